"""Snapshot every figure of a fixed set of analyses, and compare two snapshots.

Run:  python benchmarks/figures_snapshot.py write before.json      (at one commit)
      python benchmarks/figures_snapshot.py write after.json       (at another)
      python benchmarks/figures_snapshot.py compare before.json after.json
      python benchmarks/figures_snapshot.py write --raw before.json   (unrounded; compared exactly)

The set: the eight report variants of tests/test_schema.py (lux + ambient + flat + dark, exposure
metadata, lux at a stated pixel, clipped relative, bracket, profile with a kept constant, oblique
wall points with a tilted light, the printed target) and the three demo photos in sample_images/.
A refactoring that must not move any figure is checked by comparing value, uncertainty, status,
reason and budget of every figure and beam-shape figure (``shape``), as written to report.json
(6 significant digits).

``--raw`` writes every float unrounded (``repr``, compared as text, i.e. bit for bit) and adds
digests of the other numbers of the report (beam axis, profile, contours, beam map, warnings) and
the benchmark photos of benchmarks/_cache/ (beam_12mp.jpg and batch/variant-*.jpg at 5 m, when
bench_analysis.py and bench_batch.py have rendered them).  ``compare`` reads either kind.
"""

from __future__ import annotations

import json
import os
import sys

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def _raw(obj):
    """``obj`` with every float as its ``repr`` (exact), numpy scalars and arrays as Python values."""
    import numpy as np

    if isinstance(obj, (bool, np.bool_, str)) or obj is None:
        return bool(obj) if isinstance(obj, np.bool_) else obj
    if isinstance(obj, (int, np.integer)):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        return repr(float(obj))
    if isinstance(obj, dict):
        return {str(k): _raw(v) for k, v in obj.items()}
    if isinstance(obj, np.ndarray):
        return _raw(obj.tolist())
    if isinstance(obj, (list, tuple)):
        return [_raw(v) for v in obj]
    return repr(obj)


def _figure_raw(f) -> dict:
    return {"value": _raw(f.value), "uncertainty": _raw(f.uncertainty), "status": f.status, "reason": f.reason,
            "budget": {name: _raw(u) for name, u in f.budget} if f.budget else None}


def _digest(obj) -> str:
    """SHA-256 of the exact numbers in ``obj`` (arrays by their bytes, dataclasses by their fields)."""
    import dataclasses
    import hashlib

    import numpy as np

    h = hashlib.sha256()

    def feed(x):
        if isinstance(x, np.ndarray):
            h.update(f"{x.dtype}{x.shape}".encode())
            h.update(np.ascontiguousarray(x).tobytes())
        elif dataclasses.is_dataclass(x) and not isinstance(x, type):
            for fld in dataclasses.fields(x):
                h.update(fld.name.encode())
                feed(getattr(x, fld.name))
        elif isinstance(x, dict):
            for k in sorted(x, key=str):
                h.update(str(k).encode())
                feed(x[k])
        elif isinstance(x, (list, tuple)):
            h.update(b"[")
            for v in x:
                feed(v)
            h.update(b"]")
        else:
            h.update(repr(_raw(x)).encode())

    feed(obj)
    return h.hexdigest()


def _entries(rep, raw: bool) -> dict:
    """The snapshot of one BeamReport: figures (``shape.`` prefixed for the shape figures)."""
    if not raw:
        d = rep.to_dict()
        return {**d["figures"], **{"shape." + k: v for k, v in d.get("shape", {}).items()}}
    out = {k: _figure_raw(f) for k, f in rep.figures.items()}
    out |= {"shape." + k: _figure_raw(f) for k, f in rep.shape_figures.items()}
    for name, part in (("beam_axis", rep.beam_axis), ("profile", rep.profile), ("contours", rep.contours),
                       ("beam", rep.beam), ("warnings", rep.warnings)):
        out["digest." + name] = {"value": _digest(part), "uncertainty": None, "status": "", "reason": None,
                                 "budget": None}
    return out


def write(path: str, raw: bool = False) -> None:
    import glob

    sys.path.insert(0, os.path.join(ROOT, "tests"))
    from test_schema import VARIANTS, build_variant

    from beamshot import analyze

    out = {name: _entries(build_variant(name), raw) for name in VARIANTS}
    images = os.path.join(ROOT, "sample_images")
    with open(os.path.join(images, "ground_truth.json"), encoding="utf-8") as fh:
        lights = json.load(fh)["lights"]
    for light in lights:
        rep = analyze(os.path.join(images, light["photo"]), distance_m=light["distance_m"],
                      ambient=os.path.join(images, light["ambient"]), lux_at_peak=light["lux_at_peak"])
        out["demo-" + light["name"]] = _entries(rep, raw)
    if raw:
        cache = os.path.join(ROOT, "benchmarks", "_cache")
        for photo in [os.path.join(cache, "beam_12mp.jpg")] + sorted(glob.glob(os.path.join(cache, "batch", "variant-*.jpg"))):
            if os.path.exists(photo):
                out["bench-" + os.path.relpath(photo, cache)] = _entries(analyze(photo, distance_m=5.0), raw)
    out = {"__raw__": raw, **out} if raw else out
    with open(path, "w", encoding="utf-8") as fh:
        json.dump(out, fh, indent=1, sort_keys=True)
    n = sum(len(v) for k, v in out.items() if k != "__raw__")
    print(f"{len(out) - raw} analyses, {n} figures{' (raw)' if raw else ''} -> {path}")


def compare(a_path: str, b_path: str) -> int:
    with open(a_path, encoding="utf-8") as fh:
        a = json.load(fh)
    with open(b_path, encoding="utf-8") as fh:
        b = json.load(fh)
    if a.get("__raw__", False) != b.get("__raw__", False):
        sys.exit("one snapshot is raw (--raw), the other rounded: write both the same way")
    n = differ = 0
    worst = 0.0
    for case, figs in a.items():
        if case == "__raw__":
            continue
        if set(figs) != set(b.get(case, {})):
            differ += 1
            print(f"{case}: figure names differ: {sorted(set(figs) ^ set(b.get(case, {})))}")
        for key, fa in figs.items():
            fb = b.get(case, {}).get(key, {})
            n += 1
            moved = [f for f in ("value", "uncertainty", "status", "reason", "budget") if fa.get(f) != fb.get(f)]
            if moved:
                differ += 1
                worst = max(worst, _relative(fa.get(moved[0]), fb.get(moved[0])))
                print(f"{case} {key}: {moved[0]} {fa.get(moved[0])!r} -> {fb.get(moved[0])!r}")
    print(f"{n} figures compared, {differ} differ" + (f" (largest relative difference {worst:.3g})" if differ else ""))
    return 1 if differ else 0


def _relative(x, y) -> float:
    """Largest relative difference of two values (floats or repr strings, or budget dicts of them)."""
    if isinstance(x, dict) and isinstance(y, dict):
        return max([_relative(x.get(k), y.get(k)) for k in set(x) | set(y)] or [0.0])
    try:
        fx, fy = float(x), float(y)
    except (TypeError, ValueError):
        return float("inf")
    if fx == fy:
        return 0.0
    return abs(fx - fy) / max(abs(fx), abs(fy))


if __name__ == "__main__":
    if len(sys.argv) == 3 and sys.argv[1] == "write":
        write(sys.argv[2])
    elif len(sys.argv) == 4 and sys.argv[1:3] == ["write", "--raw"]:
        write(sys.argv[3], raw=True)
    elif len(sys.argv) == 4 and sys.argv[1] == "compare":
        sys.exit(compare(sys.argv[2], sys.argv[3]))
    else:
        sys.exit(__doc__)
