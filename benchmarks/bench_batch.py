"""Benchmark: `beamshot batch` over 40 synthetic 12 MP photos, beside plain decoding of the same files.

Run:  python benchmarks/bench_batch.py [--count 40] [--workers 1 2] [--pictures all]

Photos: four 12 MP beams are rendered once by beamshot.synth (different hotspot widths, spill
fractions and noise seeds, phone-like sensor noise so that they compress like real photos) into
benchmarks/_cache/batch/, and each is copied under ten names (``photo-00.jpg`` ...), so the batch
reads and decodes 40 separate files; nothing in beamshot caches a decode between items, so a copy
costs what a new photo of the same beam would.

Reported, for each worker count: the batch's wall time (planning with the input hashes, starting
the worker processes, every analysis with all outputs - report.json, profile.csv and beam.png unless
``--pictures none`` - and the summary), its ratio to the time to decode the same files one after
another in one process (cv2.imread, page cache warm for both), the scaling from the first worker
count to the others, the peak resident memory of each worker process (VmHWM, read by the worker at
the end of each item), and the mean seconds of each analysis stage (report.stage_seconds) plus the
writing of the report files.
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
CACHE = os.path.join(HERE, "_cache", "batch")
VARIANTS = 4
#: (hotspot FWHM deg, spill fraction, peak cd) of the rendered variants
BEAMS = ((6.0, 0.015, 20000.0), (9.0, 0.03, 12000.0), (14.0, 0.05, 6000.0), (4.0, 0.01, 40000.0))
WIDTH, HEIGHT = 4000, 3000  # 12 MP


def ensure_photos(count: int) -> list[str]:
    """``count`` photo files in the cache: ``VARIANTS`` renders, copied under new names."""
    from dataclasses import replace

    from beamshot.synth import HotspotSpillBeam, Scene, SynthCamera, encode_jpeg, exposure_time_for_peak, render_photo

    os.makedirs(CACHE, exist_ok=True)
    variants = []
    for k in range(VARIANTS):
        path = os.path.join(CACHE, f"variant-{k}.jpg")
        if not os.path.exists(path):
            fwhm, spill, peak = BEAMS[k]
            pattern = HotspotSpillBeam(peak_cd=peak, hotspot_fwhm_deg=fwhm, spill_fraction=spill, cutoff_deg=30.0)
            scene = Scene(distance_m=5.0)
            cam = SynthCamera(width_px=WIDTH, height_px=HEIGHT, focal_35mm_mm=16, supersample=1, iso=400.0,
                              full_well_e=1200.0, read_noise_e=4.0)
            cam = replace(cam, exposure_time_s=exposure_time_for_peak(pattern, scene, cam, target=0.8))
            t0 = time.perf_counter()
            data = encode_jpeg(render_photo(pattern, scene, cam, seed=k), cam, quality=90)
            with open(path + ".tmp", "wb") as fh:
                fh.write(data)
            os.replace(path + ".tmp", path)
            print(f"rendered {path} in {time.perf_counter() - t0:.1f} s", file=sys.stderr)
        variants.append(path)
    paths = []
    for i in range(count):
        path = os.path.join(CACHE, f"photo-{i:02d}.jpg")
        src = variants[i % VARIANTS]
        if not os.path.exists(path) or os.path.getsize(path) != os.path.getsize(src):
            shutil.copyfile(src, path)
        paths.append(path)
    return paths


def decode_seconds(paths: list[str]) -> tuple[float, float]:
    """Wall and CPU seconds to decode every file one after another in this process (second of two passes)."""
    import cv2

    for _ in range(2):
        t0, c0 = time.perf_counter(), time.process_time()
        for p in paths:
            if cv2.imread(p, cv2.IMREAD_COLOR) is None:
                raise SystemExit(f"cannot decode {p}")
        wall, cpu = time.perf_counter() - t0, time.process_time() - c0
    return wall, cpu


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--count", type=int, default=40, help="number of photos (default 40)")
    ap.add_argument("--workers", type=int, nargs="+", default=[1, 2], help="worker counts to time (default 1 2)")
    ap.add_argument("--pictures", choices=["all", "none"], default="all")
    ap.add_argument("--keep", default=None, help="keep the output folders under this folder")
    args = ap.parse_args()

    import cv2
    import numpy as np

    from beamshot.batch import STATUS_DONE, run_batch

    paths = ensure_photos(args.count)
    manifest = os.path.join(CACHE, f"manifest-{args.count}.csv")
    with open(manifest, "w", encoding="utf-8") as fh:
        fh.write("name,photos,distance_m\n")
        for i, p in enumerate(paths):
            fh.write(f"unit {i:02d},{os.path.basename(p)},5\n")
    dec, dec_cpu = decode_seconds(paths)
    size_mb = statistics.mean(os.path.getsize(p) for p in paths) / 1e6
    print(f"cores: {os.cpu_count()}, numpy {np.__version__}, opencv {cv2.__version__}; "
          f"{args.count} photos of {WIDTH}x{HEIGHT} ({size_mb:.1f} MB each), pictures: {args.pictures}")
    print(f"decoding them one after another in one process (cv2.imread): {dec:.2f} s ({dec / args.count:.3f} s each, CPU {dec_cpu:.2f} s); "
          f"load average before: {os.getloadavg()[0]:.1f} (other processes compete for the cores above ~0)")
    root = args.keep or tempfile.mkdtemp(prefix="beamshot-bench-batch-")
    walls, stage_means = {}, {}
    print(f"\n{'workers':>7} {'wall s':>8} {'ratio':>6} {'scaling':>8} {'s/item':>7} {'CPU s/item':>11} "
          f"{'CPU ratio':>10} {'peak MB per worker':>22}")
    for w in args.workers:
        out = os.path.join(root, f"out-{w}")
        shutil.rmtree(out, ignore_errors=True)
        t0 = time.perf_counter()
        res = run_batch(manifest, out, workers=w, pictures=args.pictures == "all")
        wall = time.perf_counter() - t0
        done = [o for o in res.outcomes.values() if o.status == STATUS_DONE]
        if len(done) != args.count:
            bad = [o for o in res.outcomes.values() if o.status != STATUS_DONE]
            raise SystemExit(f"{len(bad)} items not done: {bad[0].reason}")
        peak = {}
        for o in done:
            peak[o.pid] = max(peak.get(o.pid, 0.0), o.peak_mb or 0.0)
        walls[w] = wall
        scaling = walls[args.workers[0]] / wall
        peaks = ", ".join(f"{v:.0f}" for v in sorted(peak.values()))
        cpu = sum(o.cpu_seconds for o in done)
        print(f"{w:>7} {wall:>8.1f} {wall / dec:>6.2f} {scaling:>7.2f}x {wall / args.count:>7.2f} "
              f"{cpu / args.count:>11.2f} {cpu / dec_cpu:>10.2f} {peaks:>22}"
              f"   (load average {os.getloadavg()[0]:.1f})")
        keys = list(done[0].stage_seconds)
        means = {k: statistics.mean(o.stage_seconds.get(k, 0.0) for o in done) for k in keys}
        means["writing files"] = statistics.mean(o.seconds - sum(o.stage_seconds.values()) for o in done)
        means["item total"] = statistics.mean(o.seconds for o in done)
        stage_means[w] = means
    keys = list(next(iter(stage_means.values())))
    print("\nmean seconds per item and stage (report.stage_seconds; 'writing files' = report.json, profile.csv"
          + (", beam.png)" if args.pictures == "all" else ")"))
    print(f"{'workers':>7} " + " ".join(f"{k:>13}" for k in keys))
    for w, means in stage_means.items():
        print(f"{w:>7} " + " ".join(f"{means[k]:>13.3f}" for k in keys))
    if not args.keep:
        shutil.rmtree(root, ignore_errors=True)


if __name__ == "__main__":
    main()
