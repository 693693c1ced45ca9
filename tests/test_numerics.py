"""The small numerical routines that keep SciPy off the import path of an analysis, checked
against the libraries they stand in for (SciPy, scikit-image: reference implementations shipped by
general-purpose libraries) and against analytic cases; and the import path itself."""

from __future__ import annotations

import math
import subprocess
import sys

import numpy as np
import pytest
from scipy import ndimage, optimize, special
from skimage.filters import threshold_multiotsu

from beamshot.aim import axis_vector, fit_light_pose
from beamshot.beammap import bilinear
from beamshot.levenberg import levenberg_marquardt
from beamshot.normal_cdf import ndtr
from beamshot.otsu import three_class_thresholds
from beamshot.smoothing import gaussian_filter1d


@pytest.mark.parametrize("mode", ["reflect", "nearest", "wrap"])
def test_gaussian_smoothing_equals_scipy(mode):
    # scipy.ndimage.gaussian_filter1d, order 0, truncate 4 (the reference implementation)
    rng = np.random.default_rng(1)
    for shape in [(5,), (1, 7), (40, 3), (300, 182), (3, 400)]:
        for sigma in (0.3, 1.0, 2.0, 5.5, 30.0):
            for axis in range(len(shape)):
                a = rng.normal(size=shape) * 10
                ours = gaussian_filter1d(a, sigma, axis=axis, mode=mode)
                ref = ndimage.gaussian_filter1d(a, sigma, axis=axis, mode=mode)
                assert ours.shape == a.shape
                np.testing.assert_allclose(ours, ref, rtol=0, atol=1e-12)


def test_gaussian_smoothing_keeps_a_constant_and_the_area():
    # analytic: a normalised kernel leaves a constant unchanged and (periodic) preserves the sum
    a = np.full((4, 50), 3.25)
    np.testing.assert_allclose(gaussian_filter1d(a, 4.0, axis=1, mode="nearest"), a, rtol=1e-15)
    spike = np.zeros(64)
    spike[10] = 1.0
    assert gaussian_filter1d(spike, 3.0, mode="wrap").sum() == pytest.approx(1.0, abs=1e-15)
    with pytest.raises(ValueError):
        gaussian_filter1d(spike, 1.0, mode="mirror")


def test_bilinear_equals_scipy_map_coordinates_nan_for_nan():
    # scipy.ndimage.map_coordinates(order=1, mode="constant", cval=nan, prefilter=False)
    rng = np.random.default_rng(2)
    for trial in range(30):
        n, m = (int(v) for v in rng.integers(1, 40, 2))
        a = rng.normal(size=(n, m))
        if trial % 3 == 0:
            a[rng.random((n, m)) < 0.1] = np.nan
        r, c = rng.uniform(-2, n + 1, 4000), rng.uniform(-2, m + 1, 4000)
        r[:50], c[50:100] = np.round(r[:50]), np.round(c[50:100])  # on grid lines and edges
        r[100], c[100], r[101], c[101], r[102] = n - 1, m - 1, 0, 0, np.nan
        ours = bilinear(a, r, c)
        ref = ndimage.map_coordinates(a, np.stack([r, c]), order=1, mode="constant", cval=np.nan, prefilter=False)
        np.testing.assert_array_equal(np.isnan(ours), np.isnan(ref))
        np.testing.assert_allclose(ours[~np.isnan(ref)], ref[~np.isnan(ref)], rtol=0, atol=1e-13)


def test_bilinear_is_exact_on_a_plane():
    # analytic: bilinear interpolation reproduces any function a + b r + c s exactly
    rr, cc = np.mgrid[0:7, 0:9]
    a = 2.0 + 0.5 * rr - 1.25 * cc
    r, c = np.array([0.0, 3.3, 5.999, 6.0]), np.array([8.0, 0.7, 4.5, 2.25])
    np.testing.assert_allclose(bilinear(a, r, c), 2.0 + 0.5 * r - 1.25 * c, rtol=1e-14)


def test_normal_cdf_equals_scipy_ndtr_to_2e_15():
    # scipy.special.ndtr; Phi(1.959963984540054) = 0.975 (NIST/SEMATECH e-Handbook 1.3.6.7.1, two-sided 95 %)
    z = np.concatenate([np.linspace(-40, 40, 400001), [np.nan, np.inf, -np.inf, 8.0, -8.0, 7.9999999999]])
    ours, ref = ndtr(z), special.ndtr(z)
    np.testing.assert_array_equal(np.isnan(ours), np.isnan(ref))
    assert np.nanmax(np.abs(ours - ref)) < 2e-15
    assert float(ndtr(1.959963984540054)) == pytest.approx(0.975, abs=1e-15)
    assert float(ndtr(0.0)) == 0.5


def _between_class(v, t1, t2):
    """Otsu's criterion sum S_k^2 / P_k (bin-index moments) of a split of the 256-bin histogram."""
    counts, edges = np.histogram(v, bins=256, range=(v.min(), v.max()))
    centres, p, k = 0.5 * (edges[:-1] + edges[1:]), counts / counts.sum(), np.arange(256)
    total = 0.0
    for sel in (centres <= t1 + 1e-12, (centres > t1 + 1e-12) & (centres <= t2 + 1e-12), centres > t2 + 1e-12):
        P, S = p[sel].sum(), (k * p)[sel].sum()
        total += S * S / P if P > 0 else 0.0
    return total


def test_three_class_otsu_matches_scikit_image():
    # skimage.filters.threshold_multiotsu(classes=3) works in float32: where two splits tie to
    # float32 precision it may pick the neighbouring bin; ours (float64) is then never worse
    rng = np.random.default_rng(0)
    same = 0
    for t in range(120):
        x = np.concatenate([rng.normal(rng.uniform(-5, 5), rng.uniform(0.1, 2), rng.integers(10, 3000))
                            for _ in range(3)])
        if t % 5 == 0:
            x = np.round(x, 1)
        ref, ours = threshold_multiotsu(x, classes=3), three_class_thresholds(x)
        if np.allclose(ref, ours, rtol=0, atol=1e-12):
            same += 1
        else:
            a, b = _between_class(x, *ref), _between_class(x, *ours)
            assert b >= a and (b - a) / b < 1e-6
    assert same >= 110


def test_three_class_otsu_on_three_spikes_and_too_few_values():
    # analytic: three separated values split between them
    x = np.r_[np.zeros(10), np.full(10, 5.0), np.full(10, 9.0)]
    t1, t2 = three_class_thresholds(x)
    assert 0 < t1 < 5 < t2 < 9
    with pytest.raises(ValueError):
        three_class_thresholds(np.r_[np.zeros(5), np.ones(5)])


def _decay_fit(seed: int):
    """Residuals and Jacobian of the exponential-decay fit y = a exp(-b t) + c to noisy samples (a
    textbook non-linear least-squares case)."""
    rng = np.random.default_rng(seed)
    t = np.linspace(0, 4, 60)
    y = 2.5 * np.exp(-1.3 * t) + 0.5 + rng.normal(0, 0.02, t.size)

    def fun(q):
        return q[0] * np.exp(-q[1] * t) + q[2] - y

    def jac(q):
        e = np.exp(-q[1] * t)
        return np.c_[e, -q[0] * t * e, np.ones_like(t)]

    return fun, jac


def test_levenberg_marquardt_finds_scipys_minimum():
    # the decay fit against SciPy's MINPACK Levenberg-Marquardt
    fun, jac = _decay_fit(3)
    ours = levenberg_marquardt(fun, [1.0, 0.5, 0.0], jac)
    ref = optimize.least_squares(fun, [1.0, 0.5, 0.0], jac=jac, method="lm", xtol=1e-14, ftol=1e-14, gtol=1e-14)
    assert ours.converged
    np.testing.assert_allclose(ours.x, ref.x, rtol=1e-9)
    np.testing.assert_allclose(ours.jac, jac(ours.x), rtol=0, atol=0)


def test_bounded_levenberg_marquardt_stops_on_the_bound_scipy_finds():
    # the same decay fit with the rate held below its free optimum: SciPy's bounded trust-region
    # fit ends on the bound, and so must ours (the gradient pushes against it)
    fun, jac = _decay_fit(4)
    lo, hi = [-np.inf, 0.0, -np.inf], [np.inf, 1.0, np.inf]
    ours = levenberg_marquardt(fun, [1.0, 0.5, 0.0], jac, bounds=(lo, hi), ftol=1e-15)
    ref = optimize.least_squares(fun, [1.0, 0.5, 0.0], jac=jac, bounds=(lo, hi), xtol=1e-15, ftol=1e-15,
                                 gtol=1e-15)
    assert ours.converged and ours.x[1] == 1.0
    np.testing.assert_allclose(ours.x, ref.x, rtol=1e-7)


def test_bounded_levenberg_marquardt_does_not_stop_where_a_coupled_variable_has_room():
    # a strongly coupled quadratic 1/2 |M x - c|^2 in the box x >= 10, started on the bound: the
    # first variable's gradient points into the box, the second's out of it; the unbounded step
    # would carry both out, and cutting it at the bounds gives a zero step that is no minimum.
    # The minimum is SciPy's bounded least_squares' (the reference implementation).
    a = np.array([[1.0, -0.99], [-0.99, 1.0]])
    m = np.linalg.cholesky(a).T
    x0 = np.array([10.0, 10.0 + 1e-12])
    c = np.linalg.solve(m.T, m.T @ m @ x0 - np.array([-0.1, 1.0]))
    lo, hi = [10.0, 10.0], [np.inf, np.inf]
    ours = levenberg_marquardt(lambda x: m @ x - c, x0, lambda x: m, bounds=(lo, hi), ftol=1e-15)
    ref = optimize.least_squares(lambda x: m @ x - c, x0, jac=lambda x: m, bounds=(lo, hi), xtol=1e-15,
                                 ftol=1e-15, gtol=1e-15)
    assert ours.converged
    np.testing.assert_allclose(ours.x, ref.x, atol=1e-9)


@pytest.mark.parametrize("amp, mu, fwhm", [(0.3, 0.2, 1.0), (-0.15, -0.3, 0.6), (0.05, 0.0, 2.0)])
def test_ring_fit_finds_the_minimum_of_the_full_model(amp, mu, fwhm):
    # a log-parabola hotspot (a Gaussian profile) times a Gaussian ring, with noise: the separable
    # fit must reach the minimum SciPy's bounded least_squares finds on all nine parameters with
    # tight tolerances (the reference implementation), and the same covariance
    from beamshot.rings import POLY_DEGREE, _FWHM, _fit_ring, _jac, _model

    rng = np.random.default_rng(5)
    step = 0.05
    centre = 8.0
    t = np.arange(centre - 3.0, centre + 3.0 + step / 2, step)
    w = fwhm / _FWHM
    smooth = -0.5 * (t / 6.0) ** 2
    s = np.full(t.size, 0.01)
    lp = smooth + np.log1p(amp * np.exp(-0.5 * ((t - centre - mu) / w) ** 2)) + rng.normal(0, 0.01, t.size)
    ring, q = _fit_ring(t, lp, s, centre, smooth, step)
    tc = t - centre
    lo_w, hi_w = 0.2 / _FWHM, 3.0 / _FWHM
    n = POLY_DEGREE + 1
    x0 = np.polyfit(tc, smooth, POLY_DEGREE)[::-1].tolist() + [0.0, 0.0, 0.4]
    ref = optimize.least_squares(lambda p: (_model(p, tc) - lp) / s, x0, jac=lambda p: _jac(p, tc) / s[:, None],
                                 bounds=([-np.inf] * n + [-0.95, -1.0, lo_w], [np.inf] * n + [10.0, 1.0, hi_w]),
                                 x_scale="jac", xtol=1e-15, ftol=1e-15, gtol=1e-15, max_nfev=10000)
    sigma = np.array([ring.amplitude_sigma, ring.angle_sigma, ring.width_sigma / _FWHM])
    assert np.all(np.abs(q[-3:] - ref.x[-3:]) <= 1e-4 * sigma)  # the same minimum, to 1e-4 of its 1-sigma
    assert np.sum(((_model(q, tc) - lp) / s) ** 2) <= 2.0 * ref.cost * (1 + 1e-12)
    assert ring.amplitude == pytest.approx(amp, abs=5 * ring.amplitude_sigma)
    assert ring.angle_deg == pytest.approx(centre + mu, abs=5 * ring.angle_sigma)


def test_light_pose_fit_recovers_an_exact_cone():
    # analytic: points on the intersection of a cone (apex 5 m from the wall, axis turned 4 deg
    # right and 2 deg up, half-angle 25 deg) with the wall plane give back the cone
    d, yaw, pitch, alpha = 5000.0, math.radians(4.0), math.radians(2.0), math.radians(25.0)
    a = axis_vector(yaw, pitch)
    u = np.cross(a, [0.0, 1.0, 0.0])
    u /= np.linalg.norm(u)
    w = np.cross(a, u)
    phi = np.linspace(0, 2 * np.pi, 200, endpoint=False)
    dirs = np.cos(alpha) * a + np.sin(alpha) * (np.cos(phi)[:, None] * u + np.sin(phi)[:, None] * w)
    foot = np.array([120.0, -80.0])
    pts = foot + d * dirs[:, :2] / dirs[:, 2:3]
    pose = fit_light_pose(pts, d / 1000.0, tuple(pts.mean(axis=0)))
    assert pose.half_angle_deg == pytest.approx(25.0, abs=1e-6)
    assert pose.yaw_deg == pytest.approx(4.0, abs=1e-6)
    assert pose.pitch_deg == pytest.approx(2.0, abs=1e-6)
    assert pose.foot_mm == pytest.approx((120.0, -80.0), abs=1e-3)


def test_an_analysis_and_its_report_set_import_no_scipy():
    # the speed of a whole `beamshot analyze` process depends on it (benchmarks/bench_analysis.py)
    code = (
        "import sys\n"
        "from beamshot.synth import HotspotSpillBeam, Scene, SynthCamera, render_photo, encode_jpeg, exposure_time_for_peak\n"
        "from dataclasses import replace\n"
        "import tempfile, os\n"
        "p = HotspotSpillBeam(peak_cd=5000, hotspot_fwhm_deg=8, spill_fraction=0.02, cutoff_deg=30,\n"
        "                     rings=((12.0, 1.0, 0.1),))\n"
        "s = Scene(distance_m=3.0)\n"
        "c = SynthCamera(width_px=800, height_px=600, focal_35mm_mm=18)\n"
        "c = replace(c, exposure_time_s=exposure_time_for_peak(p, s, c, target=0.8))\n"
        "path = os.path.join(tempfile.mkdtemp(), 'beam.jpg')\n"
        "open(path, 'wb').write(encode_jpeg(render_photo(p, s, c), c))\n"
        "for m in [m for m in sys.modules if m.startswith('scipy')]:\n"
        "    del sys.modules[m]\n"
        "from beamshot import analyze, rings\n"
        "from beamshot.report.output import write_report\n"
        "fits = []\n"
        "fit_ring = rings._fit_ring\n"
        "rings._fit_ring = lambda *a, **k: fits.append(1) or fit_ring(*a, **k)\n"
        "write_report(analyze(path, distance_m=3.0), os.path.join(os.path.dirname(path), 'out'))\n"
        "print(len(fits))\n"
        "print(sorted(m for m in sys.modules if m.startswith('scipy')))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    lines = out.stdout.strip().splitlines()
    assert int(lines[-2]) >= 1  # the ring was fitted (with beamshot.levenberg, not SciPy)
    assert lines[-1] == "[]"
