"""Presentation details a careful reader trips on: numbers in legends rounded as the report rounds
them, the comparison card's two wall distances told apart, long light names shown whole in the
comparison sheet's table without texts running into each other, the map's enlarged inset placed
where it hides no measured light, spill edge or label, and tint.png's intensity map using
beam.png's floor and words.  Pictures are rendered and read back (text boxes, drawn records);
the demo's sample photos (beamshot.synth, known truth) give real maps.
"""

from __future__ import annotations

from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pytest

from beamshot import analyze
from beamshot.report.card import photo_distance_text, subtitle_text
from beamshot.report.compare_plots import _figures_table, _table_layout, legend_name, value_text
from beamshot.report.plots import INSET_MARGIN, INSET_SIZES, inset_place

IMAGES = Path(__file__).resolve().parents[1] / "sample_images"


# ------------------------------------------------------------------ rounding in legends

@pytest.mark.parametrize("value, u, text", [
    (9504.2, 480.0, "9,500"),     # u to two significant digits (480), the value to the same place
    (5571.6, 350.0, "5,570"),
    (0.0123456, 0.00021, "0.01235"),
    (9504.2, None, "9,500"),      # no uncertainty: 3 significant figures
    (3792.0, 0.0, "3,790"),
])
def test_legend_values_round_as_the_report(value, u, text):
    # GUM JCGM 100:2008 7.2.6: the uncertainty to at most two significant digits, the value to match
    # (as beamshot.figure.value_with_uncertainty prints every figure); without one, 3 significant
    # figures (common practice)
    assert value_text(value, u) == text


def test_reach_legend_shows_the_rounded_peak():
    from beamshot.report.plots import _pyplot
    from beamshot.report.reach_plots import plot_axis_illuminance

    plt = _pyplot()
    fig, ax = plt.subplots()
    plot_axis_illuminance([("prototype 1", {"value": 9504.2, "uncertainty": 480.0, "unit": "cd",
                                            "status": "measured"}),
                           ("prototype 2", {"value": 3792.4, "uncertainty": 190.0, "unit": "cd",
                                            "status": "estimate"})], ax=ax)
    labels = [t.get_text() for t in ax.get_legend().get_texts()]
    plt.close(fig)
    assert labels == ["prototype 1: 9,500 cd", "prototype 2: ≈ 3,790 cd"]


def test_legend_names_are_whole_on_two_lines():
    name = "prototype 4, reflector with a warm spill ring"
    shown = legend_name(name, 30)
    assert shown.replace("\n", " ") == name and all(len(x) <= 30 for x in shown.split("\n"))
    assert legend_name("x" * 10 + " " + "y" * 40 + " " + "z" * 40, 30).endswith("…")


# ------------------------------------------------------------------ the card's two distances

def test_card_tells_the_drawn_distance_from_the_photo_distance():
    top = subtitle_text(5.0, 4)
    assert "re-drawn" in top and "5 m" in top and "all 4 lights" in top
    small = photo_distance_text(4.0, 5.0)
    assert small.startswith("photo taken at 4 m") and "drawn above at 5 m" in small
    assert photo_distance_text(5.0, 5.0) == "photo taken at 5 m from the wall, as drawn above"
    assert "not recorded" in photo_distance_text(None, 5.0)


# ------------------------------------------------------------------ the sheet's table

def _figure(value, u, unit, status="measured"):
    return {"value": value, "uncertainty": u, "unit": unit, "status": status}


LONG_NAMES = ["prototype 1, smooth reflector", "prototype 2, textured reflector with a frosted window",
              "prototype 3, TIR optic", "prototype 4, reflector with a warm spill ring and a deep bezel, 2nd build"]


def _comparison(names):
    lights = []
    for i, name in enumerate(names):
        figs = {"peak_intensity": _figure(9504.2 - 1000 * i, 480.0, "cd"),
                "beam_distance": _figure(195.0, 5.0, "m"),
                "hotspot_angle": _figure(10.24, 0.44, "deg", "estimate"),
                "spill_angle": _figure(42.3, 1.4, "deg", "estimate"),
                "ra": _figure(1.0319, 0.0058, "", "estimate")}
        lights.append(SimpleNamespace(label=name, figures=figs))
    diffs = [{"a": names[0], "b": n, "figure": k, "verdict": "significant"}
             for n in names[1:] for k in ("peak_intensity", "hotspot_angle", "spill_angle", "ra")]
    return SimpleNamespace(lights=lights, differences=diffs)


def test_sheet_table_shows_long_names_whole_and_keeps_texts_apart():
    from beamshot.report.plots import _pyplot

    plt = _pyplot()
    comp = _comparison(LONG_NAMES)
    width = 6.9
    layout = _table_layout(comp, width)
    fig = plt.figure(figsize=(width + 0.3, layout["height"] + 0.6), dpi=150)
    ax = fig.add_axes([0.15 / (width + 0.3), 0.1 / (layout["height"] + 0.6), width / (width + 0.3),
                       (layout["height"] + 0.25) / (layout["height"] + 0.6)])
    _figures_table(ax, comp, layout, width)
    fig.canvas.draw()
    r = fig.canvas.get_renderer()
    names = [t for t in ax.texts if t.get_gid() == "table-name"]
    # every name whole (words in order, line breaks only)
    assert [" ".join(t.get_text().split()) for t in names] == LONG_NAMES
    boxes = [t.get_window_extent(r) for t in ax.texts if t.get_gid() in ("table-name", "table-cell", "table-head")]
    page = fig.bbox
    for b in boxes:  # inside the picture
        assert page.x0 <= b.x0 and b.x1 <= page.x1, b
    for i in range(len(boxes)):
        for j in range(i + 1, len(boxes)):
            a, b = boxes[i], boxes[j]
            overlap = min(a.x1, b.x1) - max(a.x0, b.x0) > 0 and min(a.y1, b.y1) - max(a.y0, b.y0) > 0
            assert not overlap, (ax.texts[i].get_text(), ax.texts[j].get_text())
    plt.close(fig)


# ------------------------------------------------------------------ the map's inset

def _disc_grid(radius, half=40.0, n=201, lobe=None):
    a = np.linspace(-half, half, n)
    x, y = np.meshgrid(a, a)
    vals = np.where(np.hypot(x, y) <= radius, 100.0, 0.01)
    if lobe is not None:  # a lit patch centred at lobe (x, y, r)
        vals = np.where(np.hypot(x - lobe[0], y - lobe[1]) <= lobe[2], 50.0, vals)
    return a, vals


def test_inset_takes_the_largest_clear_corner():
    # a centred disc of radius 0.5 x half leaves corner squares of side (1 - 0.5 / sqrt 2) / 2 = 0.32
    # of the map free (geometry): the inset takes the largest listed size below that, in the first corner
    a, vals = _disc_grid(20.0)
    place = inset_place(a, vals, 1.0)
    side = place["box"][2] - place["box"][0]
    free = (1 - 0.5 / np.sqrt(2)) / 2 - max(INSET_MARGIN)
    assert place["covered"] == 0 and place["corner"] == "upper left"
    assert side == max(s for s in INSET_SIZES if s <= free)


def test_inset_avoids_a_lit_corner_and_labels():
    # light reaching into the upper left: the inset goes to the next clear corner
    a, vals = _disc_grid(12.0, lobe=(-30.0, 30.0, 8.0))
    assert inset_place(a, vals, 1.0)["corner"] == "lower left"
    # a label in the lower left too: the upper right
    assert inset_place(a, vals, 1.0, keep_out=[(0.1, 0.8, 0.2, 0.9)])["corner"] == "upper right"
    # the spill edge's line counts as covered: a ring of radius 24 deg (0.6 x half) clears the inner
    # corner of a 0.26 inset (at 0.275 of the map, 25.5 deg from the centre) but not of a 0.30 one
    # (0.315 of the map, 20.9 deg): the lit disc alone would allow 0.38
    t = np.linspace(0, 2 * np.pi, 400)
    edge = np.column_stack((24 * np.cos(t), 24 * np.sin(t)))
    a, vals = _disc_grid(10.0)  # clears the inner corner of a 0.38 inset (0.395 of the map, 11.9 deg)
    assert inset_place(a, vals, 1.0)["box"][2] - INSET_MARGIN[0] == pytest.approx(INSET_SIZES[0])
    place = inset_place(a, vals, 1.0, edge_xy=edge)
    x0, y0, x1, y1 = place["box"]
    assert place["covered"] == 0 and x1 - x0 == pytest.approx(0.26)
    fx, fy = (edge[:, 0] + 40) / 80, (40 - edge[:, 1]) / 80
    assert not np.any((fx >= x0) & (fx <= x1) & (fy >= y0) & (fy <= y1))


@pytest.fixture(scope="module")
def smooth_reflector():
    from beamshot.demo import DEMO_DISTANCE_M, DEMO_LIGHTS

    name = DEMO_LIGHTS[0].name
    return analyze(str(IMAGES / f"{name}.jpg"), distance_m=DEMO_DISTANCE_M, ambient=str(IMAGES / f"{name}-off.jpg"))


def test_beam_png_inset_hides_no_spill_edge_or_label(smooth_reflector, tmp_path):
    # the demo's smooth reflector: its inset once sat over the spill edge in the upper left
    from beamshot.report.beam_picture import write_beam_picture

    report = smooth_reflector
    drawing = write_beam_picture(report, tmp_path / "beam.png").drawing
    v = drawing.values
    assert "inset_box" in v, "the small hotspot gets an inset"
    bx0, by0, bx1, by1 = v["inset_box"]
    mx0, my0, mx1, my1 = v["map_box"]
    cx, cy, s = (mx0 + mx1) / 2, (my0 + my1) / 2, v["map_deg_per_px"]
    edge = report.contours["edge"]
    th = np.degrees(edge.theta)
    ex, ey = cx + th * np.cos(edge.phi) / s, cy - th * np.sin(edge.phi) / s
    assert not np.any((ex >= bx0) & (ex <= bx1) & (ey >= by0) & (ey <= by1))
    for t in drawing.texts:
        if t.role in ("ring-label", "iso-label", "map-note"):
            x0, y0, x1, y1 = t.box
            assert x1 < bx0 or x0 > bx1 or y1 < by0 or y0 > by1, t.text
    # the peak and the beam's axis are outside it too (they are drawn enlarged inside it instead)
    for _, _, (x, y), _ in drawing.marks:
        assert not (bx0 <= x <= bx1 and by0 <= y <= by1)


def test_tint_map_says_below_as_beam_png_does(smooth_reflector, tmp_path):
    # one floor, one word for black in both pictures of a report
    from beamshot.report.beam_picture import write_beam_picture
    from beamshot.report.colour_plots import tint_figure

    drawing = write_beam_picture(smooth_reflector, tmp_path / "beam.png").drawing
    beam_below = [label for label, kind, _ in drawing.legend if label.startswith("below")]
    fig = tint_figure(smooth_reflector, tmp_path / "tint.png")
    tint_below = [t.get_text() for ax in fig.axes if ax.get_legend() is not None
                  for t in ax.get_legend().get_texts() if t.get_text().startswith("below")]
    # beam.png names it in the map's legend (first) and the profile's (with its level)
    assert beam_below[0] == "below the noise floor" and tint_below == [beam_below[0]]


@pytest.mark.parametrize("t, text", [(0.0714286, "1/14 s"), (0.004, "1/250 s"), (1 / 3, "1/3 s"), (0.3, "0.3 s"),
                                     (2.5, "2.5 s")])
def test_exposure_time_is_written_as_cameras_write_it(t, text):
    # shutter speeds below a second are written as 1/N s (common practice); EXIF gives 1/14 s as
    # 0.0714286, which the page once printed as it came
    from beamshot.report.html import exposure_text

    assert exposure_text(t) == text


@pytest.mark.parametrize("longest, bar", [(1.19, 1.0), (0.6, 0.5), (3.0, 2.0), (0.049, 0.02)])
def test_card_scale_bar_is_a_round_length(longest, bar):
    # the card's bar was 0.35 of the half width, labelled "1.2 m" for 1.19 m; now the largest
    # 1-2-5 length that fits (common practice for scale bars)
    from beamshot.report.card import scale_bar_m

    assert scale_bar_m(longest) == pytest.approx(bar)


def test_comparison_page_tells_photo_distance_from_drawn_distance(tmp_path):
    from PIL import Image

    from beamshot.report.html_comparison import comparison_html

    Image.new("RGB", (4, 4)).save(tmp_path / "sheet.png")
    data = {"schema": "beamshot.comparison", "schema_version": "1.0", "absolute": True,
            "exposure": {"wall_distance_m": 5.0},
            "lights": [{"label": "a", "distance_m": 4.0, "figures": {}}, {"label": "b", "distance_m": 4.0,
                                                                          "figures": {}}],
            "differences": [], "pictures": {"sheet": "sheet.png"}}
    text = comparison_html(data, tmp_path)
    assert "re-drawn at a common distance of 5 m" in text
    assert "<th>photo taken at</th>" in text.replace(' scope="col"', "") and "wall distance</th>" not in text
