"""Integrals of a polar intensity map over the region where it is at or above a level, with the
level's crossing placed between map rows instead of at whole cells.

The map holds ``I(theta_i, phi_j)`` on rows of polar angle from the axis.  Counting whole cells
at or above a level ``L`` puts the region's edge on the cell boundaries; for a hotspot centred on
the axis those are concentric rings, so its area jumps by a whole ring as ``L`` or the beam's
width changes (for a 3 deg Gaussian on 0.05 deg rows, the ISO 13694 flatness jumps between 0.714
and 0.721, its uniformity between 0.199 and 0.206).  Here each column is integrated along theta
with ``I`` linear between neighbouring rows (the trapezoid rule, exact for a linear profile), and
the part of a segment at or above ``L`` ends where the line crosses ``L``.  On the
azimuthal-equidistant plane the area element is ``theta dtheta dphi``, so for a segment
``theta = t0 + h s``, ``I = p + q s`` (``0 <= s <= 1``) the integrals over ``a <= s <= b`` are
polynomials in ``s`` (below); a disc of radius ``R`` fully above the level has the area
``pi R^2`` exactly.

When the first row is not on the axis (maps sample rows at ``(k + 1/2) dtheta``), a row on the
axis is put before it, holding the mean of the first row over the azimuths (the value a smooth
map takes there), so that the disc about the axis is counted too.

Returned per column (summed over rows), in deg^2 (theta in degrees, phi in radians): the area,
``int I dA``, ``int I^2 dA`` and ``int v dA`` for a map ``v`` of the cells' noise variance.  Between
rows the map is ``(1 - s) I0 + s I1``; with independent noise in the two rows its noise variance
there is ``(1 - s)^2 v0 + s^2 v1`` (variance of a weighted sum), which ``int v dA`` integrates, so
that it is the noise share of ``int I^2 dA``.  Segments with a NaN end (outside the photo) are left
out.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["LevelIntegrals", "above_level"]


@dataclass(frozen=True)
class LevelIntegrals:
    """Per-column integrals over the region at or above the level (arrays of the map's columns)."""

    area: np.ndarray
    sum_i: np.ndarray
    sum_i2: np.ndarray
    sum_var: np.ndarray


def _powers(a: np.ndarray, b: np.ndarray, n: int) -> list[np.ndarray]:
    """``(b^k - a^k) / k`` for k = 1..n: the integrals of s^(k-1) over [a, b]."""
    out, pa, pb = [], a, b
    for k in range(1, n + 1):
        if k > 1:
            pa, pb = pa * a, pb * b
        out.append((pb - pa) / k)
    return out


def above_level(inten: np.ndarray, theta_deg: np.ndarray, d_phi: float, level: float,
                var: np.ndarray | None = None, *, area_only: bool = False) -> LevelIntegrals:
    """Integrals over ``inten >= level`` of a ``(rows, columns)`` map on polar angles ``theta_deg``
    (increasing, deg) and equal azimuth steps ``d_phi`` (rad); see the module docstring.  With
    ``area_only`` the other integrals are left at zero."""
    theta_deg = np.asarray(theta_deg, float)
    if theta_deg.size and theta_deg[0] > 0:  # the axis row (module docstring)
        with np.errstate(invalid="ignore"):
            axis = np.nanmean(inten[:1], axis=1) if np.isfinite(inten[0]).any() else np.full(1, np.nan)
        inten = np.vstack([np.repeat(axis[:, None], inten.shape[1], axis=1), inten])
        theta_deg = np.r_[0.0, theta_deg]
        if var is not None:  # the mean of n cells: variance / n
            n = max(int(np.isfinite(var[0]).sum()), 1)
            var = np.vstack([np.full((1, var.shape[1]), np.nansum(var[0]) / n / n), var])
    lit = np.flatnonzero((inten >= level).any(axis=1))
    if not lit.size:
        zero = np.zeros(inten.shape[1])
        return LevelIntegrals(zero, zero, zero, zero)
    rows = min(int(lit[-1]) + 2, inten.shape[0])  # no segment beyond the last lit row and the next one is lit
    inten, theta_deg = inten[:rows], theta_deg[:rows]
    var = None if var is None else var[:rows]
    i0, i1 = inten[:-1], inten[1:]
    t0 = np.asarray(theta_deg[:-1], float)[:, None]
    h = np.diff(np.asarray(theta_deg, float))[:, None]
    q = i1 - i0
    with np.errstate(invalid="ignore", divide="ignore"):
        cross = np.where(q != 0, (level - i0) / q, 0.0)
        up0, up1 = i0 >= level, i1 >= level  # NaN compares False: a NaN end leaves the segment out
    ok = np.isfinite(i0) & np.isfinite(i1)
    a = np.where(up0, 0.0, np.where(up1, cross, 1.0))
    b = np.where(up1, 1.0, np.where(up0, cross, 0.0))
    a, b = np.where(ok, np.clip(a, 0.0, 1.0), 0.0), np.where(ok, np.clip(b, 0.0, 1.0), 0.0)
    b = np.maximum(a, b)
    w = h * d_phi
    if area_only:
        s1, s2 = _powers(a, b, 2)
        area = (w * (t0 * s1 + h * s2)).sum(axis=0)
        zero = np.zeros_like(area)
        return LevelIntegrals(area, zero, zero, zero)
    s1, s2, s3, s4 = _powers(a, b, 4)
    p = np.where(ok, i0, 0.0)
    q = np.where(ok, q, 0.0)
    area = w * (t0 * s1 + h * s2)
    m1 = w * (p * t0 * s1 + (p * h + q * t0) * s2 + q * h * s3)
    m2 = w * (p * p * t0 * s1 + (p * p * h + 2 * p * q * t0) * s2 + (2 * p * q * h + q * q * t0) * s3
              + q * q * h * s4)
    if var is None:
        v = np.zeros_like(area)
    else:  # (1 - s)^2 v0 + s^2 v1 = v0 - 2 v0 s + (v0 + v1) s^2, times theta = t0 + h s
        v0 = np.where(ok, var[:-1], 0.0)
        c2 = v0 + np.where(ok, var[1:], 0.0)
        v = w * (v0 * t0 * s1 + (v0 * h - 2 * v0 * t0) * s2 + (c2 * t0 - 2 * v0 * h) * s3 + c2 * h * s4)
    return LevelIntegrals(area.sum(axis=0), m1.sum(axis=0), m2.sum(axis=0), v.sum(axis=0))
