"""End to end on synthetic photos with known truth (beamshot.synth renders honest physics:
inverse-square and cosine laws, a Lambertian wall, ISO 12232 exposure, noise, sRGB, JPEG)."""

from dataclasses import replace

import numpy as np
import pytest

from beamshot import analyze
from beamshot.camera.response import Response
from beamshot.photo import decode_photo
from beamshot.synth import HotspotSpillBeam, Scene, encode_jpeg, encode_png16, render_photo, render_rgb_linear

from conftest import make_shot


def _jpeg(pattern, scene, cam, seed=3, quality=90):
    return decode_photo(encode_jpeg(render_photo(pattern, scene, cam, seed=seed), cam, quality=quality), "synthetic.jpg")


def _rel(fig, truth):
    assert fig.value is not None, fig.reason
    return abs(fig.value - truth) / truth


def _check_tolerances(report, truth, *, peak=True):
    # tolerances of the beam-analysis acceptance criteria
    assert _rel(report["hotspot_angle"], truth["hotspot_angle_deg"]) <= 0.02
    assert _rel(report["field_angle"], truth["field_angle_deg"]) <= 0.03
    assert _rel(report["spill_angle"], truth["spill_angle_deg"]) <= 0.03
    assert _rel(report["ra"], truth["ra"]) <= 0.05
    if peak:
        assert _rel(report["peak_intensity"], truth["peak_cd"]) <= 0.03


@pytest.fixture(scope="module")
def reflector_case(reflector_beam):
    scene, cam, truth = make_shot(reflector_beam)
    return reflector_beam, scene, cam, truth, _jpeg(reflector_beam, scene, cam)


def test_reflector_with_lux_meter(reflector_case):
    pattern, scene, cam, truth, photo = reflector_case
    rep = analyze(photo, distance_m=scene.distance_m, lux_at_peak=round(truth["peak_lux_on_wall"]))
    _check_tolerances(rep, truth)
    assert rep["peak_intensity"].status == "measured" and rep["peak_intensity"].unit == "cd"
    # FL 1 beam distance follows from the measured peak
    assert rep["beam_distance"].value == pytest.approx(2 * np.sqrt(rep["peak_intensity"].value), rel=1e-9)
    assert _rel(rep["beam_flux"], truth["beam_flux_lm"]) <= 0.03
    assert _rel(rep["hotspot_flux"], truth["hotspot_flux_lm"]) <= 0.03
    # every figure carries an uncertainty and a method
    for fig in rep.figures.values():
        assert fig.method and (fig.value is None or fig.uncertainty is not None
                               or fig.status in ("lower_bound", "upper_bound"))


def test_uncertainties_cover_the_error(reflector_case):
    pattern, scene, cam, truth, photo = reflector_case
    rep = analyze(photo, distance_m=scene.distance_m, lux_at_peak=truth["peak_lux_on_wall"])
    for key, tkey in (("hotspot_angle", "hotspot_angle_deg"), ("field_angle", "field_angle_deg"),
                      ("spill_angle", "spill_angle_deg"), ("ra", "ra"), ("peak_intensity", "peak_cd")):
        f = rep[key]
        assert abs(f.value - truth[tkey]) <= 3 * f.uncertainty, key


def test_without_scale_figures_are_relative(reflector_case):
    pattern, scene, cam, truth, photo = reflector_case
    rep = analyze(photo, distance_m=scene.distance_m, use_exif_scale=False)
    assert rep["peak_intensity"].value is None and "no absolute scale" in rep["peak_intensity"].reason
    assert rep["beam_flux"].value is None
    _check_tolerances(rep, truth, peak=False)


def test_exposure_metadata_estimate_within_its_uncertainty(reflector_case):
    # ISO 12232 relation from EXIF; the synthetic lens differs from the standard's q (0.69 vs 0.65)
    pattern, scene, cam, truth, photo = reflector_case
    rep = analyze(photo, distance_m=scene.distance_m)
    f = rep["peak_intensity"]
    assert f.status == "estimate"
    assert abs(f.value - truth["peak_cd"]) <= f.uncertainty
    assert f.uncertainty / f.value > 0.2  # honest: an estimate is much less certain than a meter


def test_ambient_subtraction(reflector_beam):
    scene = Scene(distance_m=4.0, ambient_lux=2.0)
    scene, cam, truth = make_shot(reflector_beam, scene=scene)
    beam = _jpeg(reflector_beam, scene, cam, seed=5)
    dark = _jpeg(HotspotSpillBeam(peak_cd=0.0), scene, cam, seed=6)
    rep = analyze(beam, distance_m=4.0, ambient=dark, lux_at_peak=truth["peak_lux_on_wall"] + 2.0 * 0)
    _check_tolerances(rep, truth)
    raw = analyze(beam, distance_m=4.0, lux_at_peak=truth["peak_lux_on_wall"])
    assert any("room light" in w for w in raw.warnings)


def test_vignetting_corrected_by_flat(reflector_beam):
    cam_kw = dict(natural_vignetting=True, lens_vignetting=0.3)
    scene, cam, truth = make_shot(reflector_beam, **cam_kw)
    photo = _jpeg(reflector_beam, scene, cam)
    white = HotspotSpillBeam(peak_cd=0.0, stray_fraction=0.0)
    flat_scene = Scene(distance_m=scene.distance_m, ambient_lux=200.0)
    flat_cam = replace(cam, exposure_time_s=cam.exposure_time_s * 0.0 + 1 / 60)
    flat = _jpeg(white, flat_scene, flat_cam, seed=9)
    rep = analyze(photo, distance_m=scene.distance_m, flat=flat, lux_at_peak=truth["peak_lux_on_wall"])
    _check_tolerances(rep, truth)
    assert rep.calibration["flat_field"]["residual_rms"] < 0.01


@pytest.mark.parametrize("kind", ["off_centre", "elliptical", "rings", "narrow"])
def test_pattern_families(kind):
    patterns = {
        "off_centre": HotspotSpillBeam(peak_cd=8000, hotspot_fwhm_deg=6, hotspot_offset_deg=(2.0, -1.0), cutoff_deg=28),
        "elliptical": HotspotSpillBeam(peak_cd=8000, hotspot_fwhm_deg=9, ellipse_ratio=1.3, cutoff_deg=30),
        "rings": HotspotSpillBeam(peak_cd=15000, hotspot_fwhm_deg=5, rings=((8.0, 0.7, 0.04), (14.0, 1.0, 0.02)),
                                  cutoff_deg=32, spill_fraction=0.01),
        "narrow": HotspotSpillBeam(peak_cd=60000, hotspot_fwhm_deg=2.0, spill_fraction=0.004, cutoff_deg=25,
                                   edge_width_deg=0.5),
    }
    pattern = patterns[kind]
    scene, cam, truth = make_shot(pattern, width_px=1600, height_px=1200) if kind == "narrow" else make_shot(pattern)
    rep = analyze(_jpeg(pattern, scene, cam), distance_m=scene.distance_m, lux_at_peak=truth["peak_lux_on_wall"])
    _check_tolerances(rep, truth)
    if kind == "off_centre":
        assert rep["hotspot_offset"].value == pytest.approx(np.hypot(2.0, 1.0), abs=0.1)
    if kind == "elliptical":
        ratio = rep["hotspot_angle_vertical"].value / rep["hotspot_angle_horizontal"].value
        assert ratio == pytest.approx(1.3, rel=0.03)


def test_sixteen_bit_gamma_png(reflector_beam):
    scene, cam, truth = make_shot(reflector_beam, response=Response("gamma", 2.2))
    data = encode_png16(render_rgb_linear(reflector_beam, scene, cam, seed=4), cam)
    photo = decode_photo(data, "synthetic.png")
    rep = analyze(photo, distance_m=scene.distance_m, response="gamma:2.2", focal_35mm=cam.focal_35mm_mm,
                  lux_at_peak=truth["peak_lux_on_wall"])
    _check_tolerances(rep, truth)


def test_portrait_orientation_from_exif(reflector_beam):
    scene, cam, truth = make_shot(reflector_beam, width_px=750, height_px=1000, orientation=6)
    rep = analyze(_jpeg(reflector_beam, scene, cam), distance_m=scene.distance_m, lux_at_peak=truth["peak_lux_on_wall"])
    assert rep.inputs[0]["width"] == 750 and rep.inputs[0]["height"] == 1000
    assert _rel(rep["hotspot_angle"], truth["hotspot_angle_deg"]) <= 0.02


def test_clipped_hotspot_is_not_reported_as_measured(reflector_beam):
    scene, cam, truth = make_shot(reflector_beam, target=4.0)  # four times over the clip level
    rep = analyze(_jpeg(reflector_beam, scene, cam), distance_m=scene.distance_m)  # exposure-metadata scale
    assert rep["peak_intensity"].status == "lower_bound"  # a clipped pixel reads at most its true value
    assert rep["hotspot_angle"].value is None and "clipped" in rep["hotspot_angle"].reason
    assert rep["ra"].value is None
    assert any("lower the exposure" in w for w in rep.warnings)
    # the spill edge does not depend on the peak and is still measured
    assert _rel(rep["spill_angle"], truth["spill_angle_deg"]) <= 0.03


def test_spill_running_off_the_photo(reflector_beam):
    scene, cam, truth = make_shot(reflector_beam, focal_35mm_mm=35)  # ~ +-26 deg horizontal view
    rep = analyze(_jpeg(reflector_beam, scene, cam), distance_m=scene.distance_m, lux_at_peak=truth["peak_lux_on_wall"])
    assert rep["spill_angle"].value is None and "covers" in rep["spill_angle"].reason
    assert rep["ra"].value is None
    assert _rel(rep["hotspot_angle"], truth["hotspot_angle_deg"]) <= 0.02
    assert _rel(rep["peak_intensity"], truth["peak_cd"]) <= 0.03


def test_tabulated_beam():
    # a tabulated, rotationally symmetric beam (linear between points) with a cut-off at 24 deg
    from beamshot.synth import TabulatedBeam

    ang = (0, 2, 4, 6, 8, 10, 14, 20, 23.6, 24.4, 30)
    cd = (20000, 17000, 10000, 4000, 1500, 700, 450, 380, 340, 0, 0)
    pattern = TabulatedBeam(ang, cd, edge_deg=24.0)
    scene, cam, truth = make_shot(pattern)
    rep = analyze(_jpeg(pattern, scene, cam), distance_m=scene.distance_m, lux_at_peak=truth["peak_lux_on_wall"])
    _check_tolerances(rep, truth)
