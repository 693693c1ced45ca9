"""Benchmark: peak memory of analysing a 200 MP JPEG beside a plain decode of the same file.

Run:  python benchmarks/bench_memory.py [--mp 200]

The photo (16320 x 12240, the full resolution of current 200 MP phone sensors) is made once into
benchmarks/_cache/: a synthetic beam rendered by beamshot.synth at a quarter of the size, enlarged
4x and given phone-like pixel noise so that it compresses and decodes like a real photo.  Each
measurement runs in a fresh process and reads that process's peak resident memory (VmHWM):

- plain decode with Pillow (``np.asarray(Image.open(f).convert("RGB"))``), the everyday way;
- plain decode with OpenCV (``cv2.imread``);
- ``beamshot.analyze`` on the file (no output files);
- the same with the report files written (report.json, profile.csv, beam.png).

The ratio analysis / Pillow decode is the figure the README quotes (issue: at most 1.5).
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import time

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
CACHE = os.path.join(HERE, "_cache")
SIZES = {200: (16320, 12240), 48: (8000, 6000), 12: (4000, 3000)}
FOCAL_35MM = 24.0


def ensure_photo(mp: int) -> str:
    import cv2

    from beamshot.synth import HotspotSpillBeam, Scene, SynthCamera, encode_jpeg, exposure_time_for_peak, render_photo

    path = os.path.join(CACHE, f"beam_{mp}mp_big.jpg")
    if os.path.exists(path):
        return path
    os.makedirs(CACHE, exist_ok=True)
    w, h = SIZES[mp]
    pattern = HotspotSpillBeam(peak_cd=20000, hotspot_fwhm_deg=6, spill_fraction=0.015, cutoff_deg=30)
    scene = Scene(distance_m=5.0)
    small = SynthCamera(width_px=w // 4, height_px=h // 4, focal_35mm_mm=FOCAL_35MM, supersample=1, iso=400.0,
                        full_well_e=1200.0, read_noise_e=4.0)
    from dataclasses import replace

    small = replace(small, exposure_time_s=exposure_time_for_peak(pattern, scene, small, target=0.8))
    pixels = cv2.resize(render_photo(pattern, scene, small), (w, h), interpolation=cv2.INTER_LINEAR)
    rng = np.random.default_rng(1)
    for top in range(0, h, 512):  # phone-like grain, strip by strip to keep memory low
        strip = pixels[top:top + 512].astype(np.int16)
        strip += rng.integers(-3, 4, size=strip.shape, dtype=np.int16)
        pixels[top:top + 512] = np.clip(strip, 0, 255).astype(np.uint8)
    big = replace(small, width_px=w, height_px=h)
    data = encode_jpeg(pixels, big, quality=90)
    del pixels
    with open(path, "wb") as fh:
        fh.write(data)
    return path


_STEPS = {
    "pillow": "from PIL import Image; import numpy as np; Image.MAX_IMAGE_PIXELS = None; "
              "a = np.asarray(Image.open(PATH).convert('RGB'))",
    "opencv": "import cv2; cv2.setNumThreads(2); a = cv2.imread(PATH)",
    "analyze": "from beamshot import analyze; analyze(PATH, distance_m=5.0)",
    "analyze+files": "import tempfile, os; from beamshot import analyze; from beamshot.report.output import "
                     "write_report; write_report(analyze(PATH, distance_m=5.0), os.path.join(tempfile.mkdtemp(), 'r'))",
}


def measure(step: str, path: str) -> tuple[float, float]:
    """Peak resident memory (MB) and wall time (s) of a fresh process running ``step``."""
    code = (f"PATH = {path!r}\nimport time; t0 = time.perf_counter()\n{_STEPS[step]}\n"
            "t = time.perf_counter() - t0\n"
            "hwm = [l for l in open('/proc/self/status') if l.startswith('VmHWM:')][0].split()[1]\n"
            "print(int(hwm) / 1024.0, t)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout.split()
    return float(out[-2]), float(out[-1])


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--mp", type=int, default=200, choices=sorted(SIZES))
    args = ap.parse_args()
    t0 = time.perf_counter()
    path = ensure_photo(args.mp)
    made = time.perf_counter() - t0
    size = os.path.getsize(path) / 1e6
    print(f"{os.path.basename(path)}: {SIZES[args.mp][0]}x{SIZES[args.mp][1]}, {size:.0f} MB"
          + (f" (made in {made:.0f} s)" if made > 1 else ""))
    res = {step: measure(step, path) for step in _STEPS}
    base = res["pillow"][0]
    print(f"{'step':16s} {'peak MB':>9s} {'/ Pillow':>9s} {'time s':>8s}")
    for step, (mb, t) in res.items():
        print(f"{step:16s} {mb:9.0f} {mb / base:9.2f} {t:8.1f}")


if __name__ == "__main__":
    main()
