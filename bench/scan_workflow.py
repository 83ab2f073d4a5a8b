"""Time whole-workflow scans on this machine (2 cores) against the solver alone in process.

Run from a clean clone, with the project's environment active, in one command:

    python bench/scan_workflow.py [--repeat N] [--no-shooting] [--profile]

It measures, each in a fresh temporary directory holding a copy of ``Snakefile`` and ``workflow/``
and a config of its own (invented bench models, not a physics scenario):

1. a 10,000-point ``rn`` scan (two models, 100 T x 50 mu each, closed form, 500 points per job)
   run by ``snakemake --cores 2``: points per second of the whole workflow against
   :func:`holoscan.solve_point` called in a loop in this process on the same points (the ratio is
   the orchestration overhead), with the table's ``wall_time`` total against the wall clock, and a
   check that the table has 10,000 rows, all ``ok``, equal to the in-process numbers;
2. a no-change rerun of that scan in the same directory (must do nothing; bar: under 10 s);
3. the dry run (``snakemake --cores 2 -n``) of a 100,000-point scan (two models, 500 T x 100 mu):
   its wall time (bar: under 10 s) and its number of jobs (must be between 100 and 1000);
4. unless ``--no-shooting``: a 120-point scan by shooting (about 0.5 s a point; 2 models x 3 T x
   20 mu/T, 12 points per job), to show the overhead when the solver is costly; the in-process
   reference runs on every 4th point.

The machine's load average is printed before and after: other processes on the 2 cores slow the
workflow (two jobs at a time) more than the one-core in-process reference.

``--repeat N`` repeats everything N times and reports median, min and max. ``--profile`` (automatic
when the dry run misses its bar) runs the dry run under cProfile and prints the top functions, and
profiles the parse-time plan alone. The jobs run with this checkout's ``holoscan`` first on
``PYTHONPATH``. Temporary directories are removed at the end, also after a failure. Exit status 0
when every check and bar passes, 1 otherwise.
"""
from __future__ import annotations

import argparse
import cProfile
import io
import os
import platform
import pstats
import re
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from collections import defaultdict
from datetime import datetime
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO))  # measure this checkout's holoscan, also in the jobs (PYTHONPATH below)

import pyarrow.parquet as pq  # noqa: E402
import yaml  # noqa: E402

import holoscan  # noqa: E402
from holoscan import SolverSettings, model_from_block, solve_point  # noqa: E402

CORES = 2
BAR_S = 10.0
JOBS_RANGE = (100, 1000)

# Bench models: our own invented parameters, chosen only to exercise two dimensions.
BENCH_MODELS = [
    {"id": "bench-rn4", "kind": "rn", "d": 4, "kappa_sq": 0.9, "e_sq": 1.6},
    {"id": "bench-rn3", "kind": "rn", "d": 3, "kappa_sq": 0.4, "e_sq": 2.5},
]


def grid_block(n_T: int, n_mu: int) -> dict:
    return {"T": {"min": 0.02, "max": 3.0, "num": n_T, "spacing": "log"},
            "mu": {"min": -2.5, "max": 2.5, "num": n_mu}}


CLOSED_10K = {"scan": "bench10k", "models": BENCH_MODELS, "grid": grid_block(100, 50),
              "solver": {"method": "auto"}, "points_per_job": 500}
PLAN_100K = {"scan": "bench100k", "models": BENCH_MODELS, "grid": grid_block(500, 100),
             "solver": {"method": "auto"}, "points_per_job": 500}
SHOOT_120 = {"scan": "benchshoot", "models": BENCH_MODELS,
             "grid": {"T": {"min": 0.05, "max": 2.0, "num": 3, "spacing": "log"},
                      "mu_over_T": {"min": 0.0, "max": 6.0, "num": 20}},
             "solver": {"method": "shooting"}, "points_per_job": 12}


class BenchFailure(RuntimeError):
    pass


# ----------------------------------------------------------------------------------------------
# helpers


def n_points(cfg: dict) -> int:
    g = cfg["grid"]
    return len(cfg["models"]) * g["T"]["num"] * g.get("mu", g.get("mu_over_T"))["num"]


def job_env() -> dict:
    env = os.environ.copy()
    env["PYTHONPATH"] = os.pathsep.join([str(REPO)] + ([env["PYTHONPATH"]] if env.get("PYTHONPATH") else []))
    return env


def prepare(workdir: Path, cfg: dict) -> None:
    """A runnable workflow directory: the repository's Snakefile, workflow/, profiles/ and ``cfg``."""
    shutil.copy2(REPO / "Snakefile", workdir / "Snakefile")
    for d in ("workflow", "profiles"):
        shutil.copytree(REPO / d, workdir / d, ignore=shutil.ignore_patterns("__pycache__"))
    (workdir / "config").mkdir()
    (workdir / "config" / "config.yaml").write_text(yaml.safe_dump(cfg, sort_keys=False))


def run(cmd: list, cwd: Path, what: str) -> tuple[float, str, str]:
    """Run ``cmd`` in ``cwd``; returns (wall seconds, stdout, stderr). Raises BenchFailure on error."""
    t0 = time.perf_counter()
    p = subprocess.run(cmd, cwd=cwd, capture_output=True, text=True, env=job_env())
    dt = time.perf_counter() - t0
    if p.returncode != 0:
        tail = "\n".join((p.stdout + "\n" + p.stderr).strip().splitlines()[-40:])
        raise BenchFailure(f"{what}: exit status {p.returncode} after {dt:.1f} s; last lines:\n{tail}")
    return dt, p.stdout, p.stderr


def snakemake(workdir: Path, *extra: str, what: str) -> tuple[float, str, str]:
    return run([sys.executable, "-m", "snakemake", "--cores", str(CORES), *extra], workdir, what)


def job_stats(text: str) -> dict:
    """The first "Job stats" table of Snakemake's output as {rule: count, 'total': n} ({} if none)."""
    m = re.search(r"^Job stats:\n(.*?)(?:\n\s*\n|\Z)", text, re.S | re.M)
    out = {}
    if m:
        for line in m.group(1).splitlines():
            mm = re.fullmatch(r"(\S+)\s+(\d+)", line.strip())
            if mm:
                out[mm.group(1)] = int(mm.group(2))
    return out


def rule_blocks(text: str) -> int:
    """Jobs listed one by one in a dry run ("rule X:" / "localrule X:" lines)."""
    return len(re.findall(r"^(?:local)?rule \w+:$", text, re.M))


def load() -> str:
    try:
        return "load average " + " ".join(f"{x:.2f}" for x in os.getloadavg()) + " (1, 5, 15 min)"
    except OSError:
        return "load average unavailable"


def summary_of(samples: list[float]) -> tuple[float, float, float]:
    return statistics.median(samples), min(samples), max(samples)


# ----------------------------------------------------------------------------------------------
# the measurements


def read_table(workdir: Path, scan: str):
    cols = ["model_id", "T", "mu", "s", "rho", "epsilon", "P", "status", "wall_time", "chunk_id",
            "start_time", "end_time", "point_key"]
    return pq.read_table(workdir / "results" / scan / "points.parquet", columns=cols).to_pydict()


def check_table(tab: dict, expected: int, what: str, *, all_ok: bool) -> dict:
    n = len(tab["point_key"])
    statuses = defaultdict(int)
    for s in tab["status"]:
        statuses[s] += 1
    problems = []
    if n != expected:
        problems.append(f"{n} rows, expected {expected}")
    if len(set(tab["point_key"])) != expected:
        problems.append(f"{len(set(tab['point_key']))} distinct point keys, expected {expected}")
    if all_ok and statuses.get("ok", 0) != n:
        problems.append(f"statuses {dict(statuses)}, expected all ok")
    if problems:
        raise BenchFailure(f"{what}: " + "; ".join(problems))
    return dict(statuses)


def time_split(tab: dict) -> dict:
    """Core-seconds inside the jobs: pure solves (wall_time) and each job's solve loop (first start
    to last end, i.e. solves plus per-point bookkeeping)."""
    first, last = {}, {}
    for c, a, b in zip(tab["chunk_id"], tab["start_time"], tab["end_time"]):
        a, b = datetime.fromisoformat(a), datetime.fromisoformat(b)
        first[c] = min(first.get(c, a), a)
        last[c] = max(last.get(c, b), b)
    loops = sum((last[c] - first[c]).total_seconds() for c in first)
    return {"solve": float(sum(tab["wall_time"])), "loop": loops, "chunks": len(first)}


def in_process(tab: dict, cfg: dict, every: int = 1) -> tuple[float, int, float]:
    """Solve the table's points (every ``every``-th) in this process, one by one. Returns
    (seconds, points, largest relative difference of s, rho, epsilon, P from the workflow's rows)."""
    models = {b["id"]: model_from_block(b, f"models.{b['id']}") for b in cfg["models"]}
    settings = SolverSettings.from_block(cfg["solver"])
    idx = range(0, len(tab["T"]), every)
    pts = [(models[tab["model_id"][i]], tab["T"][i], tab["mu"][i]) for i in idx]
    t0 = time.perf_counter()
    results = [solve_point(m, T, mu, settings) for m, T, mu in pts]
    dt = time.perf_counter() - t0
    worst = 0.0
    for i, res in zip(idx, results):
        r = res[0]
        for q in ("s", "rho", "epsilon", "P"):
            a, b = getattr(r, q), tab[q][i]
            worst = max(worst, abs(a - b) / max(abs(a), abs(b), 1e-300))
    return dt, len(pts), worst


def job_startup(repeat: int = 3) -> float:
    """One job process without work: interpreter start and the imports of `holoscan solve-chunk`
    (pandas included: pyarrow imports it when the segment table is built from Python lists)."""
    cmd = [sys.executable, "-c", "import holoscan.scan.chunk, holoscan.cli, pandas"]
    return statistics.median(run(cmd, REPO, "job start-up")[0] for _ in range(repeat))


def workflow_scan(cfg: dict, *, rerun: bool, all_ok: bool, tmp_root: Path) -> dict:
    """Run ``cfg`` through the workflow in a fresh directory; optionally the no-change rerun."""
    with tempfile.TemporaryDirectory(prefix=f"holoscan-{cfg['scan']}-", dir=tmp_root) as tmp:
        work = Path(tmp)
        prepare(work, cfg)
        wall, out, err = snakemake(work, what=f"snakemake run of '{cfg['scan']}'")
        tab = read_table(work, cfg["scan"])
        res = {"wall": wall, "stats": job_stats(out + err), "table": tab,
               "statuses": check_table(tab, n_points(cfg), f"table of '{cfg['scan']}'", all_ok=all_ok)}
        res.update(time_split(tab))
        if rerun:
            wall2, out2, err2 = snakemake(work, what=f"no-change rerun of '{cfg['scan']}'")
            res["rerun"] = wall2
            res["rerun_nothing"] = "Nothing to be done" in out2 + err2 and "0 to solve" in err2
    return res


def dry_run(cfg: dict, *, tmp_root: Path, profile_out: Path | None = None) -> dict:
    with tempfile.TemporaryDirectory(prefix=f"holoscan-{cfg['scan']}-", dir=tmp_root) as tmp:
        work = Path(tmp)
        prepare(work, cfg)
        if profile_out is None:
            wall, out, err = snakemake(work, "-n", what=f"dry run of '{cfg['scan']}'")
        else:
            cmd = [sys.executable, "-m", "cProfile", "-o", str(profile_out), "-m", "snakemake",
                   "--cores", str(CORES), "-n"]
            wall, out, err = run(cmd, work, f"profiled dry run of '{cfg['scan']}'")
    text = out + err
    stats = job_stats(text)
    m = re.search(r"(\d+) points, (\d+) to solve in (\d+) job", err)
    return {"wall": wall, "stats": stats, "listed": rule_blocks(text), "is_dry": "This was a dry-run" in text,
            "holoscan_line": m.group(0) if m else "(no holoscan plan line)"}


def plan_only(cfg: dict, tmp_root: Path, profiler: cProfile.Profile | None = None) -> float:
    """The parse-time validation and plan alone (what common.smk calls), in this process."""
    from holoscan.scan.snakemake_glue import plan_scan

    with tempfile.TemporaryDirectory(prefix="holoscan-plan-", dir=tmp_root) as tmp:
        cfg = yaml.safe_load(yaml.safe_dump(cfg))  # as Snakemake would hand it over
        t0 = time.perf_counter()
        if profiler:
            profiler.enable()
        plan_scan(cfg, REPO / "workflow" / "schemas" / "config.schema.yaml", str(Path(tmp) / "results"))
        if profiler:
            profiler.disable()
        return time.perf_counter() - t0


def print_profile(source, title: str, n: int = 20) -> None:
    for key in ("cumulative", "tottime"):
        buf = io.StringIO()
        pstats.Stats(source, stream=buf).strip_dirs().sort_stats(key).print_stats(n)
        lines = buf.getvalue().splitlines()
        start = next((i for i, line in enumerate(lines) if line.lstrip().startswith("ncalls")), 0)
        print(f"\n--- {title}: top {n} by {key} ---")
        print("\n".join(lines[max(0, start - 1):]).rstrip())


# ----------------------------------------------------------------------------------------------


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=1, help="repeat every measurement N times (median)")
    ap.add_argument("--no-shooting", action="store_true", help="skip the 120-point shooting scan")
    ap.add_argument("--profile", action="store_true", help="profile the 10^5-point dry run")
    args = ap.parse_args(argv)
    if args.repeat < 1:
        ap.error("--repeat must be >= 1")

    snakemake_version = subprocess.run([sys.executable, "-m", "snakemake", "--version"], capture_output=True,
                                       text=True, env=job_env()).stdout.strip()
    print(f"holoscan {holoscan.__version__} from {Path(holoscan.__file__).parent}; snakemake {snakemake_version}; "
          f"Python {platform.python_version()}; {os.cpu_count()} CPU(s); jobs use --cores {CORES}")
    print(f"repeat {args.repeat}; bars: no-change rerun < {BAR_S:g} s, 10^5-point dry run < {BAR_S:g} s "
          f"with {JOBS_RANGE[0]}..{JOBS_RANGE[1]} jobs; at start: {load()}\n", flush=True)

    tmp_root = Path(tempfile.mkdtemp(prefix="holoscan-bench-"))
    m = defaultdict(list)
    failures = []
    info = {}
    try:
        info["startup"] = job_startup()
        for i in range(args.repeat):
            tag = f"[{i + 1}/{args.repeat}]"
            n10k = n_points(CLOSED_10K)
            print(f"{tag} workflow: {n10k} points, closed form ...", flush=True)
            w = workflow_scan(CLOSED_10K, rerun=True, all_ok=True, tmp_root=tmp_root)
            dt, _, worst = in_process(w["table"], CLOSED_10K)
            m["wf_wall"].append(w["wall"])
            m["wf_solve"].append(w["solve"])
            m["wf_loop"].append(w["loop"])
            m["inproc"].append(dt)
            m["rerun"].append(w["rerun"])
            info.update(wf_jobs=w["stats"], wf_chunks=w["chunks"], wf_status=w["statuses"])
            if worst > 0.0:
                failures.append(f"workflow and in-process closed-form values differ (max rel. {worst:.2e})")
            if not w["rerun_nothing"]:
                failures.append("the no-change rerun did not report 'Nothing to be done' / '0 to solve'")
            print(f"    workflow {w['wall']:.2f} s, rerun {w['rerun']:.2f} s, in-process {dt:.3f} s, "
                  f"max rel. difference workflow vs in-process {worst:.1e}", flush=True)

            print(f"{tag} dry run: {n_points(PLAN_100K)} points ...", flush=True)
            d = dry_run(PLAN_100K, tmp_root=tmp_root)
            m["dry"].append(d["wall"])
            m["plan"].append(plan_only(PLAN_100K, tmp_root))
            info.update(dry=d)
            print(f"    dry run {d['wall']:.2f} s ({d['holoscan_line']}); plan alone in process "
                  f"{m['plan'][-1]:.2f} s", flush=True)

            if not args.no_shooting:
                print(f"{tag} workflow: {n_points(SHOOT_120)} points, shooting ...", flush=True)
                s = workflow_scan(SHOOT_120, rerun=False, all_ok=False, tmp_root=tmp_root)
                sdt, sn, sworst = in_process(s["table"], SHOOT_120, every=4)
                m["sh_wall"].append(s["wall"])
                m["sh_solve"].append(s["solve"])
                m["sh_loop"].append(s["loop"])
                m["sh_rate_in"].append(sn / sdt)
                info.update(sh_jobs=s["stats"], sh_chunks=s["chunks"], sh_status=s["statuses"], sh_n_in=sn)
                if sworst > 1e-12:  # same code and inputs: the numbers should repeat exactly
                    failures.append(f"workflow and in-process shooting values differ (max rel. {sworst:.2e})")
                print(f"    workflow {s['wall']:.2f} s, in-process {sdt:.2f} s for {sn} points, "
                      f"max rel. difference {sworst:.1e}", flush=True)

        dry_med = statistics.median(m["dry"])
        if args.profile or dry_med >= BAR_S:
            prof = tmp_root / "dry.prof"
            dry_run(PLAN_100K, tmp_root=tmp_root, profile_out=prof)
            print_profile(str(prof), "10^5-point dry run (whole Snakemake process)")
            pr = cProfile.Profile()
            plan_only(PLAN_100K, tmp_root, pr)
            print_profile(pr, "parse-time plan alone (holoscan.scan.snakemake_glue.plan_scan)", 15)
    except BenchFailure as exc:
        print(f"\nFAIL: {exc}", file=sys.stderr)
        return 1
    finally:
        shutil.rmtree(tmp_root, ignore_errors=True)

    # ------------------------------------------------------------------ report
    n10k = n_points(CLOSED_10K)
    wf, _, _ = summary_of(m["wf_wall"])
    solve = statistics.median(m["wf_solve"])
    loop = statistics.median(m["wf_loop"])
    core_s = CORES * wf
    rerun_med = statistics.median(m["rerun"])
    dry = info["dry"]
    total_jobs = dry["stats"].get("total", dry["listed"])
    solve_jobs = dry["stats"].get("solve_chunk", 0)
    rerun_ok = rerun_med < BAR_S
    dry_ok = dry_med < BAR_S and dry["is_dry"]
    jobs_ok = JOBS_RANGE[0] <= total_jobs <= JOBS_RANGE[1] and dry["listed"] == total_jobs
    if not rerun_ok:
        failures.append(f"no-change rerun {rerun_med:.2f} s >= {BAR_S:g} s")
    if not dry_ok:
        failures.append(f"10^5-point dry run {dry_med:.2f} s >= {BAR_S:g} s (or not a dry run)")
    if not jobs_ok:
        failures.append(f"10^5-point plan has {total_jobs} jobs (listed {dry['listed']}), "
                        f"outside {JOBS_RANGE[0]}..{JOBS_RANGE[1]}")

    def row(name, samples, unit="s", bar=None, verdict=""):
        med, lo, hi = summary_of(samples)
        b = f"< {bar:g}" if bar is not None else ""
        print(f"{name:52s} {med:10.3f} {lo:10.3f} {hi:10.3f} {unit:>6s} {b:>6s} {verdict:>5s}")

    print(f"\nat end: {load()}")
    print(f"\n{'=' * 96}\nResults (median, min, max over {args.repeat} repeat(s); {CORES} cores)\n{'=' * 96}")
    print(f"{'measure':52s} {'median':>10s} {'min':>10s} {'max':>10s} {'unit':>6s} {'bar':>6s} {'':>5s}")
    print("-" * 96)
    print(f"10,000-point closed-form scan: {info['wf_chunks']} solve jobs of <= 500 points "
          f"(Snakemake job stats {info['wf_jobs']}); statuses {info['wf_status']}")
    row("  workflow wall time (snakemake --cores 2)", m["wf_wall"])
    row("  workflow throughput", [n10k / x for x in m["wf_wall"]], "pt/s")
    row("  solver alone in process (1 core), 10,000 points", m["inproc"])
    row("  solver alone throughput", [n10k / x for x in m["inproc"]], "pt/s")
    row("  orchestration overhead factor (in-proc / workflow pt/s)",
        [a / b for a, b in zip(m["wf_wall"], m["inproc"])], "x")
    print(f"  split of {CORES} x {wf:.2f} s = {core_s:.2f} core-s of the workflow (median run):")
    print(f"    {'solving (sum of the table wall_time column)':50s} {solve:9.3f} core-s {100 * solve / core_s:6.2f} %")
    print(f"    {'per-point bookkeeping inside the job loops':50s} {loop - solve:9.3f} core-s "
          f"{100 * (loop - solve) / core_s:6.2f} %")
    print(f"    {'everything else (start-up, planning, I/O, idle)':50s} {core_s - loop:9.3f} core-s "
          f"{100 * (core_s - loop) / core_s:6.2f} %")
    print(f"    (Snakemake start-up + parse-time plan + DAG, about the no-change rerun: {rerun_med:.2f} s of wall)")
    print(f"    (one job process start-up, interpreter + imports, no work: {info['startup']:.2f} s; "
          f"x {info['wf_chunks'] + 1} jobs / {CORES} cores = {info['startup'] * (info['wf_chunks'] + 1) / CORES:.2f} s "
          f"of wall)")
    row("no-change rerun of the 10,000-point scan", m["rerun"], "s", BAR_S, "PASS" if rerun_ok else "FAIL")
    print(f"10^5-point plan: {dry['holoscan_line']}; job stats {dry['stats']}")
    row("  dry run (snakemake --cores 2 -n)", m["dry"], "s", BAR_S, "PASS" if dry_ok else "FAIL")
    row("  of it: validation + plan alone, in process", m["plan"])
    print(f"  {'jobs planned: total (solve_chunk)':50s} {total_jobs:10d} ({solve_jobs})  "
          f"listed {dry['listed']}; bar {JOBS_RANGE[0]}..{JOBS_RANGE[1]}  {'PASS' if jobs_ok else 'FAIL'}")
    if m["sh_wall"]:
        nsh = n_points(SHOOT_120)
        swf = statistics.median(m["sh_wall"])
        print(f"{nsh}-point shooting scan: {info['sh_chunks']} solve jobs; statuses {info['sh_status']}")
        row("  workflow wall time", m["sh_wall"])
        row("  workflow throughput", [nsh / x for x in m["sh_wall"]], "pt/s")
        row(f"  solver alone throughput (in process, {info['sh_n_in']} points)", m["sh_rate_in"], "pt/s")
        row("  overhead factor per core (2 x in-proc / workflow)",
            [CORES * r * x / nsh for r, x in zip(m["sh_rate_in"], m["sh_wall"])], "x")
        sh_solve = statistics.median(m["sh_solve"])
        print(f"    {'solving (sum of wall_time) / (2 x wall)':50s} {sh_solve:9.3f} core-s "
              f"{100 * sh_solve / (CORES * swf):6.2f} %")
    print("-" * 96)
    if failures:
        print("FAILED: " + "; ".join(failures))
        return 1
    print("all checks and bars PASS")
    return 0


if __name__ == "__main__":
    sys.exit(main())
