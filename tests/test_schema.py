"""report.json against its JSON Schema (beamshot/report/schema.json) and docs/report-schema.md.

The reports come from synthetic photos (beamshot.synth) across the inputs that change which keys
are written: a lux reading or not, light-off / flat / dark photos, a bracket, a camera profile
with a measured response and a kept constant, the printed target or four wall points, a clipped
hotspot, a tilted light.  Validation uses JSON Schema draft 2020-12 (json-schema.org, via the
``jsonschema`` library).
"""

from __future__ import annotations

import json
import math
import re
from dataclasses import replace
from importlib import resources
from pathlib import Path

import jsonschema
import numpy as np
import pytest

from beamshot import analyze
from beamshot.camera.profile import default_profile
from beamshot.camera.response import Response
from beamshot.figure import STATUSES
from beamshot.photo import decode_photo
from beamshot.report.model import ROUND_DIGITS, rounded
from beamshot.synth import (HotspotSpillBeam, Scene, SynthCamera, encode_jpeg, exposure_time_for_peak,
                            render_bracket, render_photo, truth_figures)
from beamshot.vocabulary import FIGURES

ROOT = Path(__file__).resolve().parent.parent
DOC = ROOT / "docs" / "report-schema.md"
FIGURES_DOC = ROOT / "docs" / "figures.md"

BEAM = HotspotSpillBeam(peak_cd=10000.0, hotspot_fwhm_deg=8.0, spill_fraction=0.02, cutoff_deg=24.0,
                        edge_width_deg=0.5)
OFF = HotspotSpillBeam(peak_cd=0.0)


def _schema() -> dict:
    return json.loads(resources.files("beamshot.report").joinpath("schema.json").read_text(encoding="utf-8"))


def _camera(**kw) -> SynthCamera:
    base = dict(width_px=900, height_px=675, focal_35mm_mm=16, supersample=1, position_m=(0.15, 0.0, 0.0))
    base.update(kw)
    return SynthCamera(**base)


def _shot(pattern, scene, cam, *, seed, name, quality=90):
    return decode_photo(encode_jpeg(render_photo(pattern, scene, cam, seed=seed), cam, quality=quality), name)


def _exposed(cam, scene, target=0.8, pattern=BEAM):
    return replace(cam, exposure_time_s=exposure_time_for_peak(pattern, scene, cam, target=target))


def _project(cam: SynthCamera, wall_m: np.ndarray, distance_m: float) -> np.ndarray:
    """Image positions (px) of wall points (m, light frame) for a synthetic pinhole camera (yaw only)."""
    from beamshot.wall import rotation_yaw_pitch

    r = rotation_yaw_pitch(cam.yaw_deg, cam.pitch_deg)
    p = (np.c_[wall_m, np.full(len(wall_m), distance_m)] - np.asarray(cam.position_m)) @ r
    f, cx, cy = cam.focal_px, (cam.width_px - 1) / 2, (cam.height_px - 1) / 2
    return np.c_[p[:, 0] / p[:, 2] * f + cx, p[:, 1] / p[:, 2] * f + cy]


def build_variant(name: str):
    """One analysed synthetic case: returns the BeamReport (every variant writes a different key set)."""
    truth = truth_figures(BEAM, 5.0)
    lux = float(truth["peak_lux_on_wall"])
    if name == "lux-ambient-flat-dark":
        scene = Scene(distance_m=5.0, ambient_lux=1.5)
        cam = _exposed(_camera(lens_vignetting=0.3), scene)
        beam = _shot(BEAM, scene, cam, seed=1, name="beam.jpg")
        amb = _shot(OFF, scene, cam, seed=2, name="ambient.jpg")
        dark = _shot(OFF, Scene(distance_m=5.0), cam, seed=3, name="dark.jpg")
        flat_cam = replace(cam, exposure_time_s=1 / 60)
        flat = _shot(HotspotSpillBeam(peak_cd=0.0, stray_fraction=0.0), Scene(distance_m=5.0, ambient_lux=200.0),
                     flat_cam, seed=4, name="flat.jpg")
        return analyze(beam, distance_m=5.0, ambient=amb, flat=flat, dark=dark, lux_at_peak=lux,
                       light_name="schema test light")
    if name == "exposure-metadata":
        scene = Scene(distance_m=5.0)
        return analyze(_shot(BEAM, scene, _exposed(_camera(), scene), seed=5, name="beam.jpg"), distance_m=5.0)
    if name == "lux-at-point":
        # the reading taken at a stated pixel (here near the peak: the camera sits 0.15 m right of the light)
        scene = Scene(distance_m=5.0)
        cam = _exposed(_camera(), scene)
        x = (cam.width_px - 1) / 2 - cam.focal_px * 0.15 / 5.0
        return analyze(_shot(BEAM, scene, cam, seed=12, name="beam.jpg"), distance_m=5.0, lux_at_peak=lux,
                       lux_point_px=(round(x), (cam.height_px - 1) // 2))
    if name == "relative-clipped":
        scene = Scene(distance_m=5.0)
        cam = _exposed(_camera(), scene, target=2.5)
        return analyze(_shot(BEAM, scene, cam, seed=6, name="clipped.jpg"), distance_m=5.0, use_exif_scale=False)
    if name == "bracket":
        scene = Scene(distance_m=5.0)
        cam = _exposed(_camera(full_well_e=30000), scene, target=0.5)
        frames = [decode_photo(b, f"b{i}.jpg") for i, b in enumerate(render_bracket(BEAM, scene, cam, [-1, 0, 1],
                                                                                      seed=7))]
        return analyze(frames, distance_m=5.0, lux_at_peak=lux)
    if name == "profile-constant":
        # a profile with a measured (here: the true sRGB curve as a table) response and a kept constant
        scene = Scene(distance_m=5.0)
        cam = _exposed(_camera(), scene)
        codes = np.arange(256) / 255.0
        table = tuple(float(x) for x in Response("srgb").decode(codes))
        prof = replace(default_profile(), name="schema-test-camera", calibrated=True,
                       response=Response("table", table=(table, table, table)),
                       response_quality={"method": "assumed for the test", "consistency_rms": 0.004},
                       scale_constant=3.0e3, scale_uncertainty=0.05,
                       provenance=({"step": "scale", "when_utc": "2026-01-01T00:00:00+00:00", "files": []},))
        return analyze(_shot(BEAM, scene, cam, seed=8, name="beam.jpg"), distance_m=5.0, camera=prof)
    if name == "wall-points-tilted":
        scene = Scene(distance_m=5.0, light_yaw_deg=5.0)
        cam = _exposed(_camera(width_px=1200, height_px=900, position_m=(0.6, 0.1, 0.0), yaw_deg=-10.0), scene)
        wall = np.array([[-1.2, 0.9], [1.2, 0.9], [1.2, -0.9], [-1.2, -0.9]])
        points = (_project(cam, wall, 5.0), wall * 1000.0)
        return analyze(_shot(BEAM, scene, cam, seed=9, name="oblique.jpg"), distance_m=5.0, wall_points=points,
                       lux_at_peak=lux)
    if name == "target":
        scene = Scene(distance_m=5.0)
        cam = _exposed(_camera(width_px=2400, height_px=1800, position_m=(0.6, 0.1, 0.0), yaw_deg=-10.0), scene)
        geo_scene = Scene(distance_m=5.0, ambient_lux=150.0, target_at_mm=(0.0, 0.0), target_print_scale=2.0)
        gcam = replace(cam, exposure_time_s=1 / 30, supersample=2)
        geo = _shot(OFF, geo_scene, gcam, seed=10, name="geometry.jpg", quality=92)
        return analyze(_shot(BEAM, scene, cam, seed=11, name="beam.jpg"), distance_m=5.0, geometry=geo,
                       target_scale=2.0, lux_at_peak=lux)
    raise KeyError(name)


#: Variants checked against the schema (the printed-target case is the slowest and adds only the
#: geometry keys; kept in because the geometry object is otherwise never written).
VARIANTS = ("lux-ambient-flat-dark", "exposure-metadata", "lux-at-point", "relative-clipped", "bracket", "profile-constant",
            "wall-points-tilted", "target")


@pytest.fixture(scope="module")
def reports():
    return {}


def _report_dict(reports, name):
    if name not in reports:
        reports[name] = build_variant(name).to_dict()
    return reports[name]


# ---------------------------------------------------------------------------------- schema
def test_schema_is_valid_draft_2020_12():
    # the schema itself follows the JSON Schema 2020-12 meta-schema (json-schema.org)
    jsonschema.Draft202012Validator.check_schema(_schema())


@pytest.mark.parametrize("name", VARIANTS)
def test_report_follows_the_schema(reports, name):
    data = _report_dict(reports, name)
    json.dumps(data, allow_nan=False)  # RFC 8259 JSON has no NaN or Infinity
    jsonschema.Draft202012Validator(_schema()).validate(data)


@pytest.mark.parametrize("where", ["top", "settings", "calibration.absolute_scale", "beam_axis", "figure",
                                   "inputs.exif"])
def test_schema_rejects_an_undocumented_key(reports, where):
    data = json.loads(json.dumps(_report_dict(reports, "lux-ambient-flat-dark")))
    holder = {"top": data, "settings": data["settings"], "calibration.absolute_scale": data["calibration"]["absolute_scale"],
              "beam_axis": data["beam_axis"], "figure": data["figures"]["hotspot_angle"],
              "inputs.exif": data["inputs"][0]["exif"]}[where]
    holder["undocumented_key"] = 1
    with pytest.raises(jsonschema.ValidationError, match="undocumented_key"):
        jsonschema.Draft202012Validator(_schema()).validate(data)


def test_schema_rejects_an_unknown_status_and_figure(reports):
    data = json.loads(json.dumps(_report_dict(reports, "exposure-metadata")))
    data["figures"]["hotspot_angle"]["status"] = "guessed"
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.Draft202012Validator(_schema()).validate(data)
    data = json.loads(json.dumps(_report_dict(reports, "exposure-metadata")))
    data["figures"]["beam_throw"] = data["figures"]["beam_distance"]
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.Draft202012Validator(_schema()).validate(data)


def test_status_enum_is_the_figure_statuses():
    fig = _schema()["$defs"]["figure"]
    assert tuple(fig["properties"]["status"]["enum"]) == STATUSES


def test_every_vocabulary_figure_is_in_the_schema():
    assert set(_schema()["properties"]["figures"]["properties"]) == set(FIGURES)


# ---------------------------------------------------------------------------------- rounding
def _floats(obj, path="$"):
    if isinstance(obj, float):
        yield path, obj
    elif isinstance(obj, dict):
        for k, v in obj.items():
            yield from _floats(v, f"{path}.{k}")
    elif isinstance(obj, (list, tuple)):
        for i, v in enumerate(obj):
            yield from _floats(v, f"{path}[{i}]")


def _significant_digits(x: float) -> int:
    """Digits of the shortest repr that round-trips (Python's float repr, IEEE 754)."""
    mantissa = repr(abs(x)).split("e")[0].replace(".", "").lstrip("0").rstrip("0")
    return len(mantissa) or 1


@pytest.mark.parametrize("name", ["lux-ambient-flat-dark", "bracket", "wall-points-tilted"])
def test_every_float_is_rounded(reports, name):
    data = _report_dict(reports, name)
    too_long = [(p, x) for p, x in _floats(data) if _significant_digits(x) > ROUND_DIGITS]
    assert not too_long, too_long[:5]
    assert all(math.isfinite(x) for _, x in _floats(data))


def test_rounding_helper():
    # 6 significant digits, recursively; non-finite numbers become null; ints, bools, strings kept
    got = rounded({"a": 693.3752452815363, "b": [265.55311615725145, float("nan")], "c": (float("inf"), 2),
                   "d": True, "e": "x", "f": None, "g": np.float32(0.1234567), "h": np.int64(7), "i": 1.5e-12})
    assert got == {"a": 693.375, "b": [265.553, None], "c": [None, 2], "d": True, "e": "x", "f": None,
                   "g": 0.123457, "h": 7, "i": 1.5e-12}
    assert type(got["h"]) is int


# ---------------------------------------------------------------------------------- docs
_KEY_ROW = re.compile(r"^\|\s*`([^`]+)`\s*\|")


def _doc_paths() -> set[str]:
    """Key paths of the doc's key table: rows that start with a path in backticks."""
    paths = set()
    in_table = False
    for line in DOC.read_text(encoding="utf-8").splitlines():
        if line.startswith("<!-- keys:start -->"):
            in_table = True
        elif line.startswith("<!-- keys:end -->"):
            in_table = False
        elif in_table and (m := _KEY_ROW.match(line)):
            paths.add(m.group(1))
    return paths


def _schema_paths(node: dict, root: dict, prefix: str = "") -> set[str]:
    """Every property path of the schema, `a.b`, with `[]` for array items and `*` for map keys and
    for the keys of a shared definition (`figures.*.value` for every figure's `value`)."""
    paths = set()
    for alt in node.get("anyOf", []) + node.get("oneOf", []):
        paths |= _schema_paths(alt, root, prefix)
    for key, sub in node.get("properties", {}).items():
        p = f"{prefix}.{key}" if prefix else key
        paths.add(p)
        if "$ref" in sub:
            shared = f"{prefix}.*"
            paths |= _schema_paths(root["$defs"][sub["$ref"].split("/")[-1]], root, shared)
        else:
            paths |= _schema_paths(sub, root, p)
    if isinstance(node.get("items"), dict):
        paths |= _schema_paths(node["items"], root, prefix + "[]")
    if isinstance(node.get("additionalProperties"), dict) and node["additionalProperties"]:
        p = f"{prefix}.*"
        paths.add(p)
        paths |= _schema_paths(node["additionalProperties"], root, p)
    return paths


def test_doc_and_schema_list_the_same_keys():
    doc = _doc_paths()
    schema = _schema_paths(_schema(), _schema())
    assert len(doc) > 50
    assert not doc - schema, f"documented but not in schema.json: {sorted(doc - schema)}"
    assert not schema - doc, f"in schema.json but not documented: {sorted(schema - doc)}"


def test_doc_states_the_schema_version():
    from beamshot.report.model import SCHEMA_VERSION

    assert _schema()["properties"]["schema_version"]["pattern"].startswith("^" + SCHEMA_VERSION.split(".")[0])
    assert f"version {SCHEMA_VERSION}" in DOC.read_text(encoding="utf-8").splitlines()[0]


def _figures_table() -> dict[str, list[str]]:
    """docs/figures.md's figure table: key -> cells (label, unit, definition)."""
    rows = {}
    for line in FIGURES_DOC.read_text(encoding="utf-8").splitlines():
        m = re.match(r"^\|\s*`([a-z_]+)`\s*\|(.*)\|\s*$", line)
        if m and m.group(1) in FIGURES:
            rows[m.group(1)] = [c.strip() for c in m.group(2).split("|")]
    return rows


def test_figures_doc_table_uses_the_vocabulary():
    rows = _figures_table()
    assert set(rows) == set(FIGURES)
    for key, t in FIGURES.items():
        label, unit, definition = rows[key][:3]
        assert label == t.label, key
        assert unit == (t.unit or "—"), key
        assert definition == t.definition, key


def test_ra_is_spill_over_hotspot_everywhere():
    # Ra is this project's figure: spill flux over hotspot flux
    assert "spill flux over hotspot flux" in FIGURES_DOC.read_text(encoding="utf-8")
    assert "spill flux over hotspot flux" in DOC.read_text(encoding="utf-8")
    assert FIGURES["ra"].definition.startswith("spill flux over hotspot flux")


def test_docs_state_the_map_grid_the_tool_uses(reports):
    # the grid written in a report, the one the docs describe, and profile rows at cell centres
    from beamshot.beammap import PHI_STEP_DEG, THETA_STEP_DEG

    data = _report_dict(reports, "exposure-metadata")
    assert data["settings"]["theta_step_deg"] == THETA_STEP_DEG
    assert data["settings"]["phi_step_deg"] == PHI_STEP_DEG
    first = [THETA_STEP_DEG * (k + 0.5) for k in range(3)]
    np.testing.assert_allclose(data["profile"]["theta_deg"][:3], first, atol=1e-9)
    rows = ", ".join(f"{x:g}" for x in first)
    assert f"Δθ = {THETA_STEP_DEG:g}°, Δφ = {PHI_STEP_DEG:g}°" in FIGURES_DOC.read_text(encoding="utf-8")
    assert rows in DOC.read_text(encoding="utf-8")
