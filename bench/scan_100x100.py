"""The whole workflow on a dense scan of the invented dilaton model: 100 T x 100 mu through Snakemake
on this machine's 2 cores, wall time and its split between solving and orchestration.

    python bench/scan_100x100.py [--n 100] [--points-per-job 5000] [--keep DIR]

In a fresh temporary directory holding a copy of ``Snakefile``, ``workflow/`` and ``profiles/``, a
config with one model, ``dilaton-demo`` (our invented Einstein-Maxwell-dilaton model of
config/config.yaml, units of its source), on T in [0.17, 0.27] x mu in [0, 1.0], ``n x n`` points,
is run cold by ``snakemake --cores 2``: chunks, the lines job, assembly, phase tables, figures and
provenance. Bar: at most 120 s wall, every point's status and error estimate in the table.

Split: *solve* is the time inside the solving jobs, from the first chunk or lines start to the last
end (their own clocks, written into the tables), and the core-seconds they took; *orchestration*
is the rest of the wall time (Snakemake start-up and planning, job start-up, assembly, phase tables,
figures, provenance). Exit status 0 when the bar and the table checks pass.
"""
from __future__ import annotations

import argparse
import shutil
import sys
import tempfile
from collections import Counter
from datetime import datetime
from pathlib import Path

import pyarrow.parquet as pq

sys.path.insert(0, str(Path(__file__).resolve().parent))
from scan_workflow import BenchFailure, load, prepare, snakemake

BAR_S = 120.0
DEMO = {"id": "dilaton-demo", "kind": "emd", "kappa_sq": 1.0,
        "V": "-12*cosh(0.6*phi) + 0.77*phi**2 - 0.15*phi**4 + 0.0015*phi**6", "f": "sech(1.1*phi)"}


def config(n: int, ppj: int) -> dict:
    return {"scan": "dilaton-dense", "models": [{**DEMO, "points_per_job": ppj}],
            "grid": {"T": {"min": 0.17, "max": 0.27, "num": n}, "mu": {"min": 0.0, "max": 1.0, "num": n}}}


def span(starts, ends):
    a = min(datetime.fromisoformat(x) for x in starts)
    b = max(datetime.fromisoformat(x) for x in ends)
    return a, b


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--n", type=int, default=100, help="grid points per axis (default 100)")
    ap.add_argument("--points-per-job", type=int, default=5000)
    ap.add_argument("--keep", help="keep the run directory here instead of a temporary one")
    a = ap.parse_args(argv)
    cfg = config(a.n, a.points_per_job)
    root = Path(a.keep) if a.keep else Path(tempfile.mkdtemp(prefix="holoscan-dense-"))
    root.mkdir(parents=True, exist_ok=True)
    try:
        prepare(root, cfg)
        print(f"load before: {load()}")
        wall, _, _ = snakemake(root, what="dense dilaton scan")
        print(f"load after:  {load()}")
        res = root / "results" / cfg["scan"]
        pts = pq.read_table(res / "points.parquet", columns=["T", "mu", "status", "error_estimate", "chunk_id",
                                                            "start_time", "end_time", "wall_time", "method"]).to_pydict()
        lines = pq.read_table(res / "transitions.parquet", columns=["start_time", "end_time", "status", "type"]).to_pydict()
        n_targets = len({(T, mu) for T, mu in zip(pts["T"], pts["mu"])})
        statuses = Counter(pts["status"])
        missing_err = sum(1 for s, e in zip(pts["status"], pts["error_estimate"])
                          if s in ("ok", "not converged") and e != e)  # NaN
        chunks = {}
        for c, s0, e0 in zip(pts["chunk_id"], pts["start_time"], pts["end_time"]):
            lo, hi = chunks.get(c, (s0, e0))
            chunks[c] = (min(lo, s0), max(hi, e0))
        jobs = {f"chunk {c[:8]}": span([s], [e]) for c, (s, e) in chunks.items()}
        if lines["start_time"]:
            jobs["lines"] = span(lines["start_time"], lines["end_time"])
        first = min(v[0] for v in jobs.values())
        last = max(v[1] for v in jobs.values())
        solve_wall = (last - first).total_seconds()
        print(f"\n{a.n} x {a.n} = {n_targets} targets, {len(pts['T'])} rows (branches), statuses {dict(statuses)}, "
              f"methods {dict(Counter(pts['method']))}")
        print(f"rows without an error estimate (ok / not converged): {missing_err}")
        print(f"transition rows: {len(lines['status'])} ({dict(Counter(lines['type']))})")
        print("\njob                 seconds")
        for k, (s0, e0) in sorted(jobs.items(), key=lambda kv: kv[1][0]):
            print(f"{k:18s} {(e0 - s0).total_seconds():8.1f}")
        print(f"\nwall time, whole workflow:        {wall:7.1f} s  (bar {BAR_S:.0f} s)")
        print(f"  solving (first job start to last end): {solve_wall:7.1f} s")
        print(f"  orchestration (the rest):              {wall - solve_wall:7.1f} s")
        print(f"  core-seconds in the solving jobs:      {sum((e0 - s0).total_seconds() for s0, e0 in jobs.values()):7.1f}")
        ok = wall <= BAR_S and n_targets == a.n * a.n and missing_err == 0
        print("\nMEETS the bar" if ok else "\nMISSES the bar or a check")
        return 0 if ok else 1
    except BenchFailure as exc:
        print(f"FAILED: {exc}", file=sys.stderr)
        return 1
    finally:
        if not a.keep:
            shutil.rmtree(root, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main())
