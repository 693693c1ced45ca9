"""Snapshot every figure of a fixed set of analyses, and compare two snapshots.

Run:  python benchmarks/figures_snapshot.py write before.json      (at one commit)
      python benchmarks/figures_snapshot.py write after.json       (at another)
      python benchmarks/figures_snapshot.py compare before.json after.json

The set: the eight report variants of tests/test_schema.py (lux + ambient + flat + dark, exposure
metadata, lux at a stated pixel, clipped relative, bracket, profile with a kept constant, oblique
wall points with a tilted light, the printed target) and the three demo photos in sample_images/.
A refactoring that must not move any figure is checked by comparing value, uncertainty, status,
reason and budget of every figure, as written to report.json (6 significant digits).
"""

from __future__ import annotations

import json
import os
import sys

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def write(path: str) -> None:
    sys.path.insert(0, os.path.join(ROOT, "tests"))
    from test_schema import VARIANTS, build_variant

    from beamshot import analyze

    out = {name: build_variant(name).to_dict()["figures"] for name in VARIANTS}
    images = os.path.join(ROOT, "sample_images")
    with open(os.path.join(images, "ground_truth.json"), encoding="utf-8") as fh:
        lights = json.load(fh)["lights"]
    for light in lights:
        rep = analyze(os.path.join(images, light["photo"]), distance_m=light["distance_m"],
                      ambient=os.path.join(images, light["ambient"]), lux_at_peak=light["lux_at_peak"])
        out["demo-" + light["name"]] = rep.to_dict()["figures"]
    with open(path, "w", encoding="utf-8") as fh:
        json.dump(out, fh, indent=1, sort_keys=True)
    print(f"{len(out)} analyses, {sum(len(v) for v in out.values())} figures -> {path}")


def compare(a_path: str, b_path: str) -> int:
    with open(a_path, encoding="utf-8") as fh:
        a = json.load(fh)
    with open(b_path, encoding="utf-8") as fh:
        b = json.load(fh)
    n = differ = 0
    for case, figs in a.items():
        for key, fa in figs.items():
            fb = b.get(case, {}).get(key, {})
            n += 1
            moved = [f for f in ("value", "uncertainty", "status", "reason", "budget") if fa.get(f) != fb.get(f)]
            if moved:
                differ += 1
                print(f"{case} {key}: {moved[0]} {fa.get(moved[0])!r} -> {fb.get(moved[0])!r}")
    print(f"{n} figures compared, {differ} differ")
    return 1 if differ else 0


if __name__ == "__main__":
    if len(sys.argv) == 3 and sys.argv[1] == "write":
        write(sys.argv[2])
    elif len(sys.argv) == 4 and sys.argv[1] == "compare":
        sys.exit(compare(sys.argv[2], sys.argv[3]))
    else:
        sys.exit(__doc__)
