"""The report picture (beam.png): rings as full angles, the noise floor drawn as a floor, a legend
for every mark and area, a colour scale that shows the spill, the figures table in the vocabulary's
words, and text that stays readable and apart at phone size.

Photos are small (400 x 300 px) synthetic JPEGs from beamshot.synth with a known analytic pattern.
"""

from __future__ import annotations

import re
from dataclasses import replace

import numpy as np
import pytest
from PIL import Image

from beamshot import analyze, vocabulary
from beamshot.figure import Figure
from beamshot.photo import decode_photo
from beamshot.profile import radial_profile
from beamshot.report.plots import (DETECTION_SIGMAS, FIG_DPI, FIG_WIDTH_IN, beam_figure, intensity_label,
                                   noise_floor)
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
MIN_TEXT_PX = 7.0


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
    fig = beam_figure(report, path)
    return report, fig, path


def _texts(fig):
    from matplotlib.text import Text

    return [t for t in fig.findobj(Text) if t.get_visible() and t.get_text().strip()]


def _axes_with_gid(fig, prefix):
    return [t for t in _texts(fig) if (t.get_gid() or "").startswith(prefix)]


def _legend_texts(fig):
    out = []
    for ax in fig.axes:
        leg = ax.get_legend()
        if leg is not None:
            out += [t.get_text() for t in leg.get_texts()]
    return out


def _profile_axes(fig):
    return next(ax for ax in fig.axes if ax.get_xlabel().startswith("full cone angle"))


def _map_image(fig):
    return next(im for ax in fig.axes for im in ax.get_images() if im.get_array().ndim == 2 and im.get_array().shape[0] > 300)


def test_ring_labels_are_full_angles(drawn):
    # every reported angle is a full cone angle (IES beam and field angles are full angles), so a
    # ring of radius r degrees from the axis is labelled 2r
    _, fig, _ = drawn
    labels = _axes_with_gid(fig, "ring-label")
    assert len(labels) >= 3
    for t in labels:
        x, y = t.get_position()
        number = float(re.match(r"([\d.]+)° full$", t.get_text()).group(1))
        assert number == pytest.approx(2.0 * np.hypot(x, y), abs=1e-9)


def test_table_words_come_from_the_vocabulary(drawn):
    report, fig, _ = drawn
    labels = {t.get_gid().split(":", 1)[1]: t.get_text() for t in _axes_with_gid(fig, "figure-label:")}
    assert set(labels) == set(report.figures)
    for key, text in labels.items():
        assert text == vocabulary.label(key)
    for t in _axes_with_gid(fig, "figure-status:"):
        key = t.get_gid().split(":", 1)[1]
        assert t.get_text() == vocabulary.STATUS_WORDS[report.figures[key].status]
    for t in _axes_with_gid(fig, "figure-value:"):
        f = report.figures[t.get_gid().split(":", 1)[1]]
        if f.value is None:
            assert t.get_text() == "—"
            continue
        assert t.get_text().startswith(vocabulary.STATUS_MARKS.get(f.status, ""))
        assert t.get_text().endswith(vocabulary.unit_text(f.unit))
        if f.uncertainty:
            assert " ± " in t.get_text()


def test_legend_names_every_area_and_mark(drawn):
    _, fig, _ = drawn
    texts = _legend_texts(fig)
    for entry in ("outside the photo", "below the noise floor", "peak", "beam axis (spill centre)",
                  "ring: full cone angle", vocabulary.label("hotspot_angle"), vocabulary.label("field_angle"),
                  vocabulary.label("spill_angle")):
        assert entry in texts, entry
    assert "below the noise floor (3σ of the dark wall)" in texts  # the profile's floor band


def test_peak_and_axis_marks_differ_in_shape(drawn):
    _, fig, _ = drawn
    handles = {}
    for ax in fig.axes:
        leg = ax.get_legend()
        if leg is not None:
            handles.update({t.get_text(): h for t, h in zip(leg.get_texts(), leg.legend_handles)})
    assert handles["peak"].get_marker() != handles["beam axis (spill centre)"].get_marker()


def test_colour_scale_reaches_below_the_spill(drawn):
    # the pattern's own spill (its analytic definition in beamshot.synth), between the field
    # angle and 0.9 of the cut-off, relative to its peak
    report, fig, _ = drawn
    field_half = report["field_angle"].value / 2.0
    theta = np.radians(np.linspace(1.2 * field_half, 0.9 * PATTERN.cutoff_deg, 200))
    spill_rel = float(np.median(PATTERN(theta, 0.0 * theta))) / PATTERN.peak_cd
    norm = _map_image(fig).norm
    # the spill sits clearly above the bottom shade: the scale reaches to about half its level
    # (0.6 allows for the map's noise and the analyser's spill estimate)
    assert norm.vmin / norm.vmax <= 0.6 * spill_rel
    assert norm.vmin / norm.vmax >= 1e-6  # not so deep that the spill is squeezed into one shade


def test_profile_shows_a_floor_not_noise_beyond_the_edge(drawn):
    report, fig, _ = drawn
    ax = _profile_axes(fig)
    line = next(ln for ln in ax.get_lines() if ln.get_label() == "azimuthal mean")
    x, y = (np.asarray(d, float) for d in line.get_data())
    noise = noise_floor(report.beam, report.contours["edge"], report.profile)
    floor = noise.mean_level
    beyond = x > report["spill_angle"].value + 6.0
    assert beyond.sum() > 20
    drawn_beyond = y[beyond][np.isfinite(y[beyond])]
    # nothing drawn out there but the point where the mean meets the floor
    assert np.all(drawn_beyond == pytest.approx(floor, rel=1e-9))
    assert ax.get_ylim()[0] < floor  # the shaded floor band is in view
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
    report, fig, _ = drawn
    assert report["peak_intensity"].status == "estimate"  # exposure-metadata scale
    assert _map_image(fig).colorbar.ax.get_xlabel() == "intensity, estimate (cd)"
    assert _profile_axes(fig).get_ylabel() == "intensity, estimate (cd)"
    pk = report["peak_intensity"]
    measured = replace(report, figures={**report.figures, "peak_intensity": Figure(
        pk.value, pk.uncertainty, pk.unit, "lux meter", status="measured")},
        calibration={**report.calibration, "absolute_scale": {"kind": "lux_meter"}})
    assert intensity_label(measured, "cd") == "intensity (cd)"
    assert intensity_label(measured, "relative") == "intensity (relative to peak)"


def test_title_names_the_light_or_the_photo(drawn):
    report, fig, _ = drawn
    title = lambda f: next(t.get_text() for t in _axes_with_gid(f, "title"))  # noqa: E731
    assert title(fig) == "wall.jpg"
    named = replace(report, settings={**report.settings, "light_name": "prototype 2, smooth reflector"})
    import matplotlib.pyplot as plt

    fig2 = beam_figure(named)
    try:
        assert title(fig2) == "prototype 2, smooth reflector"
    finally:
        plt.close(fig2)


def test_png_is_written_at_the_stated_size(drawn):
    _, _, path = drawn
    assert path.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (ISO/IEC 15948)
    with Image.open(path) as im:
        im.verify()
    with Image.open(path) as im:
        assert im.width == round(FIG_WIDTH_IN * FIG_DPI)
        assert im.height > im.width  # one column: map, profile, table


def test_readable_at_phone_width(drawn):
    # shown 400 px wide, every text is at least MIN_TEXT_PX tall and no two texts overlap
    _, fig, _ = drawn
    px_per_pt = PHONE_WIDTH_PX / (FIG_WIDTH_IN * 72.0)
    texts = _texts(fig)
    for t in texts:
        assert t.get_fontsize() * px_per_pt >= MIN_TEXT_PX, t.get_text()
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    canvas = FigureCanvasAgg(fig)  # the saved figure was closed; lay it out again off screen
    canvas.draw()
    renderer = canvas.get_renderer()
    boxes = [(t.get_text(), t.get_window_extent(renderer)) for t in texts]
    for i, (a, ba) in enumerate(boxes):
        for b, bb in boxes[i + 1:]:
            overlap_w = min(ba.x1, bb.x1) - max(ba.x0, bb.x0)
            overlap_h = min(ba.y1, bb.y1) - max(ba.y0, bb.y0)
            assert overlap_w <= 1.0 or overlap_h <= 1.0, (a, b)


def test_clipped_photo_marks_the_clipped_area():
    report = analyze(_photo(PATTERN, target=4.0, name="clipped.jpg"), distance_m=DISTANCE_M)
    assert report["peak_intensity"].status == "lower_bound"
    import matplotlib.pyplot as plt

    fig = beam_figure(report)
    try:
        texts = _legend_texts(fig)
        assert texts.count("clipped: not measured") == 2  # map and profile
        assert "peak" not in texts  # a clipped peak is not marked as found
        assert "outside the photo" in texts
    finally:
        plt.close(fig)


def test_caution_line_and_no_font_warnings_for_any_file_name(tmp_path):
    # a photo named in a script the font lacks: the picture is written without a warning reaching
    # the user, and it carries the safety line (pictures travel without their report)
    import warnings

    from beamshot.analysis import analyze
    from beamshot.report.plots import CAUTION_LINE, beam_figure

    pattern = HotspotSpillBeam(peak_cd=8000.0, hotspot_fwhm_deg=8.0, spill_fraction=0.02, cutoff_deg=30.0)
    rep = analyze(_photo(pattern, name="光束.jpg"), distance_m=5.0)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        fig = beam_figure(rep)
        beam_figure(rep, tmp_path / "beam.png")
    assert not [w for w in caught if "Glyph" in str(w.message)]
    assert CAUTION_LINE in [t.get_text() for t in fig.texts]


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
