"""Beam artefacts found on synthetic photos with known artefacts (beamshot.artefacts, beamshot.rings).

The photos come from the project's renderer (beamshot.synth) with the patterns of
beamshot.synth_artefacts; each truth is computed from the pattern itself, not from the analyser.
Photos are small (480 x 360 pixels, 97 deg across) to keep the module fast.
"""

from __future__ import annotations

import re
from dataclasses import replace

import numpy as np
import pytest
from scipy.optimize import brentq

from types import SimpleNamespace

from beamshot import analysis as A
from beamshot import analyze
from beamshot.request import Request
from beamshot.photo import decode_photo
from beamshot.synth import HotspotSpillBeam, Scene, SynthCamera, encode_jpeg, exposure_time_for_peak, render_photo
from beamshot.synth_artefacts import EllipticalHotspotBeam, FlatTopBeam, OffsetHotspotBeam, RingedBeam

SCENE = Scene(distance_m=5.0)
BASE = HotspotSpillBeam(peak_cd=10000.0, hotspot_fwhm_deg=8.0, spill_fraction=0.02, cutoff_deg=24.0)
WIDE = HotspotSpillBeam(peak_cd=10000.0, hotspot_fwhm_deg=14.0, spill_fraction=0.05, cutoff_deg=24.0)


def _peak_lux(pattern) -> float:
    """Brightest wall illuminance, E = I cos^3(theta) / D^2 (IES 9.1.1/9.1.2), on a coarse grid (only
    the exposure depends on it; the dense truth integration of beamshot.synth takes seconds)."""
    t, p = np.meshgrid(np.radians(np.arange(0.0, 20.0, 0.05)), np.radians(np.arange(0.0, 360.0, 2.0)), indexing="ij")
    return float(np.max(pattern(t, p) * np.cos(t) ** 3)) / SCENE.distance_m ** 2


def _photo(pattern, seed, width=480, height=360):
    cam = SynthCamera(width_px=width, height_px=height, focal_35mm_mm=16, supersample=1)
    cam = replace(cam, exposure_time_s=exposure_time_for_peak(pattern, SCENE, cam, peak_lux=_peak_lux(pattern)))
    return decode_photo(encode_jpeg(render_photo(pattern, SCENE, cam, seed=seed), cam), "beam.jpg")


def _report(pattern, seed=1):
    return analyze(_photo(pattern, seed), distance_m=SCENE.distance_m, use_exif_scale=False)


def _shape_only(pattern, seed):
    """The shape figures by the analysis's own stages, without the uncertainty budget of the main
    figures (which the shape stage does not use; it is half of an analysis's time)."""
    req = Request.from_options(_photo(pattern, seed), distance_m=SCENE.distance_m, use_exif_scale=False).validated()
    loaded = A.load(req)
    linear = A.linear_image(req, loaded)
    mapped, measured = A.beam_map(req, loaded, linear, A.wall_mapping(req, loaded, linear))
    return A.shape_of(req, linear, mapped, measured, SimpleNamespace(pixel_deg=A._pixel_deg(measured)))


def _rings_listed(fig):
    """(kind, amplitude, angle) of every ring the ring score's method lists."""
    return [(k, float(a) / 100.0, float(t)) for k, a, t in re.findall(r"(bright|dark) ([+-]\d+\.\d)% at (\d+\.\d) deg",
                                                                      fig.method)]


def test_a_5_percent_ring_at_6_deg():
    # the ring multiplies the beam (RingedBeam), so its amplitude relative to the smooth profile is 0.05
    rep = _report(RingedBeam(BASE, ((6.0, 1.0, 0.05),)))
    s = rep.shape_figures
    assert s["ring_count"].value == 1
    assert s["ring_angle"].known  # measured, or an estimate under the assumed tone curve
    assert s["ring_angle"].value == pytest.approx(6.0, abs=0.3)
    assert s["ring_amplitude"].value == pytest.approx(0.05, abs=0.01)
    assert s["ring_score"].value == pytest.approx(0.05, abs=0.01)
    assert s["ring_width"].value == pytest.approx(1.0, rel=0.25)
    assert 0 < s["ring_amplitude"].uncertainty < 0.01


def test_a_bright_and_a_dark_ring_are_both_reported():
    # the example: +30 % at 10 deg and -15 % at 5 deg, on a wide beam
    rep = _report(RingedBeam(WIDE, ((10.0, 1.0, 0.30), (5.0, 1.0, -0.15))))
    s = rep.shape_figures
    assert s["ring_count"].value == 2
    assert s["ring_angle"].value == pytest.approx(10.0, abs=0.3)  # the strongest
    rings = sorted(_rings_listed(s["ring_score"]), key=lambda r: r[2])
    assert [r[0] for r in rings] == ["dark", "bright"]
    assert rings[0][1] == pytest.approx(-0.15, abs=0.01) and rings[0][2] == pytest.approx(5.0, abs=0.3)
    assert rings[1][1] == pytest.approx(0.30, abs=0.01) and rings[1][2] == pytest.approx(10.0, abs=0.3)


def test_no_false_ring_over_20_noisy_renders_of_a_clean_beam():
    found = []
    for seed in range(20):
        s = _shape_only(BASE, 100 + seed)
        if s["ring_score"].status != "upper_bound":
            found.append((seed, s["ring_score"].method))
        else:
            assert s["ring_count"].value == 0 and s["ring_angle"].status == "not_measured"
            # the bound is what a 1 deg ring would need: it must leave a 5 % ring detectable
            assert 0 < s["ring_score"].value < 0.05
    assert not found, found


def _hole_truth(pattern):
    """Depth 1 - I(0) / max I and full width at half depth of a round pattern, on a 0.001 deg grid."""
    t = np.arange(0.0, 12.0, 0.001)
    i = pattern(np.radians(t), 0.0)
    k = int(np.argmax(i))
    depth = 1 - i[0] / i[k]
    half = i[0] + 0.5 * (i[k] - i[0])
    return depth, 2 * t[int(np.argmax(i >= half))]


@pytest.mark.parametrize("depth", [0.20, 0.23])
def test_a_centre_hole_is_found(depth):
    # 0.20: the required check; 0.23: the donut beam
    pattern = FlatTopBeam(radius_deg=6.0, hole_depth=depth, hole_fwhm_deg=3.0, cutoff_deg=24.0)
    true_depth, true_width = _hole_truth(pattern)
    s = _report(pattern).shape_figures
    assert s["centre_hole_depth"].known
    assert s["centre_hole_depth"].value == pytest.approx(true_depth, abs=0.02)
    assert s["centre_hole_width"].value == pytest.approx(true_width, rel=0.1)


@pytest.mark.parametrize("pattern", [FlatTopBeam(radius_deg=6.0, cutoff_deg=24.0), BASE], ids=["flat-top", "gaussian"])
def test_no_centre_hole_on_a_beam_without_one(pattern):
    s = _report(pattern, seed=7).shape_figures
    assert s["centre_hole_depth"].status == "upper_bound"
    assert s["centre_hole_depth"].value < 0.05
    assert s["centre_hole_width"].status == "not_measured"


def test_a_2_deg_hotspot_offset_is_recovered():
    off = (2.0 * np.cos(np.radians(30.0)), 2.0 * np.sin(np.radians(30.0)))
    rep = _report(OffsetHotspotBeam(off, cutoff_deg=24.0))
    assert rep["hotspot_offset"].value == pytest.approx(2.0, abs=0.2)
    assert rep.beam_axis["peak_direction_deg"]["phi"] == pytest.approx(30.0, abs=6.0)


def _half_width(pattern, angle_deg):
    """Full width (deg) of the pattern's 50 %-of-peak contour along the line through the axis at angle_deg."""
    peak = float(pattern(0.0, 0.0))
    a = np.radians(angle_deg)

    def level(r):
        return float(pattern(np.radians(abs(r)), a if r > 0 else a + np.pi)) - 0.5 * peak

    return brentq(level, 0.0, 20.0) + brentq(lambda r: level(-r), 0.0, 20.0)


def test_an_elliptical_hotspot_along_its_own_axes():
    # 10 x 6 deg (full widths at half maximum of the hotspot) with its major axis at 25 deg; the truth
    # is the pattern's own 50 % contour along the two axes (the 2 % spill widens it slightly)
    pattern = EllipticalHotspotBeam(major_fwhm_deg=10.0, minor_fwhm_deg=6.0, orientation_deg=25.0, cutoff_deg=24.0)
    major, minor = _half_width(pattern, 25.0), _half_width(pattern, 115.0)
    s = _report(pattern).shape_figures
    assert s["hotspot_major_angle"].value == pytest.approx(major, rel=0.03)
    assert s["hotspot_minor_angle"].value == pytest.approx(minor, rel=0.03)
    assert s["hotspot_orientation"].value == pytest.approx(25.0, abs=3.0)
    assert s["hotspot_ellipticity"].value == pytest.approx(minor / major, rel=0.03)
    # ISO 11146-1: D4sigma of the Gaussian hotspot alone is 4 sigma along each axis (sigma = FWHM / 2.3548)
    assert s["d4sigma_major"].value == pytest.approx(4 * 10.0 / 2.3548, rel=0.03)
    assert s["d4sigma_minor"].value == pytest.approx(4 * 6.0 / 2.3548, rel=0.03)
    assert s["d4sigma_azimuth"].value == pytest.approx(25.0, abs=3.0)


def test_a_round_beam_has_no_orientation_and_no_sectors():
    s = _report(BASE, seed=3).shape_figures
    assert s["hotspot_orientation"].status == "not_measured"
    assert s["spill_orientation"].status == "not_measured"
    assert s["hotspot_ellipticity"].value == pytest.approx(1.0, abs=0.02)
    assert s["sector_nonuniformity_spill"].status == "upper_bound"
    assert s["sector_nonuniformity_hotspot"].status == "upper_bound"
    # the spill edge (cut-off at 24 deg) along both axes
    assert s["spill_major_angle"].value == pytest.approx(48.0, rel=0.03)
    # the hotspot alone: D4sigma = 4 sigma of the Gaussian (ISO 11146-1), and the 90-10 % transition
    # of a Gaussian, r_10 - r_90 = sigma (sqrt(2 ln 10) - sqrt(2 ln(1/0.9))) = 1.687 sigma
    sigma = 8.0 / 2.3548
    assert s["d4sigma_major"].value == pytest.approx(4 * sigma, rel=0.03)
    assert s["hotspot_transition_width"].value == pytest.approx(1.687 * sigma, rel=0.05)


def test_a_dark_sector_in_the_spill_is_found():
    # a spill 20 % darker over 30 deg of azimuth (toward 90-120 deg): RMS of the relative azimuthal
    # profile = 0.2 x sqrt(f (1 - f)) / (1 - 0.2 f) with f = 30/360 (a two-level profile), = 0.0563
    class Sector:
        spill_edge_deg = 24.0

        def __call__(self, theta, phi):
            ph = np.degrees(np.mod(phi, 2 * np.pi))
            dark = np.where((ph >= 90.0) & (ph < 120.0) & (np.degrees(theta) > 12.0), 0.8, 1.0)
            return BASE(theta, phi) * dark

    f = 30.0 / 360.0
    expected = 0.2 * np.sqrt(f * (1 - f)) / (1 - 0.2 * f)
    s = _report(Sector()).shape_figures
    fig = s["sector_nonuniformity_spill"]
    assert fig.known
    # the 10 deg running mean softens the sector's sides: about 10 % lower than the sharp profile
    assert fig.value == pytest.approx(expected, rel=0.2)
    assert re.search(r"darkest toward (9\d|10\d|11\d) deg", fig.method)


def test_a_clipped_hotspot_leaves_the_shape_not_measured():
    # overexposed 2.5 times: the top of the beam, which every shape figure is measured against, is not
    # in the photo, so none is given (rather than a ring or a flat top that clipping made)
    pattern = RingedBeam(BASE, ((6.0, 1.0, 0.05),))
    cam = SynthCamera(width_px=480, height_px=360, focal_35mm_mm=16, supersample=1)
    cam = replace(cam, exposure_time_s=exposure_time_for_peak(pattern, SCENE, cam, target=2.5,
                                                              peak_lux=_peak_lux(pattern)))
    photo = decode_photo(encode_jpeg(render_photo(pattern, SCENE, cam, seed=2), cam), "clipped.jpg")
    s = analyze(photo, distance_m=SCENE.distance_m, use_exif_scale=False).shape_figures
    for key in ("ring_score", "centre_hole_depth", "d4sigma_major", "hotspot_flatness", "hotspot_major_angle"):
        assert s[key].status == "not_measured", key
        assert "clipped" in s[key].reason


def test_outline_axes_take_the_systematic_terms_of_the_main_figures_on_that_outline():
    # GUM 5.1.2 (uncorrelated terms add in quadrature); an error that scales the outline (the
    # distance, the wall points) is the same fraction of both axes as of the spill angle
    from beamshot.artefacts import with_shared_terms
    from beamshot.figure import Figure

    main = {"spill_angle_horizontal": Figure(60.0, 0.62, "deg", "m", budget=(("pixel noise", 0.1),
                                             ("distance to the wall", 0.6), ("tone curve", 0.1))),
            "spill_angle_vertical": Figure(60.0, 0.45, "deg", "m", budget=(("pixel noise", 0.1),
                                           ("distance to the wall", 0.3), ("lens shading", 0.3)))}
    shape = {"spill_major_angle": Figure(62.0, 0.05, "deg", "m", budget=(("pixel noise", 0.05),)),
             "spill_ellipticity": Figure(0.99, 0.001, "", "m")}
    out = with_shared_terms(shape, main)
    terms = dict(out["spill_major_angle"].budget)
    assert terms["distance to the wall"] == pytest.approx(0.01 * 62.0)  # the larger fraction of the two
    assert terms["lens shading"] == pytest.approx(0.005 * 62.0)
    assert "tone curve" not in terms  # the shape stage counts its own
    assert out["spill_major_angle"].uncertainty == pytest.approx(np.sqrt(0.05**2 + 0.62**2 + 0.31**2))
    assert out["spill_ellipticity"] is shape["spill_ellipticity"]  # a ratio: scale errors cancel


def test_axis_ratios_take_the_wall_mappings_anisotropy():
    # a mapping whose two axes differ in scale by a fraction d changes minor/major by that fraction
    # (first order); GUM 5.1.2 quadrature with the noise term
    from beamshot.artefacts import with_mapping_anisotropy
    from beamshot.figure import Figure

    shape = {"spill_ellipticity": Figure(0.98, 0.0005, "", "m", budget=(("pixel noise", 0.0005),)),
             "spill_major_angle": Figure(60.0, 0.1, "deg", "m")}
    out = with_mapping_anisotropy(shape, 0.003)
    assert out["spill_ellipticity"].uncertainty == pytest.approx(np.hypot(0.0005, 0.003 * 0.98))
    assert out["spill_major_angle"] is shape["spill_major_angle"]
    assert with_mapping_anisotropy(shape, 0.0) is shape  # a pinhole square to the wall scales both alike
