"""Benchmark: analysis time beside plain decoding of the same JPEG, at 12 MP and 48 MP.

Run:  python benchmarks/bench_analysis.py [--sizes 12 48] [--repeat 3] [--processes 5]

Photos are rendered once by beamshot.synth into benchmarks/_cache/.  For each size the
script times, in the same process and run: (a) plain decoding with OpenCV, (b) beamshot's
decode (EXIF, orientation, hash), (c) analyze() without pictures, (d) writing beam.png for
that report; and reports the ratio of (c) to (a) - of the minimum times, and the median of the
ratios of each repeat - plus the peak resident memory (VmHWM) of a separate process that runs
(c) once.  A second table gives the median seconds of each analysis stage (report.stage_seconds)
and of beam.png.  The photos carry phone-like sensor noise so that they compress (and decode)
like real ones.

With ``--processes N`` a third table times whole processes, as a user waits for them: ``beamshot
analyze PHOTO --distance 5 --out DIR`` (all report files) and a process that only imports OpenCV
and decodes the same photo, run alternately N times each, with Python's bytecode cache on (as after
a normal install, whatever PYTHONDONTWRITEBYTECODE says here); it reports both medians and the
median of the per-pair ratios.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import time

import cv2
import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
CACHE = os.path.join(HERE, "_cache")
SIZES = {12: (4000, 3000), 48: (8000, 6000)}


def ensure_photo(mp: int) -> str:
    from beamshot.synth import HotspotSpillBeam, Scene, SynthCamera, encode_jpeg, exposure_time_for_peak, render_photo

    path = os.path.join(CACHE, f"beam_{mp}mp.jpg")
    if os.path.exists(path):
        return path
    os.makedirs(CACHE, exist_ok=True)
    w, h = SIZES[mp]
    pattern = HotspotSpillBeam(peak_cd=20000, hotspot_fwhm_deg=6, spill_fraction=0.015, cutoff_deg=30)
    scene = Scene(distance_m=5.0)
    # phone-like noise (small pixels at ISO ~400) so the JPEG is as large as a real one
    cam = SynthCamera(width_px=w, height_px=h, focal_35mm_mm=16, supersample=1, iso=400.0,
                      full_well_e=1200.0, read_noise_e=4.0)
    t = exposure_time_for_peak(pattern, scene, cam, target=0.8)
    from dataclasses import replace

    cam = replace(cam, exposure_time_s=t)
    with open(path, "wb") as fh:
        fh.write(encode_jpeg(render_photo(pattern, scene, cam), cam, quality=90))
    return path


def run_once(path: str) -> float:
    """Analyse once; return the peak resident memory (MB) of this process (VmHWM)."""
    from beamshot import analyze

    analyze(path, distance_m=5.0)
    with open("/proc/self/status") as fh:
        for line in fh:
            if line.startswith("VmHWM:"):
                return float(line.split()[1]) / 1024.0
    return float("nan")


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--sizes", type=int, nargs="+", default=[12, 48])
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--processes", type=int, default=0, help="also time N whole processes of each kind")
    ap.add_argument("--child", default=None, help=argparse.SUPPRESS)
    ap.add_argument("--render", type=int, default=None, help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.child:
        print(run_once(args.child))
        return
    if args.render:
        print(ensure_photo(args.render))
        return
    import tempfile

    from beamshot import analyze
    from beamshot.photo import load_photo
    from beamshot.report.beam_picture import write_beam_picture

    print(f"cores: {os.cpu_count()}, numpy {np.__version__}, opencv {cv2.__version__}")
    print(f"{'size':>6} {'file MB':>8} {'decode s':>9} {'load s':>8} {'analyze s':>10} {'ratio':>6} {'median':>7} {'peak RSS MB':>12}")
    stage_rows = []
    png = os.path.join(tempfile.mkdtemp(prefix="beamshot-bench-"), "beam.png")
    for mp in args.sizes:
        path = subprocess.run([sys.executable, __file__, "--render", str(mp)], capture_output=True, text=True,
                              check=True).stdout.strip().splitlines()[-1]
        size_mb = os.path.getsize(path) / 1e6
        dec, load, ana, stages = [], [], [], []
        for _ in range(args.repeat):
            t0 = time.perf_counter()
            cv2.imread(path, cv2.IMREAD_COLOR)
            t1 = time.perf_counter()
            load_photo(path)
            t2 = time.perf_counter()
            report = analyze(path, distance_m=5.0)
            t3 = time.perf_counter()
            write_beam_picture(report, png)  # the first call also pays the fonts' loading
            t4 = time.perf_counter()
            dec.append(t1 - t0)
            load.append(t2 - t1)
            ana.append(t3 - t2)
            stages.append(dict(report.stage_seconds, **{"beam.png": t4 - t3}))
        stage_rows.append((mp, {k: float(np.median([st[k] for st in stages])) for k in stages[0]}))
        d, lo, a = min(dec), min(load), min(ana)
        # each repeat times decode and analysis back to back, so the median of the per-repeat
        # ratios follows the machine's speed as it drifts (shared machines are noisy)
        pair = float(np.median(np.asarray(ana) / np.asarray(dec)))
        rss = subprocess.run([sys.executable, __file__, "--child", path], capture_output=True, text=True, check=True)
        print(f"{mp:>4}MP {size_mb:>8.1f} {d:>9.3f} {lo:>8.3f} {a:>10.3f} {a / d:>6.2f} {pair:>7.2f} "
              f"{float(rss.stdout.strip().splitlines()[-1]):>12.0f}")
    keys = list(stage_rows[0][1])
    print(f"\nmedian seconds per stage over {args.repeat} repeats (report.stage_seconds; beam.png written after)")
    print(f"{'size':>6} " + " ".join(f"{k:>12}" for k in keys))
    for mp, med in stage_rows:
        print(f"{mp:>4}MP " + " ".join(f"{med[k]:>12.3f}" for k in keys))

    if args.processes:
        whole_processes(args.sizes, args.processes)


def whole_processes(sizes, n: int) -> None:
    """Median wall seconds of ``beamshot analyze --out`` and of a decode-only process, alternated."""
    import shutil
    import tempfile

    env = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}
    out = tempfile.mkdtemp(prefix="beamshot-bench-")
    print(f"\nwhole processes, {n} of each kind alternated (bytecode cache on)")
    print(f"{'size':>6} {'analyze s':>10} {'decode s':>9} {'ratio':>6}")
    for mp in sizes:
        path = ensure_photo(mp)
        ana, dec = [], []
        for _ in range(n):
            t0 = time.perf_counter()
            subprocess.run([sys.executable, "-m", "beamshot", "analyze", path, "--distance", "5", "--out",
                            os.path.join(out, "set")], env=env, check=True, capture_output=True)
            t1 = time.perf_counter()
            subprocess.run([sys.executable, "-c", f"import cv2; cv2.imread({path!r})"], env=env, check=True)
            t2 = time.perf_counter()
            ana.append(t1 - t0)
            dec.append(t2 - t1)
        ratio = float(np.median(np.asarray(ana) / np.asarray(dec)))
        print(f"{mp:>4}MP {np.median(ana):>10.3f} {np.median(dec):>9.3f} {ratio:>6.2f}")
    shutil.rmtree(out, ignore_errors=True)


if __name__ == "__main__":
    main()
