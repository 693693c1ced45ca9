"""The HTML pages read as files (beamshot/report/html*.py): self-contained, escaped, and saying what the JSON says.

The browser test (tests/test_browser.py) loads the same pages in headless Chromium; these checks
parse the text with the standard library's HTML parser, so they run everywhere and fast.
"""

from __future__ import annotations

import json
import os
import re
from html.parser import HTMLParser

import pytest
from conftest import make_shot

from beamshot.errors import BeamshotError
from beamshot.report.html import HTML_FILE, report_html
from beamshot.report.html_comparison import (
    COMPARISON_HTML,
    comparison_html,
    write_comparison_html,
)
from beamshot.report.html_page import esc
from beamshot.report.model import CAUTIONS
from beamshot.report.output import REPORT_FILES, write_report
from beamshot.synth import encode_jpeg, render_photo

#: A light name and a file name that would be markup if not escaped.
EVIL_NAME = 'proto <script>alert("x")</script> & "co"'
EVIL_FILE = "beam <script>&.jpg"


class _Page(HTMLParser):
    """Every tag with its attributes, and the visible text of each figure row."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.tags: list[tuple[str, dict]] = []
        self.text: list[str] = []
        self.rows: dict[str, dict] = {}
        self._row: dict | None = None
        self._cell: list[str] | None = None
        self._in_script = False

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        self.tags.append((tag, a))
        if tag == "tr" and "data-key" in a:
            self._row = {"attrs": a, "cells": []}
            self.rows[a["data-key"]] = self._row
        elif tag == "td" and self._row is not None:
            self._cell = []

    def handle_endtag(self, tag):
        if tag == "td" and self._row is not None and self._cell is not None:
            self._row["cells"].append("".join(self._cell).strip())
            self._cell = None
        elif tag == "tr":
            self._row = None

    def handle_data(self, data):
        self.text.append(data)
        if self._cell is not None:
            self._cell.append(data)


def parse(text: str) -> _Page:
    p = _Page()
    p.feed(text)
    p.close()
    return p


def assert_self_contained(text: str) -> None:
    """No URL that could load anything: every src is a data: URI, no link/script/base/iframe/object,
    no url() or @import in CSS, and no http:, https: or protocol-relative // anywhere."""
    page = parse(text)
    for tag, attrs in page.tags:
        assert tag not in ("link", "script", "base", "iframe", "object", "embed", "frame"), tag
        for name in ("src", "href", "srcset", "poster", "data", "action", "background", "xlink:href"):
            if name in attrs:
                assert name == "src" and attrs[name].startswith("data:image/png;base64,"), (tag, name, attrs[name][:60])
    assert not re.search(r"https?:", text, re.IGNORECASE)
    assert not re.search(r"""(["'(=\s])//[^\s]""", text)
    assert "url(" not in text and "@import" not in text
    assert 'http-equiv="Content-Security-Policy"' in text and "default-src 'none'" in text


def assert_table_matches_json(text: str, figures: dict) -> None:
    """Each figure's row carries the JSON's exact numbers, and its visible value agrees with them."""
    rows = parse(text).rows
    assert set(rows) == set(figures)
    for key, f in figures.items():
        a = rows[key]["attrs"]
        for name in ("value", "uncertainty"):
            want = f[name]
            got = a[f"data-{name}"]
            assert (got == "") if want is None else (float(got) == want), (key, name, got, want)
        assert a["data-status"] == f["status"] and a["data-unit"] == f["unit"]
        assert_visible_value(rows[key]["cells"][1], f)


def assert_visible_value(shown: str, f: dict) -> None:
    """The printed value equals the JSON value rounded to the printed precision (GUM 7.2.6 rounding
    to the uncertainty's second digit; 3 significant digits without one)."""
    if f["value"] is None:
        assert shown == "—"
        return
    m = re.search(r"-?[\d,]+(?:\.\d+)?(?:e[-+]?\d+)?", shown)
    assert m, shown
    printed = float(m.group(0).replace(",", ""))
    digits = m.group(0).split(".")[1] if "." in m.group(0) else ""
    half_step = 0.5 * 10 ** -len(digits) if "e" not in m.group(0) else abs(f["value"]) * 5e-3
    if f["uncertainty"]:
        assert "± " in shown
    assert abs(printed - f["value"]) <= half_step + 1e-9 * abs(f["value"]) or \
        abs(printed - f["value"]) <= 5e-3 * abs(f["value"]), (shown, f["value"])


@pytest.fixture(scope="session")  # shared with tests/test_browser.py
def analysed(tmp_path_factory, reflector_beam):
    """One small synthetic photo with a hostile file name and light name, analysed (lux at the peak)."""
    from beamshot import analyze

    folder = tmp_path_factory.mktemp("html")
    scene, cam, truth = make_shot(reflector_beam, width_px=320, height_px=240)
    photo = folder / EVIL_FILE
    photo.write_bytes(encode_jpeg(render_photo(reflector_beam, scene, cam, seed=3), cam))
    report = analyze(str(photo), distance_m=5.0, lux_at_peak=round(truth["peak_lux_on_wall"]), light_name=EVIL_NAME)
    out = folder / "set"
    write_report(report, out)
    return report, out


def test_every_set_holds_a_self_contained_page_with_the_json_numbers(analysed):
    _, out = analysed
    assert sorted(os.listdir(out)) == sorted(f for f in REPORT_FILES if f != "tint.png")  # no colour asked for
    text = (out / HTML_FILE).read_text(encoding="utf-8")
    assert_self_contained(text)
    data = json.loads((out / "report.json").read_text(encoding="utf-8"))
    assert_table_matches_json(text, {**data["figures"], **data.get("shape", {})})
    assert 'id="shape"' in text and "shape" in data
    page = parse(text)
    imgs = [a for t, a in page.tags if t == "img"]
    assert len(imgs) == 1 and imgs[0]["alt"].startswith("intensity map")
    svgs = [a.get("id") for t, a in page.tags if t == "svg"]
    assert svgs == ["radial-profile", "plane-profiles"]
    visible = " ".join(page.text)
    # inputs: file name and its hash; distance; camera profile; every warning; every caution
    assert data["inputs"][0]["sha256"] in visible and EVIL_FILE in visible
    assert "uncalibrated-srgb" in visible and "5 m ± 0.02 m" in visible
    for w in data["warnings"]:
        assert w in visible
    for c in CAUTIONS:
        assert c in visible
    # each figure's one-line definition from the vocabulary is in its row
    from beamshot import vocabulary

    for key, row in page.rows.items():
        assert row["cells"][-1] == vocabulary.term(key).definition


def test_user_text_is_escaped(analysed):
    _, out = analysed
    text = (out / HTML_FILE).read_text(encoding="utf-8")
    assert "<script" not in text.lower()
    assert "&lt;script&gt;alert(&quot;x&quot;)&lt;/script&gt; &amp; &quot;co&quot;" in text  # light name
    assert "beam &lt;script&gt;&amp;.jpg" in text  # file name
    visible = " ".join(parse(text).text)
    assert EVIL_NAME in visible  # shown as written


def test_without_pictures_the_page_has_the_tables_and_says_so(tmp_path, analysed):
    report, _ = analysed
    out = tmp_path / "nopics"
    write_report(report, out, picture=False)
    assert sorted(os.listdir(out)) == ["intensity-map.npz", "profile.csv", "report.html", "report.json"]
    text = (out / HTML_FILE).read_text(encoding="utf-8")
    assert_self_contained(text)
    page = parse(text)
    assert not [t for t, _ in page.tags if t in ("img", "svg")]
    assert "Pictures were turned off" in text
    data = json.loads((out / "report.json").read_text())
    assert_table_matches_json(text, {**data["figures"], **data.get("shape", {})})


def test_relative_report_says_relative(analysed, tmp_path):
    """Without any absolute scale the page says so and labels the map and profiles relative."""
    from beamshot import analyze

    _, out = analysed
    photo = out.parent / EVIL_FILE
    rel = analyze(str(photo), distance_m=5.0, use_exif_scale=False)
    assert rel.beam.unit != "cd"
    text = report_html(rel, picture=True)
    assert "relative scale (no cd)" in text and "intensity (relative to peak)" in text
    assert_table_matches_json(text, {**rel.to_dict()["figures"], **rel.to_dict().get("shape", {})})


# ------------------------------------------------------------------------------- comparison page

def _png(path, colour=(40, 90, 160)):
    from PIL import Image

    Image.new("RGB", (60, 40), colour).save(path)


def comparison_fixture(folder, *, labels=("prototype 1", "prototype 2"), schema="beamshot.comparison",
                       version="1.0") -> dict:
    """A hand-made compare folder following docs/compare.md (two lights, three pictures, one card each)."""
    folder.mkdir(parents=True, exist_ok=True)
    for name in ("sheet.png", "profiles.png", "difference.png", "card-1.png", "card-2.png"):
        _png(folder / name)
    fig = lambda v, u, unit, status="measured": {"value": v, "uncertainty": u, "unit": unit,
                                                 "status": status, "label": unit}
    data = {
        "schema": schema, "schema_version": version, "created_utc": "2026-12-03T18:00:00+00:00",
        "absolute": True, "notes": ["maps resampled onto the coarser grid <2°> & kept"],
        "exposure": {"rule": "brightest light full scale", "wall_distance_m": 5.0, "full_scale": 480.0,
                     "map_scale": {"kind": "log10", "top": 12000.0, "decades": 3.0, "unit": "cd"}},
        "lights": [
            {"label": labels[0], "report": "../p1/report.json", "unit": "cd", "distance_m": 5.0,
             "scale": "lux_meter", "card": "card-1.png",
             "figures": {"peak_intensity": fig(12000.0, 600.0, "cd"), "hotspot_angle": fig(8.07, 0.41, "deg"),
                         "spill_flux": {**fig(None, None, "lm", "not_measured"),
                                        "reason": "no absolute scale <here>"}}, "clipped": True},
            {"label": labels[1], "report": "../p2/report.json", "unit": "cd", "distance_m": 5.0,
             "scale": "lux_meter", "card": "card-2.png",
             "figures": {"peak_intensity": fig(6100.0, 300.0, "cd"), "hotspot_angle": fig(8.2, 0.4, "deg"),
                         "spill_flux": fig(250.0, 60.0, "lm", "lower_bound")}},
        ],
        "differences": [
            {"figure": "peak_intensity", "label": "peak intensity", "unit": "cd", "a": labels[0], "b": labels[1],
             "difference": -5900.0, "combined_uncertainty": 670.8, "k": 2, "verdict": "significant", "reason": None},
            {"figure": "hotspot_angle", "label": "hotspot angle (50 %)", "unit": "deg", "a": labels[0],
             "b": labels[1], "difference": 0.13, "combined_uncertainty": 0.573, "k": 2,
             "verdict": "not distinguishable", "reason": None},
            {"figure": "spill_flux", "label": "spill flux", "unit": "lm", "a": labels[0], "b": labels[1],
             "difference": None, "combined_uncertainty": None, "k": 2, "verdict": "not compared",
             "reason": "not measured in prototype 1"},
        ],
        "pictures": {"sheet": "sheet.png", "profiles": "profiles.png", "difference": "difference.png",
                     "cards": ["card-1.png", "card-2.png"]},
        "cautions": list(CAUTIONS),
    }
    (folder / "comparison.json").write_text(json.dumps(data), encoding="utf-8")
    return data


def _cells(text):
    return [a for t, a in parse(text).tags if t == "td" and "data-light" in a]


def test_comparison_page_embeds_pictures_and_holds_the_json_numbers(tmp_path):
    folder = tmp_path / "cmp"
    data = comparison_fixture(folder, labels=("<script>alert(1)</script> A&B", "prototype 2"))
    path = write_comparison_html(folder)
    assert os.path.basename(path) == COMPARISON_HTML
    with open(path, encoding="utf-8") as fh:
        text = fh.read()
    assert_self_contained(text)
    page = parse(text)
    imgs = [a for t, a in page.tags if t == "img"]
    assert len(imgs) == 5  # sheet, profiles, difference, two cards
    assert "<script" not in text.lower() and "&lt;script&gt;alert(1)&lt;/script&gt; A&amp;B" in text
    assert "&lt;2°&gt; &amp; kept" in text  # a note, escaped
    for c in _cells(text):
        f = data["lights"][int(c["data-light"])]["figures"][c["data-key"]]
        assert (c["data-value"] == "") if f["value"] is None else float(c["data-value"]) == f["value"]
        assert c["data-status"] == f["status"]
    diffs = [a for t, a in page.tags if t == "tr" and "data-verdict" in a]
    assert [d["data-verdict"] for d in diffs] == [d["verdict"] for d in data["differences"]]
    assert float(diffs[0]["data-difference"]) == -5900.0 and diffs[2]["data-difference"] == ""
    visible = " ".join(page.text)
    assert "-5,900 ± 670 cd" in visible and "+0.13 ± 0.57°" in visible  # b - a with its sign, GUM rounding
    assert "not measured in prototype 1" in visible and all(c in visible for c in CAUTIONS)
    assert "spill flux: no absolute scale <here>" in visible  # the reason a figure is missing, escaped
    assert "yes: its brightest part is a lower bound" in visible  # the clipped light


def test_comparison_page_refuses_other_files_and_skips_unsafe_picture_names(tmp_path):
    folder = tmp_path / "cmp"
    data = comparison_fixture(folder)
    secret = tmp_path / "secret.png"
    _png(secret, (255, 0, 0))
    data["pictures"].update({"difference": None, "profiles": "../secret.png", "sheet": "/etc/passwd"})
    (folder / "comparison.json").write_text(json.dumps(data), encoding="utf-8")
    with open(write_comparison_html(folder), encoding="utf-8") as fh:
        text = fh.read()
    assert len([t for t, _ in parse(text).tags if t == "img"]) == 2  # the cards only
    assert "is not in the folder" in text
    # another schema, a newer major version, no comparison.json: one-line BeamshotError each
    comparison_fixture(folder, schema="beamshot.report")
    with pytest.raises(BeamshotError, match="not a beamshot comparison"):
        write_comparison_html(folder)
    comparison_fixture(folder, version="2.0")
    with pytest.raises(BeamshotError, match="newer beamshot"):
        write_comparison_html(folder)
    with pytest.raises(BeamshotError, match="no such file"):
        write_comparison_html(tmp_path / "nothing-here")
    (folder / "comparison.json").write_text("{not json", encoding="utf-8")
    with pytest.raises(BeamshotError, match="not a beamshot comparison.json"):
        write_comparison_html(folder)


def test_comparison_page_from_a_dict_without_optional_parts(tmp_path):
    """A normalised comparison with no notes, no cards and no cautions list still makes a full page."""
    data = {"schema": "beamshot.comparison", "schema_version": "1.0", "absolute": False, "lights": [
        {"label": "a", "figures": {}}, {"label": "b", "figures": {}}], "differences": [], "pictures": {}}
    text = comparison_html(data, tmp_path)
    assert_self_contained(text)
    assert "normalised" in text and all(esc(c) in text for c in CAUTIONS)


def test_colour_section_holds_the_json_numbers(tmp_path):
    # a colour photo analysed with colour: the page's colour table carries report.json's zone figures
    from beamshot import analyze

    images = os.path.join(os.path.dirname(__file__), "..", "sample_images")
    rep = analyze(os.path.join(images, "proto-4-warm-spill-ring.jpg"), distance_m=4.0, colour=True)
    out = tmp_path / "set"
    write_report(rep, out)
    text = (out / HTML_FILE).read_text(encoding="utf-8")
    assert_self_contained(text)
    data = json.loads((out / "report.json").read_text(encoding="utf-8"))
    zones = data["colour"]["zones"]
    for zone, z in zones.items():
        m = re.search(rf'<tr data-zone="{zone}">(.*?)</tr>', text)
        assert m, zone
        values = [float(v) for v in re.findall(r'data-value="([^"]+)"', m.group(1))]
        assert values == [z[k]["value"] for k in ("cct", "duv", "u_prime", "v_prime", "x", "y")]
    assert text.count("data:image/png;base64,") == 2  # the map and tint.png
    visible = " ".join(parse(text).text)
    for line in data["colour"]["limits"]:
        assert line in visible
