"""The ellipticity of an outline with the noise's bias taken out (beamshot.artefacts).

Noise on an outline's points makes a round outline look oval: the out-of-roundness 2-vector gains
a random part, and its length is Rice-distributed (Rice, Bell Syst. Tech. J. 23, 1944:
``E|h|^2 = A^2 + 2 s^2``), so minor/major reads low by about twice its own scatter.  The truth
here is the analytic ellipse the points are drawn from.
"""

from __future__ import annotations

import numpy as np
import pytest

from beamshot.artefacts import _ellipse_figures, ellipse_of_points


def _outline(major: float, minor: float, sigma: float, rng, n: int = 72, azimuth_deg: float = 30.0):
    """Points of an ellipse (full axes, deg) on ``n`` bearings, each moved by ``sigma`` along x and y."""
    t = np.linspace(0.0, 2.0 * np.pi, n, endpoint=False)
    a = np.radians(azimuth_deg)
    x0, y0 = 0.5 * major * np.cos(t), 0.5 * minor * np.sin(t)
    x = x0 * np.cos(a) - y0 * np.sin(a) + rng.normal(0.0, sigma, n)
    y = x0 * np.sin(a) + y0 * np.cos(a) + rng.normal(0.0, sigma, n)
    return x, y, np.full(n, sigma), np.full(n, sigma)


def test_a_round_outline_is_a_lower_bound_that_holds():
    # analytic: a circle of 10 deg with 0.05 deg of noise per point; the plain ratio reads low on
    # every draw, the figure is a lower bound that the truth (1) meets
    rng = np.random.default_rng(3)
    plain, bounds = [], []
    for _ in range(40):
        x, y, sx, sy = _outline(10.0, 10.0, 0.05, rng)
        major, minor, _ = ellipse_of_points(x, y)
        plain.append(minor / major)
        f = _ellipse_figures("hotspot", x, y, sx, sy, 0.0, "outline", rng)["hotspot_ellipticity"]
        bounds.append((f.status, f.value))
    assert np.mean(plain) < 0.998  # the bias this removes: 2 x 1.25 s / D ~ 0.3 %
    statuses = [s for s, _ in bounds]
    assert statuses.count("lower_bound") >= 36  # round within noise nearly always
    assert all(v <= 1.0 for s, v in bounds if s == "lower_bound")
    assert all(v > 0.98 for s, v in bounds if s == "lower_bound")  # and still a useful bound


def test_an_oval_outline_reads_its_ratio_without_the_bias():
    # analytic: minor/major 0.97 with noise that biases the plain ratio by about its own scatter
    rng = np.random.default_rng(5)
    plain, debiased, sigmas = [], [], []
    for _ in range(40):
        x, y, sx, sy = _outline(10.0, 9.7, 0.08, rng)
        major, minor, _ = ellipse_of_points(x, y)
        plain.append(minor / major)
        f = _ellipse_figures("hotspot", x, y, sx, sy, 0.0, "outline", rng)["hotspot_ellipticity"]
        assert f.status == "measured"
        debiased.append(f.value)
        sigmas.append(f.uncertainty)
    err_plain, err_debiased = np.mean(plain) - 0.97, np.mean(debiased) - 0.97
    assert abs(err_debiased) < abs(err_plain)
    assert abs(err_debiased) < 0.5 * np.mean(sigmas)
    z = (np.asarray(debiased) - 0.97) / np.asarray(sigmas)
    assert np.mean(np.abs(z) <= 2.0) >= 0.85  # JCGM 100: about 95 % within 2 sigma


def test_the_debiasing_follows_the_rice_mean():
    # Rice 1944: with s per component, E|h|^2 = A^2 + 2 s^2 - checked on the 2-vector itself
    rng = np.random.default_rng(9)
    a, s = 0.3, 0.2
    h = rng.normal(0.0, s, (20000, 2)) + np.array([a, 0.0])
    assert np.mean(np.sum(h * h, axis=1)) == pytest.approx(a * a + 2 * s * s, rel=0.02)
