"""Peak resident memory (RSS) of one chunk job and of assembling a 10^7-row points table.

Run from a clean clone, with the project's environment active, in one command:

    python bench/memory.py

What is measured (each in a fresh child process running the real ``holoscan`` command line, with
this checkout first on ``PYTHONPATH``):

1. one chunk job, ``python -m holoscan solve-chunk MANIFEST --out SEGMENT --log LOG``, on a real
   manifest: a config with one model from ``config/config.yaml`` on the grid T in [0.17, 0.27],
   mu in [0, 1.0] (n_T x n_mu points, the most nearly square factorisation of the point count) is
   validated and planned by :func:`holoscan.scan.snakemake_glue.plan_scan` (what the Snakefile
   calls) in a temporary folder, with ``points_per_job`` equal to the point count, so the plan has
   exactly one chunk;

   a. ``rn4-demo`` (kind rn, closed form) with ``--chunk-points`` points (default: the config's
      top-level ``points_per_job``, 400: the default chunk size);
   b. ``dilaton-demo`` (kind emd, the invented dilaton model) with ``--emd-points`` points
      (default 12, not 400: with the solver as of this writing a dilaton point takes about 10 s
      on one core, so 400 points would take over an hour; the demo config itself gives this model
      ``points_per_job: 18``). The output says when a chunk is smaller than the default size.
      The emd solver is being rewritten; this script only uses the command line and the public
      plan functions, so it measures whatever the code is when it runs.

2. assembly, ``python -m holoscan assemble PLAN --out points.parquet --summary ... --summary-text
   ...`` (the arguments of ``workflow/rules/assemble.smk``), of ``--rows`` rows (default 10^7) from
   ``--segments`` sealed segments (default 2,500 of 4,000 rows). The plan is real: a config of two
   invented ``rn`` bench models (d = 4 closed form and d = 3 shooting, half of the rows each, one
   branch per point) planned by ``plan_scan``, which writes the manifests and
   ``plan/table-<hash>.json``. Each manifest is then turned into a segment of synthetic rows
   instead of being solved: observables are invented by a seeded ``numpy`` Generator (conformal
   Euler relation, a few per cent of ``not converged`` and ``failed`` rows with null observables,
   per-row messages, JSON ``extra``, timestamps), built with exactly the Arrow schema of
   :func:`holoscan.scan.tables.rows_to_table` (checked) and sealed with
   :func:`holoscan.scan.store.write_segment` as a chunk job does (written to a temporary name,
   fsynced, seal first, then renamed). The output's row count is read from its Parquet metadata.
   The data are invented and only serve to size the memory; they are not physics.

How peak RSS is read: the benchmark starts a small wrapper (``python -c``) per measurement, the
wrapper starts the measured command as its only child, waits for it and reads
``resource.getrusage(RUSAGE_CHILDREN).ru_maxrss`` (KiB on Linux): the peak RSS of that one job,
not a maximum over all jobs, and not inflated by this (possibly large) benchmark process, whose
memory a child started by fork/vfork would otherwise carry into its high-water mark. The floor of
the figure is the wrapper's own RSS (about 10 MiB). The wrapper also samples the child's VmRSS from
``/proc`` every 0.05 s, to show when the peak happens and whether RSS grows during a chunk.

Bars: a chunk job at the default chunk size under 1 GiB; the 10^7-row assembly under 1 GiB. The
import baseline (``python -m holoscan --version``) is printed for reference.

Options: ``--chunk-points N`` (rn4-demo chunk, default 400), ``--emd-points N`` (dilaton-demo chunk,
default 12), ``--rows N`` (default 10,000,000), ``--segments N`` (default 2,500), ``--seed N``,
``--skip emd|rn4|assemble`` (repeatable), ``--workdir DIR`` (the temporary folder is created inside
it instead of the system's temporary folder), ``--keep`` (do not delete the temporary folder; its
path is printed). Default run: about 4 minutes on 2 cores, most of it the dilaton points.

Exit status 0 when every measurement ran, its checks passed and it is under its bar; 1 otherwise.
"""
from __future__ import annotations

import argparse
import json
import math
import os
import platform
import shutil
import socket
import subprocess
import sys
import tempfile
import time
from datetime import UTC, datetime, timedelta
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO))  # measure this checkout's holoscan, also in the jobs (PYTHONPATH below)

import numpy as np  # noqa: E402
import pyarrow as pa  # noqa: E402
import pyarrow.parquet as pq  # noqa: E402

import holoscan  # noqa: E402
from holoscan.config import read_yaml  # noqa: E402
from holoscan.scan.identity import code_hash  # noqa: E402
from holoscan.scan.plan import write_plan_files  # noqa: E402
from holoscan.scan.snakemake_glue import plan_scan  # noqa: E402
from holoscan.scan.store import write_segment  # noqa: E402
from holoscan.scan.tables import COLUMNS, rows_to_table, schema  # noqa: E402

CONFIG = REPO / "config" / "config.yaml"
SCHEMA = REPO / "workflow" / "schemas" / "config.schema.yaml"
MIB = 1024.0  # KiB per MiB
CHUNK_BAR_MIB = 1024.0
ASSEMBLY_BAR_MIB = 1024.0
CHUNK_BOX = {"T": (0.17, 0.27), "mu": (0.0, 1.0)}
DEFAULT_EMD_POINTS = 400  # the default chunk size (top-level points_per_job of config/config.yaml)

# The wrapper that measures one command: its only child is the measured job, so RUSAGE_CHILDREN is
# that job's own peak. argv[1]: the command as JSON; argv[2], argv[3]: files for stdout, stderr.
WRAPPER = r"""
import json, resource, subprocess, sys, time
argv, out, err = json.loads(sys.argv[1]), sys.argv[2], sys.argv[3]
samples = []
t0 = time.perf_counter()
with open(out, "wb") as fo, open(err, "wb") as fe:
    p = subprocess.Popen(argv, stdout=fo, stderr=fe)
    while p.poll() is None:
        try:
            with open(f"/proc/{p.pid}/status") as fh:
                for line in fh:
                    if line.startswith("VmRSS:"):
                        samples.append((round(time.perf_counter() - t0, 3), int(line.split()[1])))
                        break
        except (OSError, ValueError, IndexError):
            pass
        time.sleep(0.05)
wall = time.perf_counter() - t0
ru = resource.getrusage(resource.RUSAGE_CHILDREN)
print(json.dumps({"rc": p.returncode, "wall": wall, "maxrss_kib": ru.ru_maxrss,
                  "cpu": ru.ru_utime + ru.ru_stime, "samples": samples}))
"""


def child_env() -> dict:
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join([str(REPO), *filter(None, [env.get("PYTHONPATH")])])
    return env


def measure(argv: list[str], cwd: Path, tag: str) -> dict:
    """Run ``argv`` under the wrapper in ``cwd``; its peak RSS (KiB), wall and CPU time, exit code."""
    out, err = cwd / f"{tag}.stdout", cwd / f"{tag}.stderr"
    res = subprocess.run([sys.executable, "-c", WRAPPER, json.dumps(argv), str(out), str(err)],
                         cwd=cwd, env=child_env(), capture_output=True, text=True, check=False)
    if res.returncode != 0:
        raise RuntimeError(f"measuring wrapper failed ({res.returncode}): {res.stderr.strip()}")
    m = json.loads(res.stdout.strip().splitlines()[-1])
    m["stdout"], m["stderr"] = out.read_text(errors="replace"), err.read_text(errors="replace")
    return m


def holoscan_cmd(*args) -> list[str]:
    return [sys.executable, "-m", "holoscan", *map(str, args)]


def factor(n: int) -> tuple[int, int]:
    """(a, b) with a * b = n and a the largest divisor of n not above sqrt(n)."""
    a = max(d for d in range(1, math.isqrt(n) + 1) if n % d == 0)
    return a, n // a


def axis(lo: float, hi: float, num: int, spacing: str = "linear") -> dict:
    if num == 1:
        return {"min": lo, "max": lo, "num": 1}
    return {"min": lo, "max": hi, "num": num, "spacing": spacing}


def rss_profile(samples: list) -> str:
    """VmRSS at 25%, 50%, 75% of the samples and the largest sample, in MiB."""
    if not samples:
        return "no /proc samples (job too short)"
    rss = [s[1] for s in samples]
    at = [rss[min(len(rss) - 1, int(f * len(rss)))] / MIB for f in (0.25, 0.5, 0.75)]
    t_max = samples[int(np.argmax(rss))][0]
    return (f"sampled VmRSS at 25/50/75% of the run {at[0]:.0f}/{at[1]:.0f}/{at[2]:.0f} MiB, "
            f"largest sample {max(rss) / MIB:.0f} MiB at t = {t_max:.1f} s ({len(rss)} samples)")


# ---------------------------------------------------------------------------------------------
# 1. one chunk job


def measure_chunk(work: Path, model_id: str, n_points: int) -> dict:
    """Plan a one-chunk scan of ``model_id`` on CHUNK_BOX with ``n_points`` points; run its job."""
    demo = read_yaml(CONFIG)
    block = next(m for m in demo["models"] if m["id"] == model_id)
    own_ppj = block.get("points_per_job")  # the demo config's own chunk size for this model, if any
    block = {k: v for k, v in block.items() if k not in ("grid", "points_per_job")}
    n_T, n_mu = factor(n_points)
    block["grid"] = {"T": axis(*CHUNK_BOX["T"], n_T), "mu": axis(*CHUNK_BOX["mu"], n_mu)}
    block["points_per_job"] = n_points
    doc = {"scan": f"mem-chunk-{model_id}", "models": [block], "points_per_job": n_points}
    if "solver" in demo:
        doc["solver"] = demo["solver"]
    folder = work / f"chunk-{model_id}"
    folder.mkdir()
    (folder / "config.json").write_text(json.dumps(doc, indent=1))  # JSON is YAML: a config file
    for attempt in (1, 2):
        _, plan = plan_scan(doc, SCHEMA, folder / "results")
        write_plan_files(plan)
        if len(plan.chunk_ids) != 1 or plan.n_points != n_points:
            raise RuntimeError(f"expected one chunk of {n_points} points, got {len(plan.chunk_ids)} chunk(s) "
                               f"for {plan.n_points} points")
        cid = plan.chunk_ids[0]
        seg = plan.segment(cid)
        m = measure(holoscan_cmd("solve-chunk", plan.chunk_manifest(cid), "--out", seg, "--log",
                                 f"logs/solve_chunk/{plan.scan}/{cid}.log"), folder, f"solve-chunk-{attempt}")
        if m["rc"] != 3:  # 3: stale manifest (the physics code changed after planning): plan again once
            break
    m.update(label=f"solve-chunk {model_id} ({block['kind']})", points=n_points, grid=f"{n_T} T x {n_mu} mu",
             bar_mib=CHUNK_BAR_MIB, attempts=attempt, checks=[], own_ppj=own_ppj)
    if m["rc"] == 0 and seg.exists():
        t = pq.read_table(seg, columns=["status"])
        st = t["status"].value_counts().to_pylist()
        m["rows"] = t.num_rows
        m["statuses"] = ", ".join(f"{d['values']}: {d['counts']}" for d in st)
    else:
        m["checks"].append(f"job failed (exit {m['rc']}): {m['stderr'].strip()[-400:]}")
    return m


# ---------------------------------------------------------------------------------------------
# 2. assembly of synthetic sealed segments

# Invented bench models (our own parameters), one branch per point, so rows = points.
BENCH_MODELS = [
    {"id": "mem-rn4", "kind": "rn", "d": 4, "kappa_sq": 0.7, "e_sq": 1.3},
    {"id": "mem-rn3", "kind": "rn", "d": 3, "kappa_sq": 1.1, "e_sq": 0.9,
     "solver": {"method": "shooting", "rtol": 1.0e-10}},
]


def assembly_config(n_rows: int, n_segments: int) -> dict:
    halves = [n_rows - n_rows // 2, n_rows // 2]
    models = []
    for block, n in zip(BENCH_MODELS, halves):
        n_T, n_mu = factor(n)
        models.append({**block, "grid": {"T": axis(0.05, 2.0, n_T, "log"), "mu": axis(-3.0, 3.0, n_mu)}})
    return {"scan": "mem-assemble", "models": models, "solver": {"method": "auto"},
            "points_per_job": math.ceil(n_rows / n_segments), "max_jobs": max(1000, 2 * n_segments),
            "max_points": max(1_000_000, n_rows)}


def _iso(base: datetime, seconds: np.ndarray) -> list[str]:
    return [(base + timedelta(seconds=float(x))).isoformat(timespec="microseconds") for x in seconds]


def synthetic_segment(manifest: dict, rng: np.random.Generator, host: str, t_base: datetime) -> pa.Table:
    """Rows of one chunk in the points-table schema, with invented values (see the module docstring)."""
    pts = manifest["points"]
    n = len(pts)
    (mid, spec), = [(k, v["spec"]) for k, v in manifest["models"].items()]
    solver = manifest["models"][mid]["solver"]
    closed = solver["method"] == "closed-form"
    d = int(spec["d"])
    T = np.array([p[1] for p in pts], float)
    mu = np.array([p[2] for p in pts], float)
    x = mu / T

    def noise(scale):
        return 1.0 + scale * rng.standard_normal(n)

    s_hat = 4.0 * np.pi * (1.0 + 0.4 * x**2) ** 0.5 * noise(1e-3)
    rho_hat = 0.8 * x * (1.0 + 0.1 * x**2) * noise(1e-3)
    chi2_hat = 1.5 * (1.0 + 0.05 * x**2) * noise(1e-3)
    s, rho, chi2 = s_hat * T ** (d - 1), rho_hat * T ** (d - 1), chi2_hat * T ** (d - 2)
    P = (T * s + mu * rho) / d  # Euler relation of a conformal plasma: epsilon + P = T s + mu rho
    eps = (d - 1) * P
    err = np.zeros(n) if closed else 10.0 ** rng.uniform(-11.5, -8.5, n)
    P_check = P * (1.0 + err * rng.standard_normal(n))
    u = rng.random(n)
    status = np.where(u < 0.97, "ok", np.where(u < 0.99, "not converged", "failed"))
    ok, failed = status == "ok", status == "failed"
    nfev = np.zeros(n, np.int64) if closed else rng.integers(1500, 9000, n)
    nsteps = np.zeros(n, np.int64) if closed else nfev // 15
    niter = np.zeros(n, np.int64) if closed else rng.integers(0, 6, n)
    shots = niter + rng.integers(3, 9, n)
    wall = 10.0 ** rng.normal(-5.4, 0.2, n) if closed else 10.0 ** rng.normal(-1.2, 0.3, n)
    residual = np.zeros(n) if closed else 10.0 ** rng.uniform(-15.5, -12.0, n)

    def obs(a):  # failed rows have no observables: null, as the chunk job stores them
        return np.where(failed, np.nan, a)

    if closed:
        r_h = (T * 4.0 * np.pi / d).tolist()
        extra = [json.dumps({"r_h": r}, sort_keys=True) for r in r_h]
        message = np.where(ok, "closed form", "closed form: outside the validity range").tolist()
    else:
        cols = [10.0 ** rng.uniform(-7, -5, n), rng.uniform(0, 2, n), err, rng.uniform(0, 1e-9, n)]
        extra = [json.dumps({"deriv_error": a, "horizon_Phi1": b, "maxwell_mismatch": c, "shots": int(k),
                             "target_mismatch": e}, sort_keys=True)
                 for a, b, c, e, k in zip(*(c.tolist() for c in cols), shots.tolist())]
        message = [f"converged: {i} root iterations, {k} shots" if st == "ok" else
                   (f"not converged: error estimate {e:.3g} above accept_error 1e-08" if st == "not converged"
                    else f"integration failed: step size too small at r = {b:.6g}")
                   for st, i, k, e, b in zip(status.tolist(), niter.tolist(), shots.tolist(),
                                             (err * 1e4 + 2e-8).tolist(), cols[1].tolist())]
    start = np.cumsum(wall + 2e-5) - wall
    values = {
        "model_id": [mid] * n, "kind": [spec["kind"]] * n, "d": np.full(n, d, np.int64),
        "branch": np.zeros(n, np.int64), "T": T, "mu": mu,
        "s": obs(s), "rho": obs(rho), "epsilon": obs(eps), "P": obs(P), "Omega": obs(-P), "chi2": obs(chi2),
        "cs2": obs(np.full(n, 1.0 / (d - 1)) * noise(1e-12)), "P_check": obs(P_check),
        "P_mismatch": obs(np.abs(P - P_check) / np.abs(P)),
        "trace_anomaly": obs((eps - (d - 1) * P) / T**d), "stability": np.where(failed, "", "stable").tolist(),
        "phase": np.where(failed, "", "unique").tolist(), "phase_flag": np.where(ok, "stable", "unknown").tolist(),
        "dominant": ok, "s_hat": obs(s_hat), "rho_hat": obs(rho_hat), "P_hat": obs(P / T**d),
        "chi2_hat": obs(chi2_hat), "status": status.tolist(), "message": list(message),
        "method": [solver["method"]] * n, "rtol": np.full(n, 0.0 if closed else float(solver.get("rtol", 1e-10))),
        "atol": np.zeros(n), "accept_error": np.full(n, float(solver.get("accept_error", 1e-8))),
        "nfev": nfev, "nsteps": nsteps, "niter": niter, "residual": obs(residual), "error_estimate": obs(err),
        "wall_time": wall, "extra": extra, "point_key": [p[3] for p in pts],
        "chunk_id": [manifest["chunk"]] * n, "code_hash": [manifest["code_hash"]] * n,
        "package_version": [manifest["package_version"]] * n, "host": [host] * n,
        "start_time": _iso(t_base, start), "end_time": _iso(t_base, start + wall),
        "log_file": [f"logs/solve_chunk/{manifest['scan']}/{manifest['chunk']}.log"] * n,
    }
    if set(values) != {c[0] for c in COLUMNS}:
        raise RuntimeError(f"synthetic columns differ from the schema: {set(values) ^ {c[0] for c in COLUMNS}}")
    arrays = [pa.array(values[name], type=typ, from_pandas=True) for name, typ, _, _ in COLUMNS]
    return pa.Table.from_arrays(arrays, schema=schema())


def measure_assembly(work: Path, n_rows: int, n_segments: int, seed: int) -> dict:
    folder = work / "assemble"
    folder.mkdir()
    doc = assembly_config(n_rows, n_segments)
    (folder / "config.json").write_text(json.dumps(doc, indent=1))
    t0 = time.perf_counter()
    _, plan = plan_scan(doc, SCHEMA, folder / "results")
    write_plan_files(plan)
    t_plan = time.perf_counter() - t0
    if plan.n_points != n_rows:
        raise RuntimeError(f"planned {plan.n_points} points, wanted {n_rows}")
    reference = rows_to_table([]).schema
    rng = np.random.default_rng(seed)
    host = socket.gethostname()
    t_base = datetime(2026, 1, 5, 9, 0, tzinfo=UTC)
    t0 = time.perf_counter()
    seg_bytes = 0
    for i, cid in enumerate(plan.chunk_ids):
        manifest = json.loads(plan.chunk_manifest(cid).read_text())
        table = synthetic_segment(manifest, rng, host, t_base + timedelta(minutes=i))
        if not table.schema.equals(reference, check_metadata=True):
            raise RuntimeError("synthetic segment schema differs from holoscan.scan.tables.rows_to_table's")
        write_segment(table, plan.segment(cid), [p[3] for p in manifest["points"]], manifest["code_hash"])
        seg_bytes += plan.segment(cid).stat().st_size
    t_gen = time.perf_counter() - t0
    root = Path("results") / plan.scan  # relative, as the workflow's rule passes them
    m = measure(holoscan_cmd("assemble", Path("results") / plan.scan / "plan" / plan.table_file.name,
                             "--out", root / "points.parquet", "--summary", root / "summary.json",
                             "--summary-text", root / "summary.txt"), folder, "assemble")
    m.update(label=f"assemble {n_rows:,} rows", points=n_rows, bar_mib=ASSEMBLY_BAR_MIB, checks=[],
             segments=len(plan.chunk_ids), seg_mib=seg_bytes / 2**20, t_plan=t_plan, t_gen=t_gen,
             plan_mib=plan.table_file.stat().st_size / 2**20)
    out = folder / root / "points.parquet"
    if m["rc"] != 0 or not out.exists():
        m["checks"].append(f"assemble failed (exit {m['rc']}): {m['stderr'].strip()[-400:]}")
        return m
    meta = pq.ParquetFile(out).metadata
    m["rows"] = meta.num_rows
    m["out_mib"] = out.stat().st_size / 2**20
    if meta.num_rows != n_rows:
        m["checks"].append(f"the table has {meta.num_rows:,} rows, expected {n_rows:,}")
    if b"holoscan" not in (meta.metadata or {}):
        m["checks"].append("the table has no 'holoscan' file metadata")
    return m


# ---------------------------------------------------------------------------------------------


def default_chunk_points() -> int:
    try:
        return int(read_yaml(CONFIG).get("points_per_job", 400))
    except (holoscan.InputError, AttributeError, TypeError, ValueError):  # not this benchmark's business
        return 400


def verdict(m: dict) -> str:
    if m["rc"] != 0 or m["checks"]:
        return "FAIL (see below)"
    return "PASS" if m["maxrss_kib"] / MIB < m["bar_mib"] else "OVER BAR"


def main() -> int:
    chunk_default = default_chunk_points()
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--chunk-points", type=int, default=chunk_default,
                    help=f"points of the rn4-demo chunk (default {chunk_default}, the config's points_per_job)")
    ap.add_argument("--emd-points", type=int, default=DEFAULT_EMD_POINTS,
                    help=f"points of the dilaton-demo chunk (default {DEFAULT_EMD_POINTS}, solved in one batch)")
    ap.add_argument("--rows", type=int, default=10_000_000, help="rows of the assembled table (default 10^7)")
    ap.add_argument("--segments", type=int, default=2500, help="sealed segments holding them (default 2,500)")
    ap.add_argument("--seed", type=int, default=20240611, help="seed of the synthetic data")
    ap.add_argument("--skip", action="append", choices=["rn4", "emd", "assemble"], default=[])
    ap.add_argument("--workdir", type=Path, default=None, help="make the temporary folder inside this one")
    ap.add_argument("--keep", action="store_true", help="keep the temporary folder (for profiling)")
    args = ap.parse_args()
    for name in ("chunk_points", "emd_points", "rows", "segments"):
        if getattr(args, name) < 1:
            ap.error(f"--{name.replace('_', '-')} must be >= 1")
    if args.segments > args.rows:
        ap.error("--segments must not exceed --rows")

    print(f"holoscan {holoscan.__version__} (physics code {code_hash()}), {REPO}")
    print(f"host {socket.gethostname()}, {os.cpu_count()} cores, Python {platform.python_version()}, "
          f"numpy {np.__version__}, pyarrow {pa.__version__}, {platform.platform()}")
    print(f"load average before: {' '.join(f'{x:.2f}' for x in os.getloadavg())}")
    if args.workdir:
        args.workdir.mkdir(parents=True, exist_ok=True)
    work = Path(tempfile.mkdtemp(prefix="holoscan-bench-memory-", dir=args.workdir))
    results = []
    t_all = time.perf_counter()
    try:
        base = measure(holoscan_cmd("--version"), work, "baseline")
        base.update(label="baseline: holoscan --version", points=None, bar_mib=None, checks=[])
        results.append(base)
        if "rn4" not in args.skip:
            print(f"solving an rn4-demo chunk of {args.chunk_points} points ...", flush=True)
            results.append(measure_chunk(work, "rn4-demo", args.chunk_points))
        if "emd" not in args.skip:
            print(f"solving a dilaton-demo chunk of {args.emd_points} points ...", flush=True)
            results.append(measure_chunk(work, "dilaton-demo", args.emd_points))
        if "assemble" not in args.skip:
            print(f"planning and writing {args.segments} synthetic segments of {args.rows:,} rows, "
                  "then assembling ...", flush=True)
            results.append(measure_assembly(work, args.rows, args.segments, args.seed))
    finally:
        if args.keep:
            print(f"kept {work}")
        else:
            shutil.rmtree(work, ignore_errors=True)

    print()
    head = f"{'measurement':34s} {'points/rows':>12s} {'wall [s]':>9s} {'CPU [s]':>8s} {'peak RSS [MiB]':>15s} " \
           f"{'bar [MiB]':>10s}  result"
    print(head)
    print("-" * len(head))
    ok = True
    for m in results:
        pts = "-" if m["points"] is None else f"{m['points']:,}"
        bar = "-" if m["bar_mib"] is None else f"< {m['bar_mib']:.0f}"
        res = "-" if m["bar_mib"] is None else verdict(m)
        if m["bar_mib"] is None and m["rc"] != 0:
            res = f"FAIL (exit {m['rc']})"
        ok &= res in ("-", "PASS")
        print(f"{m['label']:34s} {pts:>12s} {m['wall']:9.2f} {m['cpu']:8.2f} {m['maxrss_kib'] / MIB:15.1f} "
              f"{bar:>10s}  {res}")
    print()
    for m in results:
        if m["bar_mib"] is None:
            continue
        print(f"{m['label']}:")
        if "grid" in m:
            print(f"  grid {m['grid']} on T in {list(CHUNK_BOX['T'])}, mu in {list(CHUNK_BOX['mu'])}; "
                  f"{m.get('rows', '?')} rows ({m.get('statuses', 'no segment')})"
                  + ("; planned twice (the physics code changed during the run)" if m.get("attempts", 1) > 1 else ""))
            if m["points"] != chunk_default:
                print(f"  NOTE: measured at {m['points']} points, not at the default chunk size {chunk_default}; "
                      f"{chunk_default} points were not measured"
                      + (f" (config/config.yaml gives this model points_per_job: {m['own_ppj']})"
                         if m.get("own_ppj") else ""))
            if m["rc"] == 0 and m["points"]:
                print(f"  {m['wall'] / m['points']:.3g} s wall per point (including start-up)")
        if "segments" in m:
            print(f"  {m['segments']} sealed segments, {m['seg_mib']:.1f} MiB of Parquet; plan table "
                  f"{m['plan_mib']:.1f} MiB JSON; planning {m['t_plan']:.1f} s, writing the segments "
                  f"{m['t_gen']:.1f} s (in this process, not measured)")
            if "rows" in m:
                print(f"  output: {m['rows']:,} rows (Parquet metadata), {m['out_mib']:.1f} MiB")
        print(f"  {rss_profile(m['samples'])}")
        for c in m["checks"]:
            print(f"  CHECK FAILED: {c}")
    print(f"\nload average after: {' '.join(f'{x:.2f}' for x in os.getloadavg())}; "
          f"total {time.perf_counter() - t_all:.0f} s")
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
