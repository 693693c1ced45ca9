"""Whole-process start-up time of the command line: ``beamshot --help`` and ``beamshot analyze --help``
beside a bare ``python -c pass`` for reference (median of N runs, wall clock and CPU time, output discarded).

    python benchmarks/bench_help.py [--repeat 5]

The help of every command should take well under 0.3 s: the command line imports only click and
small modules of its own; numpy, SciPy, OpenCV, matplotlib and the analysis are imported inside
the commands.  ``python -X importtime -m beamshot --help`` shows what is imported.
"""

from __future__ import annotations

import argparse
import os
import resource
import shutil
import statistics
import subprocess
import sys
import time


def _cpu() -> float:
    r = resource.getrusage(resource.RUSAGE_CHILDREN)
    return r.ru_utime + r.ru_stime


def _time(cmd: list[str], repeat: int) -> tuple[float, float, float, float]:
    """Median, min and max wall-clock time, and the median CPU time (user + system) of ``cmd``."""
    subprocess.run(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, check=True)  # warm the file cache
    times, cpu = [], []
    for _ in range(repeat):
        c0, t0 = _cpu(), time.perf_counter()
        subprocess.run(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, check=True)
        times.append(time.perf_counter() - t0)
        cpu.append(_cpu() - c0)
    return statistics.median(times), min(times), max(times), statistics.median(cpu)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=5, help="runs per command (the median is reported)")
    args = ap.parse_args()
    script = shutil.which("beamshot", path=os.path.dirname(sys.executable)) or shutil.which("beamshot")
    beamshot = [script] if script else [sys.executable, "-m", "beamshot"]
    cases = [
        ("python -c pass", [sys.executable, "-c", "pass"]),
        ("beamshot --help", [*beamshot, "--help"]),
        ("beamshot analyze --help", [*beamshot, "analyze", "--help"]),
    ]
    print(f"{'command':28s} {'median':>8s} {'min':>8s} {'max':>8s} {'CPU':>8s}   (wall clock; CPU = user + system, "
          f"median; {args.repeat} runs each; load average {os.getloadavg()[0]:.1f} on {os.cpu_count()} CPUs)")
    for name, cmd in cases:
        med, lo, hi, cpu = _time(cmd, args.repeat)
        print(f"{name:28s} {med:7.3f}s {lo:7.3f}s {hi:7.3f}s {cpu:7.3f}s")


if __name__ == "__main__":
    main()
