"""CPU time per analysis stage after the decode: an older revision against the working tree, in one process.

Run:  python benchmarks/stage_cpu_ab.py REV [--repeat N] PHOTO[:DISTANCE_M] ...

``REV`` (a commit, branch or tag) is exported with ``git archive`` into a temporary directory and
imported beside the working tree's beamshot; the two run the stages after the decode (wall
mapping, beam map, scale, uncertainty, figures, shape) in turn, analysis by analysis, with BLAS on
one thread as ``analysis.run`` has it and ``BEAMSHOT_THREADS=1``.  Each stage's CPU time
(``time.process_time``, all threads) is the median of ``N`` analyses (one warm-up first).  On a
shared machine the speed drifts by tens of percent within a minute; taking the two revisions in
turn lets both see the same drift, which separate runs do not.
"""

from __future__ import annotations

import argparse
import importlib
import os
import statistics
import subprocess
import sys
import tempfile
import time

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
STAGES = ("beam map", "uncertainty", "shape", "other")  # other: wall mapping, scale, figures


def _import_tree(tree: str) -> dict:
    for k in [k for k in sys.modules if k == "beamshot" or k.startswith("beamshot.")]:
        del sys.modules[k]
    sys.path.insert(0, tree)
    try:
        for name in ("analysis", "request", "threads", "artefacts", "rings", "shape_iso", "uncertainty", "measure"):
            importlib.import_module("beamshot." + name)  # (the ones imported inside functions too)
    finally:
        sys.path.remove(tree)
    mods = {k: v for k, v in sys.modules.items() if k == "beamshot" or k.startswith("beamshot.")}
    if not mods["beamshot"].__file__.startswith(tree):
        sys.exit(f"beamshot was not imported from {tree}")
    return mods


def _use(mods: dict):
    for k in [k for k in sys.modules if k == "beamshot" or k.startswith("beamshot.")]:
        del sys.modules[k]
    sys.modules.update(mods)  # imports inside functions find this revision's modules
    return mods["beamshot.analysis"], mods["beamshot.request"].Request, mods["beamshot.threads"].one_blas_thread


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("rev")
    ap.add_argument("photos", nargs="+", help="PHOTO or PHOTO:DISTANCE_M (default 5 m)")
    ap.add_argument("--repeat", type=int, default=9)
    args = ap.parse_args()
    os.environ["BEAMSHOT_THREADS"] = "1"
    with tempfile.TemporaryDirectory() as old_tree:
        archive = subprocess.run(["git", "-C", ROOT, "archive", args.rev, "beamshot"], check=True, capture_output=True)
        subprocess.run(["tar", "-x", "-C", old_tree], input=archive.stdout, check=True)
        trees = {"old": _import_tree(old_tree), "new": _import_tree(ROOT)}
        for spec in args.photos:
            path, _, dist = spec.partition(":")
            prep = {}
            for name, mods in trees.items():
                a, request, _one = _use(mods)
                req = request.from_options(path, distance_m=float(dist or 5.0)).validated()
                loaded = a.load(req)
                prep[name] = (req, loaded, a.linear_image(req, loaded))
            times = {n: {s: [] for s in STAGES} for n in trees}
            for i in range(args.repeat + 1):
                for name in ("old", "new") if i % 2 else ("new", "old"):
                    a, _request, one = _use(trees[name])
                    req, loaded, lin = prep[name]
                    c = time.process_time
                    with one():
                        t0 = c()
                        mapped = a.wall_mapping(req, loaded, lin)
                        t1 = c()
                        mapped, meas = a.beam_map(req, loaded, lin, mapped)
                        t2 = c()
                        sc = a.absolute_scale(req, loaded, lin, mapped, meas)
                        t3 = c()
                        unc = a.uncertainty(req, loaded, lin, mapped, meas, sc)
                        t4 = c()
                        figs = a.figures_of(req, meas, sc, unc)
                        t5 = c()
                        a.shape_of(req, lin, mapped, meas, unc, figs)
                        t6 = c()
                    if i:  # the first round warms up
                        for stage, dt in zip(STAGES, (t2 - t1, t4 - t3, t6 - t5, (t1 - t0) + (t3 - t2) + (t5 - t4))):
                            times[name][stage].append(dt)
            med = {n: {s: statistics.median(v) * 1000 for s, v in times[n].items()} for n in trees}
            total = {n: sum(med[n].values()) for n in trees}
            print(os.path.basename(path), " | ".join(f"{s} {med['old'][s]:.1f} -> {med['new'][s]:.1f}" for s in STAGES),
                  f"| total {total['old']:.1f} -> {total['new']:.1f} ms CPU ({(1 - total['new'] / total['old']) * 100:.0f} % less)",
                  flush=True)


if __name__ == "__main__":
    main()
