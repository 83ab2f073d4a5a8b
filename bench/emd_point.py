"""Time targeted Einstein-Maxwell-dilaton points and check them against the one-charge black hole.

    python bench/emd_point.py [--points N]

Reports the median wall time per targeted point and per branch found (after the once-per-model
coarse scan, which is timed separately), and the largest relative error of s, rho and chi2 against
the closed form (Behrndt, Cvetic & Sabra 1999; DeWolfe, Gubser & Rosen 2011 normalisation: see
tests/test_emd_onecharge.py for the formulas).
"""
from __future__ import annotations

import argparse
import statistics
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))

from test_emd_onecharge import ONE_CHARGE, closed

from holoscan import model_from_block, solve_point
from holoscan.kinds.emd.pointwise import shooter_for


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--points", type=int, default=8)
    n = ap.parse_args().points
    m = model_from_block(ONE_CHARGE)
    t0 = time.perf_counter()
    sh = shooter_for(m, *m.couplings())
    sh.grid()
    t_grid = time.perf_counter() - t0
    xs = [0.1 + (2.15 - 0.1) * k / max(n - 1, 1) for k in range(n)]
    per_point, per_branch, worst = [], [], 0.0
    for x in xs:
        t = time.perf_counter()
        rows = solve_point(m, 1.0, x)
        dt = time.perf_counter() - t
        per_point.append(dt)
        per_branch.append(dt / max(len(rows), 1))
        for b, r in enumerate(sorted(rows, key=lambda r: -r.s)):
            s, rho, chi2 = closed(1.0, x, b)
            worst = max(worst, abs(r.s / s - 1), abs(r.rho / rho - 1), abs(r.chi2 / chi2 - 1))
    print(f"one-charge black hole, {n} targets mu/T in [0.1, 2.15], T = 1")
    print(f"  coarse scan of horizon data (once per model and process): {t_grid:.2f} s")
    print(f"  median time per targeted point: {statistics.median(per_point):.2f} s "
          f"(min {min(per_point):.2f}, max {max(per_point):.2f})")
    print(f"  median time per branch found:   {statistics.median(per_branch):.2f} s")
    print(f"  largest relative error in s, rho, chi2 against the closed form: {worst:.2e}")


if __name__ == "__main__":
    main()
