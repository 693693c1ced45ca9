"""Brackets from uncalibrated cameras: the motion check, self-calibration of the response, and
offsets (black level, dark frame) removed once from every frame."""

from dataclasses import replace

import numpy as np
import pytest

from beamshot import analyze
from beamshot.camera.bracket import check_alignment, consistency_rms, recover_response, relative_exposures
from beamshot.camera.profile import default_profile
from beamshot.camera.response import Response
from beamshot.errors import BeamshotError
from beamshot.photo import decode_photo
from beamshot.prepare import prepare_image
from beamshot.synth import (HotspotSpillBeam, Scene, SynthCamera, encode_jpeg, render_bracket,
                            render_rgb_linear)

from conftest import make_shot

REFLECTOR = HotspotSpillBeam(peak_cd=12000.0, hotspot_fwhm_deg=8.0, spill_fraction=0.02, cutoff_deg=30.0,
                             edge_width_deg=0.6)


def _rel(fig, truth):
    assert fig.value is not None, fig.reason
    return abs(fig.value / truth - 1)


# --------------------------------------------------------------------------- step-wedge chart
def _wedge(*, stops=(0, 1, 2, 3, 4), moved=None, shift=(0, 0), kind="srgb", seed=1):
    """A step-wedge chart: 12 grey bands varying along x only (reflectance 1 to 1/300, equal
    ratios), photographed at 1-stop steps; the longest frame clips the brightest 4 bands (1/3 of
    the picture).  Shot and read noise in electrons, the camera's tone curve, 8-bit JPEG.
    ``moved`` is the index of a frame displaced by ``shift`` = (dx, dy) pixels."""
    w, h, bands = 900, 600, 12
    refl = np.geomspace(1.0, 1 / 300, bands)
    band = np.minimum(np.arange(w) * bands // w, bands - 1)
    chart = np.broadcast_to(refl[band][None, :], (h, w))
    # the 5th band sits just below clipping in the longest frame
    scale = 0.95 / (refl[4] * 2.0 ** max(stops))
    cam = SynthCamera(width_px=w, height_px=h, response=Response(kind), full_well_e=20000, exposure_time_s=1 / 500)
    rng = np.random.default_rng(seed)
    photos = []
    for k, stop in enumerate(stops):
        v = chart * scale * 2.0**stop
        if k == moved:
            v = np.roll(v, (shift[1], shift[0]), axis=(0, 1))
        e = v * cam.full_well_e
        e = e + rng.standard_normal(e.shape) * np.sqrt(e + cam.read_noise_e**2)
        lin = np.repeat(np.clip(e / cam.full_well_e, 0.0, 1.0)[..., None], 3, axis=2)
        pixels = np.round(cam.response.encode(lin) * 255.0).astype(np.uint8)
        shot = replace(cam, exposure_time_s=cam.exposure_time_s * 2.0**stop)
        photos.append(decode_photo(encode_jpeg(pixels, shot, quality=90), f"wedge{k}.jpg"))
    return photos


def test_still_step_wedge_with_clipped_long_frames_is_accepted():
    photos = _wedge()
    clipped = np.mean(photos[-1].pixels[..., 1] >= 250)
    assert 0.25 <= clipped <= 0.40  # the longest frame is about 30 % clipped
    al = check_alignment(photos, relative_exposures(photos))
    for pair in al.pairs:
        # a still camera: no shift (the analytic answer is 0 px); 0.3 px allows for JPEG and noise
        assert pair["constrained"] == "x only"
        assert np.hypot(*pair["shift_px"]) < 0.3
    # the bands carry no detail along y: said, not refused
    assert any("along y" in n for n in al.notes)


def test_step_wedge_moved_across_the_bands_is_refused():
    photos = _wedge(moved=4, shift=(3, 0))
    with pytest.raises(BeamshotError, match=r"wedge4\.jpg: moved by ([0-9.]+) px against wedge3\.jpg") as exc:
        check_alignment(photos, relative_exposures(photos))
    measured = float(str(exc.value).split("moved by ")[1].split(" px")[0])
    assert measured == pytest.approx(3.0, abs=0.3)  # the imposed shift (analytic), within 0.3 px
    # a smaller move, 2 px, of a middle frame is refused too
    photos = _wedge(moved=2, shift=(2, 0))
    with pytest.raises(BeamshotError, match=r"wedge2\.jpg: moved"):
        check_alignment(photos, relative_exposures(photos))


def test_step_wedge_moved_along_the_bands_is_reported_not_refused():
    photos = _wedge(moved=4, shift=(0, 3))
    al = check_alignment(photos, relative_exposures(photos))
    note = " ".join(al.notes)
    assert "no detail along y" in note and "wedge4.jpg" in note
    assert all(p["constrained"] == "x only" for p in al.pairs)


def test_beam_bracket_moved_by_2_px_is_refused():
    # a smooth beam constrains both directions; a bumped tripod (2 px) is refused, naming the frame
    pattern = REFLECTOR
    scene, cam, _ = make_shot(pattern, target=0.5, width_px=900, height_px=675, full_well_e=30000)
    still = [decode_photo(b, f"s{i}.jpg") for i, b in enumerate(render_bracket(pattern, scene, cam, [-2, -1, 0, 1, 2]))]
    al = check_alignment(still, relative_exposures(still))
    measured = [p for p in al.pairs if p["shift_px"] is not None]
    assert measured and all(p["constrained"] == "x and y" and np.hypot(*p["shift_px"]) < 0.3 for p in measured)
    moved = render_bracket(pattern, scene, cam, [-2, -1, 0, 1, 2], moved_frame=3, move_px=2)
    moved = [decode_photo(b, f"m{i}.jpg") for i, b in enumerate(moved)]
    with pytest.raises(BeamshotError, match=r"m3\.jpg: moved"):
        check_alignment(moved, relative_exposures(moved))


# --------------------------------------------------------------------------- self-calibration
@pytest.fixture(scope="module")
def s_curve_bracket():
    """Five beam photos, -2..+2 stops, from a camera with a film-like S-curve (not sRGB)."""
    scene, cam, truth = make_shot(REFLECTOR, target=0.5, response=Response("s-curve"), full_well_e=30000)
    frames = render_bracket(REFLECTOR, scene, cam, [-2, -1, 0, 1, 2], seed=5)
    return [decode_photo(b, f"b{i}.jpg") for i, b in enumerate(frames)], scene, truth


def test_response_recovered_from_a_beam_bracket(s_curve_bracket):
    # Debevec & Malik (1997) on a beam (mostly dark wall): recovered curve vs the S-curve the
    # camera used (relative, scale-free) over 5-95 % of the code range
    photos, _, _ = s_curve_bracket
    fit = recover_response(photos)
    got = np.asarray(fit.response.table).mean(axis=0)[13:243]
    true = Response("s-curve").decode(np.arange(256) / 255)[13:243]
    ratio = got / true
    assert np.max(np.abs(ratio / np.median(ratio) - 1)) <= 0.02
    # the assumed sRGB curve leaves the frames far apart; the recovered one brings them together
    e = relative_exposures(photos)
    assert consistency_rms(photos, e, Response("srgb")) > 0.2
    assert fit.consistency_rms < 0.01


def test_uncalibrated_s_curve_bracket_calibrates_itself(s_curve_bracket):
    photos, scene, truth = s_curve_bracket
    rep = analyze(photos, distance_m=scene.distance_m, lux_at_peak=truth["peak_lux_on_wall"])
    # tolerances of the beam-analysis acceptance criteria (hotspot 2 %, field 3 %, Ra 5 %)
    assert _rel(rep["hotspot_angle"], truth["hotspot_angle_deg"]) <= 0.02
    assert _rel(rep["field_angle"], truth["field_angle_deg"]) <= 0.03
    assert _rel(rep["ra"], truth["ra"]) <= 0.05
    choice = rep.calibration["hdr_merge"]["response_choice"]
    assert choice["used"] == "recovered from the bracket"
    assert choice["consistency_recovered"] < choice["consistency_assumed"]


def test_prepared_image_records_the_response_choice(s_curve_bracket):
    photos, _, _ = s_curve_bracket
    prof = default_profile()
    prep = prepare_image(photos, ambient=None, flat=None, dark=None, profile=prof, resp=prof.response)
    assert prep.response_source == "recovered from the bracket"
    assert prep.resp.kind == "table"
    assert prep.linearity_rel == pytest.approx(prep.hdr_note["response_choice"]["consistency_recovered"])
    assert prep.linearity_rel < 0.01
    # a curve the user named is kept; its disagreement is measured and warned about with its size
    named = prepare_image(photos, ambient=None, flat=None, dark=None, profile=prof, resp=Response("srgb"),
                          response_given=True)
    assert named.response_source == "assumed" and named.resp.kind == "srgb"
    assert named.linearity_rel > 0.05
    assert any(f"{named.linearity_rel:.1%}" in w and "disagree" in w for w in named.warnings)
    # a single photo cannot measure it
    single = prepare_image(photos[2], ambient=None, flat=None, dark=None, profile=prof, resp=prof.response)
    assert single.linearity_rel is None and single.response_source == "assumed"


def test_srgb_bracket_keeps_a_curve_that_fits():
    # the camera really is sRGB: whichever curve is used, the frames agree within 1 %
    scene, cam, _ = make_shot(REFLECTOR, target=0.5, width_px=900, height_px=675, full_well_e=30000)
    photos = [decode_photo(b, f"c{i}.jpg") for i, b in enumerate(render_bracket(REFLECTOR, scene, cam, [-2, -1, 0, 1, 2]))]
    prof = default_profile()
    prep = prepare_image(photos, ambient=None, flat=None, dark=None, profile=prof, resp=prof.response)
    choice = prep.hdr_note["response_choice"]
    assert prep.linearity_rel < 0.01
    assert prep.linearity_rel == pytest.approx(min(choice["consistency_assumed"], choice["consistency_recovered"]))
    assert not any("disagree" in w for w in prep.warnings)


# --------------------------------------------------------------------------- offsets
def _photo(pattern, scene, cam, *, offset, seed, name):
    """8-bit JPEG of the scene with a linear pedestal ``offset`` (1 = clipping) added before the tone curve."""
    rgb = np.clip(render_rgb_linear(pattern, scene, cam, seed=seed) + np.float32(offset), 0.0, 1.0)
    return decode_photo(encode_jpeg(np.round(cam.response.encode(rgb) * 255.0).astype(np.uint8), cam), name)


@pytest.mark.parametrize("how", ["dark frame", "black level"])
def test_offset_removed_once_from_beam_and_ambient(how):
    # a pedestal of 1 % of full scale on every frame (beam, light-off ambient, lens-capped dark):
    # beam - ambient must equal the clean case, where the offset is zero (EMVA 1288: the dark
    # signal is subtracted from every image once)
    offset = 0.01
    scene = Scene(distance_m=5.0, ambient_lux=2.0)
    _, cam, truth = make_shot(REFLECTOR, scene=scene, target=0.8, width_px=900, height_px=675)
    off = HotspotSpillBeam(peak_cd=0.0)
    clean = analyze(_photo(REFLECTOR, scene, cam, offset=0.0, seed=1, name="beam.jpg"), distance_m=5.0,
                    ambient=_photo(off, scene, cam, offset=0.0, seed=2, name="ambient.jpg"),
                    lux_at_peak=truth["peak_lux_on_wall"])
    beam = _photo(REFLECTOR, scene, cam, offset=offset, seed=1, name="beam.jpg")
    amb = _photo(off, scene, cam, offset=offset, seed=2, name="ambient.jpg")
    if how == "dark frame":
        dark = _photo(off, Scene(distance_m=5.0), cam, offset=offset, seed=3, name="dark.jpg")
        rep = analyze(beam, distance_m=5.0, ambient=amb, dark=dark, lux_at_peak=truth["peak_lux_on_wall"])
    else:
        # the pedestal in linear units after the profile's curve (sRGB), as a profile's black level
        prof = replace(default_profile(), black_level=offset)
        rep = analyze(beam, distance_m=5.0, ambient=amb, camera=prof, lux_at_peak=truth["peak_lux_on_wall"])
    for key, tkey, tol in (("hotspot_angle", "hotspot_angle_deg", 0.02), ("field_angle", "field_angle_deg", 0.03),
                           ("ra", "ra", 0.05)):
        # the acceptance tolerances, against the clean analysis and against the truth
        assert _rel(rep[key], clean[key].value) <= tol, key
        assert _rel(rep[key], truth[tkey]) <= tol, key
