"""The outer edge of the spill: where the bezel (or reflector rim) cuts the beam off.

Method (this project's own, documented in docs/figures.md):

0. The black floor (noise clipped at black reads above zero, see :mod:`beamshot.floor`) is
   subtracted from the profiles, so a faint spill's cut-off keeps its contrast against a dark wall.
1. Average the map over azimuth sectors of ``SECTOR_DEG``; smooth each sector profile.
2. A *sharp cut-off* at ``theta`` is a drop of at least ``EDGE_MIN_CONTRAST`` times between
   ``theta - EDGE_PROBE_DEG`` and ``theta + EDGE_PROBE_DEG`` whose log-drop is at least
   ``EDGE_SHARPNESS`` times the log-drop over the same width just inside (a knee, not the
   steadily steepening flank of a hotspot, whose ratio stays near theta / (theta - 2 probe)).
   Levels below 5 noise sigmas of the smoothed profile (the scatter about a smoothed copy) count
   as that floor, so the contrast a cut-off needs adapts to the noise.  The edge is placed by the
   equivalent-step (area) rule on the unsmoothed profile (see :func:`_step_position`; for a
   symmetric edge, its half-level point), or by the half-level crossing of the smoothed profile
   where that crossing is unambiguous and more precise (a sharp, clean cut-off; see
   :func:`_sharper_of`).  A cut-off counts only if its step stands ``EDGE_MIN_SIGNIFICANCE``
   sigmas of its level noise out (noise measured on block sums of the profile itself).  The
   outermost such cut-off is taken.
3. With no sharp cut-off, the edge is where the profile falls to ``SPILL_FLOOR_FRACTION`` of
   the peak (or to 5 noise sigmas, whichever is higher), and the method says so.
4. If the profile leaves the photo first, the edge is not in the photo for that sector.
5. Sectors whose own profile shows no cut-off (too noisy, or only the threshold rule) are
   searched again on wider azimuth ranges, ``POOL_DEG`` in turn (the mean of ``n`` adjacent
   sector profiles has 1/sqrt(n) of their independent noise; the noise is measured again on the
   pooled profile).  A pooled edge is given to each of its open sectors as kind
   ``'cutoff_pooled'`` with 1-sigma ``sigma_pool sqrt(n)``: the ``n`` sectors share one
   measurement, and the independent-sector propagation in :meth:`SpillEdge.full_angle_sigma`
   then gives back ``sigma_pool`` for their mean (not ``sigma_pool / sqrt(n)``).

Each edge's 1-sigma is the profile noise carried through the rule that placed it - for a
cut-off, the noise of the window sum and of the two levels over the step height (the integral
form of noise over local slope); for a threshold crossing, the smoothed noise over the local
slope - plus the grid step as a uniform quantisation, ``d_theta / sqrt(12)`` (Sheppard), capped
at ``MAX_SIGMA_DEG``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from .beammap import BeamMap
from .floor import BlackFloor, estimate_floor, wall_gain
from .photometry import equal_cone_full_angle
from .robust import MAD_TO_SIGMA, nan_smooth_rows, smoothed_noise_sigma
from .smoothing import gaussian_filter1d

__all__ = ["SECTOR_DEG", "EDGE_PROBE_DEG", "EDGE_MIN_CONTRAST", "EDGE_SHARPNESS", "SPILL_FLOOR_FRACTION",
           "POOL_DEG", "MAX_SIGMA_DEG", "EDGE_MIN_SIGNIFICANCE", "SpillEdge", "find_spill_edge"]

SECTOR_DEG = 10.0
EDGE_PROBE_DEG = 1.5
EDGE_MIN_CONTRAST = 3.0
EDGE_SHARPNESS = 4.0
#: Fallback threshold for a beam with no sharp cut-off, as a fraction of peak (project choice).
SPILL_FLOOR_FRACTION = 0.005
_SMOOTH_DEG = 0.15
_SQRT_PI = float(np.sqrt(np.pi))
#: Widths (deg) of the azimuth ranges pooled, in turn, for sectors whose own profile shows no
#: cut-off above the noise; 360 = the azimuthal mean (project choice).
POOL_DEG = (30.0, 90.0, 360.0)
#: A cut-off must stand this many sigmas of its own level noise above the outside (the noise
#: measured on block sums of the profile, which counts correlated and clipped noise as it is;
#: the usual 5-sigma detection rule, common practice).
EDGE_MIN_SIGNIFICANCE = 5.0
#: Cap of one edge's 1-sigma (a crossing on a flat, noisy stretch; project choice).
MAX_SIGMA_DEG = 2.0


@dataclass(frozen=True)
class SpillEdge:
    """Spill edge per sector: ``theta[s]`` (rad, NaN if not in the photo) at ``phi[s]``.

    ``kind[s]`` is ``'cutoff'`` (sharp edge), ``'cutoff_pooled'`` (sharp edge found on a wider
    azimuth range, see ``pooled``), ``'threshold'`` (fallback) or ``'outside'``;
    ``sigma[s]`` is the 1-sigma uncertainty (rad); ``coverage[s]`` the largest polar angle
    the photo covers in that sector (rad).
    """

    phi: np.ndarray
    theta: np.ndarray
    sigma: np.ndarray
    kind: tuple[str, ...]
    coverage: np.ndarray
    #: sectors averaged for each sector's edge (1: its own profile; ``'cutoff_pooled'`` edges more)
    pooled: np.ndarray | None = None
    #: black floor (wall units) subtracted from the profiles for the search, 0 if none
    floor_level: float = 0.0

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
        p = np.concatenate([self.phi - 2 * np.pi, self.phi, self.phi + 2 * np.pi])
        t = np.concatenate([self.theta, self.theta, self.theta])
        return np.interp(np.mod(phi, 2 * np.pi), p, t)


def _sector_profiles(beam: BeamMap) -> tuple[np.ndarray, np.ndarray]:
    """Mean radial profile ``(n_sectors, n_theta)`` of each azimuth sector (NaN where any column is outside).

    Each map column counts with the fraction of its azimuth width that lies inside the sector,
    so a column straddling a sector boundary is shared between the two sectors.
    """
    centres, weights, runs = _sector_weights(beam.phi.tobytes(), beam.d_phi)
    inten = beam.intensity
    missing = ~np.isfinite(inten)
    profiles = np.where(missing, 0.0, inten) @ weights.T  # np.nan_to_num(nan=posinf=neginf=0)
    # a sector is NaN at a row where any of its columns is (the same as a 0/1 matrix product > 0,
    # without a second BLAS call): its columns are one run of azimuths, wrapping through 0, so the
    # missing ones are counted from running counts along the azimuth, repeated once around
    if runs is None:
        for s, cols in enumerate(_sector_columns(weights)):
            profiles[missing[:, cols].any(axis=1), s] = np.nan
    else:
        first, length = runs
        n_phi = missing.shape[1]
        counts = np.zeros((missing.shape[0], 2 * n_phi + 1), np.int32)
        np.cumsum(np.concatenate([missing, missing], axis=1), axis=1, out=counts[:, 1:])
        profiles[(counts[:, first + length] - counts[:, first]) > 0] = np.nan
    return np.radians(centres), np.ascontiguousarray(profiles.T)


@lru_cache(maxsize=8)
def _sector_weights(phi_bytes: bytes, d_phi: float) -> tuple[np.ndarray, np.ndarray, tuple | None]:
    """Sector centres (deg), the ``(n_sec, n_phi)`` weights of the map columns (azimuths ``phi``,
    given as the bytes of a float64 array) in each sector, and :func:`_sector_runs` of them.  The
    same for every map of a grid, so kept (read-only) for the next map."""
    phi = np.frombuffer(phi_bytes, float)
    n_sec = int(round(360.0 / SECTOR_DEG))
    centres = np.arange(n_sec) * SECTOR_DEG
    col = np.degrees(d_phi)
    d = np.abs((np.degrees(phi)[None, :] - centres[:, None] + 180.0) % 360.0 - 180.0)
    overlap = np.clip(SECTOR_DEG / 2 - d + col / 2, 0.0, col) / col  # (n_sec, n_phi)
    overlap[overlap < 1e-9] = 0.0
    weights = overlap / overlap.sum(axis=1, keepdims=True)
    runs = _sector_runs(weights)
    for a in (centres, weights, *(runs or ())):
        a.flags.writeable = False
    return centres, weights, runs


def _sector_runs(weights: np.ndarray) -> tuple[np.ndarray, np.ndarray] | None:
    """Per sector, the first column and the number of columns of its run of nonzero weights, going
    round through azimuth 0 (None if a sector's columns are not one such run)."""
    on = weights > 0
    n_sec, n_phi = on.shape
    first = np.empty(n_sec, int)
    length = on.sum(axis=1)
    for s in range(n_sec):
        cols = np.flatnonzero(on[s])
        if cols.size == 0 or cols.size == n_phi:
            return None
        gaps = np.flatnonzero(np.diff(cols) > 1)
        if gaps.size > 1:
            return None
        first[s] = cols[gaps[0] + 1] if gaps.size else cols[0]
        if not on[s, (first[s] + np.arange(length[s])) % n_phi].all():
            return None
    return first, length


def _sector_columns(weights: np.ndarray) -> list[np.ndarray]:
    """Per sector, the map columns with a nonzero weight."""
    return [np.flatnonzero(w > 0) for w in weights]


def _median(d: np.ndarray) -> float:
    """``np.median`` of a 1-D array without NaN, by one partition: the same value (the middle
    element, or the two middle ones added and halved, as numpy's mean of two does), less overhead."""
    n = d.size
    h = n // 2
    p = d.copy()  # np.partition's copy, partitioned in place
    if n % 2:
        p.partition(h)
        return p[h]
    p.partition((h - 1, h))
    return (p[h - 1] + p[h]) / 2.0


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


def _second_differences(raw: np.ndarray, n: int) -> np.ndarray:
    """``S(j + 2n) - 2 S(j + n) + S(j)`` for every ``j``, ``S(j)`` the sum of ``raw[j:j + n]`` (NaN
    where a sample is missing); entry ``j`` uses the samples ``[j, j + 3n)``."""
    c = np.concatenate(([0.0], np.cumsum(raw)))
    sums = c[n:] - c[:-n]
    return sums[2 * n:] - 2.0 * sums[n:-n] + sums[:-2 * n]


class _WindowSumVariances:
    """:func:`_window_sum_variance` of one profile's second differences ``d2`` at lag ``n``, kept per
    set of samples (an edge's two rules often ask for the same segments)."""

    def __init__(self, d2: np.ndarray, n: int):
        self.d2, self.n, self.seen = d2, n, {}

    def __call__(self, segments: list[tuple[int, int]]) -> float:
        return self.of_two(*segments[0], *segments[1]) if len(segments) == 2 else self._of(segments)

    def of_two(self, lo1: int, hi1: int, lo2: int, hi2: int) -> float:
        """The variance on the two segments ``(lo1, hi1)`` and ``(lo2, hi2)``."""
        m = 3 * self.n - 1
        key = (max(lo1, 0), max(hi1 - m, 0), max(lo2, 0), max(hi2 - m, 0))
        v = self.seen.get(key)
        if v is None:
            v = self.seen[key] = _window_sum_variance(self.d2, self.n, [(lo1, hi1), (lo2, hi2)])
        return v

    def _of(self, segments: list[tuple[int, int]]) -> float:
        n = self.n
        key = tuple((max(lo, 0), max(hi - 3 * n + 1, 0)) for lo, hi in segments)
        if key not in self.seen:
            self.seen[key] = _window_sum_variance(self.d2, n, segments)
        return self.seen[key]


def _second_differences_rows(rows: np.ndarray, n: int) -> np.ndarray:
    """:func:`_second_differences` of every row of ``rows`` (the running sums are sequential along
    each row, so each row's first entries are those of the row's own head)."""
    c = np.zeros((rows.shape[0], rows.shape[1] + 1))
    np.cumsum(rows, axis=1, out=c[:, 1:])
    sums = c[:, n:] - c[:, :-n]
    return sums[:, 2 * n:] - 2.0 * sums[:, n:-n] + sums[:, :-2 * n]


def _window_sum_variance(d2: np.ndarray, n: int, segments: list[tuple[int, int]]) -> float:
    """Variance of the sum of ``n`` consecutive profile samples, from the profile's own scatter
    on the ``segments`` (``(lo, hi)`` sample ranges that leave out the cut-off itself), given the
    second differences ``d2`` of :func:`_second_differences` at lag ``n``.

    Second differences of running sums at lag ``n`` cancel a linear trend of the profile and have
    variance ``(1 + 4 + 1) Var(S) = 6 Var(S)`` for noise uncorrelated beyond ``n`` samples
    (binomial weights of a finite difference); correlated noise (bilinear samples, JPEG blocks)
    and clipped noise are counted as they are, since sums of many samples are close to normal.
    The spread is taken robustly (1.4826 MAD, Rousseeuw & Croux 1993).
    """
    parts = [d2[max(lo, 0): max(hi - 3 * n + 1, 0)] for lo, hi in segments]
    d = np.concatenate(parts) if parts else np.empty(0)
    finite = np.isfinite(d)
    if not finite.all():
        d = d[finite]
    if len(d) < 3:
        return float("nan")
    dev = d - _median(d)
    np.abs(dev, out=dev)
    return float((MAD_TO_SIGMA * _median(dev)) ** 2 / 6.0)


def _step_position(raw: np.ndarray, c: int, k: int, lo: int, last: int, beam: BeamMap,
                   variances: _WindowSumVariances) -> tuple[float, float, float] | None:
    """Edge position (rad), its 1-sigma and the step's significance (``D`` over the 1-sigma of
    ``a - b``) of a cut-off centred near sample ``c`` by the equivalent-step (area) rule, on the
    unsmoothed profile ``raw``.

    Over the window ``W = [c - k, c + k]`` the profile, scaled to 1 at the inner level ``a`` (mean
    of the ``h`` samples just inside W) and 0 at the outer level ``b`` (the ``h`` just outside),
    integrates to the distance from the window's start to the step: ``t = t0 + d_theta S / D`` with
    ``S = sum_W (p - b)``, ``D = a - b``.  For a symmetric edge (erfc) this is its half-level
    point; the edge-spread-function view of ISO 12233, where the edge sits at the centroid of the
    line-spread function.  Being linear in the samples it has no first-passage bias, and its
    1-sigma follows from the noise: ``var t = (d_theta / D)^2 [V_W + (S/D)^2 V_a + (S/D - N)^2 V_b]``
    (first-order propagation; ``V`` the variances of the window sum and of the level means, from
    ``variances`` (second differences of ``h``-sample sums), short enough that the profile's curvature
    does not enter; the window sum's scaled by ``n / h``, as for noise correlated over less than
    ``h`` samples - the bilinear samples and JPEG's 8-pixel blocks are).
    """
    h = max(2, k // 2)
    w0, w1 = c - k, c + k + 1
    if w1 + h > last:  # near the photo's border: a shorter outer half-window, if the cut-off fits
        w1 = last - h
        if w1 - c < max(2, k // 2):
            return None
    if w0 - h < 0:
        return None
    n = w1 - w0
    if not np.isfinite(raw[w0 - h:w1 + h]).all():  # inner levels, window and outer levels together
        return None
    # inner and outer hold h samples each (w0 >= h, w1 + h <= last): sum / h is numpy's mean;
    # np.add.reduce is what ndarray.sum calls (the same pairwise sum), less overhead
    a, b = float(_sum(raw[w0 - h:w0])) / h, max(float(_sum(raw[w1:w1 + h])) / h, 0.0)
    d = a - b
    if d <= 0:
        return None
    ratio = float(min(max((float(_sum(raw[w0:w1])) - n * b) / d, 0.0), n))
    d_theta = beam.d_theta
    t = float(beam.theta[w0]) - d_theta / 2 + ratio * d_theta
    v_h = variances.of_two(lo, w0 - h, w1 + h, last)  # lag h
    if not math.isfinite(v_h):
        return None
    v_n = v_h * n / h
    var_mean = v_h / h**2
    var = (d_theta / d) ** 2 * (v_n + ratio**2 * var_mean + (ratio - n) ** 2 * var_mean)
    significance = d / math.sqrt(2.0 * var_mean) if var_mean > 0 else math.inf
    return t, math.sqrt(var + d_theta**2 / 12.0), significance


_sum = np.add.reduce


def _sharper_of(step: tuple[float, float, float], c: int, ps: np.ndarray, variances: _WindowSumVariances, k: int,
                sm: float, start: int, last: int, beam: BeamMap) -> tuple[float, float]:
    """The area-rule edge ``step`` or, if it is the more precise of the two, the half-level crossing
    of the smoothed profile ``ps`` between the levels at ``c -+ EDGE_PROBE_DEG`` (``c`` the
    cut-off's steepest point).

    The crossing sees the noise only where the profile falls, so for a sharp, clean cut-off it is
    the more precise; it is used only when the smoothed profile crosses the level once within
    ``EDGE_PROBE_DEG`` of the edge (no first-passage ambiguity).  Its 1-sigma: the smoothed noise
    (per-sample noise from ``variances`` over ``sqrt(2 sqrt(pi) sm)``, the white-noise gain of the Gaussian
    smoothing) on the crossing sample and, halved, on the two levels, over the local slope, plus
    the grid step (:func:`_crossing`).
    """
    if c - k < 0 or c + k >= last:
        return step[0], step[1]
    h = max(2, k // 2)
    level = 0.5 * (ps[c - k] + max(ps[c + k], 0.0))
    seg = ps[c - k: c + k + 1]
    below = seg < level
    flips = np.flatnonzero(below[1:] != below[:-1])  # where the profile crosses the level
    if len(flips) != 1 or not seg[flips[0] + 1] < level:
        return step[0], step[1]
    v_h = variances.of_two(start, c - k - h, c + k + 1 + h, last)  # lag h
    if not math.isfinite(v_h):
        return step[0], step[1]
    noise = math.sqrt(1.5 * v_h / h / (2.0 * _SQRT_PI * sm))
    t, sig = _crossing(ps, c - k + flips[0] + 1, level, beam, noise)
    return (t, sig) if sig < step[1] else (step[0], step[1])


def _centred_step(raw: np.ndarray, c: int, k: int, lo: int, last: int, beam: BeamMap,
                  variances: _WindowSumVariances) -> tuple[float, float, float] | None:
    """:func:`_step_position` at ``c``, then once more with the window centred on the edge found."""
    step = _step_position(raw, c, k, lo, last, beam, variances)
    if step is not None:
        centred = int(np.floor((step[0] - beam.theta[0]) / beam.d_theta + 0.5))
        if centred != c:
            step = _step_position(raw, centred, k, lo, last, beam, variances) or step
    return step


def _first_steps(beam: BeamMap, profiles: np.ndarray, d2_rows: np.ndarray, chosen: list[list[int]],
                 starts: np.ndarray, lasts: np.ndarray, k: int, h: int) -> dict:
    """:func:`_centred_step` of the first candidate of every sector with one, in batches (the window
    sums of all sectors as row sums of one array, the variances' medians by partitions of rows):
    ``{sector: (step or None, {variance key: value})}``, the variances to be kept in the sector's
    :class:`_WindowSumVariances`.  The same numbers as :func:`_centred_step`: the same sums (a row's
    sum is numpy's pairwise sum of the row, as a slice's is), the same order statistics, and the
    same scalar formulas.  A sector the batch does not cover (a window cut short by the photo's
    border) is left out, for :func:`_centred_step`."""
    sectors = np.array([s for s in range(len(chosen)) if chosen[s] and lasts[s] >= 4 * k], int)
    if sectors.size == 0:
        return {}
    seen = {int(s): {} for s in sectors}
    c0 = np.array([chosen[s][0] for s in sectors], int)
    lo, last = starts[sectors].astype(int), lasts[sectors].astype(int)
    step1 = _steps_at(beam, profiles, d2_rows, sectors, c0, k, h, lo, last, seen)
    out, again = {}, []
    theta0, d_theta = beam.theta[0], beam.d_theta
    for i, s in enumerate(sectors.tolist()):
        st = step1[i]
        if st is False:
            continue
        if st is None:
            out[s] = (None, seen[s])
            continue
        centred = int(np.floor((st[0] - theta0) / d_theta + 0.5))
        if centred == c0[i]:
            out[s] = (st, seen[s])
        else:
            again.append((i, centred))
    if again:
        idx = np.array([i for i, _ in again], int)
        step2 = _steps_at(beam, profiles, d2_rows, sectors[idx], np.array([c for _, c in again], int), k, h,
                          lo[idx], last[idx], seen)
        for (i, _), st in zip(again, step2):
            if st is not False:
                s = int(sectors[i])
                out[s] = (st or step1[i], seen[s])
    return out


def _sharper_of_first(first: dict, chosen: list[list[int]], smoothed: np.ndarray, d2_rows: np.ndarray | None,
                      starts: np.ndarray, lasts: np.ndarray, k: int, h: int, sm: float, beam: BeamMap) -> dict:
    """:func:`_sharper_of` of each sector's first cut-off placed by :func:`_first_steps` that stands out
    of the noise, in one batch: ``{sector: (theta, sigma)}``.  The levels, crossings and slopes are
    the same elementwise operations on the same samples; the noise per sector as there."""
    items = [(s, st) for s, (st, _) in first.items() if st is not None and st[2] >= EDGE_MIN_SIGNIFICANCE]
    if not items:
        return {}
    sec = np.array([s for s, _ in items], int)
    c = np.array([chosen[s][0] for s, _ in items], int)
    last = lasts[sec].astype(int)
    out = {}
    inner = (c - k >= 0) & (c + k < last)
    for q in np.flatnonzero(~inner):
        st = items[q][1]
        out[items[q][0]] = (st[0], st[1])
    idx = np.flatnonzero(inner)
    if idx.size == 0:
        return out
    rows, c0 = sec[idx], c[idx] - k
    seg = smoothed[rows[:, None], c0[:, None] + np.arange(2 * k + 1)[None, :]]  # ps[c - k: c + k + 1]
    top = seg[:, -1]
    level = 0.5 * (seg[:, 0] + np.where(0.0 > top, 0.0, top))  # max(ps[c + k], 0.0)
    below = seg < level[:, None]
    flips = below[:, 1:] != below[:, :-1]
    f0 = np.argmax(flips, axis=1)
    one = (flips.sum(axis=1) == 1) & (seg[np.arange(idx.size), f0 + 1] < level)
    # _crossing at sample i = c - k + f0 + 1 of each profile
    i = c0 + f0 + 1
    p_prev, p_i = seg[np.arange(idx.size), f0], seg[np.arange(idx.size), f0 + 1]
    drop = p_prev - p_i
    d_theta = beam.d_theta
    with np.errstate(divide="ignore", invalid="ignore"):
        frac = np.where(drop != 0, (p_prev - level) / drop, 0.5)
    t = beam.theta[i - 1] + frac * d_theta
    local_slope = drop / d_theta
    local_slope = np.where(1e-30 > local_slope, 1e-30, local_slope)  # max(drop / d_theta, 1e-30)
    for q, j in enumerate(idx.tolist()):
        s, st = items[j]
        if not one[q]:
            out[s] = (st[0], st[1])
            continue
        variances = _WindowSumVariances(d2_rows[s], h)
        variances.seen = first[s][1]
        ck = int(c[j])
        v_h = variances.of_two(int(starts[s]), ck - k - h, ck + k + 1 + h, int(lasts[s]))  # lag h
        if not math.isfinite(v_h):
            out[s] = (st[0], st[1])
            continue
        noise = math.sqrt(1.5 * v_h / h / (2.0 * _SQRT_PI * sm))
        sig = float(np.hypot(noise / local_slope[q], d_theta / np.sqrt(12)))
        out[s] = (t[q], sig) if sig < st[1] else (st[0], st[1])
    return out


def _steps_at(beam: BeamMap, profiles: np.ndarray, d2_rows: np.ndarray, sectors: np.ndarray, c: np.ndarray, k: int,
              h: int, lo: np.ndarray, last: np.ndarray, seen: dict) -> list:
    """:func:`_step_position` of each sector's profile at ``c`` (arrays over the sectors): per sector
    the step, None (where _step_position gives None), or False (a window cut short by the photo's
    border, not done here).  The variances used are put in ``seen[sector]`` under their keys."""
    n = 2 * k + 1
    w0, w1 = c - k, c + k + 1
    res: list = [False] * len(sectors)
    border = w1 + h > last
    for i in np.flatnonzero(~border & (w0 - h < 0)):
        res[i] = None
    idx = np.flatnonzero(~border & (w0 - h >= 0))
    if idx.size == 0:
        return res
    rows, start = sectors[idx], (w0 - h)[idx]
    g = profiles[rows[:, None], start[:, None] + np.arange(n + 2 * h)[None, :]]  # inner, window, outer
    finite = np.isfinite(g).all(axis=1)
    a = g[:, :h].sum(axis=1) / h
    b_out = g[:, h + n:].sum(axis=1) / h
    b = np.where(0.0 > b_out, 0.0, b_out)  # max(b_out, 0.0)
    win = g[:, h:h + n].sum(axis=1)
    m = 3 * h - 1
    segs = np.stack([np.maximum(lo[idx], 0), np.maximum(start - m, 0), np.maximum(w1[idx] + h, 0),
                     np.maximum(last[idx] - m, 0)], axis=1)
    v_all = _window_sum_variances(d2_rows[rows], segs)
    d_theta = beam.d_theta
    for q, i in enumerate(idx.tolist()):
        if not finite[q]:
            res[i] = None
            continue
        key = tuple(segs[q].tolist())
        v_h = float(v_all[q])
        seen[int(rows[q])][key] = v_h
        a_q, b_q = float(a[q]), float(b[q])
        d = a_q - b_q
        if not d > 0:
            res[i] = None if d <= 0 else False  # NaN: left to _step_position
            continue
        ratio = float(min(max((float(win[q]) - n * b_q) / d, 0.0), n))
        t = float(beam.theta[w0[i]]) - d_theta / 2 + ratio * d_theta
        if not math.isfinite(v_h):
            res[i] = None
            continue
        v_n = v_h * n / h
        var_mean = v_h / h**2
        var = (d_theta / d) ** 2 * (v_n + ratio**2 * var_mean + (ratio - n) ** 2 * var_mean)
        significance = d / math.sqrt(2.0 * var_mean) if var_mean > 0 else math.inf
        res[i] = (t, math.sqrt(var + d_theta**2 / 12.0), significance)
    return res


def _window_sum_variances(d2: np.ndarray, segs: np.ndarray) -> np.ndarray:
    """:func:`_window_sum_variance` of each row of ``d2`` on its two sample ranges ``segs[q] = (lo1,
    hi1, lo2, hi2)`` (already the ranges of ``d2``, as Python slices read them).  The cells of a row
    not among its finite values there are filled with equal numbers of -inf and +inf (with one more
    column where their number is odd), so that one partition of the rows of a parity of count gives
    every row's middle order statistics (the median of its values); the same for the absolute
    deviations from it."""
    q_n, m = d2.shape
    j = np.arange(m)[None, :]
    lo1, hi1, lo2, hi2 = (np.minimum(segs[:, i], m)[:, None] for i in range(4))
    sel = (((j >= lo1) & (j < hi1)) | ((j >= lo2) & (j < hi2))) & np.isfinite(d2)
    counts = sel.sum(axis=1)
    out = np.full(q_n, np.nan)
    for odd in (True, False):
        grp = np.flatnonzero((counts % 2 == odd) & (counts >= 3))
        if grp.size == 0:
            continue
        width = m + ((m - int(odd)) % 2)  # width - count even for every row of the group
        g_sel = np.zeros((grp.size, width), bool)
        g_sel[:, :m] = sel[grp]
        vals = np.zeros((grp.size, width))
        vals[:, :m] = d2[grp]
        half = ((width - counts[grp]) // 2)[:, None]
        low_pad = ~g_sel & (np.cumsum(~g_sel, axis=1) <= half)  # the first half of the cells left out
        rows = np.where(g_sel, vals, np.where(low_pad, -np.inf, np.inf))
        mid = width // 2
        kth = (mid,) if odd else (mid - 1, mid)
        part = np.partition(rows, kth, axis=1)
        med = part[:, mid] if odd else (part[:, mid - 1] + part[:, mid]) / 2.0
        dev = rows - med[:, None]
        np.abs(dev, out=dev)  # the pads are +inf now
        dev[low_pad] = -np.inf
        part = np.partition(dev, kth, axis=1)
        mad = part[:, mid] if odd else (part[:, mid - 1] + part[:, mid]) / 2.0
        out[grp] = [float((MAD_TO_SIGMA * x) ** 2 / 6.0) for x in mad]  # np.float64 scalars, as in the scalar rule
    return out


def _cutoff_points(smoothed: np.ndarray, floors: np.ndarray, starts: np.ndarray, lasts: np.ndarray,
                   k: int) -> list[list[int]]:
    """Per sector, the index of the steepest point of each run of sharp cut-off candidates,
    outermost first (an empty list if none).

    A candidate ``j`` (from ``max(start, 3k)`` to ``last - k - 1``) drops at least
    ``EDGE_MIN_CONTRAST`` times from ``j - k`` to ``j + k``, by at least ``EDGE_SHARPNESS``
    times the log-drop from ``j - 3k`` to ``j - k``, and starts at least 3 floors up.  Of each
    contiguous run of candidates, the point of steepest fall is returned.
    """
    n_sec, n_t = smoothed.shape
    j = np.arange(n_t)
    out = [[] for _ in range(n_sec)]
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
    # steepest in linear units: the mid-point of the cut-off
    slope = smoothed[:, lo - 1:n_t - k - 1] - smoothed[:, lo + 1:n_t - k + 1]  # at jj - 1 and jj + 1
    runs = (ok[:, 1:] & ~ok[:, :-1]).sum(axis=1) + ok[:, 0]
    # a row with one contiguous run of candidates (the usual case): its first steepest point at once
    steepest = np.argmax(np.where(ok, slope, -np.inf), axis=1)
    for s in np.flatnonzero(runs == 1):
        out[s] = [int(jj[steepest[s]])]
    for s in np.flatnonzero(runs > 1):
        cand = jj[ok[s]]
        picks = []
        for run in np.split(cand, np.nonzero(np.diff(cand) > 1)[0] + 1)[::-1]:  # outermost run first
            slope_run = smoothed[s, run - 1] - smoothed[s, run + 1]
            picks.append(int(run[np.argmax(slope_run)]))
        out[s] = picks
    return out


def _detect(beam: BeamMap, profiles: np.ndarray, peak_value: float) -> tuple:
    """Steps 1-4 of the module docstring on each row of ``profiles`` (mean radial profiles in map
    units, floor removed): edge ``theta``, its 1-sigma, kind, coverage and noise per row."""
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
    h = max(2, k // 2)
    # second differences of h-sample sums of every row at once (row s is used on its first lasts[s]
    # samples only, where it equals _second_differences(profiles[s, :lasts[s]], h))
    d2_rows = _second_differences_rows(profiles, h) if any(chosen) else None
    # the first (outermost) candidate of every sector at once; the rest, and any sector whose first
    # candidate the batch cannot place as _centred_step would, one by one below
    first = _first_steps(beam, profiles, d2_rows, chosen, starts, lasts, k, h) if d2_rows is not None else {}
    sharper = _sharper_of_first(first, chosen, smoothed, d2_rows, starts, lasts, k, h, sm, beam)
    for s in range(n_sec):
        last = int(lasts[s])
        coverage[s] = beam.theta[last - 1] if last > 0 else 0.0
        if last < 4 * k:
            kinds.append("outside")
            continue
        ps = smoothed[s, :last]
        noise, floor, start = noises[s], floors[s], int(starts[s])
        found = None
        variances = _WindowSumVariances(d2_rows[s], h) if chosen[s] else None
        pre = first.get(s)
        if pre is not None:
            variances.seen.update(pre[1])
        for i, c in enumerate(chosen[s]):  # the outermost cut-off that stands out of the noise
            # (None: too close to the photo's border to see the outside level)
            step = pre[0] if i == 0 and pre is not None else _centred_step(profiles[s], c, k, start, last, beam,
                                                                             variances)
            if step is not None and step[2] >= EDGE_MIN_SIGNIFICANCE:
                if i == 0 and s in sharper:
                    found = (*sharper[s], "cutoff")
                else:
                    found = (*_sharper_of(step, c, ps, variances, k, sm, start, last, beam), "cutoff")
                break
        if found is None:
            level = max(SPILL_FLOOR_FRACTION * peak_value, floor)
            j0 = start
            below = np.nonzero(ps[j0:] < level)[0]
            if len(below) and j0 + below[0] > 0:
                found = (*_crossing(ps, j0 + below[0], level, beam, noise), "threshold")
        if found is None:
            kinds.append("outside")
            continue
        theta[s], sigma[s] = found[0], min(found[1], np.radians(MAX_SIGMA_DEG))
        kinds.append(found[2])
    return theta, sigma, kinds, coverage, noises


def find_spill_edge(beam: BeamMap, peak_value: float, *, floor: BlackFloor | None = None,
                    bin_factor: int = 1) -> SpillEdge:
    """Find the outer spill edge in every sector (see module docstring).

    ``floor`` is the map's black floor (:func:`beamshot.floor.estimate_floor`); by default it is
    estimated here from the darkest annulus.  It is subtracted from the profiles for the search
    only (a map already unclipped by :func:`beamshot.floor.remove_floor` has none left).
    """
    phi, profiles = _sector_profiles(beam)
    fl = estimate_floor(beam, bin_factor=bin_factor) if floor is None else floor
    level = fl.level if fl.clipped_noise else 0.0
    if level:
        profiles = profiles - level * wall_gain(beam)[:, 0][None, :]
    theta, sigma, kinds, coverage, _ = _detect(beam, profiles, peak_value)
    n_sec = len(phi)
    pooled = np.ones(n_sec, int)
    for width in POOL_DEG:
        n_pool = int(round(width / SECTOR_DEG))
        open_ = np.array([kd not in ("cutoff", "cutoff_pooled") for kd in kinds])
        if n_pool <= 1 or not open_.any():
            continue
        n_pool = min(n_pool, n_sec)
        groups = [np.arange(g, min(g + n_pool, n_sec)) for g in range(0, n_sec, n_pool)]
        groups = [m for m in groups if open_[m].any()]
        # mean of adjacent sector profiles: NaN where any member is outside the photo
        g_prof = np.stack([profiles[m].mean(axis=0) for m in groups])
        g_theta, g_sigma, g_kind, _, _ = _detect(beam, g_prof, peak_value)
        for m, t, sg, kd in zip(groups, g_theta, g_sigma, g_kind):
            if kd != "cutoff":
                continue
            for s in m[open_[m]]:
                # len(m) sectors share one measurement: sigma * sqrt(len(m)) per sector, so the
                # independent-sector propagation of the full angle gives back sigma for the group
                theta[s], sigma[s], kinds[s], pooled[s] = t, sg * np.sqrt(len(m)), "cutoff_pooled", len(m)
    return SpillEdge(phi=phi, theta=theta, sigma=sigma, kind=tuple(kinds), coverage=coverage, pooled=pooled,
                     floor_level=level)
