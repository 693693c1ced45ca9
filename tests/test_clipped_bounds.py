"""A clipped hotspot all the way through: every figure that depends on the clipped level is a bound
of the right direction, or not measured; a lux reading at a point that is not clipped rescues the
scale.  Truth from the synthetic renderer; the bound directions follow from two facts:
a clipped pixel reads at most its true value, and no direction is brighter than the peak."""

from __future__ import annotations

import numpy as np
import pytest

from beamshot.analysis import analyze
from beamshot.photo import decode_photo
from beamshot.synth import HotspotSpillBeam, encode_jpeg, render_photo, _wall_illuminance
from conftest import make_shot

PATTERN = HotspotSpillBeam(peak_cd=12000.0, hotspot_fwhm_deg=6.0, spill_fraction=0.02, cutoff_deg=30.0,
                           edge_width_deg=0.6)


@pytest.fixture(scope="module")
def clipped():
    scene, cam, truth = make_shot(PATTERN, target=3.0)  # the peak three times over the clip level
    photo = decode_photo(encode_jpeg(render_photo(PATTERN, scene, cam, seed=5), cam), "clipped.jpg")
    return scene, cam, truth, photo


@pytest.fixture(scope="module")
def unclipped():
    scene, cam, truth = make_shot(PATTERN, target=0.8)
    photo = decode_photo(encode_jpeg(render_photo(PATTERN, scene, cam, seed=6), cam), "beam.jpg")
    return scene, cam, truth, photo


def _point_lux(scene, cam, x, y):
    """Illuminance (lx) on the wall at pixel (x, y) of a square camera (pinhole, E = I cos(i) / r^2,
    IES inverse-square and cosine laws)."""
    f = cam.focal_px
    cx, cy = (cam.width_px - 1) / 2.0, (cam.height_px - 1) / 2.0
    px = cam.position_m[0] + scene.distance_m * (x - cx) / f
    py = cam.position_m[1] + scene.distance_m * (y - cy) / f
    return float(_wall_illuminance(PATTERN, scene, np.array([px]), np.array([py]))[0])


def _within(fig, truth, k=2.0):
    return abs(fig.value - truth) <= k * fig.uncertainty


def test_lux_at_a_clipped_peak_gives_the_peak_and_upper_bounds_for_fluxes(clipped):
    scene, cam, truth, photo = clipped
    rep = analyze(photo, distance_m=scene.distance_m, lux_at_peak=truth["peak_lux_on_wall"])
    # the meter reads the true peak: I = E D^2 (ANSI/PLATO FL 1; inverse-square law)
    assert rep["peak_intensity"].status == "measured" and _within(rep["peak_intensity"], truth["peak_cd"])
    assert rep["beam_distance"].status == "measured"
    # the scale matched to the clipped level is too large: fluxes are upper bounds that hold
    for key, tkey in (("hotspot_flux", "hotspot_flux_lm"), ("beam_flux", "beam_flux_lm")):
        assert rep[key].status == "upper_bound", key
        assert rep[key].value >= truth[tkey], (key, rep[key].value, truth[tkey])
    for key in ("spill_flux", "ra", "hotspot_angle", "field_angle"):
        assert rep[key].status == "not_measured", key


def test_exposure_scale_on_a_clipped_peak_gives_lower_bounds(clipped):
    scene, cam, truth, photo = clipped
    rep = analyze(photo, distance_m=scene.distance_m)  # scale from exposure metadata
    pk, bf = rep["peak_intensity"], rep["beam_flux"]
    # the synthetic EXIF is honest, so the exposure-metadata scale is right and a lower bound must be below
    assert pk.status == "lower_bound" and pk.value <= truth["peak_cd"]
    assert bf.status == "lower_bound" and bf.value <= truth["beam_flux_lm"]
    # the 50 % contour of a clipped map holds more area but dimmer cells: no bound either way
    assert rep["hotspot_flux"].status == "not_measured"


def test_lux_at_an_unclipped_point_rescues_the_scale(clipped):
    scene, cam, truth, photo = clipped
    x, y = 0.5 * (cam.width_px - 1) + 0.12 * cam.focal_px, 0.5 * (cam.height_px - 1)  # ~7 deg right: not clipped
    lux = _point_lux(scene, cam, x, y)
    rep = analyze(photo, distance_m=scene.distance_m, lux_at_peak=lux, lux_point_px=(x, y))
    assert rep.calibration["absolute_scale"]["kind"] == "lux_meter_point"
    pk, bf = rep["peak_intensity"], rep["beam_flux"]
    assert pk.status == "lower_bound" and pk.value < truth["peak_cd"]
    assert bf.status == "lower_bound" and bf.value <= truth["beam_flux_lm"] * (1 + 2 * 0.05)  # meter 5 % (1 sigma)
    assert bf.value > 0.8 * truth["beam_flux_lm"]  # the clipped core holds little of the beam's flux


def test_lux_at_a_point_scales_an_unclipped_photo(unclipped):
    scene, cam, truth, photo = unclipped
    x, y = 0.5 * (cam.width_px - 1) + 0.08 * cam.focal_px, 0.5 * (cam.height_px - 1) - 0.03 * cam.focal_px
    rep = analyze(photo, distance_m=scene.distance_m, lux_at_peak=_point_lux(scene, cam, x, y), lux_point_px=(x, y))
    for key, tkey in (("peak_intensity", "peak_cd"), ("beam_flux", "beam_flux_lm")):
        assert rep[key].value is not None and _within(rep[key], truth[tkey]), (key, rep[key], truth[tkey])


def test_a_metered_point_that_is_clipped_or_outside_is_refused(clipped):
    from beamshot.errors import BeamshotError

    scene, cam, truth, photo = clipped
    peak_xy = np.unravel_index(np.argmax(photo.bgr.sum(axis=2)), photo.shape)[::-1]
    with pytest.raises(BeamshotError, match="clipped"):
        analyze(photo, distance_m=scene.distance_m, lux_at_peak=480.0, lux_point_px=tuple(float(v) for v in peak_xy))
    with pytest.raises(BeamshotError, match="outside"):
        analyze(photo, distance_m=scene.distance_m, lux_at_peak=480.0, lux_point_px=(-5.0, 10.0))


def test_a_soft_edge_next_to_a_clipped_core_is_not_measured():
    # a soft-edged beam (no bezel cut-off): its edge found by a level relative to the clipped peak, or at
    # the clipped plateau's rim, is not the beam's edge - spill angle, beam flux and tilt not measured
    soft = HotspotSpillBeam(peak_cd=12000.0, hotspot_fwhm_deg=8.0, spill_fraction=0.006, cutoff_deg=20.0,
                            edge_width_deg=6.0)
    scene, cam, truth = make_shot(soft, target=3.0, width_px=800, height_px=600)
    rep = analyze(decode_photo(encode_jpeg(render_photo(soft, scene, cam, seed=1), cam), "soft.jpg"), distance_m=5.0)
    for key in ("spill_angle", "beam_flux", "light_tilt"):
        assert rep[key].status == "not_measured" and "clipped" in rep[key].reason, (key, rep[key])


def test_far_field_does_not_compare_a_bound(clipped, unclipped):
    # a clipped peak's lower bound is not a value: the far-field check says it cannot compare it
    from beamshot.farfield import compare_distances

    near = analyze(clipped[3], distance_m=5.0).to_dict()
    far = analyze(unclipped[3], distance_m=5.0).to_dict()
    far["settings"]["distance_m"] = 8.0
    res = compare_distances(near, far)
    assert not any("peak intensity" in line and ("agree" in line or "DISAGREE" in line) for line in res["lines"])
