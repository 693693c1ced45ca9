"""Checking measured figures against a beam specification (:mod:`beamshot.spec`).

Each figure is judged by its coverage interval ``[y - k u, y + k u]`` (JCGM 100:2008, 6.2.1:
``U = k u``; k = 2 gives about 95 % for a normal distribution, 6.3.3), not by its value alone:
the guarded acceptance of conformity assessment (JCGM 106:2012, clause 8; the clause number from
memory), whose acceptance interval is the tolerance interval shrunk by the expanded uncertainty:

- **pass**: the whole interval lies inside the limit ``[low, high]`` (limits are closed);
- **fail**: the whole interval lies outside it (strictly beyond one side);
- **undecided**: the interval straddles a limit, so the measurement cannot tell;
- **not measured**: the report has no value (status ``not_measured``, the figure is missing, or
  it is in another unit); never a pass.

A bound (status ``lower_bound`` / ``upper_bound``, :mod:`beamshot.figure`) says only on which
side of its value the true figure lies: a lower bound y means ``[y - k u, +inf)``, an upper bound
``(-inf, y + k u]`` (``u`` = 0 when it has none), clipped at 0 for figures that cannot be
negative.  So a bound passes or fails only when that half-line alone decides it (a lower bound
above a maximum fails; a lower bound above a minimum passes when there is no maximum).  An
``estimate`` is judged like a measured figure (its uncertainty holds its assumptions) and is
marked as such.  A measured figure without an uncertainty is undecided: its interval is unknown.

A unit (one report, or one item of a batch) fails when any figure fails; otherwise it is
undecided when any figure is undecided, not measured when any is not measured, else it passes.
The run's verdict is the worst unit's, and its exit code (:data:`EXIT_CODES`) is 0 pass, 1 fail,
4 undecided or not measured (2 bad input and 3 internal error, as every command).
"""

from __future__ import annotations

import csv
import io
import json
import math
import os
from dataclasses import dataclass, field

from .errors import BeamshotError, read_user_file
from .spec import Limit, Spec

__all__ = ["PASS", "FAIL", "UNDECIDED", "NOT_MEASURED", "EXIT_CODES", "Check", "Unit", "QAResult", "judge",
           "load_units", "check_sources", "judge_report", "QA_SCHEMA", "QA_SCHEMA_VERSION"]

PASS, FAIL, UNDECIDED, NOT_MEASURED = "pass", "fail", "undecided", "not measured"
#: Severity order of verdicts (a unit takes its worst figure's, a run its worst unit's).
_ORDER = {PASS: 0, NOT_MEASURED: 1, UNDECIDED: 2, FAIL: 3}
#: Exit codes of the run's verdict (docs/spec.md): 0 all pass, 1 any fail, 4 undecided or not measured.
EXIT_CODES = {PASS: 0, FAIL: 1, UNDECIDED: 4, NOT_MEASURED: 4}

QA_SCHEMA = "beamshot.qa"
QA_SCHEMA_VERSION = "1.0"

#: Figures that cannot be negative (magnitudes, full angles, fluxes, a ratio of fluxes): the
#: half-line of a bound is clipped at 0 for them.  Units cd, lm and m are never negative either.
_NON_NEGATIVE = {"peak_intensity", "beam_distance", "hotspot_angle", "hotspot_angle_horizontal",
                 "hotspot_angle_vertical", "field_angle", "spill_angle", "spill_angle_horizontal",
                 "spill_angle_vertical", "hotspot_flux", "spill_flux", "beam_flux", "ra", "hotspot_offset",
                 "light_tilt",
                 # shape and artefact figures (docs/artefacts.md); ring_amplitude is signed (+ bright, - dark)
                 "ring_score", "ring_count", "ring_angle", "ring_width", "centre_hole_depth", "centre_hole_width",
                 "sector_nonuniformity_hotspot", "sector_nonuniformity_spill", "hotspot_major_angle",
                 "hotspot_minor_angle", "hotspot_ellipticity", "hotspot_orientation", "spill_major_angle",
                 "spill_minor_angle", "spill_ellipticity", "spill_orientation", "d4sigma_major", "d4sigma_minor",
                 "d4sigma_ellipticity", "d4sigma_azimuth", "hotspot_flatness", "hotspot_uniformity",
                 "hotspot_edge_steepness", "hotspot_transition_width"}
_NON_NEGATIVE_UNITS = {"cd", "lm", "m"}
_STATUSES = ("measured", "estimate", "lower_bound", "upper_bound", "not_measured")


@dataclass(frozen=True)
class Check:
    """One figure of one unit judged against its limit."""

    limit: Limit
    verdict: str
    why: str
    value: float | None = None
    uncertainty: float | None = None
    status: str | None = None
    interval: tuple[float, float] | None = None

    def to_dict(self) -> dict:
        def num(x):
            return None if x is None or not math.isfinite(x) else float(f"{x:.6g}")

        return {"figure": self.limit.figure, "limit": self.limit.to_dict(), "verdict": self.verdict, "why": self.why,
                "value": num(self.value), "uncertainty": num(self.uncertainty), "status": self.status,
                "interval": None if self.interval is None else [num(self.interval[0]), num(self.interval[1])]}


@dataclass(frozen=True)
class Unit:
    """One sample checked: a report, or an item of a batch summary."""

    name: str
    source: str
    checks: tuple[Check, ...]
    note: str | None = None

    @property
    def verdict(self) -> str:
        return worst(c.verdict for c in self.checks)

    def to_dict(self) -> dict:
        return {"name": self.name, "source": self.source, "verdict": self.verdict, "note": self.note,
                "checks": [c.to_dict() for c in self.checks]}


@dataclass(frozen=True)
class QAResult:
    """Every unit checked against one spec."""

    spec: Spec
    units: tuple[Unit, ...]
    sources: tuple[str, ...] = field(default=())

    @property
    def verdict(self) -> str:
        return worst(u.verdict for u in self.units)

    @property
    def exit_code(self) -> int:
        return EXIT_CODES[self.verdict]

    def counts(self) -> dict:
        return {v: sum(1 for u in self.units if u.verdict == v) for v in (PASS, FAIL, UNDECIDED, NOT_MEASURED)}

    def to_dict(self) -> dict:
        from datetime import datetime, timezone

        from . import __version__
        from .report.model import CAUTIONS

        return {"schema": QA_SCHEMA, "schema_version": QA_SCHEMA_VERSION,
                "tool": {"name": "beamshot", "version": __version__},
                "created_utc": datetime.now(timezone.utc).replace(microsecond=0).isoformat(),
                "spec": self.spec.to_dict(), "sources": list(self.sources), "verdict": self.verdict,
                "exit_code": self.exit_code, "counts": self.counts(), "units": [u.to_dict() for u in self.units],
                "cautions": list(CAUTIONS)}


def worst(verdicts) -> str:
    """The most severe verdict (fail > undecided > not measured > pass); pass for none."""
    return max(verdicts, key=_ORDER.__getitem__, default=PASS)


def _fmt(x: float, unit: str) -> str:
    u = "°" if unit == "deg" else (f" {unit}" if unit else "")
    if math.isinf(x):
        return "∞" if x > 0 else "-∞"
    from .figure import _number

    return f"{_number(x, 4)}{u}"


def judge(limit: Limit, figure: dict | None, k: float) -> Check:
    """Judge one figure (a report's ``figures.<key>`` record: value, uncertainty, unit, status,
    reason) against ``limit`` with coverage factor ``k`` (rules in the module docstring)."""
    if figure is None:
        return Check(limit, NOT_MEASURED, "not in the report")
    status = figure.get("status")
    value = figure.get("value")
    u = figure.get("uncertainty")
    if status == "not_measured" or value is None:
        return Check(limit, NOT_MEASURED, figure.get("reason") or "no value in the report", status=status)
    if (figure.get("unit") or "") != limit.unit:
        return Check(limit, NOT_MEASURED, f"reported in {figure.get('unit') or 'no unit'!r}, the spec is in "
                     f"{limit.unit or 'no unit'!r}", value=value, uncertainty=u, status=status)
    if u is not None and (not math.isfinite(u) or u < 0):
        u = None
    floor = 0.0 if (limit.figure in _NON_NEGATIVE or limit.unit in _NON_NEGATIVE_UNITS) else -math.inf
    if status in ("measured", "estimate"):
        if u is None:
            return Check(limit, UNDECIDED, "no uncertainty stated, so its interval is unknown", value=value,
                         status=status)
        a, b = value - k * u, value + k * u
    elif status == "lower_bound":
        a, b = value - k * (u or 0.0), math.inf
    elif status == "upper_bound":
        a, b = -math.inf, value + k * (u or 0.0)
    else:
        return Check(limit, NOT_MEASURED, f"unknown status {status!r}", value=value, uncertainty=u, status=status)
    if b >= floor:
        a = max(a, floor)
    span = f"{_fmt(a, limit.unit)} … {_fmt(b, limit.unit)}"
    kind = {"lower_bound": "lower bound: ", "upper_bound": "upper bound: ", "estimate": "estimate: "}.get(status, "")
    if limit.low <= a and b <= limit.high:
        verdict, why = PASS, f"{kind}the whole interval {span} is inside"
    elif b < limit.low:
        verdict, why = FAIL, f"{kind}the whole interval {span} is below {_fmt(limit.low, limit.unit)}"
    elif a > limit.high:
        verdict, why = FAIL, f"{kind}the whole interval {span} is above {_fmt(limit.high, limit.unit)}"
    else:
        edges = [x for x in (limit.low, limit.high) if math.isfinite(x) and a < x < b]
        if status in ("lower_bound", "upper_bound") and not edges:
            where = "only a bound"
        else:
            where = f"straddles {' and '.join(_fmt(x, limit.unit) for x in edges)}" if edges else "straddles the limit"
        verdict, why = UNDECIDED, f"{kind}the interval {span} {where}; a smaller uncertainty would decide"
    return Check(limit, verdict, why, value=value, uncertainty=u, status=status, interval=(a, b))


def check_figures(spec: Spec, figures: dict, *, name: str, source: str, note: str | None = None,
                  k: float | None = None, missing: str = "the report") -> Unit:
    """Judge every limit of ``spec`` on one unit's ``figures`` (key -> figure record)."""
    kk = spec.coverage_factor if k is None else k
    checks = []
    for lim in spec.limits:
        if lim.figure in figures:
            checks.append(judge(lim, figures[lim.figure], kk))
        else:
            checks.append(Check(lim, NOT_MEASURED, note or f"not in {missing}"))
    return Unit(name=name, source=source, checks=tuple(checks), note=note)


def judge_report(spec: Spec, report, source: str | None = None) -> dict:
    """A BeamReport's figures (and its shape and colour figures) judged against ``spec``, as the
    report's ``qa`` section (docs/report-schema.md)."""
    data = report.to_dict()
    unit = check_figures(spec, _clean_figures(_report_figures(data, "this analysis"), "this analysis"),
                         name="this analysis", source="this analysis")
    return {"spec": spec.name, "source": None if source is None else str(source),
            "coverage_factor": float(spec.coverage_factor), "verdict": unit.verdict,
            "checks": [c.to_dict() for c in unit.checks]}


# ---------------------------------------------------------------- reading the sources

@dataclass(frozen=True)
class _Source:
    name: str
    source: str
    figures: dict
    note: str | None = None
    missing: str = "the report"


def _clean_figures(figs, where: str, wanted=None) -> dict:
    """A report's ``figures`` object checked for the fields the judgement reads (only the figures
    in ``wanted`` when given, so figures a spec does not name are never in the way)."""
    if not isinstance(figs, dict):
        raise BeamshotError(f"{where}: has no 'figures' object; give a report.json written by beamshot analyze")
    out = {}
    for key, f in figs.items():
        if wanted is not None and key not in wanted:
            continue
        if not isinstance(f, dict):
            raise BeamshotError(f"{where}: figure {key!r} is not an object; write the report again")
        rec = {}
        for part in ("value", "uncertainty"):
            x = f.get(part)
            if x is not None and (isinstance(x, bool) or not isinstance(x, (int, float)) or not math.isfinite(x)):
                raise BeamshotError(f"{where}: figure {key!r} has {part} {x!r}, not a number; write the report again")
            rec[part] = None if x is None else float(x)
        unit = f.get("unit") or ""
        if not isinstance(unit, str):
            raise BeamshotError(f"{where}: figure {key!r} has unit {unit!r}, not text; write the report again")
        rec["unit"] = unit
        status = f.get("status")
        rec["status"] = status if isinstance(status, str) and status in _STATUSES else None
        if rec["status"] is None:
            raise BeamshotError(f"{where}: figure {key!r} has status {status!r}; write the report again")
        rec["reason"] = None if f.get("reason") is None else " ".join(str(f.get("reason")).split())
        out[key] = rec
    return out


def _from_report(path: str, wanted=None) -> _Source:
    from .report.output import read_report_json

    data = read_report_json(path)
    name = ((data.get("settings") or {}).get("light_name") if isinstance(data.get("settings"), dict) else None) \
        or os.path.basename(os.path.dirname(os.path.abspath(path))) or path
    return _Source(str(name), path, _clean_figures(_report_figures(data, path), path, wanted))


def _report_figures(data: dict, where: str) -> dict:
    """A report's figure records: ``figures`` and, when present, the shape and artefact figures
    (``shape``) and the colour figures (``colour``), which have the same parts."""
    from .vocabulary import colour_figures_of

    figs = data.get("figures")
    if not isinstance(figs, dict):
        return figs
    shape = data.get("shape")
    return {**colour_figures_of(data), **(shape if isinstance(shape, dict) else {}), **figs}


def _add_from_item_report(source: "_Source", summary_path: str, folder, wanted) -> "_Source":
    """Figures a batch summary lacks (its columns hold the main figures only) read from the item's
    own report.json, when the item's folder is still there."""
    if not wanted or not folder or not isinstance(folder, str):
        return source
    missing = [k for k in wanted if k not in source.figures]
    report = os.path.join(os.path.dirname(os.path.abspath(summary_path)), folder, "report.json")
    if not missing or not os.path.isfile(report):
        return source
    extra = _from_report(report, set(missing)).figures
    from dataclasses import replace

    return replace(source, figures={**source.figures, **extra})


def _from_summary_json(path: str, data: dict, wanted=None) -> list[_Source]:
    items = data.get("items")
    if not isinstance(items, list):
        raise BeamshotError(f"{path}: a batch summary without 'items'; give the summary.json written by beamshot batch")
    out = []
    for i, it in enumerate(items, 1):
        if not isinstance(it, dict):
            raise BeamshotError(f"{path}: item {i} is not an object; run the batch again")
        where = f"{path}, item {i}"
        name = str(it.get("name") or f"row {it.get('row', i)}")
        note = None
        figs = it.get("figures") or {}
        if it.get("status") == "failed":
            note = f"the analysis failed: {it.get('reason') or 'no reason given'}"
            figs = {}
        src = f"{path} (row {it.get('row', i)})"
        one = _Source(name, src, _clean_figures(figs, where, wanted), note, "the batch summary")
        out.append(one if note else _add_from_item_report(one, path, it.get("folder"), wanted))
    return out


def _from_summary_csv(path: str, text: str, wanted=None) -> list[_Source]:
    try:
        rows = list(csv.DictReader(io.StringIO(text)))
    except csv.Error as exc:
        raise BeamshotError(f"{path}: not a readable CSV file ({exc}); give the summary.csv written by beamshot batch") \
            from None
    if not rows and not text.strip():
        raise BeamshotError(f"{path}: empty; give the summary.csv written by beamshot batch")
    head = set(rows[0]) if rows else set(next(csv.reader(io.StringIO(text)), []))
    if not {"name", "status"} <= head:
        raise BeamshotError(f"{path}: not a batch summary (no 'name' and 'status' columns); give the summary.csv "
                            "written by beamshot batch")
    keys = [c for c in head if f"{c}_status" in head and (wanted is None or c in wanted)]
    out = []
    for i, r in enumerate(rows, 1):
        where = f"{path}, line {i + 1}"
        figs = {}
        for key in keys:
            rec = {}
            for part, col in (("value", key), ("uncertainty", f"{key}_uncertainty")):
                cell = (r.get(col) or "").strip()
                try:
                    rec[part] = float(cell) if cell else None
                except ValueError:
                    raise BeamshotError(f"{where}: {col} is {cell!r}, not a number; run the batch again") from None
            rec["unit"] = (r.get(f"{key}_unit") or "").strip()
            rec["status"] = (r.get(f"{key}_status") or "").strip() or "not_measured"
            rec["reason"] = None
            figs[key] = rec
        note = None
        if (r.get("status") or "").strip() == "failed":
            note, figs = f"the analysis failed: {r.get('reason') or 'no reason given'}", {}
        name = (r.get("name") or "").strip() or f"row {r.get('row') or i}"
        one = _Source(name, f"{path} (row {r.get('row') or i})", _clean_figures(figs, where), note,
                      "the batch summary's columns")
        out.append(one if note else _add_from_item_report(one, path, (r.get("folder") or "").strip(), wanted))
    return out


def load_units(path, wanted=None) -> list[_Source]:
    """The units in ``path``: a report.json, a batch summary (summary.json / summary.csv, or a batch
    folder holding them), an analysis output folder, or a folder of output folders (searched
    below for report.json files, in name order)."""
    path = os.fspath(path)
    if os.path.isdir(path):
        for name in ("summary.json", "summary.csv", "report.json"):
            p = os.path.join(path, name)
            if os.path.isfile(p):
                return load_units(p, wanted)
        found = []
        for root, dirs, files in os.walk(path):
            dirs.sort()
            if "report.json" in files:
                found.append(os.path.join(root, "report.json"))
        if not found:
            raise BeamshotError(f"{path}: no report.json, summary.json or summary.csv in it or below; give the folder "
                                "written by 'beamshot analyze --out' or 'beamshot batch --out'")
        return [_from_report(p, wanted) for p in found]
    if path.lower().endswith(".csv"):
        raw = read_user_file(path, "give a summary.csv, a report.json or a folder")
        return _from_summary_csv(path, raw.decode("utf-8", errors="replace"), wanted)
    raw = read_user_file(path, "give a report.json, a summary or a folder")
    try:
        data = json.loads(raw.decode("utf-8"))
    except (ValueError, RecursionError):
        raise BeamshotError(f"{path}: not JSON; give a report.json, a batch summary.json or summary.csv, or a "
                            "folder of them") from None
    if isinstance(data, dict) and data.get("schema") == "beamshot.report":
        return [_from_report(path, wanted)]
    if isinstance(data, dict) and "items" in data and "counts" in data:
        return _from_summary_json(path, data, wanted)
    raise BeamshotError(f"{path}: neither a beamshot report nor a batch summary; give a report.json, a summary.json "
                        "or a folder of them")


def check_sources(spec: Spec, paths, *, k: float | None = None) -> QAResult:
    """Check every unit found in ``paths`` (see :func:`load_units`) against ``spec``."""
    units = []
    for p in paths:
        for s in load_units(p, {lim.figure for lim in spec.limits}):
            units.append(check_figures(spec, s.figures, name=s.name, source=s.source, note=s.note, k=k,
                                       missing=s.missing))
    if not units:
        raise BeamshotError(f"{', '.join(os.fspath(p) for p in paths)}: no analysis in it (an empty batch?); "
                            "give a report.json, a batch summary or a folder of analyses")
    if k is not None:
        from dataclasses import replace

        spec = replace(spec, coverage_factor=float(k))
    return QAResult(spec=spec, units=tuple(units), sources=tuple(os.fspath(p) for p in paths))
