"""The outer edge of the spill: where the bezel (or reflector rim) cuts the beam off.

Method (this project's own, documented in docs/figures.md):

1. Average the map over azimuth sectors of ``SECTOR_DEG``; smooth each sector profile.
2. A *sharp cut-off* at ``theta`` is a drop of at least ``EDGE_MIN_CONTRAST`` times between
   ``theta - EDGE_PROBE_DEG`` and ``theta + EDGE_PROBE_DEG`` whose log-drop is at least
   ``EDGE_SHARPNESS`` times the log-drop over the same width just inside (a knee, not the
   steadily steepening flank of a hotspot, whose ratio stays near theta / (theta - 2 probe)).  The outermost
   such drop is taken; the edge is where the profile crosses the mean of the inner and
   outer levels (the half-level point of the cut-off).
3. With no sharp cut-off, the edge is where the profile falls to ``SPILL_FLOOR_FRACTION`` of
   the peak (or to 5 noise sigmas, whichever is higher), and the method says so.
4. If the profile leaves the photo first, the edge is not in the photo for that sector.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.ndimage import gaussian_filter1d

from .robust import nan_smooth_rows, smoothed_noise_sigma
from .beammap import BeamMap
from .photometry import equal_cone_full_angle

__all__ = ["SECTOR_DEG", "EDGE_PROBE_DEG", "EDGE_MIN_CONTRAST",
           "EDGE_SHARPNESS", "SPILL_FLOOR_FRACTION", "SpillEdge", "find_spill_edge"]

SECTOR_DEG = 10.0
EDGE_PROBE_DEG = 1.5
EDGE_MIN_CONTRAST = 3.0
EDGE_SHARPNESS = 4.0
#: Fallback threshold for a beam with no sharp cut-off, as a fraction of peak (project choice).
SPILL_FLOOR_FRACTION = 0.005
_SMOOTH_DEG = 0.15


@dataclass(frozen=True)
class SpillEdge:
    """Spill edge per sector: ``theta[s]`` (rad, NaN if not in the photo) at ``phi[s]``.

    ``kind[s]`` is ``'cutoff'`` (sharp edge), ``'threshold'`` (fallback) or ``'outside'``;
    ``sigma[s]`` is the 1-sigma uncertainty (rad); ``coverage[s]`` the largest polar angle
    the photo covers in that sector (rad).
    """

    phi: np.ndarray
    theta: np.ndarray
    sigma: np.ndarray
    kind: tuple[str, ...]
    coverage: np.ndarray

    @property
    def complete(self) -> bool:
        return bool(np.all(np.isfinite(self.theta)))

    @property
    def sharp_fraction(self) -> float:
        return sum(k == "cutoff" for k in self.kind) / len(self.kind)

    def full_angle(self) -> float:
        """Full angle (rad) of the cone with the same solid angle as the edge encloses."""
        return equal_cone_full_angle(self.theta)

    def full_angle_sigma(self) -> float:
        """1-sigma of :meth:`full_angle` from the per-sector edge uncertainties (rad)."""
        return equal_cone_full_angle(self.theta, self.sigma)[1]

    def across(self, phi_deg: float) -> tuple[float, float]:
        """Full angle (rad) across the beam axis along ``phi_deg`` and its 1-sigma."""
        i = int(round(phi_deg / SECTOR_DEG)) % len(self.phi)
        j = (i + len(self.phi) // 2) % len(self.phi)
        return float(self.theta[i] + self.theta[j]), float(np.hypot(self.sigma[i], self.sigma[j]))

    def at(self, phi: np.ndarray) -> np.ndarray:
        """Edge angle (rad) interpolated periodically at azimuths ``phi`` (rad)."""
        p = np.r_[self.phi - 2 * np.pi, self.phi, self.phi + 2 * np.pi]
        t = np.r_[self.theta, self.theta, self.theta]
        return np.interp(np.mod(phi, 2 * np.pi), p, t)


def _sector_profiles(beam: BeamMap) -> tuple[np.ndarray, np.ndarray]:
    """Mean radial profile ``(n_sectors, n_theta)`` of each azimuth sector (NaN where any column is outside).

    Each map column counts with the fraction of its azimuth width that lies inside the sector,
    so a column straddling a sector boundary is shared between the two sectors.
    """
    n_sec = int(round(360.0 / SECTOR_DEG))
    centres = np.arange(n_sec) * SECTOR_DEG
    col = np.degrees(beam.d_phi)
    d = np.abs((np.degrees(beam.phi)[None, :] - centres[:, None] + 180.0) % 360.0 - 180.0)
    overlap = np.clip(SECTOR_DEG / 2 - d + col / 2, 0.0, col) / col  # (n_sec, n_phi)
    overlap[overlap < 1e-9] = 0.0
    weights = overlap / overlap.sum(axis=1, keepdims=True)
    inten = beam.intensity
    missing = ~np.isfinite(inten)
    profiles = np.nan_to_num(inten, nan=0.0, posinf=0.0, neginf=0.0) @ weights.T
    profiles[(missing.astype(float) @ (weights > 0).T.astype(float)) > 0] = np.nan
    return np.radians(centres), np.ascontiguousarray(profiles.T)


def _profile_noise(profiles: np.ndarray, sm: float) -> np.ndarray:
    """Per-sector noise (1 sigma) of the smoothed profiles, from the residual about a smoothed copy."""
    return smoothed_noise_sigma(profiles - nan_smooth_rows(profiles, sm), sm)


def _crossing(ps: np.ndarray, i: int, level: float, beam: BeamMap, noise: float) -> tuple[float, float]:
    """Polar angle (rad) where the profile ``ps`` falls through ``level`` between samples ``i - 1``
    and ``i`` (linear interpolation), and its 1-sigma from the noise over the local slope and the
    grid step (uniform quantisation, step / sqrt(12))."""
    drop = ps[i - 1] - ps[i]
    frac = (ps[i - 1] - level) / drop if drop != 0 else 0.5
    t = beam.theta[i - 1] + frac * beam.d_theta
    local_slope = max(drop / beam.d_theta, 1e-30)
    return t, float(np.hypot(noise / local_slope, beam.d_theta / np.sqrt(12)))


def _cutoff_points(smoothed: np.ndarray, floors: np.ndarray, starts: np.ndarray, lasts: np.ndarray,
                   k: int) -> np.ndarray:
    """Per sector, the index of the steepest point of the outermost sharp cut-off (-1 if none).

    A candidate ``j`` (from ``max(start, 3k)`` to ``last - k - 1``) drops at least
    ``EDGE_MIN_CONTRAST`` times from ``j - k`` to ``j + k``, by at least ``EDGE_SHARPNESS``
    times the log-drop from ``j - 3k`` to ``j - k``, and starts at least 3 floors up.  Of the
    outermost contiguous run of candidates, the point of steepest fall is returned.
    """
    n_sec, n_t = smoothed.shape
    j = np.arange(n_t)
    out = np.full(n_sec, -1)
    if n_t < 4 * k + 1:
        return out
    f = floors[:, None]
    lo = 3 * k
    jj = j[lo: n_t - k]
    inner = smoothed[:, jj - k]
    outer = np.maximum(smoothed[:, jj + k], f)
    before = np.maximum(smoothed[:, jj - 3 * k], f)
    inner_f = np.maximum(inner, f)
    with np.errstate(divide="ignore", invalid="ignore"):
        drop = np.log(inner_f / outer)
        drop_before = np.log(before / inner_f)
    ok = (drop >= np.log(EDGE_MIN_CONTRAST)) & (inner >= 3 * f) & (drop >= EDGE_SHARPNESS * drop_before)
    ok &= (jj[None, :] >= starts[:, None]) & (jj[None, :] < lasts[:, None] - k)
    for s in np.nonzero(ok.any(axis=1))[0]:
        cand = jj[ok[s]]
        breaks = np.nonzero(np.diff(cand) > 1)[0]
        run = cand[breaks[-1] + 1:] if len(breaks) else cand
        slope = smoothed[s, run - 1] - smoothed[s, run + 1]  # steepest in linear units: mid-point of the cut-off
        out[s] = int(run[np.argmax(slope)])
    return out


def find_spill_edge(beam: BeamMap, peak_value: float) -> SpillEdge:
    """Find the outer spill edge in every sector (see module docstring)."""
    phi, profiles = _sector_profiles(beam)
    step_deg = np.degrees(beam.d_theta)
    k = max(1, int(round(EDGE_PROBE_DEG / step_deg)))
    sm = max(0.5, _SMOOTH_DEG / step_deg)
    n_sec, n_t = profiles.shape
    theta = np.full(n_sec, np.nan)
    sigma = np.full(n_sec, np.nan)
    coverage = np.zeros(n_sec)
    kinds = []
    noises = _profile_noise(profiles, sm)
    finite = np.isfinite(profiles)
    lasts = np.where(finite.all(axis=1), n_t, np.argmin(finite, axis=1))
    # smooth each sector's finite head, continued by its last value (as mode="nearest" would)
    fill = profiles[np.arange(n_sec), np.maximum(lasts - 1, 0)]
    head = np.where(np.arange(n_t)[None, :] < lasts[:, None], profiles, fill[:, None])
    smoothed = gaussian_filter1d(np.nan_to_num(head), sm, axis=1, mode="nearest")
    floors = np.maximum(5.0 * noises, peak_value * 1e-6)
    # beyond the half-peak point of each sector
    below_half = smoothed < 0.5 * peak_value
    starts = np.where(below_half.any(axis=1), np.argmax(below_half, axis=1), lasts)
    starts = np.minimum(starts, lasts)
    chosen = _cutoff_points(smoothed, floors, starts, lasts, k)
    for s in range(n_sec):
        last = int(lasts[s])
        coverage[s] = beam.theta[last - 1] if last > 0 else 0.0
        if last < 4 * k:
            kinds.append("outside")
            continue
        ps = smoothed[s, :last]
        noise, floor, start = noises[s], floors[s], int(starts[s])
        found = None
        if chosen[s] >= 0:
            c = int(chosen[s])
            level = 0.5 * (ps[c - k] + max(ps[c + k], 0.0))
            seg = ps[c - k: c + k + 1]
            below = np.nonzero(seg < level)[0]
            if len(below) and below[0] > 0:
                found = (*_crossing(ps, c - k + below[0], level, beam, noise), "cutoff")
        if found is None:
            level = max(SPILL_FLOOR_FRACTION * peak_value, floor)
            j0 = start
            below = np.nonzero(ps[j0:] < level)[0]
            if len(below) and j0 + below[0] > 0:
                found = (*_crossing(ps, j0 + below[0], level, beam, noise), "threshold")
        if found is None:
            kinds.append("outside")
            continue
        theta[s], sigma[s] = found[0], min(found[1], np.radians(2.0))
        kinds.append(found[2])
    return SpillEdge(phi=phi, theta=theta, sigma=sigma, kind=tuple(kinds), coverage=coverage)
