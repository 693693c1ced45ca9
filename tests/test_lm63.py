"""IES LM-63 files: export of the measured I(theta, phi), reading back, layout and flux.

Structure checks name ANSI/IESNA LM-63-2002 (layout as in /work/shared/REFERENCES.md 7.1; items
that reference marks "from memory" are marked so here too).  Flux checks use analytic
distributions: a uniform cone, Phi = 2 pi I (1 - cos a) (cone solid angle, IES Lighting Handbook
solid-angle definition; textbook), and a Lambertian (cosine) emitter, Phi = pi I0 (textbook).
"""

import json
import math
import re
from dataclasses import replace

import numpy as np
import pytest
from click.testing import CliRunner

from beamshot.cli import cli
from beamshot.errors import BeamshotError
from beamshot.lm63 import (LINE_LIMIT, Photometry, format_lm63, parse_lm63, photometry_from_map, read_lm63,
                           structure_problems, write_lm63)
from beamshot.report.intensity_map import read_intensity_map
from beamshot.report.output import read_report_json
from beamshot.synth import encode_jpeg, render_photo

from conftest import analytic_map, make_shot

I_CONE = 1000.0
A_CONE = 10.0


def cone_map():
    """1000 cd inside 10 deg of the axis, 0 outside, on the analyser's grid (0.1 x 2 deg cells)."""
    beam = analytic_map(lambda t, p: np.where(t < np.radians(A_CONE), I_CONE, 0.0), theta_max_deg=30.0,
                        d_theta_deg=0.1, d_phi_deg=2.0)
    return replace(beam, unit="cd")


def test_uniform_cone_round_trips_and_its_flux_matches_the_analytic_value(tmp_path):
    p, _ = photometry_from_map(cone_map(), None, issue_date="2026-12-03")
    path = tmp_path / "cone.ies"
    write_lm63(p, path)
    back = read_lm63(path)
    # same grid, same values within the written precision (6 significant digits)
    np.testing.assert_allclose(back.vertical_deg, p.vertical_deg, atol=1e-9)
    np.testing.assert_allclose(back.horizontal_deg, p.horizontal_deg, atol=1e-9)
    np.testing.assert_allclose(back.candela, p.candela, rtol=5e-6, atol=1e-6)
    assert back.keywords == p.keywords
    exact = 2 * math.pi * I_CONE * (1 - math.cos(math.radians(A_CONE)))  # cone: Omega = 2 pi (1 - cos a)
    # The map's edge lies on a cell boundary, 10.0 deg, which is a vertical angle of the file
    # (step 0.1 deg): the file holds 1000 at 9.9, 500 at 10.0 and 0 at 10.1, a linear ramp over
    # [a - h, a + h] in place of the step at a.  Its first-order error cancels (the ramp is
    # antisymmetric about a); the second-order term is  2 pi I cos(a) int (ramp - step)(x) x dx
    # = 2 pi I cos(a) h^2 / 6  (derived here), + O(h^3).
    h = math.radians(0.1)
    predicted = 2 * math.pi * I_CONE * math.cos(math.radians(A_CONE)) * h**2 / 6
    assert back.flux_lm() - exact == pytest.approx(predicted, abs=2 * math.pi * I_CONE * h**3)
    assert back.flux_lm(90.0) == back.flux_lm(120.0) == pytest.approx(back.flux_lm(), rel=1e-12)


def test_cone_edge_between_vertical_angles_errs_as_derived():
    # step 0.3 deg: samples at 9.9 (1000) and 10.2 (0); the edge at 10.0 is 0.05 deg before the
    # segment's middle.  A linear ramp over [a0, a1] against a step at e: first-order error
    # 2 pi I sin(e) ((a0 + a1)/2 - e) (derived here), the rest bounded by 2 pi I (a1 - a0)^2 / 2.
    p, _ = photometry_from_map(cone_map(), None, vertical_step_deg=0.3)
    back = parse_lm63(format_lm63(p))
    exact = 2 * math.pi * I_CONE * (1 - math.cos(math.radians(A_CONE)))
    first = 2 * math.pi * I_CONE * math.sin(math.radians(A_CONE)) * math.radians(10.05 - A_CONE)
    d = math.radians(0.3)
    assert abs(back.flux_lm() - exact - first) < 2 * math.pi * I_CONE * d**2 / 2
    assert back.flux_lm() - exact == pytest.approx(first, rel=0.1)


def test_the_layout_follows_lm63_2002_line_by_line():
    p, _ = photometry_from_map(cone_map(), None, issue_date="2026-12-03", facts={"luminaire": "test cone"})
    text = format_lm63(p)
    assert text.endswith("\r\n") and "\n" not in text.replace("\r\n", "")  # CR LF line ends (LM-63-2002; from memory)
    assert text.isascii()
    lines = text.split("\r\n")[:-1]
    assert all(len(s) <= LINE_LIMIT for s in lines)  # <= 256 in LM-63-2002 (from memory); we keep 80
    assert lines[0] == "IESNA:LM-63-2002"  # LM-63-2002: first line, the format identifier
    n = 1
    keys = []
    while not lines[n].startswith("TILT="):
        m = re.match(r"^\[([A-Z0-9_]+)\] \S", lines[n])  # LM-63-2002: keyword lines "[KEYWORD] text"
        assert m, lines[n]
        keys.append(m.group(1))
        n += 1
    for required in ("TEST", "TESTLAB", "ISSUEDATE", "MANUFAC"):  # LM-63-2002 required keywords
        assert required in keys
    assert keys[0] != "MORE" and keys.count("LUMINAIRE") == 1  # [MORE] continues a keyword (from memory)
    assert all(not k.startswith("_") or k[1:].replace("_", "").isalnum() for k in keys)  # user keywords "_" (from memory)
    assert lines[n] == "TILT=NONE"  # LM-63-2002: TILT line
    ten = lines[n + 1].split()
    assert len(ten) == 10  # LM-63-2002: lamps, lumens/lamp, multiplier, #V, #H, type, units, width, length, height
    lamps, lumens, mult, n_v, n_h, ptype, units = (float(x) for x in ten[:7])
    assert (lamps, lumens, ptype, units) == (1, -1, 1, 2)  # one source; -1 absolute photometry; type C; metres
    assert mult > 0
    three = lines[n + 2].split()
    assert len(three) == 3 and float(three[0]) == 1  # ballast factor, future use, input watts
    rest = [s.split() for s in lines[n + 3:]]
    numbers = [x for s in rest for x in s]
    assert all(re.fullmatch(r"-?\d+(\.\d+)?", x) for x in numbers)  # plain decimals, no exponent
    assert len(numbers) == n_v + n_h + n_v * n_h  # vertical angles, horizontal angles, candela
    v = [float(x) for x in numbers[:int(n_v)]]
    hz = [float(x) for x in numbers[int(n_v):int(n_v + n_h)]]
    assert v[0] == 0 and v[-1] == 90 and np.all(np.diff(v) > 0)  # type C: 0 ... 90 (from memory)
    assert hz[0] == 0 and hz[-1] == 360 and np.all(np.diff(hz) > 0)  # type C 0-360: no symmetry
    # the two angle lists and each horizontal angle's block of #V values start on their own line
    # (common practice)
    starts = set(np.cumsum([0] + [len(s) for s in rest])[:-1].tolist())
    nv, nh = int(n_v), int(n_h)
    assert {0, nv} | {nv + nh + b * nv for b in range(nh)} <= starts
    assert structure_problems(parse_lm63(text)) == []


def test_azimuth_convention_c0_right_c90_up():
    # a lobe 5 deg from the axis toward phi = 90 (up, seen from behind the light) and a weaker one to the right
    def lobes(t, p):
        x, y = np.degrees(t) * np.cos(p), np.degrees(t) * np.sin(p)
        return 1000 * np.exp(-(x**2 + (y - 5) ** 2) / 2) + 500 * np.exp(-((x - 5) ** 2 + y**2) / 2)

    beam = replace(analytic_map(lobes, theta_max_deg=20.0, d_theta_deg=0.1, d_phi_deg=2.0), unit="cd")
    p, _ = photometry_from_map(beam, None)
    _, v, h = p.peak()
    assert (v, h) == pytest.approx((5.0, 90.0), abs=0.11)
    j0 = int(np.argmin(abs(p.horizontal_deg - 0.0)))
    i5 = int(np.argmin(abs(p.vertical_deg - 5.0)))
    assert p.candela[j0, i5] == pytest.approx(500, rel=0.02)


def test_relative_map_and_too_fine_step_are_refused():
    with pytest.raises(BeamshotError, match=r"relative .* holds candela; analyse again with --lux"):
        photometry_from_map(replace(cone_map(), unit="relative"), None)
    with pytest.raises(BeamshotError, match=r"finer than the map's 0.1 deg"):
        photometry_from_map(cone_map(), None, vertical_step_deg=0.05)


def _cosine_file(fmt="IESNA:LM-63-1995", horizontal=(0,), extra=""):
    """A hand-made file: I = 1000 cos V (a Lambertian emitter), V every 5 deg, values to 0.01 cd."""
    v = np.arange(0, 91, 5)
    lines = [fmt, "[TEST] hand-made cosine distribution", "[MANUFAC] none", extra, "TILT=NONE",
             f"1 -1 1 {len(v)} {len(horizontal)} 1 2 0 0 0", "1 1 0",
             " ".join(f"{x:g}" for x in v), " ".join(f"{x:g}" for x in horizontal)]
    for _ in horizontal:
        lines.append(" ".join(f"{1000 * math.cos(math.radians(x)):.2f}" for x in v))
    return "\n".join(s for s in lines if s) + "\n"


@pytest.mark.parametrize("fmt,horizontal", [("IESNA:LM-63-1995", (0,)),
                                            ("IESNA:LM-63-2002", (0, 45, 90)),
                                            ("IESNA:LM-63-2002", tuple(range(0, 181, 30))),
                                            ("IESNA:LM-63-2002", tuple(range(0, 361, 90)))])
def test_hand_made_cosine_file_gives_pi_i0(fmt, horizontal):
    # Lambertian emitter: Phi = int 1000 cos V sin V dV dC over the hemisphere = pi * 1000 (textbook).
    # Linear interpolation of a concave I(V) lies below it by at most h^2/8 max|I''| (interpolation
    # error bound), so  0 < pi I0 - Phi_file <= 2 pi (h^2 / 8) I0  (derived here), plus the 0.005 cd rounding.
    p = parse_lm63(_cosine_file(fmt, horizontal), source="cos.ies")
    assert p.format_line == fmt and p.keyword("TEST") == ["hand-made cosine distribution"]
    h = math.radians(5)
    gap = math.pi * 1000 - p.flux_lm()
    assert 0 < gap <= 2 * math.pi * h**2 / 8 * 1000 + 2 * math.pi * 0.005
    assert p.cone_angle_deg(0.5) == pytest.approx(120.0, abs=0.5)  # cos V = 0.5 at 60 deg: full angle 120


def test_a_plane_dependent_file_integrates_over_its_symmetry():
    # I = 1000 cos V (1 + 0.5 cos C): the cos C term integrates to 0 over the circle; bilateral
    # (0-180) files mirror C -> 360 - C, where cos C is the same; full 0-360 files as written.
    v = np.arange(0, 91, 5)
    for hs in (np.arange(0, 181, 30), np.arange(0, 361, 30)):
        cand = np.array([[1000 * math.cos(math.radians(x)) * (1 + 0.5 * math.cos(math.radians(c))) for x in v]
                         for c in hs])
        p = Photometry(vertical_deg=v.astype(float), horizontal_deg=hs.astype(float), candela=cand)
        axial = Photometry(vertical_deg=v.astype(float), horizontal_deg=np.array([0.0]),
                           candela=1000 * np.cos(np.radians(v))[None, :])
        assert p.flux_lm() == pytest.approx(axial.flux_lm(), rel=1e-12)  # trapezoid exact on a whole cos period


@pytest.mark.parametrize("mangle,match", [
    (lambda s: "", r"empty"),
    (lambda s: s.replace("TILT=NONE", "TOLT=NONE"), r"no TILT= line"),
    (lambda s: s.replace("TILT=NONE", "TILT=lamp.tlt"), r"line 4: TILT=lamp.tlt names another file"),
    (lambda s: s.replace("1 -1 1 19", "1 -1 x 19"), r"line 5: 'x' is not a number; expected the candela multiplier"),
    (lambda s: s.rsplit(" ", 3)[0] + "\n", r"ends at line 9 before the candela value 17 of 19"),
    (lambda s: s + "7 8\n", r"line 10: more numbers than the header's 19 x 1"),
    (lambda s: s.replace("1 -1 1 19 1 1 2", "1 -1 1 19 1 4 2"), r"photometric type 4"),
    (lambda s: s.replace("1 -1 1 19 1", "1 -1 1 19 0"), r"number of horizontal angles is 0"),
    (lambda s: s.replace("0 5 10", "0 10 5"), r"vertical angles do not rise"),
])
def test_a_malformed_file_gives_one_clear_line(mangle, match):
    text = mangle(_cosine_file())
    with pytest.raises(BeamshotError, match=match) as err:
        parse_lm63(text, source="bad.ies")
    assert "\n" not in str(err.value) and str(err.value).startswith("bad.ies")


def test_read_accepts_tilt_include_and_more_lines():
    extra = "[MORE] second line of the test"
    text = _cosine_file(extra=extra).replace("TILT=NONE", "TILT=INCLUDE\n1\n3\n0 45 90\n1 0.9 0.8")
    p = parse_lm63(text)
    assert p.tilt == "INCLUDE" and p.keyword("MANUFAC") == ["none second line of the test"]
    # an untagged header line (LM-63-1986/1991 style) is kept as text, even one starting with "Tilt"
    old_style = parse_lm63(_cosine_file(fmt="IESNA91").replace("[MANUFAC] none", "Tilted optic, see notes"))
    assert ("", "Tilted optic, see notes") in old_style.keywords and old_style.tilt == "NONE"
    assert p.flux_lm() == pytest.approx(parse_lm63(_cosine_file()).flux_lm(), rel=1e-12)


# --------------------------------------------------------------- a real analysis of a synthetic photo

@pytest.fixture(scope="module")
def analysed(tmp_path_factory, reflector_beam):
    folder = tmp_path_factory.mktemp("lm63-photo")
    scene, cam, truth = make_shot(reflector_beam, width_px=800, height_px=600)
    photo = folder / "beam.jpg"
    photo.write_bytes(encode_jpeg(render_photo(reflector_beam, scene, cam, seed=5), cam))
    out = folder / "rep"
    res = CliRunner().invoke(cli, ["analyze", str(photo), "--distance", "5", "--lux",
                                   f"{truth['peak_lux_on_wall']:.0f}", "--name", "prototype 2", "--out", str(out)])
    assert res.exit_code == 0, res.output
    return out, truth


def test_export_of_a_real_analysis(analysed, tmp_path):
    out, truth = analysed
    ies = tmp_path / "beam.ies"
    res = CliRunner().invoke(cli, ["lm63", "write", str(out), "--out", str(ies), "--manufacturer", "workshop test"])
    assert res.exit_code == 0, res.output
    res = CliRunner().invoke(cli, ["lm63", "read", str(ies), "--json", "--report", str(out)])
    assert res.exit_code == 0, res.output
    doc = json.loads(res.output)
    assert doc["layout_problems"] == []
    # beside its report: every figure the file gives agrees within 2 of the report's u
    assert {r["figure"] for r in doc["against_report"]} == {"peak_intensity", "beam_flux", "hotspot_angle",
                                                           "field_angle"}
    assert all(abs(r["z"]) < 2 for r in doc["against_report"]), doc["against_report"]
    rep = read_report_json(out / "report.json")
    figs = rep["figures"]
    p = read_lm63(ies)
    assert p.keyword("MANUFAC") == ["workshop test"] and p.keyword("LUMINAIRE") == ["prototype 2"]
    assert p.keyword("_ZERO_FILL") and p.keyword("_COVERAGE")
    # the flux within the spill edge's cone equals the report's beam flux (the same zone) within 1 %
    half_spill = figs["spill_angle"]["value"] / 2
    assert p.flux_lm(half_spill) == pytest.approx(figs["beam_flux"]["value"], rel=0.01)
    # write -> read gives the same grid and values within the written precision (6 significant digits)
    beam = read_intensity_map(out)
    written, _ = photometry_from_map(beam, rep)
    np.testing.assert_allclose(p.vertical_deg, written.vertical_deg, atol=1e-9)
    np.testing.assert_allclose(p.candela, written.candela, rtol=5e-6, atol=1e-6)
    # the file's values are the map's, sampled on the file's grid (type C V = theta, C = phi)
    th, ph = np.degrees(beam.theta), np.degrees(beam.phi)
    i, j = 40, 10  # theta 4.05 deg, phi 21 deg
    v_file = np.interp(th[i], p.vertical_deg, p.candela[int(np.argmin(abs(p.horizontal_deg - ph[j])))])
    h_lo = int(np.searchsorted(p.horizontal_deg, ph[j])) - 1
    rows = [np.interp(th[i], p.vertical_deg, p.candela[h]) for h in (h_lo, h_lo + 1)]
    assert np.mean(rows) == pytest.approx(beam.intensity[i, j], rel=0.01)
    assert abs(v_file - beam.intensity[i, j]) / beam.intensity[i, j] < 0.05
    # the peak and the 50 % cone angle agree with the report within its uncertainty (synthetic truth beside)
    assert doc["peak_cd"] == pytest.approx(figs["peak_intensity"]["value"], rel=0.02)
    assert abs(doc["cone_angle_50_deg"] - figs["hotspot_angle"]["value"]) < 2 * figs["hotspot_angle"]["uncertainty"]
    assert abs(doc["cone_angle_50_deg"] - truth["hotspot_angle_deg"]) < 0.3  # synth.truth_figures


def test_cli_refuses_a_relative_map_and_a_malformed_file_in_one_line(analysed, tmp_path):
    import shutil

    from beamshot.report.intensity_map import write_intensity_map

    out, _ = analysed
    rel = tmp_path / "relative-set"
    rel.mkdir()
    shutil.copy(out / "report.json", rel / "report.json")
    write_intensity_map(replace(read_intensity_map(out), unit="relative"), rel / "intensity-map.npz")
    res = CliRunner().invoke(cli, ["lm63", "write", str(rel), "--out", str(tmp_path / "x.ies")])
    assert res.exit_code == 2 and len(res.output.strip().splitlines()) == 1 and "--lux" in res.output
    assert not (tmp_path / "x.ies").exists()
    bad = tmp_path / "bad.ies"
    bad.write_text(_cosine_file().replace("1 -1 1 19", "1 -1 1 abc"))
    res = CliRunner().invoke(cli, ["lm63", "read", str(bad)])
    assert res.exit_code == 2 and len(res.output.strip().splitlines()) == 1
    assert "line 5: 'abc' is not a number; expected the number of vertical angles" in res.output


def test_damaged_files_are_read_or_refused_in_one_line():
    # cut, spliced and overwritten copies of a valid file: a Photometry or a one-line BeamshotError
    from hypothesis import given, settings
    from hypothesis import strategies as st

    base = _cosine_file("IESNA:LM-63-2002", (0, 90, 180))
    edit = st.tuples(st.integers(0, len(base)), st.integers(0, 12), st.text(alphabet="0123456789-.,e []TILT=\n\x00x",
                                                                           max_size=6))

    @settings(max_examples=300, deadline=None, derandomize=True)
    @given(st.lists(edit, max_size=3))
    def run(edits):
        text = base
        for at, cut, insert in edits:
            text = text[:at] + insert + text[at + cut:]
        try:
            p = parse_lm63(text, source="f.ies")
        except BeamshotError as exc:
            assert "\n" not in str(exc) and str(exc).startswith("f.ies")
            return
        assert p.candela.shape == (len(p.horizontal_deg), len(p.vertical_deg))
        try:
            flux = p.flux_lm()
        except BeamshotError:
            return
        assert np.isfinite(flux) or not np.all(np.isfinite(p.candela))

    run()


def test_a_keyword_word_longer_than_a_line_is_cut_onto_more_lines():
    # LM-63-2002 limits every line's length (LINE_LIMIT here, from memory): a long name without
    # spaces is cut into [MORE] lines, and reading them back joins the text again
    from beamshot.lm63 import LINE_LIMIT, _keyword_lines

    word = "X" * 300
    lines = _keyword_lines("LUMCAT", word)
    assert len(lines) > 1 and all(len(line) <= LINE_LIMIT for line in lines)
    assert lines[0].startswith("[LUMCAT] ") and all(line.startswith("[MORE] ") for line in lines[1:])
    assert "".join(line.split(" ", 1)[1] for line in lines) == word
