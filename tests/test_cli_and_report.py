"""The command line (click CliRunner) and the report files."""

import csv
import json
import os

import numpy as np
import pytest
from click.testing import CliRunner

from beamshot.cli import cli
from beamshot.report.output import read_report_json
from beamshot.synth import SynthCamera, encode_jpeg, render_photo

from conftest import make_shot


@pytest.fixture(scope="module")
def photos(tmp_path_factory, reflector_beam):
    folder = tmp_path_factory.mktemp("photos")
    scene, cam, truth = make_shot(reflector_beam, width_px=800, height_px=600)
    paths = {}
    paths["beam"] = folder / "beam.jpg"
    paths["beam"].write_bytes(encode_jpeg(render_photo(reflector_beam, scene, cam, seed=1), cam))
    black = np.zeros((600, 800, 3), np.uint8)
    paths["black"] = folder / "black.jpg"
    paths["black"].write_bytes(encode_jpeg(black, cam))
    grey = np.full((600, 800, 3), 120, np.uint8)
    paths["grey"] = folder / "grey.jpg"
    paths["grey"].write_bytes(encode_jpeg(grey, cam))
    small = SynthCamera(width_px=400, height_px=300)
    paths["small"] = folder / "small.jpg"
    paths["small"].write_bytes(encode_jpeg(np.zeros((300, 400, 3), np.uint8), small))
    paths["text"] = folder / "notes.jpg"
    paths["text"].write_text("not an image")
    return paths, truth


def test_analyze_writes_report(photos, tmp_path):
    paths, truth = photos
    out = tmp_path / "rep"
    res = CliRunner().invoke(cli, ["analyze", str(paths["beam"]), "--distance", "5",
                                   "--lux", f"{truth['peak_lux_on_wall']:.0f}", "--out", str(out)])
    assert res.exit_code == 0, res.output
    assert "hotspot angle" in res.output and "cd" in res.output
    assert sorted(os.listdir(out)) == ["beam.png", "intensity-map.npz", "profile.csv", "report.html", "report.json"]
    data = read_report_json(out / "report.json")
    assert data["schema"] == "beamshot.report" and data["schema_version"].startswith("1.")
    assert data["inputs"][0]["sha256"] and data["inputs"][0]["exif"]["iso"] == 100.0
    for name, fig in data["figures"].items():
        assert set(fig) == {"value", "uncertainty", "unit", "status", "method", "reason", "budget"}
        assert (fig["value"] is None) == (fig["status"] == "not_measured")
    assert data["cautions"] and "IEC 62471" in " ".join(data["cautions"])
    with open(out / "profile.csv") as fh:
        rows = list(csv.reader(fh))
    assert rows[0][:2] == ["theta_deg", "mean_cd"] and len(rows) > 100
    assert (out / "beam.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_json_output(photos):
    paths, _ = photos
    res = CliRunner().invoke(cli, ["analyze", str(paths["beam"]), "--distance", "5", "--json", "--no-exif-scale"])
    assert res.exit_code == 0
    data = json.loads(res.stdout)  # notes and file lines go to stderr: stdout is the JSON alone
    assert data["figures"]["peak_intensity"]["value"] is None
    assert data["figures"]["ra"]["value"] > 0


@pytest.mark.parametrize("key, extra, message", [
    ("missing", ["--distance", "5"], "no such file"),
    ("text", ["--distance", "5"], "not a readable image"),
    ("black", ["--distance", "5"], "black"),
    ("grey", ["--distance", "5"], "no beam found"),
    ("beam", ["--distance", "0"], "distance"),
    ("beam", ["--distance", "-3"], "distance"),
    ("beam", ["--distance", "5000"], "too large"),
    ("beam", ["--distance", "5", "--focal-35mm", "26", "--hfov", "70"], "not both"),
    ("beam", ["--distance", "5", "--lux", "300", "--reflectance", "0.8"], "drop one"),
    ("beam", ["--distance", "5", "--response", "banana"], "unknown curve"),
    ("beam", ["--distance", "5", "--ambient", "SMALL"], "same camera"),
])
def test_errors_are_one_line_exit_2(photos, tmp_path, key, extra, message):
    paths, _ = photos
    photo = str(tmp_path / "nope.jpg") if key == "missing" else str(paths[key])
    extra = [str(paths["small"]) if e == "SMALL" else e for e in extra]
    out = tmp_path / "should-not-exist"
    res = CliRunner().invoke(cli, ["analyze", photo, *extra, "--out", str(out)])
    assert res.exit_code == 2, res.output
    assert message in res.output
    assert "Traceback" not in res.output
    assert not out.exists()
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".beamshot-")]


def test_missing_distance_is_usage_error(photos):
    paths, _ = photos
    res = CliRunner().invoke(cli, ["analyze", str(paths["beam"])])
    assert res.exit_code == 2 and "--distance" in res.output


def test_help_lists_commands():
    res = CliRunner().invoke(cli, ["--help"])
    assert res.exit_code == 0 and "analyze" in res.output and "demo" in res.output
    assert "Caution" in res.output


def test_newer_report_schema_refused(tmp_path):
    path = tmp_path / "report.json"
    path.write_text(json.dumps({"schema": "beamshot.report", "schema_version": "2.0"}))
    from beamshot.errors import BeamshotError

    with pytest.raises(BeamshotError, match="newer beamshot"):
        read_report_json(path)


def test_far_field_given_a_photo_is_one_line(photos):
    paths, _ = photos
    res = CliRunner().invoke(cli, ["far-field", str(paths["beam"]), str(paths["beam"])])
    assert res.exit_code == 2 and "not a beamshot report.json" in res.output
    assert "Traceback" not in res.output and len(res.output.strip().splitlines()) == 1


@pytest.mark.parametrize("option, value", [("--head-diameter", "-2"), ("--head-diameter", "0"),
                                           ("--scale-bar-mm", "0"), ("--scale-bar-mm", "-1")])
def test_nonsense_sizes_are_refused(photos, option, value):
    paths, _ = photos
    res = CliRunner().invoke(cli, ["analyze", str(paths["beam"]), "--distance", "5", option, value])
    assert res.exit_code == 2 and "Traceback" not in res.output


def test_report_with_unreadable_schema_version_is_one_line(tmp_path):
    from beamshot.errors import BeamshotError

    bad = tmp_path / "report.json"
    bad.write_text(json.dumps({"schema": "beamshot.report", "schema_version": "abc"}))
    with pytest.raises(BeamshotError, match="schema_version"):
        read_report_json(bad)


def test_an_exact_count_prints_as_a_whole_number():
    # a figure with zero uncertainty and a whole value is a count ("rings found"): no decimals
    from beamshot.figure import Figure

    assert Figure(1.0, 0.0, "", "counted").text() == "1"
    assert Figure(12000.0, 0.0, "", "counted").text() == "12,000"
    assert Figure(2.5, 0.0, "", "m").text() == "2.50"  # not whole: three significant digits as before
