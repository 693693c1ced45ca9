"""Comparing lights (beamshot.compare): equal exposure from calibrated maps, significance at k = 2,
honest mixing of absolute and relative reports, one-line refusals.  Synthetic photos with known
truth come from beamshot.synth (inverse-square and cosine laws, Lambertian wall, ISO 12232
exposure, sRGB, JPEG)."""

import json
import os
import shutil
from dataclasses import replace

import numpy as np
import pytest
from click.testing import CliRunner

from beamshot import analyze
from beamshot.beammap import BeamMap, directions
from beamshot.cli import cli
from beamshot.compare import Light, build_comparison, compare_figures, srgb_tone
from beamshot.photo import decode_photo
from beamshot.report.output import write_report
from beamshot.synth import HotspotSpillBeam, encode_jpeg, render_photo

from conftest import make_shot

#: A reflector beam, and the same beam at half the intensity, and one with a wider hotspot.
BEAM_A = HotspotSpillBeam(peak_cd=12000.0, hotspot_fwhm_deg=8.0, spill_fraction=0.02, cutoff_deg=30.0,
                          edge_width_deg=0.6)
BEAM_HALF = replace(BEAM_A, peak_cd=6000.0)
BEAM_WIDE = replace(BEAM_A, hotspot_fwhm_deg=11.0)
SMALL = dict(width_px=480, height_px=360, focal_35mm_mm=18)


def _analysis(pattern, *, target, seed, truth=None, **kw):
    scene, cam, t = make_shot(pattern, target=target, **SMALL)
    photo = decode_photo(encode_jpeg(render_photo(pattern, scene, cam, seed=seed), cam, quality=90), "synthetic.jpg")
    lux = round(t["peak_lux_on_wall"])
    return analyze(photo, distance_m=scene.distance_m, lux_at_peak=lux, **kw), photo, t


def _light(report, label):
    return Light(label, f"/nowhere/{label}/report.json", report.to_dict(), report.beam)


@pytest.fixture(scope="module")
def reports():
    a1, photo_a, truth_a = _analysis(BEAM_A, target=0.8, seed=3, light_name="prototype 1")
    a2, _, _ = _analysis(BEAM_A, target=0.2, seed=4)  # the same light, 2 stops less exposure
    half, _, truth_half = _analysis(BEAM_HALF, target=0.8, seed=5)
    wide, _, truth_wide = _analysis(BEAM_WIDE, target=0.8, seed=6, light_name="prototype 2")
    rel = analyze(photo_a, distance_m=5.0, use_exif_scale=False)
    return {"a1": a1, "a2": a2, "half": half, "wide": wide, "rel": rel,
            "truth_a": truth_a, "truth_half": truth_half, "truth_wide": truth_wide}


def test_two_stops_apart_give_the_same_tiles(reports):
    comp = build_comparison([_light(reports["a1"], "0 EV"), _light(reports["a2"], "-2 EV")])
    assert comp.absolute
    w1, w2 = comp.wall_tiles
    lit = (w1 > 0.2) & (w2 > 0.2)  # the hotspot and the spill, clear of the dark wall
    assert lit.sum() > 2000
    rel = np.abs(w2[lit] - w1[lit]) / w1[lit]
    # the criterion: pixel values agree within 2 % (typical pixel; single pixels carry the
    # photo's noise, 2 stops darker); the hotspot itself and the mean level agree within 2 % too
    assert np.median(rel) <= 0.02
    assert abs(np.nanmax(w2) / np.nanmax(w1) - 1) <= 0.02
    assert abs(w2[lit].mean() / w1[lit].mean() - 1) <= 0.02
    # the exposure is the brightest light's: one of the two tiles reaches full scale, no per-light exposure
    assert max(np.nanmax(w1), np.nanmax(w2)) == pytest.approx(1.0, abs=1e-12)


def test_half_the_intensity_is_as_dark_as_the_tone_curve_says(reports):
    comp = build_comparison([_light(reports["a1"], "full"), _light(reports["half"], "half")])
    ex = comp.exposure
    assert ex["full_scale_light"] == "full" and not ex["normalised_to_each_peak"]
    # the brightest hotspot is at full scale (the exposure rule); the other at sRGB(E_half / E_full)
    full, half = (float(np.nanmax(t)) for t in comp.wall_tiles)
    assert full == pytest.approx(1.0, abs=1e-12)
    ratio = reports["truth_half"]["peak_lux_on_wall"] / reports["truth_a"]["peak_lux_on_wall"]  # 0.5 by construction
    # IEC 61966-2-1 sRGB encoding: V = 1.055 L^(1/2.4) - 0.055 for L > 0.0031308
    predicted = 1.055 * ratio ** (1 / 2.4) - 0.055
    assert predicted == pytest.approx(0.7353569830524495, rel=1e-12)  # the formula at L = 0.5
    assert half == pytest.approx(predicted, rel=0.02)
    # the angular maps share one scale: their peaks keep the intensity ratio (cd)
    assert np.nanmax(comp.angular_tiles[1]) / np.nanmax(comp.angular_tiles[0]) == pytest.approx(ratio, rel=0.03)


def test_srgb_tone_follows_iec_61966_2_1():
    # REFERENCES appendix A12 (IEC 61966-2-1): encode(0.18) = 0.461356129500; linear segment below 0.0031308
    assert float(srgb_tone(0.18)) == pytest.approx(0.4613561295, abs=1e-12)
    assert float(srgb_tone(0.001)) == pytest.approx(12.92 * 0.001, abs=1e-12)
    assert float(srgb_tone(2.0)) == pytest.approx(1.0, abs=1e-12) and np.isnan(srgb_tone(np.nan))


def test_same_light_twice_is_not_distinguishable(reports):
    diffs = compare_figures([_light(reports["a1"], "0 EV"), _light(reports["a2"], "-2 EV")])
    compared = [d for d in diffs if d["verdict"] != "not compared"]
    assert len(compared) >= 10
    assert all(d["verdict"] == "not distinguishable" for d in compared), \
        [(d["figure"], d["difference"], d["combined_uncertainty"]) for d in compared if d["verdict"] == "significant"]
    for d in compared:
        assert d["k"] == 2 and abs(d["difference"]) <= 2 * d["combined_uncertainty"]


def test_different_hotspots_are_significant(reports):
    a, b = reports["a1"], reports["wide"]
    diffs = {d["figure"]: d for d in compare_figures([_light(a, "8 deg"), _light(b, "11 deg")])}
    d = diffs["hotspot_angle"]
    # truth: the two hotspot angles differ by well over 5 combined uncertainties
    true_diff = reports["truth_wide"]["hotspot_angle_deg"] - reports["truth_a"]["hotspot_angle_deg"]
    assert true_diff > 5 * d["combined_uncertainty"]
    assert d["verdict"] == "significant" and d["difference"] == pytest.approx(true_diff, rel=0.1)
    # combined uncertainty of independent analyses (GUM 5.1.2): sqrt(u_a^2 + u_b^2)
    ua, ub = a["hotspot_angle"].uncertainty, b["hotspot_angle"].uncertainty
    assert d["combined_uncertainty"] == pytest.approx(np.hypot(ua, ub), rel=1e-5)  # report.json keeps 6 digits
    # the same peak intensity (both 12 000 cd) is not distinguishable
    assert diffs["peak_intensity"]["verdict"] == "not distinguishable"


def test_bounds_and_missing_figures_are_never_compared(reports):
    a = _light(reports["a1"], "a")
    data = json.loads(json.dumps(reports["a2"].to_dict()))
    data["figures"]["peak_intensity"].update(status="lower_bound", uncertainty=None, reason="clipped")
    data["figures"]["ra"].update(status="not_measured", value=None, uncertainty=None, reason="clipped hotspot")
    b = Light("b", "/nowhere/b/report.json", data, reports["a2"].beam)
    diffs = {d["figure"]: d for d in compare_figures([a, b])}
    assert diffs["peak_intensity"]["verdict"] == "not compared" and "bound" in diffs["peak_intensity"]["reason"]
    assert diffs["peak_intensity"]["difference"] is None
    assert diffs["ra"]["verdict"] == "not compared" and "not measured for b" in diffs["ra"]["reason"]


def test_absolute_and_relative_are_normalised_with_a_note(reports):
    comp = build_comparison([_light(reports["a1"], "in cd"), _light(reports["rel"], "relative")])
    assert not comp.absolute and comp.exposure["normalised_to_each_peak"]
    assert any("normalised to its own peak" in n and "relative" in n for n in comp.notes)
    # each map divided by its own peak: both hotspots at full scale, the same shape gives the same tiles
    w1, w2 = comp.wall_tiles
    assert np.nanmax(w1) == pytest.approx(1.0, rel=1e-6) and np.nanmax(w2) == pytest.approx(1.0, rel=1e-6)
    diffs = {d["figure"]: d for d in comp.differences}
    assert diffs["peak_intensity"]["verdict"] == "not compared"  # relative: no cd
    assert diffs["hotspot_angle"]["verdict"] == "not distinguishable"  # shapes are still compared


def test_different_grids_are_noted(reports):
    a = _light(reports["a1"], "fine")
    beam = reports["wide"].beam
    theta = (np.arange(150) + 0.5) * np.radians(0.2)  # a coarser grid, ending at 30 deg
    phi = (np.arange(90) + 0.5) * 2 * np.pi / 90
    tt, pp = np.meshgrid(theta, phi, indexing="ij")
    coarse = BeamMap(theta=theta, phi=phi, intensity=beam.sample(directions(tt, pp)),
                     saturated=np.zeros(tt.shape, bool), distance_m=5.0, unit="cd")
    comp = build_comparison([a, Light("coarse", "/nowhere/c/report.json", reports["wide"].to_dict(), coarse)])
    assert any("different grids" in n for n in comp.notes)
    assert any("end before the common half angle" in n for n in comp.notes)
    outside = np.hypot(*np.meshgrid(np.linspace(-1, 1, comp.wall_tiles[1].shape[0]), np.linspace(-1, 1, 301)))
    assert np.all(np.isnan(comp.angular_tiles[1][outside > 0.99]))  # beyond its map: not covered, never dark


@pytest.fixture(scope="module")
def folders(reports, tmp_path_factory):
    root = tmp_path_factory.mktemp("lights")
    for key in ("a1", "wide", "rel"):
        write_report(reports[key], root / key, picture=False)
    return root


def test_compare_command_writes_the_set(folders, tmp_path):
    out = tmp_path / "cmp"
    args = ["compare", str(folders / "a1"), str(folders / "wide" / "report.json"), "--out", str(out),
            "--label", "<script>alert(1)</script>", "--label", "cost $5 & up"]
    res = CliRunner().invoke(cli, args)
    assert res.exit_code == 0, res.output
    data = json.loads((out / "comparison.json").read_text())
    assert data["schema"] == "beamshot.comparison" and data["schema_version"] == "1.0" and data["absolute"]
    assert [x["label"] for x in data["lights"]] == ["<script>alert(1)</script>", "cost $5 & up"]
    assert (out / data["lights"][1]["report"]).resolve() == (folders / "wide" / "report.json").resolve()
    fig = data["lights"][0]["figures"]["hotspot_angle"]
    assert set(fig) >= {"value", "uncertainty", "unit", "status", "label"}
    assert {d["verdict"] for d in data["differences"]} <= {"significant", "not distinguishable", "not compared"}
    # every key written is documented in docs/compare.md (the HTML page and other readers rely on it)
    from pathlib import Path

    doc = (Path(__file__).resolve().parents[1] / "docs" / "compare.md").read_text()
    for part in (data, data["exposure"], data["lights"][0], data["differences"][0], data["pictures"]):
        for key in part:
            assert f"`{key}`" in doc or f'"{key}"' in doc, key
    pics = data["pictures"]
    assert pics["difference"] == "difference.png" and len(pics["cards"]) == 2
    from PIL import Image

    for name in [pics["sheet"], pics["profiles"], pics["difference"], pics["reach"], *pics["cards"]]:
        with Image.open(out / name) as im:
            im.verify()
    with Image.open(out / pics["cards"][0]) as im:
        assert im.size == (1080, 1350)
    if (out / "comparison.html").exists():  # the HTML page, when the package has it, escapes the label
        assert "<script>alert(1)</script>" not in (out / "comparison.html").read_text()
    # the same folder again with a mixed set: replaced whole (no reach picture is left from the first set)
    res = CliRunner().invoke(cli, ["compare", str(folders / "a1"), str(folders / "rel"), "--out", str(out)])
    assert res.exit_code == 0, res.output
    assert "normalised to each light's own peak" in res.output
    data = json.loads((out / "comparison.json").read_text())
    assert data["absolute"] is False and data["pictures"]["reach"] is None and not (out / "reach.png").exists()
    assert data["exposure"]["full_scale"] is None and data["exposure"]["map_scale"]["unit"] == "fraction of peak"
    # a folder holding files beamshot did not write is refused and left alone
    (out / "notes.txt").write_text("mine")
    res = CliRunner().invoke(cli, args)
    assert res.exit_code == 2 and "did not write" in res.output and (out / "notes.txt").exists()


def _one_line_refusal(args, *needles):
    res = CliRunner().invoke(cli, args)
    assert res.exit_code == 2, res.output
    lines = res.output.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("beamshot: error:"), res.output
    for n in needles:
        assert n in lines[0], lines[0]


def test_refusals_are_one_line(folders, tmp_path):
    a = str(folders / "a1")
    out = ["--out", str(tmp_path / "x")]
    _one_line_refusal(["compare", a, *out], "1 report given", "2 to 12")
    _one_line_refusal(["compare", *[a] * 13, *out], "13 reports given", "2 to 12")
    _one_line_refusal(["compare", a, a, a, "--label", "only one", *out], "1 --label for 3 reports")
    empty = tmp_path / "empty"
    empty.mkdir()
    _one_line_refusal(["compare", a, str(empty), *out], "no report.json")
    newer = tmp_path / "newer"
    shutil.copytree(folders / "a1", newer)
    data = json.loads((newer / "report.json").read_text())
    data["schema_version"] = "2.0"
    (newer / "report.json").write_text(json.dumps(data))
    _one_line_refusal(["compare", a, str(newer), *out], "newer beamshot")
    data["schema"] = "something.else"
    (newer / "report.json").write_text(json.dumps(data))
    _one_line_refusal(["compare", a, str(newer), *out], "not a beamshot report")
    nomap = tmp_path / "nomap"
    shutil.copytree(folders / "a1", nomap)
    (nomap / "intensity-map.npz").unlink()
    _one_line_refusal(["compare", a, str(nomap), *out], "no intensity map")
    assert not (tmp_path / "x").exists()


def test_same_meter_cancels_the_shared_term(reports):
    # GUM 5.2.2 with correlation 1: a term that is the same error in both enters as the difference of
    # its contributions, so two equal contributions of 500 cd leave sqrt(2 * 600^2 - 2 * 500^2)
    def light(label):
        data = json.loads(json.dumps(reports["a1"].to_dict()))
        data["calibration"]["absolute_scale"]["kind"] = "lux_meter"
        data["figures"]["peak_intensity"].update(value=10000.0, uncertainty=600.0, status="measured",
                                                 budget={"lux meter": 500.0, "noise": float(np.sqrt(600**2 - 500**2))})
        return Light(label, f"/nowhere/{label}/report.json", data, reports["a1"].beam)

    pair = [light("a"), light("b")]
    independent = {d["figure"]: d for d in compare_figures(pair)}["peak_intensity"]
    shared = {d["figure"]: d for d in compare_figures(pair, same_meter=True)}["peak_intensity"]
    assert independent["combined_uncertainty"] == pytest.approx(np.sqrt(2) * 600.0, rel=1e-9)
    assert shared["combined_uncertainty"] == pytest.approx(np.sqrt(2 * 600.0**2 - 2 * 500.0**2), rel=1e-9)


@pytest.mark.filterwarnings("ignore:.*Machado et al.*")
@pytest.mark.parametrize("deficiency", ["Protanomaly", "Deuteranomaly", "Tritanomaly"])
def test_ratio_colours_stay_apart_for_colour_vision_deficiency(deficiency):
    # Machado, Oliveira & Fernandes 2009 simulation (colour-science's matrix_cvd_Machado2009, severity 1),
    # CIE 1976 L*a*b* distances (CIE 15:2018): the two ends of the ratio map and each end against the
    # middle stay far apart (Delta E > 20, a clearly visible difference, common practice)
    colour = pytest.importorskip("colour")
    from beamshot.report.compare_plots import ratio_cmap

    cmap = ratio_cmap()
    srgb = np.array([cmap(x)[:3] for x in (0.0, 0.5, 1.0)])
    linear = colour.models.eotf_sRGB(srgb)  # IEC 61966-2-1 decoding
    seen = np.clip(linear @ colour.matrix_cvd_Machado2009(deficiency, 1.0).T, 0, 1)
    lab = colour.XYZ_to_Lab(colour.sRGB_to_XYZ(colour.models.eotf_inverse_sRGB(seen)))
    de = lambda i, j: float(np.linalg.norm(lab[i] - lab[j]))  # noqa: E731
    assert de(0, 2) > 20 and de(0, 1) > 20 and de(1, 2) > 20


def test_same_names_are_numbered_with_one_note(reports):
    comp = build_comparison([_light(reports["a1"], "p"), _light(reports["a2"], "p"), _light(reports["half"], "p")])
    assert [x.label for x in comp.lights] == ["p", "p #2", "p #3"]
    assert sum("same name" in n for n in comp.notes) == 1


def test_wall_view_follows_the_cosine_cubed_law_and_keeps_up_at_the_top():
    from beamshot.compare import angular_intensity, wall_illuminance

    from conftest import analytic_map

    # REFERENCES appendix A4 (inverse-square and cosine laws, E = I cos^3(theta) / D^2):
    # 1000 cd, D = 5 m, theta = 30 deg -> 25.9808 lx
    uniform = analytic_map(lambda t, p: np.full_like(t, 1000.0), theta_max_deg=60.0)
    half = 5.0 * np.tan(np.radians(30.0))
    e = wall_illuminance(uniform, half, 5.0, n=3)  # pixels at -half, 0, +half
    assert e[1, 2] == pytest.approx(25.9808, abs=1e-4) and e[1, 1] == pytest.approx(1000 / 25, abs=1e-9)
    # a beam brighter upward (phi = 90 deg, counter-clockwise from the right seen from behind the light)
    # is brighter in row 0 of both tiles, and brighter to the right (phi = 0) in the last column
    upward = analytic_map(lambda t, p: 1000.0 * (1 + 0.5 * np.sin(p) + 0.2 * np.cos(p)), theta_max_deg=60.0)
    for tile in (wall_illuminance(upward, 2.0, 5.0, n=101), angular_intensity(upward, 20.0, n=101)):
        assert tile[2, 50] > tile[-3, 50] and tile[50, -3] > tile[50, 2]


def test_colour_figures_are_compared_when_both_lights_have_colour(tmp_path):
    # the same colour photo analysed twice: its colour figures are compared, and not distinguishable
    from beamshot import analyze
    from beamshot.compare import compare
    from beamshot.report.output import write_report
    from beamshot.vocabulary import COLOUR_FIGURES

    images = os.path.join(os.path.dirname(__file__), "..", "sample_images")
    rep = analyze(os.path.join(images, "proto-4-warm-spill-ring.jpg"), distance_m=4.0, lux_at_peak=437.0, colour=True)
    write_report(rep, tmp_path / "a", picture=False)
    write_report(rep, tmp_path / "b", picture=False)
    comp = compare([tmp_path / "a", tmp_path / "b"], out_dir=tmp_path / "cmp")
    colour_rows = [d for d in comp.differences if d["figure"] in COLOUR_FIGURES]
    assert {d["figure"] for d in colour_rows} >= {"hotspot_cct", "spill_cct", "zones_max_delta_uv"}
    assert all(d["verdict"] == "not distinguishable" and d["difference"] == 0 for d in colour_rows)
    data = json.loads((tmp_path / "cmp" / "comparison.json").read_text(encoding="utf-8"))
    assert data["lights"][0]["figures"]["hotspot_cct"]["unit"] == "K"
