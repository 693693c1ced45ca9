"""Benchmark: the CPU time of writing an analysis's output set beside the analysis itself, in one run.

Run:  BEAMSHOT_THREADS=1 python benchmarks/bench_pictures.py [--repeat 3] [--photos 4]

Photos: the four 12 MP batch renders of benchmarks/bench_batch.py (rendered into
benchmarks/_cache/batch/ on first use).  In one process, for each repeat and each photo: the
analysis (``analyze``, CPU time), then the whole set (``write_report``: report.json, profile.csv,
intensity-map.npz, beam.png, report.html, with their flushes and the folder swap), then each file
on its own as ``write_report`` makes it (report.json with the report's dict, profile.csv, the map,
beam.png's drawing and its PNG deflate, report.html given the map panel).  CPU time
(``time.process_time``, both threads of the PNG deflate) rather than wall time: the machines these
run on are shared.  The process's first set is shown on its own (it pays the report modules'
imports and fills the per-process caches of text and grid); the table gives medians of the rest,
as a batch worker writes them, and the ratio of writing to analysing.  From the second repeat on
the same photos' texts come from the cache (as in bench_batch.py's ten copies of each render); a
batch of distinct photos draws its values and ticks anew (about 25 texts, some 8 ms a picture).
"""

from __future__ import annotations

import argparse
import os
import shutil
import statistics
import sys
import tempfile
import time

HERE = os.path.dirname(os.path.abspath(__file__))


def _cpu(fn, *args, **kw):
    t = time.process_time()
    out = fn(*args, **kw)
    return time.process_time() - t, out


def parts(report, folder: str) -> dict[str, float]:
    """CPU seconds of each file of the set, made as ``write_report`` makes it."""
    from beamshot.report import beam_picture, html, intensity_map, output
    from beamshot.report.plots import report_noise_floor

    t = {}
    t["report.json"], data = _cpu(report.to_dict)
    dt, _ = _cpu(output.write_json, report, os.path.join(folder, "report.json"), data)
    t["report.json"] += dt
    t["profile.csv"], _ = _cpu(output.write_profile_csv, report, os.path.join(folder, "profile.csv"))
    t["intensity-map.npz"], _ = _cpu(intensity_map.write_intensity_map, report.beam,
                                     os.path.join(folder, intensity_map.MAP_FILE))
    t["noise floor"], noise = _cpu(report_noise_floor, report)
    t["beam.png drawing"], pic = _cpu(beam_picture.draw_beam_picture, report, noise=noise)
    t["beam.png deflate"], (png, map_png) = _cpu(beam_picture.png_pair, pic.rgb, pic.map_panel_rows,
                                                 beam_picture.PNG_COMPRESS_LEVEL)
    t["report.html"], _ = _cpu(html.write_report_html, report, os.path.join(folder, html.HTML_FILE), map_png=map_png,
                               data=data, noise=noise)
    t["beam.png bytes"] = len(png)
    return t


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--photos", type=int, default=4, help="how many of the four batch renders")
    args = ap.parse_args()
    sys.path.insert(0, HERE)
    from bench_batch import ensure_photos

    photos = ensure_photos(args.photos)[: args.photos]
    from beamshot import analyze
    from beamshot.report.output import write_report

    tmp = tempfile.mkdtemp(prefix="bench-pictures-")
    try:
        analysis, writing, first, per_part = [], [], None, {}
        for rep in range(args.repeat):
            for k, path in enumerate(photos):
                dt_a, report = _cpu(analyze, path, distance_m=5.0)
                dt_w, _ = _cpu(write_report, report, os.path.join(tmp, f"set-{k}"))
                if first is None:
                    first = (dt_a, dt_w)
                    continue
                analysis.append(dt_a)
                writing.append(dt_w)
                folder = os.path.join(tmp, f"parts-{k}")
                os.makedirs(folder, exist_ok=True)
                for name, v in parts(report, folder).items():
                    per_part.setdefault(name, []).append(v)
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    med = statistics.median
    print(f"{len(photos)} photos x {args.repeat} repeats, BEAMSHOT_THREADS={os.environ.get('BEAMSHOT_THREADS', '')!r}; "
          "CPU seconds (median; the process's first set apart)")
    print(f"first set in the process: analysis {first[0]:.3f} s, writing {first[1]:.3f} s")
    print(f"{'analysis':28s} {med(analysis):8.4f}")
    print(f"{'writing the set (all files)':28s} {med(writing):8.4f}")
    for name, v in per_part.items():
        if name == "beam.png bytes":
            print(f"{'  beam.png size (kB)':28s} {med(v) / 1000:8.0f}")
        else:
            print(f"{'  ' + name:28s} {med(v):8.4f}")
    ratios = [w / a for w, a in zip(writing, analysis)]
    print(f"{'writing / analysis':28s} {med(ratios):8.2f}  (median of the per-photo ratios)")


if __name__ == "__main__":
    main()
