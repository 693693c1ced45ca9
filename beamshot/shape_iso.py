"""Beam shape measures from laser-beam practice, applied to the angular intensity map.

Both work on the azimuthal-equidistant plane about the beam axis: ``x = theta cos phi``,
``y = theta sin phi`` in degrees (right and up as seen from behind the light), each map cell
weighted by its area there, ``dA = theta d_theta d_phi`` (for the small angles of a hotspot this
is its solid angle, sin theta ~ theta, to 0.5 % at 10 deg).

**ISO 11146-1 second moments (D4sigma).**  For a distribution E(x, y):
centroid ``x_c = sum x E dA / sum E dA``; ``s_xx = sum (x - x_c)^2 E dA / sum E dA``, ``s_yy``,
``s_xy`` likewise; principal diameters
``d_{+,-} = 2 sqrt 2 sqrt(s_xx + s_yy +- sqrt((s_xx - s_yy)^2 + 4 s_xy^2))`` and the azimuth of the
major axis ``phi = atan2(2 s_xy, s_xx - s_yy) / 2``; ellipticity ``d_minor / d_major``.  A Gaussian
``exp(-r^2 / 2 sigma^2)`` has ``d = 4 sigma``, a uniform disc of radius R has ``d = 2R``.

For a flashlight the spill (a wide plateau of a few % of the peak) and the noise floor would
dominate the second moments, so the hotspot is taken alone (ISO 11146-3 handles the background
and the noise the same way, by subtraction and a noise threshold):

1. the spill is modelled as ``S(theta) = a + b theta^2`` (the bowl of a reflector's spill about
   the beam axis), fitted to the azimuthal mean profile between ``centroid offset + d`` and 90 % of
   the spill edge (or the photo's reach), and subtracted: ``E = I - S``;
2. cells with ``E`` below ``N_T`` = 3 times their own noise are set to 0 (ISO 11146-3: 2 to 4);
3. only cells within ``d`` of the centroid count (ISO 11146-3 integrates over 3 d; the spill's
   model would be extrapolated further, and a Gaussian loses only ``(1 + 8) e^-8`` = 0.3 % of its
   second moment beyond 4 sigma);
4. centroid, moments and ``d`` are iterated until ``d`` changes by less than 0.1 %.

**ISO 13694 (power density distribution), on the hotspot.**  With ``E_max`` the peak and ``A_eta``
the area where ``I >= eta E_max``: flatness ``F = E_mean,eta / E_max``, uniformity
``U = std(I over A_eta) / E_mean,eta``, both at ``eta = HOTSPOT_CLIP`` = 0.5 (the hotspot's own
level); edge steepness ``s = (A_low - A_high) / A_low`` between ``EDGE_CLIPS`` = (0.1, 0.9).
(Definitions from a secondary source's code, not the standard's text; the 0.1 / 0.9 clip levels
from memory; see /work/shared/REFERENCES.md 6.1.)  A flat top with vertical edges has F = 1,
U = 0, s = 0; a Gaussian F = 0.721, U = 0.199, s = 0.954 (tests/test_shape_iso.py derives them).

Noise: each measure is repeated on ``N_SUBSETS`` interleaved subsets of the azimuth columns
(every fourth column), each a full sample of the beam with its own pixel noise; the spread of the
subset results over sqrt(N_SUBSETS) is the 1-sigma noise of the full result (a split-sample
estimate, common practice).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ._quiet import quiet_nan
from .beammap import BeamMap
from .map_noise import NoiseModel

__all__ = ["SecondMoments", "second_moments", "principal_diameters", "HotspotMoments", "hotspot_moments",
           "Iso13694", "iso13694", "ae_grid", "N_T", "HOTSPOT_CLIP", "EDGE_CLIPS", "N_SUBSETS"]

#: ISO 11146-3 noise threshold factor (the standard allows 2 to 4).
N_T = 3.0
#: ISO 13694 clip level for flatness and uniformity of a hotspot: its own 50 % level.
HOTSPOT_CLIP = 0.5
#: ISO 13694 edge steepness clip levels (low, high) - from memory.
EDGE_CLIPS = (0.1, 0.9)
#: Interleaved azimuth subsets for the noise of each measure.
N_SUBSETS = 4
#: Contiguous azimuth sectors for the noise of the ISO 13694 measures (each about 30 deg).
N_SECTORS = 12
#: The spill model is fitted to at least this many map rows (project choice: about 1 deg at 0.1 deg).
MIN_SPILL_ROWS = 10


def ae_grid(beam: BeamMap, rows: int | None = None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Azimuthal-equidistant ``x``, ``y`` (deg) of every cell and its area ``theta d_theta d_phi`` (deg^2)
    (of the first ``rows`` theta rows only, if given: the same values, elementwise)."""
    t = np.degrees(beam.theta[:rows])[:, None]
    x = t * np.cos(beam.phi)[None, :]
    y = t * np.sin(beam.phi)[None, :]
    area = t * np.degrees(beam.d_theta) * beam.d_phi * np.ones_like(x)
    return x, y, area


@dataclass(frozen=True)
class SecondMoments:
    """Centroid (deg), second moments (deg^2) and the summed ``E dA`` of a distribution."""

    cx: float
    cy: float
    sxx: float
    syy: float
    sxy: float
    power: float


def second_moments(x: np.ndarray, y: np.ndarray, e: np.ndarray, area: np.ndarray) -> SecondMoments:
    """First and second moments of ``e`` over cells at ``x``, ``y`` with ``area`` (ISO 11146-1 sec. 3)."""
    w = e * area
    p = float(np.sum(w))
    if not p > 0:
        nan = float("nan")
        return SecondMoments(nan, nan, nan, nan, nan, 0.0)
    cx, cy = float(np.sum(w * x) / p), float(np.sum(w * y) / p)
    dx, dy = x - cx, y - cy
    return SecondMoments(cx, cy, float(np.sum(w * dx * dx) / p), float(np.sum(w * dy * dy) / p),
                         float(np.sum(w * dx * dy) / p), p)


def principal_diameters(m: SecondMoments) -> tuple[float, float, float]:
    """ISO 11146-1 principal diameters ``(d_major, d_minor)`` (deg) and the major axis's azimuth
    (deg, 0-180, counter-clockwise from the right): ``d = 2 sqrt 2 sqrt(s_xx + s_yy +- root)``."""
    root = np.sqrt((m.sxx - m.syy) ** 2 + 4.0 * m.sxy ** 2)
    d_major = 2.0 * np.sqrt(2.0) * np.sqrt(max(m.sxx + m.syy + root, 0.0))
    d_minor = 2.0 * np.sqrt(2.0) * np.sqrt(max(m.sxx + m.syy - root, 0.0))
    azimuth = float(np.degrees(0.5 * np.arctan2(2.0 * m.sxy, m.sxx - m.syy)) % 180.0)
    return float(d_major), float(d_minor), azimuth


@dataclass(frozen=True)
class HotspotMoments:
    """ISO 11146 measures of the hotspot (spill and noise excluded); ``reason`` is set when they
    could not be measured.  Values in degrees; ``*_sigma`` are 1-sigma noise, ``*_model`` the change
    with a richer spill model (``+ c theta^4``)."""

    reason: str | None
    centroid: tuple[float, float] = (float("nan"), float("nan"))
    d_major: float = float("nan")
    d_minor: float = float("nan")
    azimuth: float = float("nan")
    d_major_sigma: float = 0.0
    d_minor_sigma: float = 0.0
    azimuth_sigma: float = 0.0
    d_major_model: float = 0.0
    d_minor_model: float = 0.0
    spill: tuple[float, ...] = ()
    radius: float = float("nan")
    iterations: int = 0

    @property
    def ellipticity(self) -> float:
        return self.d_minor / self.d_major if self.d_major > 0 else float("nan")

    def spill_at(self, theta_deg) -> np.ndarray:
        """The fitted spill model at polar angles ``theta_deg`` (map units)."""
        t2 = np.asarray(theta_deg, float) ** 2
        return sum(c * t2 ** k for k, c in enumerate(self.spill))


def _spill_fit(tdeg, mean, lo: float, hi: float, order: int):
    rows = np.isfinite(mean) & (tdeg >= lo) & (tdeg <= hi)
    if rows.sum() < max(MIN_SPILL_ROWS, 3 * (order + 1)):
        return None
    a = np.stack([tdeg[rows] ** (2 * k) for k in range(order + 1)], axis=1)
    coef, *_ = np.linalg.lstsq(a, mean[rows], rcond=None)
    return tuple(float(c) for c in coef)


def _moments_once(x, y, area, e, keep, centre, radius):
    """Moments of ``e`` over the kept cells within ``radius`` of ``centre`` (only the map rows that
    can reach it are looked at: rows are polar angles, and x = theta cos phi)."""
    return _Disc(x, y, centre, radius).moments(area, e, keep)


class _Disc:
    """The cells within ``radius`` of ``centre`` (the map rows that can reach it), for the moments of
    several distributions over the same disc (:func:`_moments_once` of each, computed once)."""

    def __init__(self, x, y, centre, radius):
        self.rows = int(np.searchsorted(np.hypot(x[:, 0], y[:, 0]), float(np.hypot(*centre)) + radius,
                                        side="right")) + 1
        x, y = x[:self.rows], y[:self.rows]
        self.x, self.y = x, y
        self.inside = (x - centre[0]) ** 2 + (y - centre[1]) ** 2 <= radius * radius

    def moments(self, area, e, keep) -> SecondMoments:
        """:func:`_moments_once` of ``e`` over the cells of ``keep`` in the disc."""
        rows = self.rows
        sel = keep[:rows] & self.inside
        return second_moments(self.x[sel], self.y[sel], e[:rows][sel], area[:rows][sel])

    def moments_with_subsets(self, area, e, keep, n_subsets: int) -> tuple[SecondMoments, list[SecondMoments]]:
        """:meth:`moments`, and those over the interleaved azimuth subsets (columns ``k mod n_subsets``)
        of the kept cells: each subset's cells are taken, in order, from the selected ones, so the
        sums are those of selecting each subset from the map."""
        rows = self.rows
        sel = keep[:rows] & self.inside
        xs, ys, es, areas = self.x[sel], self.y[sel], e[:rows][sel], area[:rows][sel]
        cols = np.broadcast_to(np.arange(sel.shape[1]) % n_subsets, sel.shape)[sel]
        subs = []
        for k in range(n_subsets):
            on = cols == k
            subs.append(second_moments(xs[on], ys[on], es[on], areas[on]))
        return second_moments(xs, ys, es, areas), subs


class _NearRows:
    """The map's first theta rows as far as a disc about a centre reaches (rows are polar angles):
    AE ``x``, ``y``, ``area``, intensity, validity, noise sigma and theta (deg).  Every value is
    elementwise, so it is the one computed on the whole map; rows are computed once, as needed."""

    def __init__(self, beam: BeamMap, noise: NoiseModel):
        self.beam, self.noise = beam, noise
        t = np.degrees(beam.theta)
        # hypot(x[:, 0], y[:, 0]) of ae_grid, the distance from the axis that _moments_once sorts by
        self.radius_of_row = np.hypot(t * np.cos(beam.phi)[0], t * np.sin(beam.phi)[0])
        self.rows = -1
        self.arrays = ()

    def within(self, centre, radius: float) -> tuple:
        """The arrays over the rows that :func:`_moments_once` looks at for this disc."""
        rows = int(np.searchsorted(self.radius_of_row, float(np.hypot(*centre)) + radius, side="right")) + 1
        rows = min(rows, len(self.beam.theta))
        if rows > self.rows:
            # half as many rows again as asked for: the disc grows over the iterations, and the rows
            # already computed hold the same values
            more = min(rows + rows // 2, len(self.beam.theta))
            x, y, area = ae_grid(self.beam, more)
            inten = self.beam.intensity[:more]
            self.arrays = (x, y, area, inten, np.isfinite(inten), self.noise.sigma(inten),
                           np.degrees(self.beam.theta[:more]))
            self.rows = more
        return tuple(a[:rows] for a in self.arrays)


def hotspot_moments(beam: BeamMap, start_centre: tuple[float, float], start_d: float, noise: NoiseModel,
                    outer_deg: float | None) -> HotspotMoments:
    """ISO 11146 D4sigma of the hotspot with the spill modelled and subtracted (module docstring).

    ``start_centre`` (deg, AE) and ``start_d`` (deg) start the iteration (the peak and about 1.2
    times the 50 % full angle); ``outer_deg`` is how far the spill model may be fitted (90 % of the
    spill edge; None: as far as the photo covers at least half the azimuths).
    """
    inten = beam.intensity
    tdeg = np.degrees(beam.theta)
    count = np.isfinite(inten).sum(axis=1)
    with quiet_nan():
        mean = np.where(count >= 0.5 * inten.shape[1], np.nanmean(inten, axis=1), np.nan)
    covered = tdeg[np.isfinite(mean)]
    reach = float(covered.max()) if covered.size else 0.0
    outer = min(outer_deg, reach) if outer_deg is not None else reach
    near = _NearRows(beam, noise)
    centre, d = tuple(start_centre), float(start_d)
    if not (np.isfinite(d) and d > 0):
        return HotspotMoments("the hotspot has no 50 % contour to start from")
    spill = None
    it = 0
    for it in range(1, 16):
        lo = float(np.hypot(*centre)) + d
        spill = _spill_fit(tdeg, mean, lo, outer, 1)
        if spill is None:
            return HotspotMoments(f"the spill is not seen far enough beyond the hotspot to be modelled under it "
                                  f"(needs {lo:.1f} to {lo + 1:.1f} deg or more from the axis; the photo and the spill "
                                  f"reach {outer:.1f} deg); step back or use a wider lens")
        x, y, area, inten, valid, sig, t = near.within(centre, d)
        e = inten - (spill[0] + spill[1] * t ** 2)[:, None]
        keep = valid & (e > N_T * sig)
        # (the cells moments are taken over are kept ones: e itself, not np.where(keep, e, 0.0))
        m = _moments_once(x, y, area, e, keep, centre, d)
        if not m.power > 0:
            return HotspotMoments("no part of the hotspot stands above the spill and the noise")
        d_new = principal_diameters(m)[0]
        done = abs(d_new - d) < 1e-3 * d
        centre, d = (m.cx, m.cy), d_new
        if done:
            break
    x, y, area, inten, valid, sig, t = near.within(centre, d)
    e = inten - (spill[0] + spill[1] * t ** 2)[:, None]
    keep = valid & (e > N_T * sig)
    disc = _Disc(x, y, centre, d)
    # noise: interleaved azimuth subsets (columns k mod N_SUBSETS)
    m, subsets = disc.moments_with_subsets(area, e, keep, N_SUBSETS)
    d_major, d_minor, azimuth = principal_diameters(m)
    subs = np.array([principal_diameters(ms) for ms in subsets])
    spread = np.std(subs, axis=0, ddof=1) / np.sqrt(N_SUBSETS)
    az_spread = np.degrees(np.std(np.angle(np.exp(2j * np.radians(subs[:, 2] - azimuth))), ddof=1) / 2.0
                           ) / np.sqrt(N_SUBSETS)
    # spill model: a richer polynomial changes the subtracted level under the hotspot
    richer = _spill_fit(tdeg, mean, float(np.hypot(*centre)) + d, outer, 2)
    dm = (0.0, 0.0)
    if richer is not None:
        e2 = inten - sum(c * t ** (2 * k) for k, c in enumerate(richer))[:, None]
        keep2 = valid & (e2 > N_T * sig)
        m2 = disc.moments(area, e2, keep2)
        if m2.power > 0:
            p2 = principal_diameters(m2)
            dm = (abs(p2[0] - d_major), abs(p2[1] - d_minor))
    return HotspotMoments(None, (m.cx, m.cy), d_major, d_minor, azimuth, float(spread[0]), float(spread[1]),
                          float(az_spread), dm[0], dm[1], spill, d, it)


@dataclass(frozen=True)
class Iso13694:
    """ISO 13694 measures of the hotspot (fractions) with their 1-sigma noise; a ``reason`` each
    when not measured (None when measured)."""

    flatness: float
    flatness_sigma: float
    uniformity: float
    uniformity_sigma: float
    edge_steepness: float
    edge_steepness_sigma: float
    flatness_reason: str | None = None
    edge_reason: str | None = None


def _iso13694_of(hot, a_low, a_high, e_max, cols):
    """The three measures from the level integrals (beamshot.level_integrals) of the columns ``cols``."""
    area = float(hot.area[cols].sum())
    if area <= 0:
        return np.nan, np.nan, np.nan
    mean = float(hot.sum_i[cols].sum()) / area
    var_i = float(hot.sum_i2[cols].sum()) / area - mean * mean
    noise_var = float(hot.sum_var[cols].sum()) / area
    flat = mean / e_max
    unif = float(np.sqrt(max(var_i - noise_var, 0.0)) / mean)
    low, high = float(a_low[cols].sum()), float(a_high[cols].sum())
    steep = (low - high) / low if low > 0 else np.nan
    return flat, unif, steep


def iso13694(beam: BeamMap, e_max: float, noise: NoiseModel | None = None, *,
             edge_reason: str | None = None, flatness_reason: str | None = None,
             correlation_deg: float = 0.0, values_only: bool = False) -> Iso13694:
    """Flatness and uniformity at ``HOTSPOT_CLIP`` and edge steepness between ``EDGE_CLIPS`` of the
    map about its peak value ``e_max`` (module docstring).  The uniformity has the cells' own noise
    variance (from ``noise``) removed: ``U = sqrt(var - noise var) / mean``.

    The areas and integrals place each clip level's crossing between map rows, with the map linear
    between them (beamshot.level_integrals): whole cells put the region's edge on the rows, which
    about the axis are rings, and made a centred 3 deg hotspot's flatness and uniformity jump by
    1 % and 3 % with its width.

    The noise is the larger of the interleaved-subset spread and the contiguous-sector estimate
    (:func:`_sector_noise`, with ``correlation_deg`` the angle over which the photo's errors are
    correlated, a JPEG block).  ``values_only``: the three values alone, their noise left 0 (for
    the terms that measure how much a value moves; the values are the same)."""
    from .level_integrals import above_level

    # every region lies at or above the lowest clip level: the rows up to the last such cell and the
    # next one (where its edge crosses) hold them
    low = min(EDGE_CLIPS[0] * e_max, HOTSPOT_CLIP * e_max, EDGE_CLIPS[1] * e_max)
    lit = np.flatnonzero((beam.intensity >= low).any(axis=1))
    rows = min(int(lit[-1]) + 2, beam.intensity.shape[0]) if lit.size else 0
    inten = beam.intensity[:rows]
    tdeg = np.degrees(beam.theta[:rows])
    var = noise.sigma(inten) ** 2 if noise is not None else np.zeros_like(inten)
    hot = above_level(inten, tdeg, beam.d_phi, HOTSPOT_CLIP * e_max, var)
    a_low = above_level(inten, tdeg, beam.d_phi, EDGE_CLIPS[0] * e_max, area_only=True).area
    a_high = above_level(inten, tdeg, beam.d_phi, EDGE_CLIPS[1] * e_max, area_only=True).area
    cols = np.arange(inten.shape[1])
    full = _iso13694_of(hot, a_low, a_high, e_max, slice(None))
    if values_only:
        return Iso13694(full[0], 0.0, full[1], 0.0, full[2], 0.0, flatness_reason, edge_reason)
    subs = np.array([_iso13694_of(hot, a_low, a_high, e_max, cols % N_SUBSETS == k) for k in range(N_SUBSETS)])
    with quiet_nan():
        spread = np.nanstd(subs, axis=0, ddof=1) / np.sqrt(N_SUBSETS)
    # the contour each measure's noise comes from: A_0.5 (flatness, uniformity), A_0.9 (edge steepness,
    # the smaller area of its ratio)
    radius = np.sqrt(np.array([hot.area.sum(), hot.area.sum(), a_high.sum()]) / np.pi)
    spread = np.fmax(spread, _sector_noise(hot, a_low, a_high, e_max, beam.phi[:inten.shape[1]], radius,
                                           correlation_deg))
    return Iso13694(full[0], float(spread[0]), full[1], float(spread[1]), full[2], float(spread[2]),
                    flatness_reason, edge_reason)


def _sector_noise(hot, a_low, a_high, e_max, phi: np.ndarray, radius_deg: np.ndarray,
                  correlation_deg: float) -> np.ndarray:
    """1-sigma noise of (flatness, uniformity, edge steepness) from ``N_SECTORS`` contiguous azimuth
    sectors (NaN where it cannot be told).

    Near the axis the map's columns are much closer than a pixel, so the interleaved column subsets
    share pixels and their spread misses most of the noise (over 8 noise draws of a 4 deg beam the
    edge steepness scattered by 1.5e-3 where they said 2e-5).  Contiguous sectors hold disjoint
    pixels (but for the few within a pixel of the axis): each sector's measure is the full one plus
    its own noise, and the full measure is about their mean (equal areas).  A beam that is offset
    from the axis or oval differs between sectors by the first and second harmonic of azimuth
    (``cos phi``, ``cos 2 phi``), which is not noise: the sector values are fitted with
    ``c0 + c1 cos phi + s1 sin phi + c2 cos 2 phi + s2 sin 2 phi`` and the residual variance
    ``RSS / (K - 5)`` is one sector's noise variance, ``/ K`` the full measure's (split-sample
    estimate with a harmonic model, common practice).

    Errors correlated over ``correlation_deg`` (a JPEG block) along a contour of radius ``r`` leave
    only ``K_eff = 2 pi r / correlation_deg`` independent pieces of it: when that is fewer than the
    sectors, neighbouring sectors share their errors, their scatter is still about one piece's, and
    the full measure's variance is that over ``K_eff``, not ``K``: the estimate is multiplied by
    ``sqrt(K / K_eff)`` (``radius_deg``: the equal-area radius of each measure's contour)."""
    k = len(phi)
    sector = np.minimum((np.arange(k) * N_SECTORS) // k, N_SECTORS - 1)
    vals = np.array([_iso13694_of(hot, a_low, a_high, e_max, sector == j) for j in range(N_SECTORS)])
    mid = np.array([np.angle(np.mean(np.exp(1j * phi[sector == j]))) for j in range(N_SECTORS)])
    design = np.stack([np.ones_like(mid), np.cos(mid), np.sin(mid), np.cos(2 * mid), np.sin(2 * mid)], axis=1)
    out = np.full(3, np.nan)
    for m in range(3):
        ok = np.isfinite(vals[:, m])
        if ok.sum() < design.shape[1] + 3:
            continue
        coef, *_ = np.linalg.lstsq(design[ok], vals[ok, m], rcond=None)
        rss = float(np.sum((vals[ok, m] - design[ok] @ coef) ** 2))
        out[m] = np.sqrt(rss / (ok.sum() - design.shape[1]) / ok.sum())
    if correlation_deg > 0:
        with np.errstate(divide="ignore", invalid="ignore"):
            k_eff = 2.0 * np.pi * np.asarray(radius_deg, float) / correlation_deg
            out *= np.sqrt(np.fmax(1.0, np.where(k_eff > 0, N_SECTORS / k_eff, 1.0)))
    return out
