"""Time to plan a scan of 10^6 grid points (validation, point keys, chunks, manifests, table file).

Run from a clean clone, with the project's environment active:

    python bench/plan_speed.py [--points N] [--repeat R]

What is measured: :func:`holoscan.scan.snakemake_glue.plan_scan` (what the Snakefile calls on every
run: schema and physics validation of the config, then :func:`holoscan.scan.plan.make_plan`) on a
config of one invented closed-form ``rn`` model on a square (T, mu) grid of ``--points`` points
(default 10^6) in an empty results folder, so every point is new: every key is computed, every
point packed into a chunk and every chunk manifest's text made. Wall time (``perf_counter``), best
of ``--repeat`` runs (default 3), each in this process; plus, for scale, the time of the plain
loop that computes the same point keys one by one with :func:`holoscan.scan.identity.point_key`
(the least any plan must do), as a ratio.

Bar: planning 10^6 points in under 10 s on this machine. Exit status 0 when under the bar.
"""
from __future__ import annotations

import argparse
import math
import platform
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from holoscan.scan.identity import code_hash, model_context, point_key
from holoscan.scan.snakemake_glue import plan_scan

BAR_S = 10.0
MODEL = {"id": "bench-rn4", "kind": "rn", "d": 4, "kappa_sq": 0.5, "e_sq": 2.0}


def config(n: int) -> dict:
    side = math.isqrt(n)
    return {"scan": "plan-speed", "models": [MODEL], "max_points": max(n, 1_000_000),
            "grid": {"T": {"min": 0.05, "max": 2.0, "num": side, "spacing": "log"},
                     "mu": {"min": -3.0, "max": 3.0, "num": n // side}}}


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--points", type=int, default=1_000_000)
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    print(f"host {platform.node()}, Python {platform.python_version()}")
    best, plan = math.inf, None
    for _ in range(args.repeat):
        with tempfile.TemporaryDirectory() as d:
            t0 = time.perf_counter()
            _, plan = plan_scan(config(args.points), None, Path(d) / "results")
            best = min(best, time.perf_counter() - t0)
    m = plan_scan(config(args.points), None, tempfile.mkdtemp())[0].models[0]
    ctx = model_context(m.model.spec(), m.settings.canonical(), code_hash())
    t0 = time.perf_counter()
    for T, mu in m.points:
        point_key(ctx, T, mu)
    plain = time.perf_counter() - t0
    ok = best < BAR_S
    print(f"plan of {plan.n_points:,} points: {best:.2f} s (best of {args.repeat}); {len(plan.chunk_ids)} chunks; "
          f"plain key loop {plain:.2f} s (plan / plain = {best / plain:.2f}); bar < {BAR_S:.0f} s: "
          f"{'PASS' if ok else 'OVER BAR'}")
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
