"""Honest uncertainties of the beam-shape figures: the peak fit's noise counted in photo pixels, the
ISO 13694 noise from contiguous sectors, the sector non-uniformity's noise over a correlation length,
and the edge steepness's lens-shading term (beamshot.artefacts, beamshot.shape_iso)."""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest
from conftest import analytic_map

from beamshot.artefacts import (
    _sector_figure,
    with_shared_terms,
)
from beamshot.figure import Figure
from beamshot.hotspot import BILINEAR_VARIANCE, QUADRATIC_INTERCEPT_VARIANCE, find_peak, peak_rel_noise
from beamshot.shape_iso import iso13694

SIGMA_DEG = 4.0 / (2.0 * np.sqrt(2.0 * np.log(2.0)))  # a 4 deg FWHM Gaussian hotspot


def _gaussian_map(theta_max_deg=12.0):
    return analytic_map(lambda t, p: np.exp(-0.5 * (np.degrees(t) / SIGMA_DEG) ** 2), theta_max_deg=theta_max_deg,
                        d_theta_deg=0.1, d_phi_deg=2.0)


def _with_pixel_noise(beam, rng, pixel_deg, s_pix, block=1):
    """``beam`` plus the noise of a photo: independent pixels of ``pixel_deg`` (or blocks of ``block``
    pixels sharing one error), read bilinearly at each cell's place on the azimuthal-equidistant plane,
    as the map reads a photo."""
    from scipy.ndimage import map_coordinates

    tt, pp = np.meshgrid(beam.theta, beam.phi, indexing="ij")
    x, y = np.degrees(tt) * np.cos(pp), np.degrees(tt) * np.sin(pp)
    n = int(np.ceil(2.0 * np.degrees(beam.theta[-1]) / pixel_deg)) + 4
    nb = n // block + 2
    img = np.kron(rng.normal(0.0, s_pix, (nb, nb)), np.ones((block, block)))
    off = rng.uniform(0.0, block, 2)
    noise = map_coordinates(img, [y / pixel_deg + n / 2 + off[0], x / pixel_deg + n / 2 + off[1]], order=1)
    return replace(beam, intensity=beam.intensity + noise)


def test_bilinear_sample_variance_is_four_ninths():
    # analytic: a bilinear sample of independent unit-variance pixels at offsets (f, g) has the variance
    # ((1-f)^2 + f^2)((1-g)^2 + g^2), whose mean over f, g uniform on [0, 1] is (2/3)^2 = 4/9
    rng = np.random.default_rng(1)
    f, g = rng.uniform(size=(2, 200_000))
    w = np.stack([(1 - f) * (1 - g), f * (1 - g), (1 - f) * g, f * g])
    assert np.mean(np.sum(w ** 2, axis=0)) == pytest.approx(BILINEAR_VARIANCE, rel=0.01)
    samples = np.sum(w * rng.normal(size=w.shape), axis=0)
    assert np.var(samples) == pytest.approx(4.0 / 9.0, rel=0.02)


def test_quadratic_intercept_variance_on_a_disc():
    # analytic: least squares a + b.x + x^T C x on N points evenly over a disc; the intercept's variance
    # is (1 + mean(u)^2 / var(u)) s^2 / N with u = r^2 / R^2 uniform on [0, 1]: 4 s^2 / N
    rng = np.random.default_rng(2)
    n, draws = 400, 3000
    r, a = np.sqrt(rng.uniform(size=n)), rng.uniform(0, 2 * np.pi, n)
    x, y = r * np.cos(a), r * np.sin(a)
    design = np.stack([np.ones(n), x, y, x * x, x * y, y * y], axis=1)
    cov = np.linalg.inv(design.T @ design)
    assert cov[0, 0] * n == pytest.approx(QUADRATIC_INTERCEPT_VARIANCE, rel=0.1)
    coef = np.linalg.lstsq(design, rng.normal(size=(n, draws)), rcond=None)[0]
    assert np.var(coef[0]) * n == pytest.approx(QUADRATIC_INTERCEPT_VARIANCE, rel=0.15)


def test_peak_noise_counts_the_photos_pixels():
    # analytic: a Gaussian hotspot (peak 1) on a map finer than the photo's pixels (0.1 deg cells near the
    # axis, 0.15 deg pixels) with 1 % independent pixel noise: the fitted peak's scatter over noise draws
    # is what peak_rel_noise states; find_peak's own rel_noise, which counts map samples, is far smaller
    rng = np.random.default_rng(3)
    beam, pixel = _gaussian_map(), 0.15
    peaks, stated, own = [], [], []
    for _ in range(40):
        pk = find_peak(_with_pixel_noise(beam, rng, pixel, 0.01))
        peaks.append(pk.value)
        stated.append(peak_rel_noise(pk, pixel))
        own.append(pk.rel_noise)
    scatter = np.std(peaks, ddof=1)
    assert 0.7 < scatter / np.mean(stated) < 1.4
    assert scatter / np.mean(own) > 2.5
    # pixels finer than the fit's samples: nothing shared, find_peak's value is kept
    assert peak_rel_noise(pk, 1e-4) == pk.rel_noise
    assert peak_rel_noise(pk, 0.0) == pk.rel_noise


def test_iso13694_noise_from_contiguous_sectors():
    # analytic: Gaussian hotspot, E_max known (1): the edge steepness scatters over pixel-noise draws by about
    # its stated noise (the interleaved column subsets alone share the pixels near the axis and state far less)
    rng = np.random.default_rng(4)
    beam, pixel = _gaussian_map(), 0.15
    steep, stated = [], []
    for _ in range(40):
        r = iso13694(_with_pixel_noise(beam, rng, pixel, 0.01), 1.0, None, correlation_deg=pixel)
        steep.append(r.edge_steepness)
        stated.append(r.edge_steepness_sigma)
    ratio = np.std(steep, ddof=1) / np.mean(stated)
    assert 0.6 < ratio < 1.6
    # the noise-free value: ISO 13694 edge steepness of a Gaussian, 1 - ln(1/0.9) / ln(1/0.1) = 0.954
    assert np.mean(steep) == pytest.approx(1 - np.log(1 / 0.9) / np.log(10), abs=5 * np.mean(stated) / np.sqrt(40))


def test_iso13694_sector_noise_ignores_an_offset_beam():
    # analytic: a noise-free Gaussian 0.3 deg off the axis differs between sectors by the first harmonic of
    # azimuth only (to first order in the offset); that is not noise, so the stated noise stays near 0
    ox = 0.3
    beam = analytic_map(lambda t, p: np.exp(-0.5 * ((np.degrees(t) * np.cos(p) - ox) ** 2
                                                    + (np.degrees(t) * np.sin(p)) ** 2) / SIGMA_DEG ** 2),
                        theta_max_deg=12.0, d_theta_deg=0.1, d_phi_deg=2.0)
    r = iso13694(beam, 1.0, None)
    from beamshot.level_integrals import above_level
    from beamshot.shape_iso import (  # the sectors' raw spread, for comparison
        N_SECTORS,
        _iso13694_of,
    )

    t = np.degrees(beam.theta)
    a_low = above_level(beam.intensity, t, beam.d_phi, 0.1, area_only=True).area
    a_high = above_level(beam.intensity, t, beam.d_phi, 0.9, area_only=True).area
    hot = above_level(beam.intensity, t, beam.d_phi, 0.5, np.zeros_like(beam.intensity))
    k = len(beam.phi)
    sector = np.minimum((np.arange(k) * N_SECTORS) // k, N_SECTORS - 1)
    raw = np.std([_iso13694_of(hot, a_low, a_high, 1.0, sector == j)[2] for j in range(N_SECTORS)], ddof=1)
    assert raw > 1e-3  # the offset does make the sectors differ
    assert r.edge_steepness_sigma < 0.05 * raw / np.sqrt(N_SECTORS)


@pytest.mark.parametrize("fwhm_deg, block", [(20.0, 8), (4.0, 4)])
def test_round_beam_sector_nonuniformity_is_a_bound_with_correlated_noise(fwhm_deg, block):
    # analytic: a rotationally symmetric beam has no azimuthal variation (truth 0).  With noise correlated
    # over blocks of pixels (JPEG: 8) wider than the radial bands, the bands share it and the noise was read
    # too small, so noise passed for sectors; counted over the correlation length it is an upper bound
    from beamshot.beammap import directions
    from beamshot.hotspot import _rays

    rng = np.random.default_rng(5)
    sigma = fwhm_deg / (2.0 * np.sqrt(2.0 * np.log(2.0)))
    h, step, pixel = 0.5 * fwhm_deg, 0.1, 0.13
    beam = analytic_map(lambda t, p: np.exp(-0.5 * (np.degrees(t) / sigma) ** 2), theta_max_deg=1.3 * h + 1.0,
                        d_theta_deg=step, d_phi_deg=2.0)
    r = np.arange(0.0, 1.2 * h, step)
    vec = _rays(directions(0.0, 0.0), np.arange(180) * 2 * np.pi / 180, np.radians(r))
    sel = (r >= 0.3 * h) & (r <= h)
    before, after = [], []
    for _ in range(4):
        rows = _with_pixel_noise(beam, rng, pixel, 0.01, block=block).sample(vec)[:, sel].T
        before.append(_sector_figure("hotspot", rows, 2.0, 3, "m", None))
        after.append(_sector_figure("hotspot", rows, 2.0, 3, "m", None, corr_rows=block * pixel / step,
                                    circle_deg=2 * np.pi * 0.65 * h, correlation_deg=block * pixel))
    assert sum(f.status == "measured" for f in before) >= 2  # the bias this fixes
    assert all(f.status == "upper_bound" and f.value >= 0 for f in after)


def test_a_real_sector_is_still_measured():
    # analytic: a 60 deg sector 10 % dark in the hotspot zone: the RMS of a profile that is 0.9 over 1/6 of the
    # circle and 1 elsewhere, about its mean, is 0.1 sqrt(p (1 - p)) = 0.0373 (p = 1/6) before the 10 deg smoothing
    rng = np.random.default_rng(6)
    dark = np.where((np.arange(180) * 2.0 >= 100) & (np.arange(180) * 2.0 < 160), 0.9, 1.0)
    rows = np.exp(-0.5 * (np.linspace(0.5, 1.7, 13) / SIGMA_DEG) ** 2)[:, None] * dark[None, :]
    rows = rows + rng.normal(0.0, 0.002, rows.shape)
    f = _sector_figure("hotspot", rows, 2.0, 3, "m", None, corr_rows=4.0, circle_deg=2 * np.pi * 1.1,
                       correlation_deg=0.4)
    assert f.status == "measured"
    assert f.value == pytest.approx(0.1 * np.sqrt(1 / 6 * 5 / 6), rel=0.1)


def test_gain_leaves_a_gaussians_edge_steepness():
    # analytic: a Gaussian times a gain 1 - k r^2 (lens shading near the axis) is, to first order, a Gaussian of
    # another width, and the ISO 13694 measures of a Gaussian do not depend on its width (s = 0.954, F = 0.721)
    beam = _gaussian_map(theta_max_deg=14.0)
    shaded = analytic_map(lambda t, p: np.exp(-0.5 * (np.degrees(t) / SIGMA_DEG) ** 2)
                          * np.exp(-0.003 * np.degrees(t) ** 2), theta_max_deg=14.0, d_theta_deg=0.1, d_phi_deg=2.0)
    a, b = iso13694(beam, 1.0), iso13694(shaded, 1.0)
    assert b.edge_steepness == pytest.approx(a.edge_steepness, abs=2e-4)
    assert b.flatness == pytest.approx(a.flatness, abs=2e-4)


def test_edge_steepness_takes_the_contours_differential_shading():
    # analytic: ds = -(1 - s)(2 e_0.9 - 2 e_0.1), e the relative radius error, e_0.9 = e_0.5 on a Gaussian top
    s = 0.96
    shape = {"hotspot_edge_steepness": Figure(s, 1e-3, "", "m", budget=(("pixel noise", 1e-3),))}
    main = {"hotspot_angle": Figure(20.0, 1.0, "deg", "m", budget=(("lens shading", 0.6),)),
            "field_angle": Figure(40.0, 2.0, "deg", "m", budget=(("lens shading", 1.8),))}
    out = with_shared_terms(shape, main)["hotspot_edge_steepness"]
    term = 2 * (1 - s) * abs(1.8 / 40 - 0.6 / 20)
    assert dict(out.budget)["lens shading"] == pytest.approx(term)
    assert out.uncertainty == pytest.approx(np.hypot(1e-3, term))
    # no shading term in the main figures (a flat field, or none needed): unchanged
    main_flat = {k: replace(f, budget=(("pixel noise", 0.1),)) for k, f in main.items()}
    assert with_shared_terms(shape, main_flat)["hotspot_edge_steepness"] == shape["hotspot_edge_steepness"]


def test_tone_curve_shape_moves_what_a_power_law_bend_does_not():
    # analytic: a Gaussian's ISO 13694 measures do not change under a power-law bend I (I / I_peak)^eps (its
    # contours all scale alike), but do when a photo encoded with a pure power law (gamma 2.4) is read as sRGB
    # (IEC 61966-2-1 curve, whose local exponent changes with level): the tone-curve shape term covers that
    from beamshot.artefacts import TONE_PEAK_LEVEL, _with_tone_shape
    from beamshot.camera.response import Response

    beam = _gaussian_map(theta_max_deg=14.0)
    base = iso13694(beam, 1.0)
    bent = iso13694(replace(beam, intensity=beam.intensity ** 1.1), 1.0)
    assert abs(bent.edge_steepness - base.edge_steepness) < 3e-4
    read = Response().decode(Response("gamma", 2.4).encode(beam.intensity * TONE_PEAK_LEVEL)) / TONE_PEAK_LEVEL
    wrong = iso13694(replace(beam, intensity=read), float(np.max(read)))
    assert wrong.edge_steepness - base.edge_steepness > 1e-3
    figs = {k: Figure(v, 1e-4, "", "m", budget=(("pixel noise", 1e-4),)) for k, v in
            (("hotspot_flatness", base.flatness), ("hotspot_uniformity", base.uniformity),
             ("hotspot_edge_steepness", base.edge_steepness))}
    out = _with_tone_shape(figs, beam, 1.0)
    term = dict(out["hotspot_edge_steepness"].budget)["tone curve shape"]
    # the term (a rectangular half-width over sqrt 3) is of the size of the error it stands for
    assert 0.3 < term * np.sqrt(3.0) / (wrong.edge_steepness - base.edge_steepness) < 3.0
    assert out["hotspot_edge_steepness"].status == "estimate"  # the assumed curve makes most of its uncertainty
