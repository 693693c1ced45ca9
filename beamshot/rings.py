"""Rings: ripple of the azimuthal-mean profile beyond what a smooth profile and the noise explain.

Method (this project's, built from textbook pieces):

1. ``p(theta)``: the azimuthal mean of the map at each polar angle about the beam axis (rings of a
   reflector or a lens are concentric with the beam), with its noise ``sigma_p`` measured from the
   scatter of the mean profiles of 8 azimuth sectors (:func:`profile_noise`).  Rows from the axis
   to ``EDGE_MARGIN_DEG`` inside the spill edge (the cut-off itself is not a ring) are used.
2. A smooth profile ``s(theta)``: a Savitzky-Golay filter (cubic, ``SMOOTH_WINDOW_DEG`` wide;
   Savitzky & Golay 1964) of the log profile mirrored about the axis (it is even in theta).
   Candidates are the extremes of the smoothed, normalised residual ``(ln p - s) / sigma`` beyond
   ``CANDIDATE_Z``, strongest first; each ring found is divided out before the next search.
3. Each candidate is fitted by weighted least squares on ``+-FIT_HALF_WINDOW_DEG`` (3 deg), in the
   log of the profile (a ring multiplies the profile; a Gaussian hotspot is a parabola there):
   ``ln p = poly5(theta) + ln(1 + a exp(-(theta - mu)^2 / (2 w^2)))``.  The ring's **amplitude**
   ``a`` is relative to the smooth profile ``exp(poly5)``; its **location** is ``mu``; its **width**
   the full width at half maximum ``2.3548 w``.  Uncertainties come from the fit's covariance
   (scaled by the reduced chi-square when it exceeds 1).  The profile is used out to where it
   falls to 5 times its noise.
4. A ring is reported when the fit is good (reduced chi-square <= 4), a richer smooth profile (a
   polynomial of degree 7) leaves its amplitude within 3 sigma or 25 %,
   ``|a| / sigma_a >= RING_SIGNIFICANCE`` and its width lies between ``MIN_FWHM_DEG`` and
   ``MAX_FWHM_DEG`` (wider is the beam's shape, not a ring).  6 sigma: noise alone over the ~300
   profile rows of a beam would give a false ring at 5 sigma about once in 10^4 beams, but small
   JPEG photos showed dips of 5 to 5.5 sigma where a hotspot's flank meets the spill, once in 20
   to 50 photos; the sixth sigma is for such effects, which the noise model does not hold.
   No ring is searched within 1.5 deg of where the profile falls faster than a factor e^1.5 per
   degree (a flat top's edge and its knee into the spill: shape, not a ring).

**Ring score** of a beam (figure ``ring_score``): the largest ``|a|`` of its rings, a fraction of
the smooth profile (0.05: no ring deviates by more than 5 % from the smooth profile).  When no ring
is found, it is an upper bound: the amplitude a 1 deg wide ring would need to be found here
(``RING_SIGNIFICANCE`` times its amplitude noise) at ``LIMIT_PERCENTILE`` of the rows searched.

A JPEG's coding leaves errors the same all around the axis (beamshot.jpeg_coding), which the
azimuthal mean does not average out and the sector scatter does not see: their relative 1-sigma at
the ring's level is added in quadrature to each ring's amplitude noise, and a ring must be deeper
than ``hypot(RING_SIGNIFICANCE sigma_fit, CODING_SIGNIFICANCE sigma_coding)`` (so must the
detection limit).  Without it, a warm spill round a cool hotspot coded at quality 90 gave a "dark
ring" of -1.5 % at 7 sigma that the beam does not have.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from ._quiet import quiet_nan
from .beammap import BeamMap
from .map_noise import NoiseModel
from .savgol import savgol
from .smoothing import gaussian_filter1d

__all__ = ["Ring", "RingSearch", "find_rings", "RING_SIGNIFICANCE", "CODING_SIGNIFICANCE"]

#: Width of the smoothing window for the smooth profile, degrees (project choice: wider than a ring).
SMOOTH_WINDOW_DEG = 3.0
#: Half window of the local ring fit, degrees.
FIT_HALF_WINDOW_DEG = 3.0
#: Degree of the local polynomial for the log of the smooth profile (a quintic follows a hotspot's
#: knee into the spill to 0.3 % over the window; cubic and quartic bias a ring's amplitude there).
POLY_DEGREE = 5
#: A candidate whose fit leaves a reduced chi-square above this is not a ring on a smooth profile
#: (the edge of a flat top, a step): it is not reported (project choice; a good fit gives about 1).
MAX_REDUCED_CHI2 = 4.0
#: Rings are not searched within half a fit window of where the smooth profile falls faster than
#: this (natural log per degree: a factor e^1.5 per degree), a steep edge whose shape a ring
#: cannot be told from (project choice; a Gaussian hotspot of 8 deg FWHM falls at 0.8 at its knee).
MAX_LOG_SLOPE = 1.5
#: A ring is kept only if a smooth profile with two more polynomial terms changes its amplitude by
#: less than 3 sigma or this fraction of it (project choice).
ROBUST_FRACTION = 0.25
#: Candidate threshold on the smoothed normalised residual.
CANDIDATE_Z = 4.0
#: Significance a ring needs to be reported (amplitude over its 1-sigma; see the module docstring).
RING_SIGNIFICANCE = 6.0
#: A ring must also be deeper than this many times the RMS of the photo's concentric coding error
#: (beamshot.jpeg_coding): the largest coding error measured was 2.3 times the RMS used there, and
#: a coding error is one per photo, not one of many noisy candidates (project choice).
CODING_SIGNIFICANCE = 3.0
#: Rings closer to the axis than this are not searched (a centre feature; project choice), degrees.
MIN_RING_DEG = 0.5
#: Azimuth sectors whose mean profiles give the profile's noise.
NOISE_SECTORS = 8
#: Candidates tried at most (rings found plus those rejected).
MAX_CANDIDATES = 10
#: Ring widths (full width at half maximum) searched, degrees.
MIN_FWHM_DEG, MAX_FWHM_DEG = 0.2, 3.0
#: Rows this close to the spill edge are left out (the cut-off is not a ring), degrees.
EDGE_MARGIN_DEG = 2.0
#: The ring of the detection limit (the upper bound when none is found): 1 deg full width.
LIMIT_FWHM_DEG = 1.0
#: The detection limit holds at this percentile of the rows searched, ordered by their noise (the
#: median left a third of a warm spill's rows needing more; project choice).
LIMIT_PERCENTILE = 90.0
_FWHM = 2.0 * np.sqrt(2.0 * np.log(2.0))


@dataclass(frozen=True)
class Ring:
    """One ring: location, amplitude relative to the smooth profile (signed), width (FWHM), each
    with its 1-sigma from the fit (the profile's noise), the amplitude's 1-sigma from the JPEG's
    concentric coding errors (``coding_sigma``, beamshot.jpeg_coding; 0 for other files), their sum
    in quadrature (``total_sigma``, the amplitude's reported uncertainty) and the ``significance``
    the detection test uses."""

    angle_deg: float
    angle_sigma: float
    amplitude: float
    amplitude_sigma: float
    width_deg: float
    width_sigma: float
    coding_sigma: float = 0.0

    @property
    def total_sigma(self) -> float:
        """The amplitude's 1-sigma: the fit's and the coding's, added in quadrature."""
        return float(np.hypot(self.amplitude_sigma, self.coding_sigma))

    @property
    def significance(self) -> float:
        """``|a|`` over the scale the detection test uses: the fit's 1-sigma, and the coding's taken
        ``RING_SIGNIFICANCE / CODING_SIGNIFICANCE`` times less strictly (so that a ring must exceed
        ``hypot(6 sigma_fit, 3 sigma_coding)``)."""
        scale = float(np.hypot(self.amplitude_sigma, self.coding_sigma * CODING_SIGNIFICANCE / RING_SIGNIFICANCE))
        return abs(self.amplitude) / scale if scale > 0 else float("inf")

    @property
    def kind(self) -> str:
        return "bright" if self.amplitude > 0 else "dark"


@dataclass(frozen=True)
class RingSearch:
    """Rings found (by angle), the detection limit (fraction), and the range searched (deg)."""

    rings: tuple[Ring, ...]
    limit: float
    searched_deg: tuple[float, float]
    reason: str | None = None
    #: The relative 1-sigma of the photo's concentric coding error at ``LIMIT_PERCENTILE`` of the rows
    #: searched (part of ``limit``; 0 when the photo has none, e.g. a raw or 16-bit photo).
    coding: float = 0.0

    @property
    def strongest(self) -> Ring | None:
        return max(self.rings, key=lambda r: abs(r.amplitude)) if self.rings else None


def _model(params, t):
    """Log of the profile: a polynomial of ``POLY_DEGREE`` (the smooth profile, ln q) plus
    ``ln(1 + a g)``, g the Gaussian ring ``exp(-(t - mu)^2 / (2 w^2))``."""
    amp, mu, w = params[-3:]
    return np.polyval(params[-4::-1], t) + np.log1p(amp * np.exp(-0.5 * ((t - mu) / w) ** 2))


def _jac(params, t):
    """Derivatives of :func:`_model` by its parameters, shape ``(len(t), POLY_DEGREE + 4)``."""
    amp, mu, w = params[-3:]
    g = np.exp(-0.5 * ((t - mu) / w) ** 2)
    k = g / (1.0 + amp * g)
    powers = [t ** n for n in range(len(params) - 3)]
    return np.stack(powers + [k, amp * k * (t - mu) / w ** 2, amp * k * (t - mu) ** 2 / w ** 3], axis=1)


def _ring_log(theta, t):
    """``ln(1 + a g)`` of the ring ``theta = (a, mu, w)`` and its derivatives by ``theta``, ``(len(t), 3)``."""
    amp, mu, w = theta
    g = np.exp(-0.5 * ((t - mu) / w) ** 2)
    k = g / (1.0 + amp * g)
    return np.log1p(amp * g), np.stack([k, amp * k * (t - mu) / w ** 2, amp * k * (t - mu) ** 2 / w ** 3], axis=1)


def _fit_ring(t, lp, s, guess_mu, smooth_at, step, degree=POLY_DEGREE):
    """Least-squares fit of :func:`_model` to the log profile ``lp`` (1-sigma ``s``) on samples ``t``
    (deg) about ``guess_mu``: ``(Ring, params)`` with ``params`` centred at ``guess_mu``, or None.

    The model is linear in the polynomial's coefficients, so they are projected out (variable
    projection; Golub & Pereyra, SIAM J. Numer. Anal. 10, 1973): with ``Q`` an orthonormal basis
    of the weighted polynomial columns, the ring's ``(a, mu, w)`` minimise
    ``|(I - Q Q^T) W (ln(1 + a g) - lp)|^2``, whose Jacobian is the projected one exactly (the
    projector does not depend on them); a bounded Levenberg-Marquardt fit (beamshot.levenberg)
    finds them and the coefficients follow by linear least squares.  The minimum is the one of
    the full model (tests/test_numerics.py compares it with SciPy's ``least_squares``), and the
    covariance is that of the full model's Jacobian at it.
    """
    from .levenberg import levenberg_marquardt

    tc = t - guess_mu
    n = degree + 1
    a0 = float(np.clip(np.expm1(np.interp(0.0, tc, lp - smooth_at)), -0.5, 1.0))
    lo_w, hi_w = MIN_FWHM_DEG / _FWHM, MAX_FWHM_DEG / _FWHM
    theta0 = [a0, 0.0, float(np.clip(0.4, lo_w * 1.01, hi_w * 0.99))]
    wt = 1.0 / s
    basis = np.vander(tc, n, increasing=True) * wt[:, None]
    qbasis = np.linalg.qr(basis)[0]
    target = lp * wt

    def off_basis(v):  # (I - Q Q^T) v
        return v - qbasis @ (qbasis.T @ v)

    last: dict = {}

    def ring_at(th):  # the fit asks for residuals and Jacobian at the same point: computed once
        key = tuple(th)
        if key not in last:
            last.clear()
            last[key] = _ring_log(th, tc)
        return last[key]

    fit = levenberg_marquardt(lambda th: off_basis(ring_at(th)[0] * wt - target),
                              theta0, lambda th: off_basis(ring_at(th)[1] * wt[:, None]),
                              bounds=([-0.95, -1.0, lo_w], [10.0, 1.0, hi_w]), gtol=0.0, xtol=1e-10, ftol=1e-12)
    if not fit.converged or not np.all(np.isfinite(fit.x)):
        return None
    ring_part = _ring_log(fit.x, tc)[0]
    coef = np.linalg.lstsq(basis, target - ring_part * wt, rcond=None)[0]
    q = np.r_[coef, fit.x]
    resid = (_model(q, tc) - lp) / s
    chi2 = float(np.sum(resid ** 2) / max(len(t) - len(q), 1))
    jac = _jac(q, tc) / s[:, None]
    try:
        cov = np.linalg.inv(jac.T @ jac) * max(chi2, 1.0)
    except np.linalg.LinAlgError:
        return None
    amp, mu, w = q[-3:]
    if chi2 > MAX_REDUCED_CHI2:
        return None  # the window is not a smooth profile with a ring (a flat top's edge, a step)
    if abs(mu) > 1.0 - step or not (lo_w * 1.02 < w < hi_w * 0.98):
        return None  # the ring runs against a bound of the search: not a ring of this search
    ring = Ring(float(guess_mu + mu), float(np.sqrt(max(cov[-2, -2], 0.0))), float(amp),
                float(np.sqrt(max(cov[-3, -3], 0.0))), float(_FWHM * w), float(_FWHM * np.sqrt(max(cov[-1, -1], 0.0))))
    return ring, q


def profile_noise(inten: np.ndarray, step_deg: float, pixel_deg: float = 0.0) -> np.ndarray:
    """1-sigma noise of the azimuthal mean of each row of ``inten`` (rows x azimuths), measured on
    the map itself: the mean profiles of ``NOISE_SECTORS`` azimuth sectors scatter about the full
    mean by their noise (rings are concentric and cancel; a smooth asymmetry is removed by the same
    Savitzky-Golay filter), ``var(mean) = sum_k (p_k - p)^2 / (K (K - 1))``, smoothed over 1 deg
    of rows.  Neighbouring rows share pixels (and JPEG blocks), so the fits, which treat rows as
    independent, get the noise times ``sqrt(tau)``, tau the integrated autocorrelation of the
    sector residuals along theta, ``1 + 2 sum rho(lag)`` summed until rho first falls below 0
    (the integrated autocorrelation time of Markov-chain practice, Sokal 1997 - from memory).
    ``pixel_deg`` is kept as a lower bound of the correlation length."""
    n_rows, n_az = inten.shape
    k = NOISE_SECTORS
    with quiet_nan():
        p = np.nanmean(inten, axis=1)
        parts = np.stack([np.nanmean(inten[:, j * n_az // k:(j + 1) * n_az // k], axis=1) for j in range(k)])
    d = parts - p[None, :]
    window = int(round(SMOOTH_WINDOW_DEG / step_deg)) | 1
    if n_rows > window:
        d = d - savgol(np.nan_to_num(d), window, 3, axis=1)
    var = np.nansum(d ** 2, axis=0) / (k * (k - 1))
    var = gaussian_filter1d(var, max(1.0, 0.5 / step_deg), mode="nearest")
    # integrated autocorrelation along theta of the residuals, each row scaled to unit variance
    z = np.nan_to_num(d / np.sqrt(np.maximum(var * k, 1e-300))[None, :])
    z = z[:, int(0.1 * n_rows):]  # the rows nearest the axis share most pixels; leave them out
    tau = 1.0
    if z.shape[1] > 40:
        z0 = float(np.mean(z * z))
        for lag in range(1, min(40, z.shape[1] // 4)):
            rho = float(np.mean(z[:, :-lag] * z[:, lag:])) / z0
            if rho <= 0:
                break
            tau += 2.0 * rho
    tau = max(tau, pixel_deg / step_deg, 1.0)
    return np.sqrt(var * tau)


def find_rings(beam: BeamMap, noise: NoiseModel | None = None, *, outer_deg: float | None, pixel_deg: float = 0.0,
               exclude_below_deg: float = 0.0, correlation_deg: float = 0.0,
               coding_rel: np.ndarray | None = None) -> RingSearch:
    """Rings of the azimuthal-mean profile out to ``outer_deg`` (the spill edge's nearest point;
    None: as far as the photo covers half the azimuths).  ``exclude_below_deg``: rings centred
    closer to the axis belong to a centre hole (beamshot.artefacts) and are not reported.
    ``correlation_deg``: the angle over which the photo's errors are correlated (a JPEG block):
    closer to the axis than where the noise sectors are ``NOISE_SECTORS`` such lengths around,
    the sectors share their errors and the noise cannot be measured, so no ring is searched there.

    ``coding_rel``: per row of the map, the relative 1-sigma of an error the same all around the
    axis that the photo's coding leaves (a JPEG's, beamshot.jpeg_coding); the azimuthal mean does
    not average it out, so it adds to each ring's amplitude noise, ``(1 + a)`` times its value at
    the ring, and to the detection limit, at ``CODING_SIGNIFICANCE`` (None: no such error, e.g. a
    raw or 16-bit photo).

    Rings are taken one at a time, strongest first, each fitted ring subtracted from the profile
    before the next search (so that a ring's own shoulders are not taken for rings).
    """
    inten = beam.intensity
    count = np.isfinite(inten).sum(axis=1)
    with quiet_nan():
        mean = np.where(count >= 0.5 * inten.shape[1], np.nanmean(inten, axis=1), np.nan)
    tdeg = np.degrees(beam.theta)
    step = float(np.degrees(beam.d_theta))
    end = len(tdeg) if np.all(np.isfinite(mean)) else int(np.argmax(~np.isfinite(mean)))
    if outer_deg is not None:
        end = min(end, int(np.searchsorted(tdeg, outer_deg - EDGE_MARGIN_DEG)))
    window = int(round(SMOOTH_WINDOW_DEG / step)) | 1
    if end < 2 * window:
        return RingSearch((), float("nan"), (0.0, float(tdeg[max(end - 1, 0)])),
                          "the profile inside the spill edge is too short to search for rings")
    sp_all = profile_noise(inten[:end], step, pixel_deg)
    # the log profile needs light well above the noise: stop where the profile falls to 5 sigma
    weak = np.flatnonzero(~(mean[:end] > 5.0 * sp_all))
    if weak.size:
        end = int(weak[0])
    if end < 2 * window:
        return RingSearch((), float("nan"), (0.0, float(tdeg[max(end - 1, 0)])),
                          "the profile is too short or too faint to search for rings")
    t, p = tdeg[:end], mean[:end]
    # relative noise: the log profile's 1-sigma
    sp = np.maximum(sp_all[:end] / p, 1e-9)
    # mirrored about the axis: the profile is even in theta; fitted in log (a ring multiplies the profile)
    tm, pm, sm = np.r_[-t[::-1], t], np.log(np.r_[p[::-1], p]), np.r_[sp[::-1], sp]
    half = len(t)
    work = pm.copy()
    tried = np.zeros(half, bool)
    inner = max(exclude_below_deg, MIN_RING_DEG, NOISE_SECTORS * max(correlation_deg, pixel_deg) / (2.0 * np.pi))
    tried[t < inner] = True
    rings: list[Ring] = []
    # rows where the coding error is known (rows without light have no level)
    coding_known = np.zeros(len(tdeg), bool) if coding_rel is None else np.isfinite(coding_rel)
    smooth = savgol(work, window, 3)
    # steep flanks (a flat top's edge, its knee into the spill): no ring search within a fit window of them
    slope = np.abs(savgol(pm, window, 3, deriv=1, delta=step))[half:]
    steep = slope > MAX_LOG_SLOPE
    if steep.any():
        near = np.convolve(steep.astype(float), np.ones(2 * int(FIT_HALF_WINDOW_DEG / step / 2) + 1), "same") > 0
        tried |= near
    for _ in range(MAX_CANDIDATES):
        smooth = savgol(work, window, 3)
        z = gaussian_filter1d((work - smooth) / sm, 2.0) * np.sqrt(2.0 * np.sqrt(np.pi) * 2.0)
        zz = np.where(tried, 0.0, np.abs(z[half:]))
        i = int(np.argmax(zz))
        if zz[i] < CANDIDATE_Z:
            break
        tried[np.abs(t - t[i]) <= 0.5] = True
        sel = np.abs(tm - t[i]) <= FIT_HALF_WINDOW_DEG
        fit = _fit_ring(tm[sel], work[sel], sm[sel], t[i], smooth[sel], step)
        if fit is None:
            continue
        ring, params = fit
        if coding_known.any():
            coding_here = np.interp(ring.angle_deg, tdeg[coding_known], coding_rel[coding_known])
            ring = replace(ring, coding_sigma=float((1.0 + ring.amplitude) * coding_here))
        if ring.significance < RING_SIGNIFICANCE or ring.angle_deg < max(inner, ring.width_deg):
            continue
        if ring.angle_deg > t[-1]:
            continue
        # robustness: a richer smooth profile (two more polynomial terms) must leave the ring as it is;
        # the knee of a flat top's edge, taken for a ring by the quintic, is followed by the richer one
        # (checked last: the second fit costs as much as the first, and a weak candidate needs neither)
        check = _fit_ring(tm[sel], work[sel], sm[sel], t[i], smooth[sel], step, POLY_DEGREE + 2)
        if check is None or abs(check[0].amplitude - ring.amplitude) > max(3.0 * ring.amplitude_sigma,
                                                                          ROBUST_FRACTION * abs(ring.amplitude)):
            continue
        rings.append(ring)
        amp, mu, w = params[-3], ring.angle_deg, params[-1]
        work = work - np.log1p(amp * np.exp(-0.5 * ((tm - mu) / w) ** 2)) - np.log1p(
            amp * np.exp(-0.5 * ((tm + mu) / w) ** 2))
        tried[np.abs(t - mu) <= 0.5 * ring.width_deg + 0.5] = True
    # detection limit: a 1 deg ring's amplitude noise, sigma_p / s over the ring's effective samples
    # (sum of the squared Gaussian: sqrt(pi) w / step), 1.5 times for the polynomial it shares the fit with
    rel = sp
    use = t >= max(1.0, inner)
    w_samples = LIMIT_FWHM_DEG / _FWHM / step
    # at 9 in 10 of the rows searched (the dimmest tenth, far out in the spill, needs more)
    noise_limit = 1.5 * np.percentile(rel[use] if use.any() else rel, LIMIT_PERCENTILE) / np.sqrt(
        np.sqrt(np.pi) * w_samples)
    coding = 0.0  # the coding error's relative 1-sigma at that percentile of the rows searched
    if coding_rel is not None:
        with quiet_nan():
            coding = float(np.nanpercentile(coding_rel[:end][use] if use.any() else coding_rel[:end],
                                            LIMIT_PERCENTILE))
        coding = coding if np.isfinite(coding) else 0.0
    limit = float(np.hypot(RING_SIGNIFICANCE * noise_limit, CODING_SIGNIFICANCE * coding))
    return RingSearch(tuple(sorted(rings, key=lambda r: r.angle_deg)), limit, (float(inner), float(t[-1])),
                      coding=coding)
