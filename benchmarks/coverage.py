"""Print the uncertainty coverage table: synthetic photos with varied faults, error over stated sigma.

    python benchmarks/coverage.py [--cases 24] [--first-seed 0] [--shape]

Basis: JCGM 100:2008 (GUM) 6.2-6.3 - about 95 % of figures should lie within two standard
uncertainties of the truth (k = 2: 95.45 % for a normal distribution).  The photo set and its
faults are in tests/coverage_set.py.
"""

import argparse
import os
import sys

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "tests"))

import coverage_set  # noqa: E402


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cases", type=int, default=24)
    ap.add_argument("--first-seed", type=int, default=0)
    ap.add_argument("--shape", action="store_true",
                    help="also the beam-shape figures, against the shape stage run on the pattern itself")
    args = ap.parse_args()
    rows = coverage_set.run(args.cases, args.first_seed, shape=args.shape)
    main_rows = [r for r in rows if not r["figure"].startswith("shape:")]
    shape_rows = [r for r in rows if r["figure"].startswith("shape:")]
    for part in (main_rows, shape_rows):
        if not part:
            continue
        print(coverage_set.format_summary(coverage_set.summary(part)))
        print("\nlargest |z|:")
        for r in sorted(part, key=lambda r: -abs(r["z"]))[:8]:
            err = f"error {r['value'] / r['truth'] - 1:+7.1%}" if r["truth"] else f"error {r['value']:+.3g} (truth 0)"
            print(f"  {r['case']:40s} {r['figure']:24s} {err}  z {r['z']:+.1f}")
        print()


if __name__ == "__main__":
    main()
