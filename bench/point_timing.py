"""Time one Reissner-Nordstrom point: in-process (closed form and shooting) and the whole
`holoscan point` command as a separate process. Prints medians; run from the repository root:

    python bench/point_timing.py [--repeat N]
"""
from __future__ import annotations

import argparse
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from holoscan import RNModel, SolverSettings, solve_point

CFG = "models:\n  - {id: b, kind: rn, d: 4, kappa_sq: 0.5, e_sq: 2.0}\n"


def median_time(fn, repeat):
    ts = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        ts.append(time.perf_counter() - t0)
    return statistics.median(ts), min(ts), max(ts)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeat", type=int, default=15)
    n = ap.parse_args().repeat
    m = RNModel("b", 4, 0.5, 2.0)
    targets = [(1.0, x) for x in (0.0, 0.5, 2.0, 5.0)]
    rows = []
    for method in ("closed-form", "shooting"):
        st = SolverSettings(method=method)
        i = iter(range(10**9))
        med, lo, hi = median_time(lambda i=i, st=st: solve_point(m, *targets[next(i) % len(targets)], st), n)
        rows.append((f"in-process, {method}", med, lo, hi))
    with tempfile.TemporaryDirectory() as tmp:
        cfg = Path(tmp) / "b.yaml"
        cfg.write_text(CFG)
        for method in ("closed-form", "shooting"):
            cmd = [sys.executable, "-m", "holoscan", "point", "--config", str(cfg), "--model", "b",
                   "--T", "1.0", "--mu", "2.0", "--method", method]
            med, lo, hi = median_time(lambda cmd=cmd: subprocess.run(cmd, check=True, capture_output=True), max(3, n // 3))
            rows.append((f"holoscan point process, {method}", med, lo, hi))
    print(f"{'what':40s} {'median [s]':>11s} {'min':>9s} {'max':>9s}")
    for name, med, lo, hi in rows:
        print(f"{name:40s} {med:11.3e} {lo:9.2e} {hi:9.2e}")


if __name__ == "__main__":
    main()
