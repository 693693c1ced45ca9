"""Inputs that calibrate are checked before they are used: a flat field must be a smooth radial
fall-off, a light-off photo must be darker than the beam where the beam is, and a bracket must be
several exposures of one scene.  Each refusal is one line that names the fix."""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from beamshot.analysis import analyze
from beamshot.camera.flatfield import fit_flat_field
from beamshot.errors import BeamshotError
from beamshot.photo import decode_photo
from beamshot.synth import HotspotSpillBeam, Scene, encode_jpeg, render_photo
from conftest import make_shot

BEAM = HotspotSpillBeam(peak_cd=12000.0, hotspot_fwhm_deg=6.0, spill_fraction=0.02, cutoff_deg=30.0, edge_width_deg=0.6)
OFF = HotspotSpillBeam(peak_cd=0.0)


@pytest.fixture(scope="module")
def shot():
    scene, cam, truth = make_shot(BEAM, width_px=480, height_px=360)
    photo = decode_photo(encode_jpeg(render_photo(BEAM, scene, cam, seed=1), cam), "beam.jpg")
    return scene, cam, truth, photo


def _one_line(exc) -> str:
    text = str(exc.value)
    assert "\n" not in text
    return text


def test_a_flat_with_a_beam_in_it_is_refused(shot):
    scene, cam, truth, photo = shot
    with pytest.raises(BeamshotError) as exc:
        analyze(photo, distance_m=5.0, flat=photo)
    assert "a beam?" in _one_line(exc) and "evenly lit white target" in str(exc.value)


def test_a_real_flat_passes_and_one_brighter_at_its_edges_is_refused():
    # natural cos^4 fall-off of a 16 mm lens (the cos^4 law) passes; its inverse (brighter toward the
    # corners, as a target lit from the sides) is not a lens's shading
    h, w = 300, 400
    yy, xx = np.mgrid[0:h, 0:w]
    f = 16.0 / 43.27 * np.hypot(w, h)  # 35 mm-equivalent focal length in pixels (43.27 mm diagonal)
    cos4 = 1.0 / (1.0 + ((xx - (w - 1) / 2) ** 2 + (yy - (h - 1) / 2) ** 2) / f**2) ** 2
    ff = fit_flat_field(0.5 * cos4)
    assert ff.residual_rms < 0.01
    with pytest.raises(BeamshotError, match="brighter toward its edges"):
        fit_flat_field(0.5 / cos4 / 4.0)


def test_a_light_off_photo_as_bright_as_the_beam_is_refused(shot):
    scene, cam, truth, photo = shot
    with pytest.raises(BeamshotError) as exc:
        analyze(photo, distance_m=5.0, ambient=photo)
    assert "light off" in _one_line(exc) and "swapped" in str(exc.value)


def test_strong_room_light_is_warned_about(shot):
    scene, cam, truth, photo = shot
    room = Scene(distance_m=5.0, ambient_lux=0.25 * truth["peak_lux_on_wall"])  # a quarter of the hotspot
    lit = decode_photo(encode_jpeg(render_photo(BEAM, room, cam, seed=2), cam), "lit.jpg")
    off = decode_photo(encode_jpeg(render_photo(OFF, room, cam, seed=3), cam), "off.jpg")
    rep = analyze(lit, distance_m=5.0, ambient=off)
    assert any("light-off photo is" in w and "darken the room" in w for w in rep.warnings), rep.warnings


def test_a_light_off_photo_in_a_bracket_is_refused(shot):
    # a wildcard that picks up the light-off photo: same exposure as the beam photo, not a bracket
    scene, cam, truth, photo = shot
    off = decode_photo(encode_jpeg(render_photo(OFF, scene, cam, seed=4), cam), "beam-off.jpg")
    with pytest.raises(BeamshotError) as exc:
        analyze([off, photo], distance_m=5.0)
    assert "same exposure" in _one_line(exc) and "--ambient" in str(exc.value)


def test_two_lights_given_as_a_bracket_are_refused(shot):
    # three frames, one of another light: not even the curve recovered from the frames themselves
    # (Debevec & Malik 1997) makes them agree
    scene, cam, truth, photo = shot
    other = HotspotSpillBeam(peak_cd=12000.0, hotspot_fwhm_deg=20.0, spill_fraction=0.05, cutoff_deg=40.0)
    cam2, cam3 = replace(cam, exposure_time_s=cam.exposure_time_s * 2.0), replace(cam, exposure_time_s=cam.exposure_time_s / 2)
    second = decode_photo(encode_jpeg(render_photo(other, scene, cam2, seed=5), cam2), "other.jpg")
    third = decode_photo(encode_jpeg(render_photo(BEAM, scene, cam3, seed=6), cam3), "beam-short.jpg")
    with pytest.raises(BeamshotError) as exc:
        analyze([photo, second, third], distance_m=5.0)
    assert "not exposures of one unchanged scene" in _one_line(exc)
