"""Peak and threshold contours of the beam: peak intensity, hotspot (50 %) and field (10 %).

Thresholds follow the IES definitions (50 % / 10 % of the *maximum* intensity; CIE ILV
17-27-077 uses the centre-beam intensity, which is the same when the peak is on the axis).
For a beam of any shape the contour at a level is traced along rays from the peak
direction; the reported full angle is that of the cone with the same solid angle,
``Omega = sum_beta (1 - cos alpha_beta) d_beta`` so ``full = 2 arccos(mean cos alpha)``
(cone solid angle ``2 pi (1 - cos a)``, Mazonka 2012).  Horizontal and vertical widths are
the two ray pairs along the wall's horizontal and vertical through the peak.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from .robust import nan_smooth_rows, smoothed_noise_sigma
from .beammap import BeamMap, directions
from .frames import local_basis, opposite_index
from .photometry import equal_cone_full_angle

__all__ = ["Peak", "Contour", "find_peak", "peak_rel_noise", "trace_contour", "trace_contours", "local_basis",
           "N_BEARINGS"]

#: Number of rays (bearings) used to trace a contour.
N_BEARINGS = 72
#: Samples at or above this fraction of the maximum are used in the peak fit.
PEAK_FIT_LEVEL = 0.95
#: Smoothing along a ray before finding a crossing, in samples of the map's theta step.
_RAY_SMOOTH_SAMPLES = 1.5


@dataclass(frozen=True)
class Peak:
    """Peak of the map: value (map unit), direction, relative 1-sigma noise, clipped flag.

    ``fit_samples`` and ``fit_area`` (sr) are the number of map samples the final quadratic fit used
    and the tangent-plane area they cover: ``rel_noise`` treats the samples as independent, which
    they are not where the map is finer than the photo's pixels (see
    :func:`peak_rel_noise`)."""

    value: float
    vector: np.ndarray
    theta: float
    phi: float
    rel_noise: float
    clipped: bool
    fit_samples: int = 0
    fit_area: float = 0.0


@dataclass(frozen=True)
class Contour:
    """A threshold contour around the peak: ``alpha[b]`` (rad) at ``bearings[b]``.

    ``alpha`` is NaN on rays where the crossing lies outside the photo; ``sigma`` is the
    1-sigma noise of each crossing (rad).
    """

    level_fraction: float
    bearings: np.ndarray
    alpha: np.ndarray
    sigma: np.ndarray

    @property
    def complete(self) -> bool:
        return bool(np.all(np.isfinite(self.alpha)))

    def full_angle(self) -> float:
        """Full angle (rad) of the cone of equal solid angle."""
        return equal_cone_full_angle(self.alpha)

    def full_angle_sigma(self) -> float:
        """1-sigma noise of :meth:`full_angle` from independent ray crossings (rad)."""
        return equal_cone_full_angle(self.alpha, self.sigma)[1]

    def width_along(self, bearing_deg: float) -> float:
        """Full width (rad) along the line through the peak at ``bearing_deg`` and its opposite."""
        i, j = opposite_index(np.degrees(self.bearings), bearing_deg)
        return float(self.alpha[i] + self.alpha[j])

    def width_sigma_along(self, bearing_deg: float) -> float:
        i, j = opposite_index(np.degrees(self.bearings), bearing_deg)
        return float(np.hypot(self.sigma[i], self.sigma[j]))


def _rays(centre, bearings, alphas):
    e1, e2 = local_basis(centre)
    c = np.asarray(centre, float) / np.linalg.norm(centre)
    b = bearings[:, None, None]
    a = alphas[None, :, None]
    return np.cos(a) * c + np.sin(a) * (np.cos(b) * e1 + np.sin(b) * e2)


def find_peak(beam: BeamMap) -> Peak:
    """Locate the maximum and refine it with a local quadratic fit (least squares).

    The fit uses samples at or above 95 % of the smoothed maximum on a tangent-plane patch
    whose radius grows (0.75, 1.5, 3, 6 deg) until it reaches past the 95 % region, then is
    re-centred on the fitted vertex once.  A broad, flat hotspot is thus located by its
    shape rather than by its noisiest pixel, and the value is not biased upward by noise.
    """
    inten = beam.intensity
    filled = np.where(np.isfinite(inten), inten, -np.inf)
    # light smoothing (3 x 3 cells, wrapping in azimuth) to pick the starting point
    pad = np.concatenate([filled[:, -1:], filled, filled[:, :1]], axis=1)
    # separable 3 x 3 box sum: azimuth, then theta (in place: the same additions in the same order)
    across = np.add(pad[:, :-2], pad[:, 1:-1])
    across += pad[:, 2:]
    acc = filled  # a fresh array: its inner rows are overwritten by the smoothed sums
    np.add(across[:-2], across[1:-1], out=acc[1:-1])
    acc[1:-1] += across[2:]
    acc[1:-1] /= 9.0
    k, j = np.unravel_index(int(np.argmax(acc)), acc.shape)
    centre = directions(beam.theta[k], beam.phi[j])
    coarse = float(acc[k, j])
    value, rel_noise = coarse, 0.02
    fit_samples, fit_area = 0, 0.0
    radii = (0.75, 1.5, 3.0, 6.0)
    first = 0
    for _ in range(2):  # fit, re-centre on the vertex, fit again (from the radius reached)
        fit = None
        for n in range(first, len(radii)):
            fit = _quadratic_peak(beam, centre, np.radians(radii[n]), coarse)
            first = n
            if fit is None or fit[3] < 0.6:
                break
        if fit is None:
            break
        value, rel_noise, centre = fit[0], fit[1], fit[2]
        fit_samples, fit_area = fit[4], fit[5]
    theta = float(np.arccos(np.clip(centre[2], -1, 1)))
    phi = float(np.mod(np.arctan2(centre[1], centre[0]), 2 * np.pi))
    near = np.isfinite(inten) & (inten >= 0.9 * value)
    clipped = bool(np.any(beam.saturated & near))
    return Peak(value=value, vector=centre, theta=theta, phi=phi, rel_noise=max(rel_noise, 1e-4), clipped=clipped,
                fit_samples=fit_samples, fit_area=fit_area)


@lru_cache(maxsize=16)
def _patch(radius: float) -> tuple[np.ndarray, ...]:
    """The tangent-plane patch of :func:`_quadratic_peak` for ``radius`` (rad): offsets ``uu``, ``vv``
    on a 31 x 31 grid, the disc within the radius, and ``cos r``, ``sinc(r / pi)`` of the offsets'
    length ``r`` (shaped to broadcast over vectors); the same for every map, so kept (read-only)."""
    n = 15
    u = np.linspace(-radius, radius, 2 * n + 1)
    uu, vv = np.meshgrid(u, u, indexing="ij")
    rr = np.hypot(uu, vv)
    out = (uu, vv, rr <= radius, np.cos(rr)[..., None], np.sinc(rr / np.pi)[..., None])
    for a in out:
        a.flags.writeable = False
    return out


def _quadratic_peak(beam: BeamMap, centre: np.ndarray, radius: float, reference: float):
    """Fit ``a + b.u + u^T C u`` to samples >= 95 % of ``reference`` on a patch of ``radius`` (rad).

    Returns ``(value, relative noise, vertex vector, fraction of patch used, samples used, their
    tangent-plane area in sr)`` or None.
    """
    uu, vv, disc, cos_rr, sinc_rr = _patch(float(radius))
    e1, e2 = local_basis(centre)
    vec = cos_rr * centre + sinc_rr * (uu[..., None] * e1 + vv[..., None] * e2)
    vals = beam.sample(vec)
    use = disc & np.isfinite(vals) & (vals >= PEAK_FIT_LEVEL * reference)
    if use.sum() < 12:
        return None
    us, vs = uu[use], vv[use]
    a = np.stack([np.ones(use.sum()), us, vs, us ** 2, us * vs, vs ** 2], axis=1)
    coef, *_ = np.linalg.lstsq(a, vals[use], rcond=None)
    resid = vals[use] - a @ coef
    rel_noise = float(np.std(resid) / np.sqrt(use.sum() / 6.0) / max(reference, 1e-30))
    hess = np.array([[2 * coef[3], coef[4]], [coef[4], 2 * coef[5]]])
    off = np.zeros(2)
    try:
        if np.all(np.linalg.eigvalsh(hess) < 0):
            off = np.linalg.solve(hess, -coef[1:3])
    except np.linalg.LinAlgError:
        pass
    if np.hypot(*off) > radius:
        off = np.zeros(2)
    value = float(coef[0] + coef[1] * off[0] + coef[2] * off[1] + coef[3] * off[0] ** 2
                  + coef[4] * off[0] * off[1] + coef[5] * off[1] ** 2)
    r0 = np.hypot(*off)
    vec0 = np.cos(r0) * centre + np.sinc(r0 / np.pi) * (off[0] * e1 + off[1] * e2)
    step = 2.0 * float(radius) / (uu.shape[0] - 1)  # the patch's grid spacing (rad)
    return (value, rel_noise, vec0 / np.linalg.norm(vec0), float(use.sum() / disc.sum()), int(use.sum()),
            float(use.sum()) * step * step)


def trace_contour(beam: BeamMap, centre: np.ndarray, level: float, level_fraction: float,
                  *, n_bearings: int | None = None) -> Contour:
    """Angles from ``centre`` at which the intensity first falls below ``level``, per bearing."""
    return trace_contours(beam, centre, [(level, level_fraction)], n_bearings=n_bearings)[0]


def trace_contours(beam: BeamMap, centre: np.ndarray, levels: list[tuple[float, float]],
                   *, n_bearings: int | None = None) -> list[Contour]:
    """:func:`trace_contour` for several ``(level, level_fraction)`` pairs, sharing the ray samples."""
    nb = N_BEARINGS if n_bearings is None else n_bearings
    alpha_max = beam.theta[-1] + np.arccos(np.clip(np.asarray(centre)[2] / np.linalg.norm(centre), -1, 1))
    alpha_max = min(alpha_max, np.radians(89.0))
    found: list[Contour | None] = [None] * len(levels)
    # trace a short reach first; most contours close well inside it
    for reach in (np.radians(12.0), np.radians(40.0), alpha_max):
        reach = min(reach, alpha_max)
        rays = _sample_rays(beam, centre, nb, reach)
        for n, (level, fraction) in enumerate(levels):
            if found[n] is not None:
                continue
            contour = _crossings(rays, level, fraction)
            if reach >= alpha_max or np.all(np.isfinite(contour.alpha) & (contour.alpha < 0.9 * reach)):
                found[n] = contour
        if all(c is not None for c in found):
            break
    return found


def _sample_rays(beam: BeamMap, centre: np.ndarray, nb: int, alpha_max: float):
    """Intensity along ``nb`` rays from ``centre`` out to ``alpha_max`` (rad), raw and smoothed."""
    bearings = np.arange(nb) * 2 * np.pi / nb
    step = beam.d_theta
    alphas = np.arange(0.0, alpha_max, step)
    vals = beam.sample(_rays(centre, bearings, alphas))
    return bearings, alphas, step, vals, nan_smooth_rows(vals, _RAY_SMOOTH_SAMPLES)


def _smoothing_shift(smooth: np.ndarray, b: np.ndarray, i: np.ndarray, step: float) -> np.ndarray:
    """Shift (rad) that moves a crossing found on the smoothed ray back to the unsmoothed profile.

    Gaussian smoothing of width s adds ``(s^2 / 2) f''`` to a profile f (second-order Taylor
    expansion of the convolution; textbook), so a crossing of level L found on the smoothed ray
    lies ``(s^2 / 2) f'' / f'`` from the true one.  On a falling, outward-curving flank (the 10 %
    level of a narrow beam) this is the bias that made field angles 1-1.5 % wide.  ``f'`` and
    ``f''`` come from the smoothed samples around the crossing (finite differences).
    """
    n = smooth.shape[1]
    lo, hi = np.clip(i - 2, 0, n - 1), np.clip(i + 1, 0, n - 1)
    f1 = (smooth[b, i] - smooth[b, i - 1]) / step
    f2 = (smooth[b, hi] - smooth[b, i] - smooth[b, i - 1] + smooth[b, lo]) / (2.0 * step**2)
    s = _RAY_SMOOTH_SAMPLES * step
    with np.errstate(invalid="ignore", divide="ignore"):
        shift = np.where((f1 < 0) & np.isfinite(f2), 0.5 * s**2 * f2 / f1, 0.0)
    # a correction is a small second-order term: never more than a step
    return np.clip(np.nan_to_num(shift), -step, step)


def _crossings(rays, level: float, level_fraction: float) -> Contour:
    """First fall below ``level`` along each sampled ray, with its 1-sigma from the ray's noise."""
    bearings, alphas, step, vals, smooth = rays
    nb = len(bearings)
    n = smooth.shape[1]
    alpha = np.full(nb, np.nan)
    sigma = np.full(nb, np.nan)
    # first sample per ray that is NaN or under the level; a crossing needs it finite and > 0
    under = ~(smooth >= level)
    has = under.any(axis=1)
    first = np.where(has, np.argmax(under, axis=1), 0)
    rows = np.arange(nb)
    ok = has & (first > 0)
    ok[ok] &= np.isfinite(smooth[rows[ok], first[ok]])
    if np.any(ok):
        b, i = rows[ok], first[ok]
        p0, p1 = smooth[b, i - 1], smooth[b, i]
        frac = np.where(p0 != p1, (p0 - level) / np.where(p0 != p1, p0 - p1, 1.0), 0.5)
        alpha[b] = alphas[i - 1] + frac * step + _smoothing_shift(smooth, b, i, step)
        # noise: MAD of the residual about the smoothed ray within +-10 samples of the crossing
        win = np.clip(i[:, None] + np.arange(-10, 10)[None, :], 0, n - 1)
        r = vals[b[:, None], win] - smooth[b[:, None], win]
        noise = smoothed_noise_sigma(r, _RAY_SMOOTH_SAMPLES)
        slope = np.maximum((p0 - p1) / step, 1e-30)
        sigma[b] = np.hypot(noise / slope, step / np.sqrt(12.0))
    return Contour(level_fraction=level_fraction, bearings=bearings, alpha=alpha, sigma=sigma)


#: Variance of a bilinear sample of independent pixels over that of one pixel, averaged over the
#: sample's offset ``f`` on each axis: ``(E[(1 - f)^2 + f^2])^2 = (2/3)^2`` (f uniform on [0, 1]).
BILINEAR_VARIANCE = 4.0 / 9.0
#: Variance of the intercept of a quadratic ``a + b.x + x^T C x`` fitted at the centre of a disc
#: evenly covered by N samples of variance s^2, in units of ``s^2 / N``: with ``u = r^2 / R^2``
#: uniform on [0, 1], ``1 + mean(u)^2 / var(u) = 1 + (1/4) / (1/12) = 4`` (least-squares intercept;
#: the linear, cross and ``x^2 - y^2`` terms are orthogonal to it on a disc).
QUADRATIC_INTERCEPT_VARIANCE = 4.0


def peak_rel_noise(pk: Peak, pixel_deg: float) -> float:
    """Relative 1-sigma noise of the fitted peak ``E_max`` with the photo's pixels counted, not the map's
    samples.

    :func:`beamshot.hotspot.find_peak` states ``s_res / sqrt(n / 6)`` for ``n`` samples with
    residual ``s_res``, as if every sample were independent.  Near the axis the map and the fit's
    patch are much finer than the working pixel (``pixel_deg``), so the samples share pixels: over
    the fit's area ``A`` there are only ``N = A / pixel^2`` independent pixels, each of variance
    ``s_res^2 / BILINEAR_VARIANCE`` (a bilinear sample averages its pixels), and the intercept of
    the quadratic over them has the variance ``QUADRATIC_INTERCEPT_VARIANCE * s_pix^2 / N``.  The
    larger of the two is kept.  Over 8 noise draws of a narrow (4 deg) beam the fitted peak
    scattered by 0.19 % where ``rel_noise`` said 0.06 %."""
    rel = float(pk.rel_noise)
    if not (pixel_deg > 0 and pk.fit_samples > 0 and pk.fit_area > 0):
        return rel
    s_res = rel * np.sqrt(pk.fit_samples / 6.0)
    n_pix = pk.fit_area / np.radians(pixel_deg) ** 2
    if n_pix >= pk.fit_samples:
        return rel
    return float(max(rel, s_res * np.sqrt(QUADRATIC_INTERCEPT_VARIANCE / BILINEAR_VARIANCE / max(n_pix, 1.0))))
