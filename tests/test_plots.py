"""The report picture (beam.png, drawn by beamshot.report.beam_picture without matplotlib): rings as
full angles, the noise floor drawn as a floor, a legend for every mark and area, a colour scale
that shows the spill, the figures table in the vocabulary's words, and text that stays readable
and apart at phone size.  The renderer returns a plain record of what it drew (texts with their
role and box, legend entries, marks, the colour scale's range, the profile's points), which these
tests read; pixel checks look at the PNG itself.

Photos are small (400 x 300 px) synthetic JPEGs from beamshot.synth with a known analytic pattern.
"""

from __future__ import annotations

import io
import re
import subprocess
import sys
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from PIL import Image

from beamshot import analyze, vocabulary
from beamshot.figure import Figure
from beamshot.photo import decode_photo
from beamshot.profile import radial_profile
from beamshot.report.beam_picture import (MIN_TEXT_PX, PICTURE_WIDTH_PX, beam_pictures, draw_beam_picture,
                                          write_beam_picture)
from beamshot.report.plots import _BELOW, _VERMILLION, CAUTION_LINE, DETECTION_SIGMAS, intensity_label, noise_floor
from beamshot.spill import SpillEdge
from beamshot.synth import HotspotSpillBeam, Scene, SynthCamera, encode_jpeg, exposure_time_for_peak, render_photo

from conftest import analytic_map

DISTANCE_M = 5.0
#: A thrower-like beam whose spill is 1 % of the peak (before its gentle fall-off).
PATTERN = HotspotSpillBeam(peak_cd=20000.0, hotspot_fwhm_deg=6.0, spill_fraction=0.01, spill_falloff=0.3,
                           cutoff_deg=25.0, edge_width_deg=0.5)
PHONE_WIDTH_PX = 400
#: Smallest text height (px) that stays legible on a phone screen (common practice: ~9 px for
#: captions; we allow 7 px for the smallest legend text).
PHONE_MIN_TEXT_PX = 7.0


def _photo(pattern, *, target=0.8, name="wall.jpg", seed=2):
    scene = Scene(distance_m=DISTANCE_M)
    cam = SynthCamera(width_px=400, height_px=300, focal_35mm_mm=16, supersample=2)
    # inverse-square law on the axis, normal incidence: E = I / D^2
    t = exposure_time_for_peak(pattern, scene, cam, target=target, peak_lux=pattern.peak_cd / DISTANCE_M**2)
    cam = replace(cam, exposure_time_s=t)
    return decode_photo(encode_jpeg(render_photo(pattern, scene, cam, seed=seed), cam, quality=90), name)


@pytest.fixture(scope="module")
def drawn(tmp_path_factory):
    report = analyze(_photo(PATTERN), distance_m=DISTANCE_M)
    path = tmp_path_factory.mktemp("plots") / "beam.png"
    pic = write_beam_picture(report, path)
    return report, pic.drawing, path


def _texts(drawing, prefix):
    return [t for t in drawing.texts if t.role.startswith(prefix)]


def _legend_texts(drawing):
    return [label for label, _, _ in drawing.legend]


def test_inset_label_gives_its_enlargement_on_the_page(drawn):
    # the inset's "xN" is how much larger it shows the hotspot than the map does: the ratio of the
    # two scales in degrees per pixel (it once gave the ratio of the angular widths shown, 2.6x too much)
    _, drawing, _ = drawn
    (label,) = drawing.text_of("inset-label")
    shown = float(re.match(r"×([\d.]+)$", label).group(1))
    v = drawing.values
    assert shown == pytest.approx(v["map_deg_per_px"] / v["inset_deg_per_px"], abs=0.051)


def test_ring_labels_are_full_angles(drawn):
    # every reported angle is a full cone angle (IES beam and field angles are full angles), so a
    # ring of radius r degrees from the axis is labelled 2r
    _, drawing, _ = drawn
    labels = _texts(drawing, "ring-label")
    assert len(labels) >= 3
    for t in labels:
        x, y = t.data
        number = float(re.match(r"([\d.]+)° full$", t.text).group(1))
        assert number == pytest.approx(2.0 * np.hypot(x, y), abs=1e-9)


def test_table_words_come_from_the_vocabulary(drawn):
    report, drawing, _ = drawn
    labels = {t.role.split(":", 1)[1]: t.text for t in _texts(drawing, "figure-label:")}
    assert set(labels) == set(report.figures)
    for key, text in labels.items():
        assert text == vocabulary.label(key)
    for t in _texts(drawing, "figure-status:"):
        key = t.role.split(":", 1)[1]
        assert t.text == vocabulary.STATUS_WORDS[report.figures[key].status]
        assert (t.style == "italic") == (report.figures[key].status != "measured")
    for t in _texts(drawing, "figure-value:"):
        f = report.figures[t.role.split(":", 1)[1]]
        if f.value is None:
            assert t.text == "—"
            continue
        assert t.text.startswith(vocabulary.STATUS_MARKS.get(f.status, ""))
        assert t.text.endswith(vocabulary.unit_text(f.unit))
        if f.uncertainty:
            assert " ± " in t.text
    # parts of a figure (horizontal / vertical) are indented under it
    x = {t.role.split(":", 1)[1]: t.box[0] for t in _texts(drawing, "figure-label:")}
    assert x["hotspot_angle_horizontal"] > x["hotspot_angle"] + 10


def test_legend_names_every_area_and_mark(drawn):
    _, drawing, _ = drawn
    texts = _legend_texts(drawing)
    for entry in ("outside the photo", "below the noise floor", "peak", "beam axis (spill centre)",
                  "ring: full cone angle", vocabulary.label("hotspot_angle"), vocabulary.label("field_angle"),
                  vocabulary.label("spill_angle")):
        assert entry in texts, entry
    assert "below the noise floor (3σ of the dark wall)" in texts  # the profile's floor band
    assert "azimuthal mean" in texts and "10–90 % over azimuth" in texts
    # every legend entry is also drawn as text
    drawn_texts = [t.text for t in drawing.texts if t.role in ("legend", "profile-legend")]
    assert sorted(drawn_texts) == sorted(texts)


def test_peak_and_axis_marks_differ_in_shape(drawn):
    _, drawing, _ = drawn
    handles = {label: style for label, kind, style in drawing.legend if kind == "mark"}
    assert handles["peak"]["shape"] != handles["beam axis (spill centre)"]["shape"]
    marks = {kind: shape for kind, shape, _, _ in drawing.marks}
    assert marks["peak"] != marks["beam axis"]


def test_colour_scale_reaches_below_the_spill(drawn):
    # the pattern's own spill (its analytic definition in beamshot.synth), between the field
    # angle and 0.9 of the cut-off, relative to its peak
    report, drawing, _ = drawn
    field_half = report["field_angle"].value / 2.0
    theta = np.radians(np.linspace(1.2 * field_half, 0.9 * PATTERN.cutoff_deg, 200))
    spill_rel = float(np.median(PATTERN(theta, 0.0 * theta))) / PATTERN.peak_cd
    vmin, vmax = drawing.values["colour_scale"]
    # the spill sits clearly above the bottom shade: the scale reaches to about half its level
    # (0.6 allows for the map's noise and the analyser's spill estimate)
    assert vmin / vmax <= 0.6 * spill_rel
    assert vmin / vmax >= 1e-6  # not so deep that the spill is squeezed into one shade
    # the colour bar's tick labels name values inside the scale, in increasing order left to right
    ticks = _texts(drawing, "colour-bar-tick")
    assert len(ticks) >= 2
    assert all(vmin <= t.data[0] <= vmax for t in ticks)
    assert [t.data[0] for t in sorted(ticks, key=lambda t: t.box[0])] == sorted(t.data[0] for t in ticks)


def test_profile_shows_a_floor_not_noise_beyond_the_edge(drawn):
    report, drawing, _ = drawn
    x, y = (np.asarray(d, float) for d in drawing.values["profile_mean"])
    noise = noise_floor(report.beam, report.contours["edge"], report.profile)
    floor = noise.mean_level
    beyond = x > report["spill_angle"].value + 6.0
    assert beyond.sum() > 20
    drawn_beyond = y[beyond][np.isfinite(y[beyond])]
    # nothing drawn out there but the point where the mean meets the floor
    assert np.all(drawn_beyond == pytest.approx(floor, rel=1e-9))
    assert drawing.values["profile_ylim"][0] < floor  # the shaded floor band is in view
    # and inside the spill the mean is drawn as measured
    inside = (x > 1.5 * report["field_angle"].value) & (x < 0.8 * report["spill_angle"].value)
    assert np.all(np.isfinite(y[inside])) and np.all(y[inside] > floor)


def test_noise_floor_of_a_known_noise():
    # Gaussian noise of known sigma beyond a circular edge at 20 deg: the MAD-based sigma
    # (x 1.4826, normal consistency) recovers it; the azimuthal mean of n independent cells has
    # sigma / sqrt(n) (standard error of a mean)
    rng = np.random.default_rng(4)
    sigma = 0.5
    beam = analytic_map(lambda t, p: np.where(np.degrees(t) < 20.0, 100.0, 0.0), theta_max_deg=40.0,
                        d_theta_deg=0.1, d_phi_deg=2.0)
    beam = replace(beam, intensity=beam.intensity + rng.normal(0.0, sigma, beam.intensity.shape))
    phi = np.radians(np.arange(0, 360, 10) + 5.0)
    edge = SpillEdge(phi=phi, theta=np.full(phi.shape, np.radians(20.0)), sigma=np.zeros(phi.shape),
                     kind=("cutoff",) * len(phi), coverage=np.full(phi.shape, np.radians(40.0)))
    nf = noise_floor(beam, edge, radial_profile(beam))
    assert nf.cell_sigma == pytest.approx(sigma, rel=0.05)
    assert nf.cell_level == pytest.approx(DETECTION_SIGMAS * sigma, rel=0.1)
    assert nf.mean_sigma == pytest.approx(sigma / np.sqrt(beam.intensity.shape[1]), rel=0.2)
    assert nf.rows > 100


def test_estimate_is_said_on_the_intensity_labels(drawn):
    report, drawing, _ = drawn
    assert report["peak_intensity"].status == "estimate"  # exposure-metadata scale
    assert drawing.text_of("colour-bar-label") == ["intensity, estimate (cd)"]
    assert drawing.text_of("profile-ylabel") == ["intensity, estimate (cd)"]
    pk = report["peak_intensity"]
    measured = replace(report, figures={**report.figures, "peak_intensity": Figure(
        pk.value, pk.uncertainty, pk.unit, "lux meter", status="measured")},
        calibration={**report.calibration, "absolute_scale": {"kind": "lux_meter"}})
    assert intensity_label(measured, "cd") == "intensity (cd)"
    assert intensity_label(measured, "relative") == "intensity (relative to peak)"


def test_title_names_the_light_or_the_photo(drawn):
    report, drawing, _ = drawn
    assert drawing.text_of("title") == ["wall.jpg"]
    named = replace(report, settings={**report.settings, "light_name": "prototype 2, smooth reflector"})
    d2 = draw_beam_picture(named).drawing
    assert d2.text_of("title") == ["prototype 2, smooth reflector"]
    assert d2.text_of("subtitle") == ["photo wall.jpg · wall at 5 m"]


def test_png_is_written_at_the_stated_size(drawn):
    report, drawing, path = drawn
    assert path.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (ISO/IEC 15948)
    with Image.open(path) as im:
        im.verify()
    with Image.open(path) as im:
        assert (im.width, im.height) == (PICTURE_WIDTH_PX, drawing.height)
        assert im.height > im.width  # one column: map, profile, table
        full = np.asarray(im.convert("RGB"))
    # the map panel for the page is beam.png's upper part, down to the map's legend
    _, panel = beam_pictures(report)
    top = np.asarray(Image.open(io.BytesIO(panel)).convert("RGB"))
    assert top.shape[1] == PICTURE_WIDTH_PX and 0.3 * full.shape[0] < top.shape[0] < 0.7 * full.shape[0]
    assert np.array_equal(top, full[: top.shape[0]])
    legend_bottom = max(t.box[3] for t in drawing.texts if t.role == "legend")
    profile_top = min(t.box[1] for t in drawing.texts if t.role.startswith("profile"))
    assert legend_bottom <= top.shape[0] <= profile_top


def test_png_encoding_is_lossless():
    # the PNG writer (beamshot.report.raster.png_pair) against Pillow's PNG decoder: any RGB
    # array comes back exactly, and the pair's short picture is the long one's first rows
    from beamshot.report.raster import png_pair

    rgb = np.random.default_rng(3).integers(0, 256, (37, 23, 3), dtype=np.uint8)
    full, top = png_pair(rgb, 11)
    assert np.array_equal(np.asarray(Image.open(io.BytesIO(full))), rgb)
    assert np.array_equal(np.asarray(Image.open(io.BytesIO(top))), rgb[:11])


def test_readable_at_phone_width(drawn):
    # shown 400 px wide, every text is at least PHONE_MIN_TEXT_PX tall and no two texts overlap
    _, drawing, _ = drawn
    shrink = PHONE_WIDTH_PX / PICTURE_WIDTH_PX
    assert MIN_TEXT_PX * shrink >= PHONE_MIN_TEXT_PX
    for t in drawing.texts:
        assert t.size_px * shrink >= PHONE_MIN_TEXT_PX, t.text
        x0, y0, x1, y1 = t.box
        assert 0 <= x0 and x1 <= drawing.width and 0 <= y0 and y1 <= drawing.height, t.text  # inside the picture
    boxes = [(t.text, t.box) for t in drawing.texts]
    for i, (a, ba) in enumerate(boxes):
        for b, bb in boxes[i + 1:]:
            overlap_w = min(ba[2], bb[2]) - max(ba[0], bb[0])
            overlap_h = min(ba[3], bb[3]) - max(ba[1], bb[1])
            assert overlap_w <= 1.0 or overlap_h <= 1.0, (a, b)


def _map_box(drawing):
    """Rows of the map (px): below the title, down to the note in the map's lower corner."""
    note = next(t for t in drawing.texts if t.role == "map-note")
    title = next(t for t in drawing.texts if t.role == "title")
    return int(title.box[3]) + 30, int(note.box[3])


def _has_colour(rgb, colour, tol=3):
    c = np.array([int(colour[i:i + 2], 16) for i in (1, 3, 5)])
    return int(np.sum(np.all(np.abs(rgb.astype(int) - c) <= tol, axis=-1)))


def test_map_pixels_show_the_areas_the_legend_names(drawn):
    # the hatched 'outside the photo' (grey lines on light grey) and 'below the noise floor' (black)
    # colours are on the map itself, not only in its legend
    _, drawing, path = drawn
    rgb = np.asarray(Image.open(path).convert("RGB"))
    top, bottom = _map_box(drawing)
    area = rgb[top:bottom]
    assert _has_colour(area, "#eeeeee") > 5000 and _has_colour(area, "#9a9a9a") > 1000
    assert _has_colour(area, _BELOW) > 5000


def test_clipped_photo_marks_the_clipped_area():
    report = analyze(_photo(PATTERN, target=4.0, name="clipped.jpg"), distance_m=DISTANCE_M)
    assert report["peak_intensity"].status == "lower_bound"
    pic = draw_beam_picture(report)
    texts = _legend_texts(pic.drawing)
    assert texts.count("clipped: not measured") == 2  # map and profile
    assert "peak" not in texts  # a clipped peak is not marked as found
    assert "peak" not in [kind for kind, _, _, _ in pic.drawing.marks]
    assert "outside the photo" in texts
    # the clipped area's colour is drawn on the map (around its centre, where the clipped cells are)
    top, bottom = _map_box(pic.drawing)
    mid = (top + bottom) // 2
    centre = pic.rgb[mid - 80:mid + 80, PICTURE_WIDTH_PX // 2 - 80:PICTURE_WIDTH_PX // 2 + 80]
    assert _has_colour(centre, _VERMILLION, tol=10) > 200


@pytest.mark.parametrize("name", ["光束.jpg", "🔦 beam 🔦.jpg", "prototype " + "x" * 290 + ".jpg"])
def test_caution_line_and_no_warnings_for_any_file_name(tmp_path, name):
    # a photo named in a script the font lacks, with emoji, or 300 characters long: the picture is
    # written without a warning reaching the user, the title stays inside the picture, and it
    # carries the safety line (pictures travel without their report)
    import warnings

    pattern = HotspotSpillBeam(peak_cd=8000.0, hotspot_fwhm_deg=8.0, spill_fraction=0.02, cutoff_deg=30.0)
    rep = analyze(_photo(pattern, name=name), distance_m=5.0)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        pic = write_beam_picture(rep, tmp_path / "beam.png")
    assert not caught, [str(w.message) for w in caught]
    assert pic.drawing.text_of("caution") == [CAUTION_LINE]
    title = next(t for t in pic.drawing.texts if t.role == "title")
    assert 0 <= title.box[0] and title.box[2] <= PICTURE_WIDTH_PX
    assert title.size_px >= MIN_TEXT_PX
    if len(name) < 60:
        assert title.text == name


def test_colour_table_is_matplotlibs_cividis():
    # the stored table against matplotlib's own (cividis: Nuñez, Anderton and Renslow 2018), to
    # the 8-bit rounding of the stored entries
    import matplotlib

    from beamshot.report.colour_table import CIVIDIS_RGB

    ref = matplotlib.colormaps["cividis"].resampled(256)(np.arange(256))[:, :3] * 255.0
    assert CIVIDIS_RGB.shape == (256, 3)
    assert np.max(np.abs(CIVIDIS_RGB - ref)) <= 0.5 + 1e-9


def test_report_set_is_written_without_matplotlib(tmp_path):
    # a plain analysis (no --colour) writes beam.png and the page without importing matplotlib
    code = f"""
import sys
sys.path.insert(0, {str(Path(__file__).parent)!r})
from test_plots import PATTERN, _photo
from beamshot import analyze
from beamshot.report.output import write_report
names = write_report(analyze(_photo(PATTERN), distance_m=5.0), {str(tmp_path / "out")!r})
assert any(n.endswith("beam.png") for n in names) and any(n.endswith("report.html") for n in names), names
assert "matplotlib" not in sys.modules, sorted(m for m in sys.modules if m.startswith("matplotlib"))[:5]
"""
    run = subprocess.run([sys.executable, "-c", code], check=False, capture_output=True, text=True, timeout=120)
    assert run.returncode == 0, run.stderr[-2000:]


def test_log_ticks_on_the_colour_bar():
    # decades on long scales, 1-2-5 on scales under two decades (the preferred-number series of
    # common practice); every tick inside the range
    from beamshot.report.raster_chart import linear_ticks, log_ticks

    assert [v for v, _ in log_ticks(0.5, 2e4)] == pytest.approx([1.0, 10.0, 100.0, 1e3, 1e4])
    assert [t for _, t in log_ticks(3.0, 60.0, short_scales=True)] == ["5", "10", "20", "50"]
    assert log_ticks(0.0, 1.0) == [] and log_ticks(2.0, 1.0) == []
    assert linear_ticks(0.0, 97.0) == pytest.approx([0.0, 20.0, 40.0, 60.0, 80.0])


def test_log_ticks_are_plain_decades():
    # decade labels without math typesetting: each names its power of ten exactly
    from beamshot.report.plots import _decade_text

    for e in range(-9, 10):
        text = _decade_text(10.0 ** e)
        assert float(text.replace(",", "")) == pytest.approx(10.0 ** e, rel=1e-12), text
    assert _decade_text(3.0) == "" and _decade_text(0.0) == "" and _decade_text(float("nan")) == ""


def test_short_log_scales_get_plain_1_2_5_ticks():
    # a colour bar spanning under two decades is labelled at 1-2-5 steps (the preferred-number
    # series of common practice), each label the tick's exact value
    from beamshot.report.plots import _tick_text

    for e in range(-2, 6):
        for m in (1, 2, 5):
            v = m * 10.0 ** e
            assert float(_tick_text(v).replace(",", "")) == pytest.approx(v, rel=1e-12)
    assert _tick_text(3.0) == "" and _tick_text(700.0) == "" and _tick_text(-1.0) == ""


def test_drawn_grid_matches_the_exact_resampling(drawn):
    # the picture's fast grid (OpenCV remap and nearest-label fill) against the exact one the
    # comparison maps use (scipy's map_coordinates and distance transform): same cells shown, values
    # within the 1/32-cell weight steps of the fast bilinear interpolation (common practice: judged
    # against the colour table's 256 steps over several decades)
    from beamshot.report.map_panel import picture_grid
    from beamshot.report.plots import _azimuthal_grid

    report, _, _ = drawn
    for half, n in ((60.0, 401), (8.0, 241)):
        a1, exact = _azimuthal_grid(report.beam, half, n)
        a2, fast = picture_grid(report.beam, half, n)
        assert np.array_equal(a1, a2)
        assert np.array_equal(np.isfinite(exact), np.isfinite(fast))
        both = np.isfinite(exact)
        peak = np.nanmax(exact)
        assert np.max(np.abs(fast[both] - exact[both])) <= 0.01 * peak
        assert np.percentile(np.abs(fast[both] - exact[both]), 99) <= 0.001 * peak


def test_relative_scale_is_drawn_relative_to_the_peak():
    # without an absolute scale the map and the profile are divided by their peak: the colour
    # scale ends at 1 and the labels say 'relative to peak'
    report = analyze(_photo(PATTERN, name="relative.jpg"), distance_m=DISTANCE_M, use_exif_scale=False)
    assert report.beam.unit != "cd"
    drawing = draw_beam_picture(report).drawing
    assert drawing.text_of("colour-bar-label") == ["intensity (relative to peak)"]
    assert drawing.text_of("profile-ylabel") == ["intensity (relative to peak)"]
    assert drawing.values["colour_scale"][1] == pytest.approx(1.0, rel=1e-12)
    _, y = drawing.values["profile_mean"]
    assert np.nanmax(y) == pytest.approx(1.0, rel=1e-12)


@pytest.mark.parametrize("light", [2, 3])
def test_profile_legend_leaves_the_curve_visible(tmp_path, light):
    # the demo beams whose spill plateau ran under the legend (prototypes 3 and 4): no drawn point
    # of the azimuthal mean lies inside the legend's box
    from beamshot.demo import DEMO_DISTANCE_M, DEMO_LIGHTS

    name = DEMO_LIGHTS[light].name
    images = Path(__file__).resolve().parents[1] / "sample_images"
    report = analyze(str(images / f"{name}.jpg"), distance_m=DEMO_DISTANCE_M, ambient=str(images / f"{name}-off.jpg"))
    v = write_beam_picture(report, tmp_path / "beam.png").drawing.values
    (x0, y0, x1, y1), xmax = v["profile_box"]
    lo, hi = np.log10(v["profile_ylim"])
    x, y = v["profile_mean"]
    ok = np.isfinite(y) & (y > 0)
    px = x0 + x[ok] / xmax * (x1 - x0)
    py = y1 - (np.log10(y[ok]) - lo) / (hi - lo) * (y1 - y0)
    bx0, by0, bx1, by1 = v["profile_legend_box"]
    inside = (px >= bx0) & (px <= bx1) & (py >= by0) & (py <= by1)
    assert not inside.any()
