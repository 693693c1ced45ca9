"""Camera calibration and HDR: response recovery, flat field, kept constant, bracket merge."""

import json
from dataclasses import replace

import numpy as np
import pytest
from click.testing import CliRunner

from beamshot import analyze
from beamshot.camera.bracket import recover_response
from beamshot.camera.flatfield import fit_flat_field
from beamshot.camera.linearize import linearize
from beamshot.camera.response import Response
from beamshot.cli import cli
from beamshot.photo import decode_photo
from beamshot.synth import (HotspotSpillBeam, Scene, SynthCamera, encode_jpeg, exposure_time_for_peak,
                            render_bracket, render_photo, truth_figures)

BEAM = HotspotSpillBeam(peak_cd=10000, hotspot_fwhm_deg=8, spill_fraction=0.02, cutoff_deg=30)


def _bracket(kind, stops, *, pattern=BEAM, scene=None, target=0.05, moved_frame=None, move_px=0, **kw):
    scene = scene or Scene(distance_m=5.0, ambient_lux=3.0)
    base = dict(width_px=900, height_px=675, focal_35mm_mm=16, response=Response(kind), full_well_e=30000)
    base.update(kw)
    cam = SynthCamera(**base)
    cam = replace(cam, exposure_time_s=exposure_time_for_peak(pattern, scene, cam, target=target))
    return scene, cam, render_bracket(pattern, scene, cam, stops, moved_frame=moved_frame, move_px=move_px)


@pytest.mark.parametrize("kind", ["srgb", "gamma", "s-curve"])
def test_response_recovered_within_2_percent(kind):
    # Debevec & Malik (1997) via OpenCV: recovered curve vs the known one, relative exposure
    # (scale-free) over 5-95 % of the code range; base-ISO noise (30 000 e- full well)
    _, _, frames = _bracket(kind, [0, 1.5, 3, 4.5, 6, 7.5, 9])
    photos = [decode_photo(b, f"f{i}.jpg") for i, b in enumerate(frames)]
    fit = recover_response(photos)
    codes = np.arange(256) / 255
    got = np.asarray(fit.response.table).mean(axis=0)[13:243]
    true = Response(kind).decode(codes)[13:243]
    ratio = got / true
    ratio /= np.median(ratio)
    assert np.max(np.abs(ratio - 1)) <= 0.02
    assert fit.consistency_rms < 0.01
    assert fit.monotonic_fixes == 0


def test_robertson_method_also_works():
    # Robertson, Borman & Stevenson (OpenCV createCalibrateRobertson)
    _, _, frames = _bracket("srgb", [0, 2, 4, 6, 8])
    fit = recover_response([decode_photo(b, f"f{i}.jpg") for i, b in enumerate(frames)], method="robertson")
    assert fit.consistency_rms < 0.03


def test_flat_field_removes_40_percent_vignetting():
    # a white wall under even light; lens fall-off 40 % at the corners (EMVA 1288: gain non-uniformity)
    cam = SynthCamera(width_px=900, height_px=675, lens_vignetting=0.4, exposure_time_s=1 / 60, full_well_e=30000)
    flat = decode_photo(encode_jpeg(render_photo(HotspotSpillBeam(peak_cd=0.0), Scene(ambient_lux=300.0), cam), cam), "flat.jpg")
    lum = linearize(flat, Response()).luminance
    before = lum / np.median(lum[300:375, 400:500])
    assert before[:20, :20].mean() < 0.65  # 40 % darker corners (plus noise)
    ff = fit_flat_field(lum)
    corrected = lum / ff.evaluate(lum.shape)
    blocks = corrected[: 675 // 25 * 25, :].reshape(27, 25, 36, 25).mean(axis=(1, 3))
    assert np.max(np.abs(blocks / np.median(blocks) - 1)) <= 0.01


def test_hdr_merge_reproduces_deep_spill():
    # spill at 1/2000 of peak; 5 frames 2 stops apart; every angle with I >= 0.1 % of peak within 3 %
    pattern = HotspotSpillBeam(peak_cd=20000, hotspot_fwhm_deg=6, spill_fraction=1 / 2000, spill_falloff=0.2,
                               cutoff_deg=30, edge_width_deg=0.5)
    scene = Scene(distance_m=5.0)
    _, cam, frames = _bracket("srgb", [0, 2, 4, 6, 8], pattern=pattern, scene=scene, target=0.8,
                              position_m=(0.0, 0.0, 0.0))
    truth = truth_figures(pattern, 5.0)
    photos = [decode_photo(b, f"b{i}.jpg") for i, b in enumerate(frames)]
    rep = analyze(photos, distance_m=5.0, lux_at_peak=truth["peak_lux_on_wall"])
    beam = rep.beam
    tt, pp = np.meshgrid(beam.theta, beam.phi, indexing="ij")
    true = pattern(tt, pp)
    rows = np.all(true >= 1e-3 * truth["peak_cd"], axis=1) & np.all(np.isfinite(beam.intensity), axis=1)
    assert rows.sum() > 80  # out to 9.5 deg: the hotspot down to 0.1 % of peak
    measured = beam.intensity[rows].mean(axis=1)
    expected = true[rows].mean(axis=1)
    assert np.max(np.abs(measured / expected - 1)) <= 0.03
    # the spill itself (0.05 % of peak, 12-27 deg) is also recovered, averaged over azimuth
    spill = (beam.theta > np.radians(12)) & (beam.theta < np.radians(27))
    ratio = np.nanmean(beam.intensity[spill], axis=1) / true[spill].mean(axis=1)
    assert np.max(np.abs(ratio - 1)) <= 0.05
    assert rep.calibration["hdr_merge"]["frames"] == 5
    # a single frame cannot see that spill: the longest exposure clips the hotspot
    single = analyze(photos[-1], distance_m=5.0, lux_at_peak=truth["peak_lux_on_wall"])
    assert single["hotspot_angle"].value is None and "clipped" in single["hotspot_angle"].reason


def test_kept_constant_gives_absolute_peak_at_other_settings(tmp_path):
    # calibrate K on an evenly lit wall (1/60 s, f/1.8, ISO 100, 200 lx), then measure a beam
    # at 1/500 s, f/2.8, ISO 50: peak within 5 % of truth (ISO 12232 exposure relations)
    wall_cam = SynthCamera(width_px=900, height_px=675, exposure_time_s=1 / 60, f_number=1.8, iso=100)
    lit = render_photo(HotspotSpillBeam(peak_cd=0.0), Scene(ambient_lux=200.0), wall_cam)
    wall = tmp_path / "wall.jpg"
    wall.write_bytes(encode_jpeg(lit, wall_cam))
    prof = tmp_path / "phone.json"
    res = CliRunner().invoke(cli, ["camera", "scale", str(wall), "--lux", "200", "--name", "phone", "--out", str(prof)])
    assert res.exit_code == 0, res.output
    scene = Scene(distance_m=5.0)
    cam = SynthCamera(width_px=900, height_px=675, focal_35mm_mm=16, f_number=2.8, iso=50)
    truth = truth_figures(BEAM, 5.0)
    t = exposure_time_for_peak(BEAM, scene, cam, target=0.8)
    cam = replace(cam, exposure_time_s=t)
    photo = decode_photo(encode_jpeg(render_photo(BEAM, scene, cam), cam), "beam.jpg")
    rep = analyze(photo, distance_m=5.0, camera=str(prof))
    f = rep["peak_intensity"]
    assert rep.calibration["absolute_scale"]["kind"] == "camera_constant"
    assert f.status == "measured"
    assert abs(f.value / truth["peak_cd"] - 1) <= 0.05
    # a lux reading that agrees with the kept constant passes quietly; one 40 % high is more than twice
    # their combined uncertainty (JCGM 100 sec. 6, k = 2) and is warned about, naming the profile
    agree = analyze(photo, distance_m=5.0, camera=str(prof), lux_at_peak=truth["peak_lux_on_wall"])
    assert not any("camera constant kept" in w for w in agree.warnings)
    high = analyze(photo, distance_m=5.0, camera=str(prof), lux_at_peak=1.4 * truth["peak_lux_on_wall"])
    assert any("camera constant kept in profile 'phone'" in w for w in high.warnings), high.warnings


def _write(folder, frames, prefix):
    """Write JPEG bytes to files; returns their paths."""
    paths = []
    for i, b in enumerate(frames):
        p = folder / f"{prefix}{i}.jpg"
        p.write_bytes(b)
        paths.append(str(p))
    return paths


def test_cli_calibration_round_trip(tmp_path):
    _, cam, frames = _bracket("gamma", [0, 2, 4, 6, 8])
    paths = _write(tmp_path, frames, "r")
    prof = tmp_path / "cam.json"
    res = CliRunner().invoke(cli, ["camera", "response", *paths, "--name", "cam", "--out", str(prof)])
    assert res.exit_code == 0, res.output
    data = json.loads(prof.read_text())
    assert data["schema"] == "beamshot.camera" and data["response"]["kind"] == "table"
    assert data["provenance"][-1]["step"] == "response" and len(data["provenance"][-1]["files"]) == 5
    # the profile's response is used by analyze and recorded in the report
    res = CliRunner().invoke(cli, ["analyze", paths[2], "--distance", "5", "--camera", str(prof), "--json"])
    assert res.exit_code == 0, res.output
    rep = json.loads(res.stdout)
    assert rep["calibration"]["camera_profile"]["name"] == "cam"


def _run(args):
    res = CliRunner().invoke(cli, args)
    assert res.exit_code == 2, res.output
    assert "Traceback" not in res.output
    return res.output


def test_bad_calibration_inputs(tmp_path):
    _, cam, frames = _bracket("srgb", [0, 2, 4, 6, 8])
    paths = _write(tmp_path, frames, "r")
    small = SynthCamera(width_px=450, height_px=338, exposure_time_s=0.02)
    other = tmp_path / "other.jpg"
    other.write_bytes(encode_jpeg(np.full((338, 450, 3), 90, np.uint8), small))
    prof = tmp_path / "keep.json"
    assert CliRunner().invoke(cli, ["camera", "response", *paths, "--name", "keep", "--out", str(prof)]).exit_code == 0
    before = prof.read_bytes()
    # a bracket of different sizes
    assert "differs" in _run(["camera", "response", *paths[:3], str(other), "--name", "keep", "--out", str(prof)])
    # a bracket with a moved frame
    _, _, moved = _bracket("srgb", [0, 2, 4, 6, 8], moved_frame=3, move_px=25)
    mpaths = _write(tmp_path, moved, "m")
    assert "moved" in _run(["camera", "response", *mpaths, "--name", "keep", "--out", str(prof)])
    # too few frames
    assert "at least 3" in _run(["camera", "response", *paths[:2], "--name", "keep", "--out", str(prof)])
    # a flat field from another camera (size mismatch) used in analyze
    flat_prof = tmp_path / "flatcam.json"
    assert CliRunner().invoke(cli, ["camera", "flat", str(other), "--name", "flatcam", "--out", str(flat_prof)]).exit_code == 0
    assert "flat field" in _run(["analyze", paths[0], "--distance", "5", "--camera", str(flat_prof)])
    # a bracket of different sizes in analyze
    assert "one camera and position" in _run(["analyze", paths[0], str(other), "--distance", "5"])
    # a corrupt profile and a profile from a newer beamshot
    bad = tmp_path / "bad.json"
    bad.write_text("{ not json")
    assert "cannot read" in _run(["analyze", paths[0], "--distance", "5", "--camera", str(bad)])
    newer = tmp_path / "newer.json"
    newer.write_text(json.dumps({"schema": "beamshot.camera", "schema_version": "9.0", "name": "x"}))
    assert "newer beamshot" in _run(["analyze", paths[0], "--distance", "5", "--camera", str(newer)])
    assert "newer beamshot" in _run(["camera", "scale", paths[0], "--lux", "100", "--name", "x", "--out", str(newer)])
    damaged = tmp_path / "damaged.json"
    damaged.write_text(json.dumps({"schema": "beamshot.camera", "schema_version": "1.0", "name": "x",
                                   "response": {"kind": "table", "table_rgb": [[0, 1]]}}))
    assert "damaged" in _run(["camera", "show", str(damaged)])
    # nothing was overwritten
    assert prof.read_bytes() == before
    assert newer.read_text().startswith('{"schema"')


def test_raw_beam_photo_end_to_end(tmp_path):
    # a beam recorded as linear raw (DNG through LibRaw): no response curve involved, and the lens's
    # natural cos^4 fall-off (textbook cos^4 law) is in the data, as in every raw file
    from beamshot.synth import render_rgb_linear
    from test_photo import _linear_dng

    scene = Scene(distance_m=5.0)
    cam = SynthCamera(width_px=900, height_px=675, focal_35mm_mm=16, natural_vignetting=True)
    truth = truth_figures(BEAM, 5.0)
    cam = replace(cam, exposure_time_s=exposure_time_for_peak(BEAM, scene, cam, target=0.7))
    rgb = render_rgb_linear(BEAM, scene, cam, seed=2)
    codes = np.round(256 + rgb * (16383 - 256)).astype(np.uint16)
    path = tmp_path / "beam.dng"
    _linear_dng(path, codes, exposure=(cam.exposure_time_s, cam.f_number, cam.iso))
    rep = analyze(str(path), distance_m=5.0, focal_35mm=16, lux_at_peak=truth["peak_lux_on_wall"])
    assert rep.inputs[0]["bits"] == 16
    assert abs(rep["hotspot_angle"].value / truth["hotspot_angle_deg"] - 1) <= 0.02
    assert abs(rep["spill_angle"].value / truth["spill_angle_deg"] - 1) <= 0.03
    assert abs(rep["ra"].value / truth["ra"] - 1) <= 0.05


def test_merge_checks_exif_ratios_against_pixels():
    from beamshot.camera.hdr import merge_bracket

    _, _, frames = _bracket("srgb", [0, 2, 4], target=0.6)
    photos = [decode_photo(b, f"e{i}.jpg") for i, b in enumerate(frames)]
    lin = [linearize(p, Response()) for p in photos]
    exif = [p.exif.exposure_product() for p in photos]
    ok = merge_bracket(lin, exif, Response())
    assert not ok.warnings
    assert ok.ratios_measured[1] == pytest.approx(4.0, rel=0.03)  # 2 stops, measured from pixels
    # EXIF claims a wrong exposure for frame 3: reported, EXIF still used
    wrong = merge_bracket(lin, [exif[0], exif[1], exif[2] * 1.3], Response())
    assert any("EXIF says" in w for w in wrong.warnings)
    # no EXIF for frame 2: the measured ratio is used instead
    missing = merge_bracket(lin, [exif[0], None, exif[2]], Response())
    assert missing.ratios_used[1] == pytest.approx(4.0, rel=0.03)
    assert any("no exposure in EXIF" in w for w in missing.warnings)
