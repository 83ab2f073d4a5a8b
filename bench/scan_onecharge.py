"""The whole workflow against the plain per-point method, side by side in one run, at default settings.

    python bench/scan_onecharge.py [--n 60] [--n-small 20] [--sample 30]

The model is the one-charge black hole (an unsourced ``emd`` model with a closed form), on
``T`` in linspace(0.4, 2, n) x ``mu/T`` in linspace(0, 2, n) (every branch of every target). Two
scans, each in a fresh temporary folder with a copy of ``Snakefile`` and ``workflow/`` and nothing
but the model and its grid in the config (no ``points_per_job``, no solver block):

1. ``n x n`` targets (default 3,600), everything: plan, shared atlas, chunks, lines, tables,
   figures, provenance (``snakemake --cores 2``);
2. ``n_small x n_small`` targets (default 400), the same.

Two per-point methods run in this process on every ``--sample``-th target of the large grid (their
rates, targets per second, are what is compared): the plain reference of bench/emd_throughput.py
(``solve_ivp`` DOP853 at rtol 1e-7 with hand-written couplings and ``scipy.optimize.root``, tuned
to just meet 1e-8), and holoscan's own point solver (method ``shooting``, every branch, its error
evidence). Accuracy: the largest relative error of ``s`` over ``ok`` rows of
both against the closed form (tests/reference/onecharge.py, Gubser 1998; Cvetic & Gubser 1999);
and, like for like, the workflow's largest error on the targets the reference converged on and on
the same root (the workflow's row nearest the reference's ``s`` at that target; the workflow also
solves the deep unstable rows, which the reference never reaches and which are its least accurate).

Prints the rates, the ratios, the errors and the workflow's per-rule wall times from Snakemake's
log. Machine load distorts the ratios; the load average is printed.
"""
from __future__ import annotations

import argparse
import os
import re
import shutil
import subprocess
import sys
import tempfile
import time
from datetime import datetime
from pathlib import Path

import numpy as np
import pyarrow.parquet as pq
import yaml

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO))
sys.path.insert(0, str(REPO / "tests"))
sys.path.insert(0, str(REPO / "bench"))

from emd_throughput import OneChargeCouplings, PlainReference  # noqa: E402
from reference import onecharge as oc  # noqa: E402

from holoscan import SolverSettings, model_from_block, solve_point  # noqa: E402

MODEL = {"id": "onecharge", "kind": "emd", "kappa_sq": 1.0,
         "V": "-(8*exp(phi/sqrt(6)) + 4*exp(-2*phi/sqrt(6)))", "f": "exp(-4*phi/sqrt(6))", "source": False}


def targets(n):
    return [(float(T), float(x * T)) for T in np.linspace(0.4, 2, n) for x in np.linspace(0, 2, n)]


def s_error(T, mu, s):
    refs = oc.points(T, mu)
    return min(abs(s - r["s"]) / r["s"] for r in refs) if refs else np.inf


def run_workflow(n):
    tmp = Path(tempfile.mkdtemp(prefix="holoscan-bench-"))
    try:
        shutil.copy(REPO / "Snakefile", tmp / "Snakefile")
        for d in ("workflow", "profiles"):
            shutil.copytree(REPO / d, tmp / d)
        grid = {"T": {"min": 0.4, "max": 2.0, "num": n}, "mu_over_T": [float(x) for x in np.linspace(0, 2, n)]}
        (tmp / "config").mkdir()
        (tmp / "config" / "config.yaml").write_text(yaml.safe_dump({"scan": "bench", "models": [{**MODEL, "grid": grid}]}))
        env = {**os.environ, "PYTHONPATH": f"{REPO}{os.pathsep}{os.environ.get('PYTHONPATH', '')}"}
        t0 = time.perf_counter()
        p = subprocess.run([sys.executable, "-m", "snakemake", "--cores", "2"], cwd=tmp, env=env,
                           capture_output=True, text=True)
        wall = time.perf_counter() - t0
        if p.returncode:
            raise RuntimeError(p.stdout[-3000:] + p.stderr[-3000:])
        t = pq.read_table(tmp / "results" / "bench" / "points.parquet").to_pandas()
        ok = t[t.status == "ok"]
        err = max(s_error(r.T, r.mu, r.s) for r in ok.itertuples())
        return wall, len(t), len(ok), err, rule_times(tmp), ok[["T", "mu", "s"]].to_numpy()
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


def rule_times(ws):
    """Wall seconds per rule (sum over its jobs) from Snakemake's log."""
    log = sorted((ws / ".snakemake" / "log").glob("*.log"))[-1].read_text().splitlines()
    stamp, started, out = None, {}, {}
    for line in log:
        m = re.match(r"\[(\w{3} \w{3}\s+\d+ [\d:]+ \d{4})\]", line)
        if m:
            stamp = datetime.strptime(m.group(1), "%a %b %d %H:%M:%S %Y")
            continue
        m = re.match(r"\s*(?:local)?rule (\w+):", line)
        if m:
            started.setdefault(m.group(1), []).append(stamp)
        m = re.match(r"Finished jobid: \d+ \(Rule: (\w+)\)", line)
        if m and started.get(m.group(1)):
            out[m.group(1)] = out.get(m.group(1), 0.0) + (stamp - started[m.group(1)].pop(0)).total_seconds()
    return out


def plain_rate(n, sample):
    m = model_from_block(MODEL)
    pts = targets(n)[::sample]
    st = SolverSettings(method="shooting")
    t0 = time.perf_counter()
    rows = [(T, mu, r) for T, mu in pts for r in solve_point(m, T, mu, st)]
    dt = time.perf_counter() - t0
    ok = [(T, mu, r) for T, mu, r in rows if r.status == "ok"]
    return len(pts) / dt, dt, len(pts), max(s_error(T, mu, r.s) for T, mu, r in ok)


def plain_reference_rate(n, sample):
    ref = PlainReference(OneChargeCouplings, 1e-7)
    pts = targets(n)[::sample]
    t0 = time.perf_counter()
    res = [(T, mu, ref.solve(T, mu)) for T, mu in pts]
    dt = time.perf_counter() - t0
    ok = [(T, mu, s) for T, mu, (good, s, _) in res if good]
    return len(ok) / dt, dt, len(pts), len(ok), max(s_error(T, mu, s) for T, mu, s in ok), ok


def same_roots_error(ok_rows, ref_ok):
    """The workflow's worst s error on the reference's converged targets, on the reference's root."""
    worst, found = 0.0, 0
    for T, mu, s_ref in ref_ok:
        same = np.isclose(ok_rows[:, 0], T, rtol=1e-9, atol=0) & np.isclose(ok_rows[:, 1], mu, rtol=1e-9, atol=1e-12)
        here = ok_rows[same]
        if not len(here):
            continue
        s = here[np.argmin(np.abs(here[:, 2] / s_ref - 1)), 2]
        worst, found = max(worst, s_error(T, mu, s)), found + 1
    return worst, found


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--n", type=int, default=60)
    ap.add_argument("--n-small", type=int, default=20)
    ap.add_argument("--sample", type=int, default=30)
    ap.add_argument("--no-point-solver", action="store_true", help="skip holoscan's point solver (slow)")
    a = ap.parse_args()
    print(f"load average before: {os.getloadavg()}")
    rate, dt, npts, nok, perr, ref_ok = plain_reference_rate(a.n, a.sample)
    print(f"plain reference (solve_ivp + root, rtol 1e-7): {npts} targets in {dt:.1f} s, {nok} converged = "
          f"{rate:.3f} targets/s; worst s error {perr:.2e}")
    if not a.no_point_solver:
        prate, pdt, pn, perr2 = plain_rate(a.n, a.sample)
        print(f"holoscan point solver (method shooting): {pn} targets in {pdt:.1f} s = {prate:.3f} targets/s; "
              f"worst s error {perr2:.2e}")
    for n in (a.n, a.n_small):
        wall, rows, ok, err, rules, ok_rows = run_workflow(n)
        wrate = n * n / wall
        print(f"workflow {n} x {n} = {n * n} targets: {wall:.1f} s (everything) = {wrate:.2f} targets/s, "
              f"{wrate / rate:.1f} x the plain rate; {rows} rows, {ok} ok; worst s error {err:.2e}")
        if n == a.n:
            same, found = same_roots_error(ok_rows, ref_ok)
            print(f"  like for like: on the {found} of {len(ref_ok)} targets the reference converged on, same root: "
                  f"worst s error workflow {same:.2e} / reference {perr:.2e}")
        print("  per rule (s, summed over jobs): " + ", ".join(f"{k} {v:.0f}" for k, v in sorted(rules.items())))
    print(f"load average after: {os.getloadavg()}")


if __name__ == "__main__":
    main()
