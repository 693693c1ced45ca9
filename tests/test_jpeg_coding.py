"""The concentric errors of JPEG coding in a ring search (beamshot.jpeg_coding, beamshot.rings).

A beam whose colour changes across it (a cool hotspot in a warm spill) coded as a JPEG gave a
"dark ring" of -1.5 % at 7 sigma that the beam does not have: libjpeg's coding leaves errors the
same all around the axis (benchmarks/jpeg_concentric_error.py measures them).  The photos here
come from the project's renderer (beamshot.synth); each truth is the pattern rendered.
"""

from __future__ import annotations

import io
from dataclasses import replace

import numpy as np
import pytest
from PIL import Image

from beamshot import analyze
from beamshot.camera.response import Response, srgb_decode
from beamshot.jpeg_coding import COLOUR_RMS_CODES, ONE_COLOUR_RMS_CODES, coding_rms_codes, concentric_sigma_rel
from beamshot.photo import decode_photo
from beamshot.synth import (HotspotSpillBeam, Scene, SynthCamera, TwoToneBeam, encode_jpeg, exposure_time_for_peak,
                            render_photo, render_two_tone_photo)
from beamshot.synth_artefacts import RingedBeam

SCENE = Scene(distance_m=4.0)
SHAPE = dict(peak_cd=7000.0, hotspot_fwhm_deg=7.0, spill_fraction=0.03, spill_falloff=0.3, cutoff_deg=28.0,
             edge_width_deg=0.5)


@pytest.mark.parametrize("gamma", [1.0, 2.2])
def test_relative_error_of_a_power_law_curve(gamma):
    # analytic: L = (c / m)^gamma, so a code error s at code c is ln(L(c + s) / L(c)) = gamma ln(1 + s / c)
    resp = Response("linear") if gamma == 1.0 else Response("gamma", gamma=gamma)
    codes = np.array([10.0, 40.0, 128.0, 250.0])
    got = concentric_sigma_rel((codes / 255.0) ** gamma, resp, sigma_codes=0.3)
    assert got == pytest.approx(gamma * np.log1p(0.3 / codes), rel=1e-9)


def test_relative_error_under_srgb_is_large_in_dim_parts_and_small_in_bright_ones():
    # IEC 61966-2-1 sRGB decoding: at code 40 a third of a code is 1.5 % of the luminance, at 200 0.3 %
    levels = srgb_decode(np.array([40.0, 200.0]) / 255.0)
    got = concentric_sigma_rel(levels, Response("srgb"), sigma_codes=1.0 / 3.0)
    want = np.log(srgb_decode((np.array([40.0, 200.0]) + 1.0 / 3.0) / 255.0) / levels)
    assert got == pytest.approx(want, rel=1e-9)
    assert 0.012 < got[0] < 0.018 and got[1] < 0.004
    assert np.isnan(concentric_sigma_rel(np.array([0.0]), Response("srgb"))[0])  # no light: no level


def test_size_by_colour_change():
    assert coding_rms_codes(0.0) == ONE_COLOUR_RMS_CODES and coding_rms_codes(0.6) == COLOUR_RMS_CODES
    assert coding_rms_codes(float("nan")) == COLOUR_RMS_CODES  # unknown: the larger


def test_the_file_format_is_kept():
    px = np.full((16, 24, 3), 128, np.uint8)
    for fmt in ("JPEG", "PNG"):
        buf = io.BytesIO()
        Image.fromarray(px).save(buf, fmt)
        assert decode_photo(buf.getvalue(), "x." + fmt.lower()).file_format == fmt


def _two_tone(pattern: TwoToneBeam, seed: int) -> bytes:
    cam = SynthCamera(width_px=960, height_px=720, focal_35mm_mm=15, sensor_diag_mm=6.0, f_number=2.2, iso=50.0,
                      supersample=1)
    grey = HotspotSpillBeam(**SHAPE)
    cam = replace(cam, exposure_time_s=exposure_time_for_peak(grey, SCENE, cam, target=0.75))
    return encode_jpeg(render_two_tone_photo(pattern, SCENE, cam, seed=seed), cam, quality=90)


def test_no_ring_from_the_coding_of_a_warm_spill_round_a_cool_hotspot():
    beam = TwoToneBeam.split(HotspotSpillBeam(**SHAPE), 5700.0, 3500.0)
    for seed in (7, 8):
        s = analyze(decode_photo(_two_tone(beam, seed), "beam.jpg"), distance_m=SCENE.distance_m,
                    use_exif_scale=False).shape_figures
        assert s["ring_count"].value == 0, s["ring_score"].method
        assert s["ring_score"].status == "upper_bound"
        assert "JPEG's coding errors" in s["ring_score"].reason
        assert s["ring_score"].value < 0.1  # a 10 % ring would still be found


def test_a_ring_in_a_two_colour_beam_is_still_found_with_the_coding_in_its_uncertainty():
    # the ring multiplies both parts (RingedBeam): +12 % relative to the smooth profile at 5 deg
    rings = ((5.0, 1.0, 0.12),)
    base = TwoToneBeam.split(HotspotSpillBeam(**SHAPE), 5700.0, 3500.0)
    beam = TwoToneBeam(RingedBeam(base.hotspot, rings), RingedBeam(base.spill, rings), base.hotspot_k, base.spill_k)
    s = analyze(decode_photo(_two_tone(beam, 3), "beam.jpg"), distance_m=SCENE.distance_m,
                use_exif_scale=False).shape_figures
    assert s["ring_count"].value == 1
    assert s["ring_angle"].value == pytest.approx(5.0, abs=0.3)
    amp = s["ring_amplitude"]
    assert amp.value == pytest.approx(0.12, abs=0.02)
    terms = dict(amp.budget)
    assert terms["JPEG coding"] > terms["pixel noise"] > 0  # a bright ring's coding term is still the larger here
    assert amp.uncertainty == pytest.approx(np.sqrt(sum(v * v for v in terms.values())), rel=1e-9)


def test_colour_change_is_read_alike_with_an_ambient_photo_on_a_tight_frame(monkeypatch):
    # a light-off photo makes the working image float, NaN outside the photo; with a long lens the
    # rows of the lit hotspot run out of the frame: they must still count toward the colour change
    # (they were dropped whole, 0.48 -> 0.16). Truth: the same photo without the ambient.
    import beamshot.jpeg_coding as coding

    seen = []
    real = coding.coding_rms_codes
    monkeypatch.setattr(coding, "coding_rms_codes", lambda change: (seen.append(change), real(change))[1])
    scene = Scene(distance_m=4.0, ambient_lux=0.5)
    cam = SynthCamera(width_px=960, height_px=720, focal_35mm_mm=120, sensor_diag_mm=6.0, f_number=2.2, iso=50.0,
                      supersample=1)
    grey = HotspotSpillBeam(**SHAPE)
    cam = replace(cam, exposure_time_s=exposure_time_for_peak(grey, scene, cam, target=0.75))
    beam = TwoToneBeam.split(grey, 5700.0, 3500.0)
    off = TwoToneBeam.split(HotspotSpillBeam(**dict(SHAPE, peak_cd=1e-9)), 5700.0, 3500.0)
    photo = encode_jpeg(render_two_tone_photo(beam, scene, cam, seed=7), cam, quality=90)
    ambient = encode_jpeg(render_two_tone_photo(off, scene, cam, seed=8), cam, quality=90)
    for kw in ({}, {"ambient": decode_photo(ambient, "off.jpg")}):
        analyze(decode_photo(photo, "beam.jpg"), distance_m=4.0, use_exif_scale=False, **kw)
    assert len(seen) == 2 and seen[0] > 0.3
    assert seen[1] == pytest.approx(seen[0], rel=0.1)  # the dimmest rows differ a little by the ambient taken off


def test_the_docs_state_the_term_at_codes_40_and_200_as_computed():
    # docs/artefacts.md gives the term (COLOUR_RMS_CODES through IEC 61966-2-1 sRGB) at two codes
    import pathlib
    import re

    text = (pathlib.Path(__file__).parents[1] / "docs" / "artefacts.md").read_text(encoding="utf-8")
    stated = re.search(r"([\d.]+) % at code 40 of sRGB, ([\d.]+) % at code 200", " ".join(text.split()))
    assert stated, "the sentence giving the term at codes 40 and 200 is gone from docs/artefacts.md"
    got = concentric_sigma_rel(srgb_decode(np.array([40.0, 200.0]) / 255.0), Response("srgb"))
    assert [float(v) for v in stated.groups()] == [round(100 * float(g), 1) for g in got]


def test_the_method_says_which_test_a_jpeg_ring_passed():
    # a ring held to hypot(6 sigma_fit, 3 sigma_coding) (beamshot.rings) may stand only ~3 of its total
    # 1-sigma clear of 0: its method must not say "reported at 6 sigma" alone
    from beamshot.artefacts import _ring_figures
    from beamshot.rings import CODING_SIGNIFICANCE, RING_SIGNIFICANCE, Ring, RingSearch

    ring = Ring(angle_deg=9.0, angle_sigma=0.05, amplitude=-0.035, amplitude_sigma=0.001, width_deg=1.0,
                width_sigma=0.1, coding_sigma=0.011)
    assert ring.significance >= RING_SIGNIFICANCE  # it passes the test ...
    assert abs(ring.amplitude) / ring.total_sigma < 4.0  # ... at ~3 of its reported 1-sigma
    figs = {}
    _ring_figures(figs, RingSearch((ring,), 0.04, (1.0, 25.0), coding=0.01), None)
    method = figs["ring_amplitude"].method
    assert f"hypot({RING_SIGNIFICANCE:g} x the fit's 1-sigma, {CODING_SIGNIFICANCE:g} x" in method
    assert figs["ring_amplitude"].uncertainty == pytest.approx(ring.total_sigma)
    plain = {}
    _ring_figures(plain, RingSearch((replace(ring, coding_sigma=0.0, amplitude_sigma=0.005),), 0.03, (1.0, 25.0)), None)
    assert f"at {RING_SIGNIFICANCE:g} sigma" in plain["ring_amplitude"].method and "JPEG" not in plain["ring_amplitude"].method


def test_a_bracket_of_jpegs_carries_the_term_at_its_longest_unclipped_frame(monkeypatch):
    # a [0, -2 stop] bracket: the spill comes from the 0-stop frame at the codes a single photo has,
    # so its rings carry the coding term (beamshot.analysis._coding_rel); the 0-stop frame alone
    # gives the same term at the spill (the levels in the bracket's units times its ratio 4)
    from beamshot import analysis as A

    seen = []
    real = A._coding_rel
    monkeypatch.setattr(A, "_coding_rel", lambda *a: (seen.append(real(*a)), seen[-1])[1])
    scene = Scene(distance_m=4.0)
    cam = SynthCamera(width_px=960, height_px=720, focal_35mm_mm=15, sensor_diag_mm=6.0, f_number=2.2, iso=50.0,
                      supersample=1)
    beam = HotspotSpillBeam(**SHAPE)
    t = exposure_time_for_peak(beam, scene, cam, target=0.75)
    frames = []
    for k, scale in enumerate((1.0, 0.25)):
        c = replace(cam, exposure_time_s=t * scale)
        frames.append(decode_photo(encode_jpeg(render_photo(beam, scene, c, seed=20 + k), c, quality=90), f"f{k}.jpg"))
    analyze(frames, distance_m=4.0, use_exif_scale=False)
    analyze(frames[0], distance_m=4.0, use_exif_scale=False)
    bracket, single = seen
    assert bracket is not None and single is not None
    lit = np.isfinite(bracket) & np.isfinite(single)
    # the spill's rows (the dimmest half lit): the same term within the frames' noise and merge
    dim = lit & (single > np.nanmedian(single[lit]))
    assert np.nanmedian(bracket[dim] / single[dim]) == pytest.approx(1.0, abs=0.15)
