"""The black floor: noisy codes clipped at black read above zero, and how to undo it.

Physics
-------
A camera clips at black.  A pixel whose true linear signal is ``mu`` and whose noise at black
is normal with standard deviation ``sigma`` reads ``max(mu + sigma Z, 0)``.  The mean of this
censored normal variable is (moments of the censored normal, textbook; e.g. Greene,
*Econometric Analysis*, the censored-regression (Tobit) chapter)::

    f(mu; sigma) = mu Phi(mu / sigma) + sigma phi(mu / sigma)

with ``Phi``/``phi`` the standard normal CDF/density.  So ``f(0) = sigma / sqrt(2 pi)``
(about 0.399 sigma), ``f(mu) -> mu`` for ``mu >> sigma``, and ``df/dmu = Phi(mu/sigma)``: ``f`` is
increasing and convex, hence invertible.  Quantisation changes the floor (fine codes add
``Delta^2 / 12`` to the variance, Sheppard's correction; with coarse codes the code-0 bin
``[0, Delta/2)`` lowers it) and JPEG blurs the codes near black further; instead of modelling
each, ``sigma`` here is the *effective* noise at black, the one for which ``f(0; sigma)``
equals the level measured on the dark wall.  A simulation of rounded codes with steps of 0.5
to 1.5 sigma recovers ``mu`` to 0.001 sigma this way (tests/test_faint_spill.py).

Every later average (binning, the map's bilinear samples, sector and zone sums) keeps the
expectation ``f(mu)``, so a dark wall reads ``f(0) > 0`` (the *floor*, about 0.03 % of the peak in
a dark-room 8-bit photo, more in a dim noisy one) and faint light ``mu ~ sigma`` reads high.
Subtracting a constant floor would be wrong inside faint spill (``f(mu) - mu`` falls from
``f(0)`` at ``mu = 0`` to nearly 0 at ``mu = 2 sigma``), so the map is *unclipped*: the local mean
``m`` (smoothed over a few map cells) is mapped back to ``mu = f^-1(m)`` and each cell loses
``m - mu``, which keeps its own noise and detail.  The floor is constant on the wall (in linear
image units, ``I cos^3(theta) / D^2`` for a light square to the wall, IES 9.1.1/9.1.2), not in
intensity, so the work is done in those *wall units*.

Where the wall is dark
----------------------
Beyond the spill edge (``edge`` given), else from the darkest annulus of the map outward.  The
floor is taken as clipped noise only if its cells scatter as clipped noise does: at ``mu = 0`` the
censored normal has ``sd / mean = sqrt(pi - 1) = 1.46`` (same textbook moments), while room
light well above the noise gives ``sd / mean = sigma / mu << 1``.  The map's bilinear samples and
JPEG lower the scatter of single cells (about 0.4 of the pixel value here), binning by ``b``
lowers it by ``b``; ``CLIPPED_SCATTER_MIN`` sits between the two cases (project choice).  Room
light is left alone: a light-off photo (``--ambient``) is the remedy, and the analysis warns.

Limits: a flat-field division makes the floor vary as 1/vignetting; a tilted light's map
uses ``r^2 / cos(incidence)`` instead of ``D^2 / cos^3(theta)`` (pass ``gain``); shot noise makes
``sigma`` grow with ``mu``, which the constant effective ``sigma`` ignores (by the formula, about
0.05 sigma at ``mu = sigma`` when the shot noise there equals the read noise).  JPEG works on
tone-curve codes: where the noise spans the curved part of the curve (a dim photo, tens of
codes of noise), its smoothing of colour noise lowers the linear mean by a level-dependent
amount that the one-parameter model cannot separate from the floor; there the spill level is
over-corrected by a few per cent (in the synthetic dim photo of the tests, 4 % of the spill
flux against 1.5 % under without the correction).
"""

from __future__ import annotations

import threading
from dataclasses import dataclass, replace

import numpy as np

from .beammap import BeamMap
from .normal_cdf import ndtr
from .photometry import intensity_from_wall_illuminance
from .smoothing import gaussian_filter1d

__all__ = ["CLIPPED_SCATTER_MIN", "EDGE_MARGIN_DEG", "ANNULUS_DEG", "MIN_FLOOR_CELLS", "BlackFloor",
           "clipped_mean", "unclipped_mean", "wall_gain", "estimate_floor", "remove_floor", "floor_corrected"]

_SQRT_2PI = float(np.sqrt(2.0 * np.pi))
#: Least ``sd x bin_factor / mean`` of the dark cells for the floor to count as clipped noise
#: (clipped noise: 1.46 per pixel, ~0.55 per map cell; room light 3 sigma above black: ~0.13; project choice).
CLIPPED_SCATTER_MIN = 0.3
#: Dark wall starts this far beyond the spill edge (the cut-off's width plus smoothing; project choice).
EDGE_MARGIN_DEG = 2.0
#: Width of the annulus searched for the darkest wall when no spill edge is known (project choice).
ANNULUS_DEG = 2.0
#: Fewest map cells for a floor estimate (its mean then has ~2 % of the floor's noise; project choice).
MIN_FLOOR_CELLS = 300
#: Smoothing of the local mean that is unclipped: along azimuth (the spill edge runs along it)
#: and, little, along the polar angle (project choice).
SMOOTH_PHI_DEG = 8.0
SMOOTH_THETA_DEG = 0.2


@dataclass(frozen=True)
class BlackFloor:
    """The dark wall's level in wall units (linear image value, 1 = clipping, for a square light).

    ``sigma`` is the effective noise at black implied by ``level`` when it is clipped noise
    (``level * sqrt(2 pi)``), else 0.  ``scatter`` is the standard deviation of the cells used,
    ``cells`` their number, ``where`` says which region was used.
    """

    level: float
    sigma: float
    scatter: float
    cells: int
    clipped_noise: bool
    where: str

    def relative_to(self, peak_wall: float) -> float:
        """The floor as a fraction of a peak given in the same wall units."""
        return self.level / peak_wall if peak_wall > 0 else float("nan")


def clipped_mean(mu, sigma):
    """Mean of ``max(X, 0)`` for ``X ~ N(mu, sigma^2)``: ``mu Phi(mu/sigma) + sigma phi(mu/sigma)``.

    >>> round(float(clipped_mean(0.0, 1.0)), 6)  # 1 / sqrt(2 pi)
    0.398942
    """
    mu = np.asarray(mu, float)
    sigma = np.asarray(sigma, float)
    with np.errstate(divide="ignore", invalid="ignore"):
        z = mu / sigma
        out = mu * ndtr(z) + sigma * np.exp(-0.5 * z * z) / _SQRT_2PI
    return np.where(sigma > 0, out, np.maximum(mu, 0.0))


#: ``r = m / sigma`` above which :func:`unclipped_mean`'s Newton steps change nothing in float64
#: (``ndtr(10) == 1.0`` and ``phi(10) / 10 ~ 8e-24``, below the unit roundoff 1.1e-16).
_FAR_ABOVE = 10.0
_Z_TABLE = np.linspace(-8.0, 8.0, 4001)
_F_TABLE = _Z_TABLE * ndtr(_Z_TABLE) + np.exp(-0.5 * _Z_TABLE**2) / _SQRT_2PI  # f(z; 1), increasing
#: Cells worked on at a time by :func:`unclipped_mean` (see beamshot.normal_cdf._BLOCK).
_BLOCK = 16384


def unclipped_mean(m, sigma):
    """Inverse of :func:`clipped_mean` in ``mu``: the true mean whose clipped mean is ``m``.

    ``f`` is increasing (``df/dmu = Phi(mu/sigma)``): a table of ``f(z; 1)`` on ``z`` in [-8, 8]
    gives the start, two Newton steps (where ``Phi > 1e-3``) refine it to float precision.  Above
    the table ``f(mu) = mu`` to 1e-16; below it (``m <= f(-8 sigma)``, ~5e-17 sigma) ``-8 sigma``.
    NaN stays NaN.

    >>> round(float(unclipped_mean(clipped_mean(0.3, 1.0), 1.0)), 9)
    0.3
    """
    m = np.asarray(m, float)
    sigma = float(sigma)
    if sigma <= 0:
        return m.copy()
    # only the finite values below _FAR_ABOVE sigma are worked on (NaN stays NaN); each step is
    # elementwise, so the values are those of the whole array.  Above _FAR_ABOVE the start is z = r
    # and both Newton steps are exactly 0 in floating point (Phi(z) rounds to 1 and phi(z) is below
    # half an ulp of z), so the result there is r sigma as it stands.
    # block by block (every step is elementwise, so the same numbers): the temporaries of a block stay
    # in the processor's cache, and only the result is a map-sized allocation
    out = np.empty(m.shape)
    flat_m, flat_out = m.reshape(-1), out.reshape(-1)
    for i in range(0, flat_m.size, _BLOCK):
        r_all = flat_m[i:i + _BLOCK] / sigma
        o = r_all * sigma
        work = (r_all <= _FAR_ABOVE) | (r_all == np.inf)  # NaN: left NaN
        r = r_all[work]
        z = np.where(r > _F_TABLE[-1], r, np.interp(r, _F_TABLE, _Z_TABLE))
        for _ in range(2):
            slope = ndtr(z)
            # clipped_mean(z, 1): z Phi(z) + phi(z), with Phi(z) = slope already at hand; in place, the
            # operations of (z * slope + np.exp(-0.5 * z * z) / _SQRT_2PI - r) / np.maximum(slope, 1e-3)
            density = z * -0.5
            density *= z
            np.exp(density, out=density)
            density /= _SQRT_2PI
            step = z * slope
            step += density
            step -= r
            step /= np.maximum(slope, 1e-3)
            np.subtract(z, step, out=step)
            z = np.where(slope > 1e-3, step, z)
        z *= sigma
        o[work] = z
        flat_out[i:i + _BLOCK] = o
    return out


def wall_gain(beam: BeamMap) -> np.ndarray:
    """Intensity per wall unit, ``D^2 / cos^3(theta)`` per map row, shape ``(n_theta, 1)``
    (inverse-square and cosine laws for a light square to the wall, IES 9.1.1/9.1.2)."""
    return intensity_from_wall_illuminance(1.0, beam.theta, beam.distance_m)[:, None]


def _floor_from(cells: np.ndarray, bin_factor: int, where: str) -> BlackFloor:
    level = float(np.mean(cells))
    scatter = float(np.std(cells))
    clipped = bool(level > 0 and scatter * bin_factor >= CLIPPED_SCATTER_MIN * level)
    return BlackFloor(level=level, sigma=level * _SQRT_2PI if clipped else 0.0, scatter=scatter,
                      cells=int(cells.size), clipped_noise=clipped, where=where)


def estimate_floor(beam: BeamMap, edge=None, *, bin_factor: int = 1, gain: np.ndarray | None = None) -> BlackFloor:
    """The black floor of ``beam``: mean and scatter of the dark wall in wall units.

    With a :class:`~beamshot.spill.SpillEdge`, the cells more than ``EDGE_MARGIN_DEG`` beyond the
    edge (sectors with an edge only); otherwise, or with fewer than ``MIN_FLOOR_CELLS`` there, the
    cells from the first ``ANNULUS_DEG`` wide annulus (with enough valid cells) whose mean is within
    3 standard errors of the darkest one, outward.
    ``bin_factor`` is the working image's binning (it lowers the cells' scatter).
    """
    g = wall_gain(beam) if gain is None else gain
    wall = beam.intensity / g
    valid = np.isfinite(wall)
    if edge is not None:
        # sectors without an edge interpolate to NaN, and no cell is "beyond" NaN
        dark = (beam.theta[:, None] > edge.at(beam.phi)[None, :] + np.radians(EDGE_MARGIN_DEG)) & valid
        if dark.sum() >= MIN_FLOOR_CELLS:
            return _floor_from(wall[dark], bin_factor, "beyond the spill edge")
    # darkest annulus: cumulative sums over rows give every window's sum and count at once
    rows = max(1, int(round(np.radians(ANNULUS_DEG) / beam.d_theta)))
    s = np.concatenate(([0.0], np.cumsum(np.where(valid, wall, 0.0).sum(axis=1))))
    n = np.concatenate(([0], np.cumsum(valid.sum(axis=1))))
    if len(beam.theta) < rows:
        return BlackFloor(0.0, 0.0, 0.0, 0, False, "no dark wall in the photo")
    win_s, win_n = s[rows:] - s[:-rows], n[rows:] - n[:-rows]
    ok = win_n >= MIN_FLOOR_CELLS
    if not ok.any():
        return BlackFloor(0.0, 0.0, 0.0, 0, False, "no dark wall in the photo")
    means = np.where(ok, win_s / np.maximum(win_n, 1), np.inf)
    k = int(np.argmin(means))
    # the darkest window is a minimum over noisy means (biased low by ~2 of its standard errors), so
    # the floor is the mean of all cells from the first window within 3 standard errors of it
    # outward (beyond the spill the wall only gets darker outward)
    dark = wall[k:k + rows]
    dark = dark[np.isfinite(dark)]
    tol = 3.0 * float(np.std(dark)) / np.sqrt(dark.size)
    k = int(np.argmax(ok & (means <= means[k] + tol)))
    block = wall[k:]
    return _floor_from(block[np.isfinite(block)], bin_factor, "darkest annulus and beyond")


#: The smoothed weights (valid-cell masks) of the latest maps: a map rebuilt from the same view (the
#: lens-shading term, the colour channels) has the same valid cells, so the same smoothed weights.
_WEIGHTS: list = []
_WEIGHTS_KEPT = 3
_WEIGHTS_LOCK = threading.Lock()


def _kept_weights(finite: np.ndarray, s_phi: float, s_theta: float) -> np.ndarray | None:
    """The smoothed weights kept for exactly this mask and smoothing (read-only), or None."""
    with _WEIGHTS_LOCK:
        kept = list(_WEIGHTS)
    for mask, sp, st, den in kept:
        if sp == s_phi and st == s_theta and mask.shape == finite.shape and np.array_equal(mask, finite):
            return den
    return None


def _keep_weights(finite: np.ndarray, s_phi: float, s_theta: float, den: np.ndarray) -> None:
    mask = finite.copy()
    mask.flags.writeable = den.flags.writeable = False  # den is not written after this
    with _WEIGHTS_LOCK:
        _WEIGHTS.insert(0, (mask, s_phi, s_theta, den))
        del _WEIGHTS[_WEIGHTS_KEPT:]


def _smooth_map(wall: np.ndarray, beam: BeamMap) -> np.ndarray:
    """NaN-aware Gaussian smoothing of a map (normalised convolution), periodic in azimuth."""
    finite = np.isfinite(wall)
    s_phi = SMOOTH_PHI_DEG / np.degrees(beam.d_phi)
    s_theta = SMOOTH_THETA_DEG / np.degrees(beam.d_theta)
    num = np.where(finite, wall, 0.0)
    den = _kept_weights(finite, s_phi, s_theta)  # the weights' smoothing, if this mask was smoothed lately
    fresh = den is None
    if fresh:
        den = finite.astype(float)
    for arr in (num, den) if fresh else (num,):
        arr[:] = gaussian_filter1d(arr, s_phi, axis=1, mode="wrap")
        arr[:] = gaussian_filter1d(arr, s_theta, axis=0, mode="nearest")
    if fresh:
        _keep_weights(finite, s_phi, s_theta, den)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(finite & (den > 1e-3), num / den, np.nan)


def remove_floor(beam: BeamMap, floor: BlackFloor, *, gain: np.ndarray | None = None) -> BeamMap:
    """``beam`` with the clipping bias removed: each cell loses ``m - f^-1(m)`` (times the gain),
    ``m`` the smoothed local mean in wall units.  The loss is capped at twice ``f(0)`` so noise in a
    dark patch cannot run away (the inverse's slope there is 2).  Unchanged if the floor is not
    clipped noise."""
    if not floor.clipped_noise or floor.sigma <= 0:
        return beam
    g = wall_gain(beam) if gain is None else gain
    m = _smooth_map(beam.intensity / g, beam)
    bias = unclipped_mean(m, floor.sigma)
    np.subtract(m, bias, out=bias)  # m - f^-1(m), in place
    np.clip(bias, 0.0, 2.0 * floor.level, out=bias)
    bias[np.isnan(bias)] = 0.0  # np.nan_to_num's NaN -> 0 (clipped: nothing infinite is left)
    bias *= g
    return replace(beam, intensity=beam.intensity - bias)


def floor_corrected(beam: BeamMap, edge=None, *, bin_factor: int = 1,
                    gain: np.ndarray | None = None) -> tuple[BeamMap, BlackFloor]:
    """:func:`estimate_floor` then :func:`remove_floor`: the corrected map and the floor found."""
    floor = estimate_floor(beam, edge, bin_factor=bin_factor, gain=gain)
    return remove_floor(beam, floor, gain=gain), floor
