"""Beam specifications and the QA check (beamshot.spec, beamshot.qa, ``beamshot qa``).

The judgement follows the coverage interval y ± k·u of JCGM 100:2008 (6.2.1, U = k·u; k = 2 for
about 95 %, 6.3.3) and the guarded acceptance of JCGM 106:2012 (clause 8, the number from memory):
pass only when the whole interval is inside the tolerance, fail only when it is wholly outside.
"""

import json
from pathlib import Path
import math
import os

import pytest
from click.testing import CliRunner

from beamshot.cli import cli
from beamshot.errors import BeamshotError
from beamshot.qa import FAIL, NOT_MEASURED, PASS, UNDECIDED, check_figures, judge
from beamshot.spec import Limit, parse_spec, read_spec
from beamshot.synth import encode_jpeg, render_photo

from conftest import make_shot

HERE = os.path.dirname(__file__)
EXAMPLE = os.path.join(HERE, os.pardir, "docs", "examples", "spec-reflector.toml")


def fig(value, u=None, status="measured", unit="deg", reason=None):
    return {"value": value, "uncertainty": u, "unit": unit, "status": status, "reason": reason}


HOTSPOT_8_PM_1 = Limit("hotspot_angle", 7.0, 9.0, "deg", "8 ± 1°")


# --------------------------------------------------------------- the judgement, figure by figure

@pytest.mark.parametrize("value,u,k,verdict", [
    (8.0, 0.4, 2, PASS),        # [7.2, 8.8] inside [7, 9]
    (8.0, 0.5, 2, PASS),        # [7.0, 9.0]: limits are closed, touching is inside
    (8.8, 0.2, 2, UNDECIDED),   # [8.4, 9.2] straddles 9
    (7.1, 0.2, 2, UNDECIDED),   # [6.7, 7.5] straddles 7
    (9.5, 0.3, 2, UNDECIDED),   # [8.9, 10.1]: the value is out, the interval is not wholly out
    (10.0, 0.4, 2, FAIL),       # [9.2, 10.8] wholly above 9
    (6.0, 0.4, 2, FAIL),        # [5.2, 6.8] wholly below 7
    (8.7, 0.2, 1, PASS),        # k = 1: [8.5, 8.9] inside
    (8.7, 0.2, 2, UNDECIDED),   # k = 2: [8.3, 9.1] straddles 9
    (8.7, 0.2, 3, UNDECIDED),
])
def test_a_unit_passes_fails_and_is_undecided_as_its_interval_says(value, u, k, verdict):
    c = judge(HOTSPOT_8_PM_1, fig(value, u), k)
    assert c.verdict == verdict, c.why
    assert c.interval == pytest.approx((value - k * u, value + k * u), abs=1e-12)  # JCGM 100 6.2.1: y ± k·u


def test_an_estimate_is_judged_by_its_interval_and_marked():
    c = judge(HOTSPOT_8_PM_1, fig(8.0, 0.3, status="estimate"), 2)
    assert c.verdict == PASS and c.why.startswith("estimate")
    assert judge(HOTSPOT_8_PM_1, fig(8.0, 0.6, status="estimate"), 2).verdict == UNDECIDED


def test_without_uncertainty_or_value_nothing_passes():
    assert judge(HOTSPOT_8_PM_1, fig(8.0, None), 2).verdict == UNDECIDED
    nm = judge(HOTSPOT_8_PM_1, fig(None, None, status="not_measured", reason="the hotspot is clipped"), 2)
    assert nm.verdict == NOT_MEASURED and "clipped" in nm.why
    assert judge(HOTSPOT_8_PM_1, None, 2).verdict == NOT_MEASURED
    assert judge(HOTSPOT_8_PM_1, fig(8.0, 0.1, unit="rad"), 2).verdict == NOT_MEASURED  # never converted


PEAK_MIN = Limit("peak_intensity", 20000.0, math.inf, "cd", "≥ 20000 cd")
PEAK_RANGE = Limit("peak_intensity", 20000.0, 30000.0, "cd", "20000 … 30000 cd")
OFFSET_MAX = Limit("hotspot_offset", -math.inf, 1.0, "deg", "≤ 1°")
OFFSET_MIN = Limit("hotspot_offset", 2.0, math.inf, "deg", "≥ 2°")
TILT_0_PM_5 = Limit("light_tilt", -5.0, 5.0, "deg", "0 ± 5°")


@pytest.mark.parametrize("limit,value,u,status,verdict", [
    (PEAK_MIN, 25000, 1000, "lower_bound", PASS),         # true >= 23000 >= 20000
    (PEAK_MIN, 21000, 1000, "lower_bound", UNDECIDED),    # true >= 19000: may be below the minimum
    (PEAK_RANGE, 25000, 1000, "lower_bound", UNDECIDED),  # true >= 23000 but may exceed 30000
    (PEAK_RANGE, 33000, 1000, "lower_bound", FAIL),       # true >= 31000 > 30000
    (OFFSET_MAX, 0.27, None, "upper_bound", PASS),        # true <= 0.27 <= 1
    (OFFSET_MAX, 1.5, None, "upper_bound", UNDECIDED),    # true <= 1.5: may be under 1 or not
    (OFFSET_MIN, 1.5, 0.1, "upper_bound", FAIL),          # true <= 1.7 < 2
    (OFFSET_MIN, 2.5, None, "upper_bound", UNDECIDED),
    (TILT_0_PM_5, 3.0, None, "upper_bound", PASS),        # an angle: true in [0, 3] inside [-5, 5]
])
def test_a_bound_decides_only_when_its_side_decides(limit, value, u, status, verdict):
    unit = limit.unit
    c = judge(limit, fig(value, u, status=status, unit=unit), 2)
    assert c.verdict == verdict, c.why


def test_a_report_missing_a_figure_is_not_measured_never_pass():
    spec = parse_spec('[figures.ra]\nmax = 4.0\n[figures.hotspot_angle]\ntarget = 8\ntolerance = 1\nunit = "deg"\n')
    unit = check_figures(spec, {"hotspot_angle": fig(8.0, 0.2)}, name="x", source="x")
    assert [c.verdict for c in unit.checks] == [NOT_MEASURED, PASS]
    assert unit.verdict == NOT_MEASURED


# --------------------------------------------------------------- specs that are refused

GOOD = '''[spec]
name = "test"

[figures.hotspot_angle]
target = 8.0
tolerance = 1.0
unit = "deg"

[figures.ra]
max = 4.0
'''


@pytest.mark.parametrize("old,new,line,fix", [
    ('tolerance = 1.0', 'tolerance = 1.0\ncolour = "red"', 7, r"unknown key 'colour'.*known: target"),
    ('[figures.ra]', '[figures.hotspot_angel]', 9, r"no figure is called 'hotspot_angel'; did you mean 'hotspot_angle'"),
    ('unit = "deg"', 'unit = "rad"', 7, r"reported in deg, not 'rad'; write the limits in deg"),
    ('unit = "deg"\n', '', 4, r'state the unit of its limits, unit = "deg"'),
    ('tolerance = 1.0', 'tolerance = -1.0', 6, r"tolerance must be above 0"),
    ('tolerance = 1.0', 'tolerance = [1.0, 2.0]', 6, r"lower deviation must be 0 or negative: write \[-1, 2\]"),
    ('tolerance = 1.0', 'tolerance = [-1.0, -2.0]', 6, r"upper deviation must be 0 or positive"),
    ('max = 4.0', 'max = 4.0\nmin = 5.0', 11, r"min 5 is above max 4; swap them"),
    ('max = 4.0', 'max = 4.0\ntarget = 3.0', 11, r"either target and tolerance, or min and/or max"),
    ('name = "test"', 'name = "test"\ncoverage_factor = 0', 3, r"coverage_factor must be a number above 0"),
    ('[spec]', '[specs]', 1, r"unknown table or key 'specs'"),
    ('max = 4.0', 'max = "four"', 10, r"max must be a finite number"),
])
def test_a_bad_spec_is_refused_in_one_line_naming_the_line_and_fix(old, new, line, fix):
    text = GOOD.replace(old, new, 1)
    assert text != GOOD
    with pytest.raises(BeamshotError, match=fix) as err:
        parse_spec(text, source="s.toml")
    msg = str(err.value)
    assert "\n" not in msg and msg.startswith(f"s.toml, line {line}: "), msg


def test_not_toml_and_no_figures_are_refused():
    with pytest.raises(BeamshotError, match=r"not valid TOML"):
        parse_spec("[figures.ra\nmax = 4", source="s.toml")
    with pytest.raises(BeamshotError, match=r"states no figure"):
        parse_spec('[spec]\nname = "x"\n', source="s.toml")


def test_inline_tables_and_the_documented_example_parse():
    spec = parse_spec('[figures]\nra = { max = 4.0 }\nfield_angle = { target = 17, tolerance = [-2, 3], unit = "°" }\n')
    assert [(lim.figure, lim.low, lim.high) for lim in spec.limits] == [("ra", -math.inf, 4.0),
                                                                       ("field_angle", 15.0, 20.0)]
    with pytest.raises(BeamshotError, match=r"line 2: .*unknown key 'maxi'"):
        parse_spec('[figures]\nra = { maxi = 4.0 }\n', source="s")
    ex = read_spec(EXAMPLE)
    assert ex.coverage_factor == 2.0 and len(ex.limits) == 7
    assert {lim.figure for lim in ex.limits} == {"hotspot_angle", "field_angle", "peak_intensity", "ra",
                                                 "hotspot_offset", "ring_score", "hotspot_ellipticity"}


# --------------------------------------------------------------- the command on reports, folders and summaries

def _report(figures: dict, name="unit") -> dict:
    return {"schema": "beamshot.report", "schema_version": "1.1", "settings": {"light_name": name},
            "figures": figures}


SPEC = '''[spec]
name = "two limits"
[figures.hotspot_angle]
target = 8.0
tolerance = 1.0
unit = "deg"
[figures.peak_intensity]
min = 10000
unit = "cd"
'''


def _write(path, data):
    os.makedirs(os.path.dirname(path), exist_ok=True)
    with open(path, "w") as fh:
        json.dump(data, fh)


@pytest.mark.parametrize("hot,peak,code,verdict", [
    (fig(8.0, 0.2), fig(12000, 500, unit="cd"), 0, "pass"),
    (fig(8.0, 0.2), fig(8000, 500, unit="cd"), 1, "fail"),
    (fig(8.9, 0.2), fig(12000, 500, unit="cd"), 4, "undecided"),
    (fig(8.0, 0.2), fig(None, None, "not_measured", "cd", "no absolute scale"), 4, "not measured"),
])
def test_command_exit_codes_and_result_file(tmp_path, hot, peak, code, verdict):
    spec = tmp_path / "spec.toml"
    spec.write_text(SPEC)
    _write(str(tmp_path / "a" / "report.json"), _report({"hotspot_angle": hot, "peak_intensity": peak}))
    out = tmp_path / "qa.json"
    res = CliRunner().invoke(cli, ["qa", str(spec), str(tmp_path / "a"), "--result", str(out)])
    assert res.exit_code == code, res.output
    doc = json.loads(out.read_text())
    assert doc["verdict"] == verdict and doc["exit_code"] == code and doc["schema"] == "beamshot.qa"
    assert "IEC 62471" in " ".join(doc["cautions"])
    assert f"[{verdict.upper()}] unit" in res.output


def test_folders_and_batch_summaries(tmp_path):
    spec = tmp_path / "spec.toml"
    spec.write_text(SPEC)
    good = _report({"hotspot_angle": fig(8.0, 0.2), "peak_intensity": fig(12000, 500, unit="cd")}, "good")
    bad = _report({"hotspot_angle": fig(10.5, 0.2), "peak_intensity": fig(12000, 500, unit="cd")}, "bad")
    _write(str(tmp_path / "sets" / "p1" / "report.json"), good)
    _write(str(tmp_path / "sets" / "p2" / "report.json"), bad)
    res = CliRunner().invoke(cli, ["qa", str(spec), str(tmp_path / "sets")])
    assert res.exit_code == 1 and "[PASS] good" in res.output and "[FAIL] bad" in res.output

    # a batch summary as docs/batch.md describes it: summary.json and summary.csv
    items = []
    for row, (name, rep, status) in enumerate([("good", good, "done"), ("bad", bad, "done"), ("broken", None, "failed")], 1):
        figs = {} if rep is None else {k: {p: v.get(p) for p in ("value", "uncertainty", "unit", "status")}
                                       for k, v in rep["figures"].items()}
        items.append({"name": name, "row": row, "status": status, "reason": "" if rep else "no such file",
                      "figures": figs})
    _write(str(tmp_path / "batch" / "summary.json"), {"beamshot": "0.1.0", "items_total": 3, "counts": {},
                                                      "figures": {}, "items": items})
    head = ["name", "row", "status", "reason", "folder"]
    keys = ["hotspot_angle", "peak_intensity"]
    for k in keys:
        head += [k, f"{k}_uncertainty", f"{k}_unit", f"{k}_status"]
    lines = [",".join(head)]
    for it in items:
        cells = [it["name"], str(it["row"]), it["status"], it["reason"], ""]
        for k in keys:
            f = it["figures"].get(k) or {}
            cells += ["" if f.get(p) is None else str(f.get(p)) for p in ("value", "uncertainty", "unit", "status")]
        lines.append(",".join(cells))
    (tmp_path / "summary.csv").write_text("\n".join(lines) + "\n")
    for source in (tmp_path / "batch", tmp_path / "summary.csv"):
        out = tmp_path / "r.json"
        res = CliRunner().invoke(cli, ["qa", str(spec), str(source), "--result", str(out), "--detail"])
        assert res.exit_code == 1, res.output
        doc = json.loads(out.read_text())
        assert [u["verdict"] for u in doc["units"]] == ["pass", "fail", "not measured"]
        assert "no such file" in doc["units"][2]["checks"][0]["why"]


def test_bad_inputs_exit_2_in_one_line(tmp_path):
    spec = tmp_path / "spec.toml"
    spec.write_text(SPEC.replace('unit = "cd"', 'unit = "kcd"'))
    res = CliRunner().invoke(cli, ["qa", str(spec), str(tmp_path)])
    assert res.exit_code == 2 and "line 9" in res.output and len(res.output.strip().splitlines()) == 1
    spec.write_text(SPEC)
    (tmp_path / "empty").mkdir()
    res = CliRunner().invoke(cli, ["qa", str(spec), str(tmp_path / "empty")])
    assert res.exit_code == 2 and "no report.json" in res.output
    res = CliRunner().invoke(cli, ["qa", str(spec)])
    assert res.exit_code == 0 and "8 ± 1°" in res.output and "≥ 10,000 cd" in res.output


# --------------------------------------------------------------- one real analysis of a synthetic photo

@pytest.fixture(scope="module")
def analysed(tmp_path_factory, reflector_beam):
    folder = tmp_path_factory.mktemp("qa-photo")
    scene, cam, truth = make_shot(reflector_beam, width_px=800, height_px=600)
    photo = folder / "beam.jpg"
    photo.write_bytes(encode_jpeg(render_photo(reflector_beam, scene, cam, seed=3), cam))
    out = folder / "rep"
    res = CliRunner().invoke(cli, ["analyze", str(photo), "--distance", "5", "--lux",
                                   f"{truth['peak_lux_on_wall']:.0f}", "--name", "prototype 1", "--out", str(out)])
    assert res.exit_code == 0, res.output
    return out, truth


def test_a_real_analysis_against_limits_set_from_the_truth(analysed, tmp_path):
    out, truth = analysed
    # truth from synth.truth_figures (dense integration of the analytic pattern)
    spec = tmp_path / "spec.toml"
    spec.write_text(f'''[figures.hotspot_angle]
target = {truth["hotspot_angle_deg"]:.3f}
tolerance = 1.5
unit = "deg"
[figures.peak_intensity]
min = {2 * truth["peak_cd"]:.0f}
unit = "cd"
[figures.field_angle]
max = {truth["field_angle_deg"]:.3f}
unit = "deg"
[figures.ring_score]
max = 0.05
[figures.centre_hole_depth]
max = 0.05
''')
    res_path = tmp_path / "r.json"
    res = CliRunner().invoke(cli, ["qa", str(spec), str(out / "report.json"), "--result", str(res_path)])
    doc = json.loads(res_path.read_text())
    verdicts = {c["figure"]: c["verdict"] for c in doc["units"][0]["checks"]}
    # hotspot within ±1.5° of the truth: its interval (u ≈ 0.35°) fits; peak at half of twice the
    # minimum: wholly below; field angle limit at its true value: a measurement whose interval covers
    # the truth straddles it; the pattern has no ring and no centre hole (synth.HotspotSpillBeam with
    # none), so the shape stage's bounds stay under 5 %
    assert verdicts == {"hotspot_angle": "pass", "peak_intensity": "fail", "field_angle": "undecided",
                        "ring_score": "pass", "centre_hole_depth": "pass"}, res.output
    assert res.exit_code == 1
    c = {c["figure"]: c for c in doc["units"][0]["checks"]}["field_angle"]
    assert c["interval"][0] < truth["field_angle_deg"] < c["interval"][1]


def test_shape_figures_are_read_from_the_report_and_from_a_batch_items_report(tmp_path, monkeypatch):
    # the shape and artefact figures live in report.json "shape" and in vocabulary.SHAPE_FIGURES;
    # a ring score is a fraction with no unit (docs/artefacts.md)
    from beamshot import vocabulary
    from beamshot.vocabulary import Term

    shape_terms = dict(getattr(vocabulary, "SHAPE_FIGURES", {}))
    shape_terms.setdefault("ring_score", Term("ring_score", "ring score", "", "largest ring amplitude"))
    monkeypatch.setattr(vocabulary, "SHAPE_FIGURES", shape_terms, raising=False)
    spec = tmp_path / "spec.toml"
    spec.write_text('[figures.ring_score]\nmax = 0.05\n[figures.hotspot_angle]\ntarget = 8\ntolerance = 1\n'
                    'unit = "deg"\n')
    smooth = _report({"hotspot_angle": fig(8.0, 0.2)}, "smooth")
    smooth["shape"] = {"ring_score": fig(0.012, None, status="upper_bound", unit="")}
    ringed = _report({"hotspot_angle": fig(8.0, 0.2)}, "ringed")
    ringed["shape"] = {"ring_score": fig(0.09, 0.01, unit="")}
    _write(str(tmp_path / "batch" / "items" / "a" / "report.json"), smooth)
    _write(str(tmp_path / "batch" / "items" / "b" / "report.json"), ringed)
    items = [{"name": r["settings"]["light_name"], "row": i, "status": "done", "reason": "", "folder": f"items/{f}",
              "figures": {"hotspot_angle": {p: r["figures"]["hotspot_angle"][p] for p in
                                            ("value", "uncertainty", "unit", "status")}}}
             for i, (r, f) in enumerate([(smooth, "a"), (ringed, "b")], 1)]
    _write(str(tmp_path / "batch" / "summary.json"), {"items_total": 2, "counts": {}, "figures": {}, "items": items})
    for source in (tmp_path / "batch" / "items", tmp_path / "batch"):
        out = tmp_path / "r.json"
        res = CliRunner().invoke(cli, ["qa", str(spec), str(source), "--result", str(out)])
        doc = json.loads(out.read_text())
        assert [u["verdict"] for u in doc["units"]] == ["pass", "fail"], res.output
        assert res.exit_code == 1


# --------------------------------------------------------------- damaged reports: a verdict or one line, never a crash

def _damaged_reports():
    from hypothesis import strategies as st

    junk = st.one_of(st.none(), st.booleans(), st.integers(-10**30, 10**30), st.floats(allow_nan=False),
                     st.text(max_size=8), st.lists(st.integers(), max_size=3), st.dictionaries(st.text(max_size=4),
                                                                                              st.integers(), max_size=2))
    part = st.sampled_from(["value", "uncertainty", "unit", "status", "reason"])
    figure = st.sampled_from(["hotspot_angle", "peak_intensity", "ra"])
    return st.lists(st.tuples(figure, part, junk), max_size=4), st.sampled_from(["figures", "settings", "shape", None])


def test_damaged_reports_give_a_verdict_or_one_line(tmp_path):
    from hypothesis import given, settings

    from beamshot.qa import check_sources

    spec = parse_spec(SPEC + "[figures.ra]\nmax = 4.0\n")
    edits, top = _damaged_reports()
    base = _report({"hotspot_angle": fig(8.0, 0.2), "peak_intensity": fig(12000, 500, unit="cd"),
                    "ra": fig(2.0, 0.1, unit="")})

    @settings(max_examples=150, deadline=None, derandomize=True)
    @given(edits, top)
    def run(changes, drop):
        rep = json.loads(json.dumps(base))
        for key, part, value in changes:
            rep["figures"][key][part] = value
        if drop:
            rep[drop] = [1]
        path = tmp_path / "report.json"
        path.write_text(json.dumps(rep))
        try:
            result = check_sources(spec, [path])
        except BeamshotError as exc:
            assert "\n" not in str(exc) and str(exc).startswith(str(path))
            return
        assert result.verdict in ("pass", "fail", "undecided", "not measured")
        json.dumps(result.to_dict(), allow_nan=False)

    run()


def test_analyze_with_a_spec_puts_the_verdict_in_every_output(analysed, tmp_path):
    # the same judgement as 'beamshot qa' on the same figures, in the table, report.json and report.html
    import jsonschema

    from beamshot.report.output import read_report_json

    out, truth = analysed
    spec = tmp_path / "spec.toml"
    spec.write_text(f'[spec]\nname = "unit check"\n[figures.hotspot_angle]\ntarget = {truth["hotspot_angle_deg"]:.3f}\n'
                    'tolerance = 1.5\nunit = "deg"\n[figures.peak_intensity]\n'
                    f'min = {2 * truth["peak_cd"]:.0f}\nunit = "cd"\n')
    photo = out.parent / "beam.jpg"
    rep = tmp_path / "rep"
    res = CliRunner().invoke(cli, ["analyze", str(photo), "--distance", "5", "--lux", f"{truth['peak_lux_on_wall']:.0f}",
                                   "--spec", str(spec), "--out", str(rep)])
    assert res.exit_code == 0, res.output
    assert "specification unit check: FAIL" in res.output
    data = read_report_json(rep / "report.json")
    jsonschema.validate(data, json.loads((Path(__file__).parent.parent / "beamshot/report/schema.json").read_text()))
    assert [c["verdict"] for c in data["qa"]["checks"]] == ["pass", "fail"] and data["qa"]["verdict"] == "fail"
    qa_run = CliRunner().invoke(cli, ["qa", str(spec), str(rep / "report.json"), "--result", str(tmp_path / "q.json")])
    unit = json.loads((tmp_path / "q.json").read_text())["units"][0]
    assert [c["verdict"] for c in unit["checks"]] == [c["verdict"] for c in data["qa"]["checks"]]
    assert qa_run.exit_code == 1
    page = (rep / "report.html").read_text(encoding="utf-8")
    assert 'data-verdict="fail"' in page and 'data-qa="peak_intensity"' in page
    # a spec with a mistake is refused before anything is analysed
    spec.write_text('[figures.hotspot_angel]\nmax = 9\nunit = "deg"\n')
    bad = CliRunner().invoke(cli, ["analyze", str(photo), "--distance", "5", "--spec", str(spec)])
    assert bad.exit_code == 2 and "hotspot_angel" in bad.output and "figure" not in bad.output.split("\n", 1)[1]


@pytest.mark.skipif(not os.path.isdir("/proc"), reason="needs a folder nobody can create files in")
def test_an_unwritable_result_file_is_refused_before_any_verdict(analysed, tmp_path):
    # /proc refuses new files even to root, whatever its permission bits say
    out, _ = analysed
    spec = tmp_path / "spec.toml"
    spec.write_text('[figures.hotspot_angle]\nmax = 90\nunit = "deg"\n')
    res = CliRunner().invoke(cli, ["qa", str(spec), str(out / "report.json"), "--result", "/proc/qa.json"])
    assert res.exit_code == 2 and "PASS" not in res.output and "cannot be written there" in res.output
