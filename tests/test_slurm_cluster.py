"""The scan through Snakemake's SLURM executor on a real (one-node) SLURM cluster.

Runs only where a cluster is up: `.ci/run` starts one with `.ci/slurm/up.sh` and sets
HOLOSCAN_SLURM_CONF to its configuration; elsewhere the test is skipped with that reason.
What is checked (the workflow's contract, README "Running on a cluster"; common practice, no source):
the tables from SLURM equal a local run's in every physics column; a chunk job cancelled with
scancel while it runs is retried and the scan completes with every point exactly once; nothing a
killed job left behind is read as a result.
"""
import os
import shutil
import subprocess
import sys
import threading
import time

import pyarrow.parquet as pq
import pytest
from workflow_helpers import run, workspace

from holoscan.scan.phase_tables import PHASE_PHYSICS
from holoscan.scan.store import index_store
from holoscan.scan.tables import PHYSICS_COLUMNS

SLURM_CONF = os.environ.get("HOLOSCAN_SLURM_CONF", "")
pytestmark = [
    pytest.mark.workflow,
    pytest.mark.cluster,
    pytest.mark.skipif(not SLURM_CONF or not shutil.which("sbatch"),
                       reason="no SLURM cluster (run .ci/run, which starts a one-node cluster)"),
]

CONFIG = {
    "scan": "cluster",
    "models": [
        {"id": "rn4", "kind": "rn", "d": 4, "kappa_sq": 0.5, "e_sq": 2.0},
        {"id": "rn3", "kind": "rn", "d": 3, "kappa_sq": 1.2, "e_sq": 0.8, "solver": {"method": "shooting"},
         "points_per_job": 24, "grid": {"T": {"min": 0.1, "max": 1.0, "num": 12}, "mu_over_T": [0.0, 1.0, 2.0, 4.0]}},
    ],
    "grid": {"T": {"min": 0.1, "max": 1.0, "num": 10}, "mu": {"min": -1.0, "max": 1.0, "num": 11}},
}

# Test-only settings on top of the project's profile: no accounting on this cluster (job status from
# squeue, no account), fast polling, and the partition of the test cluster.
CLUSTER_ARGS = ["--profile", "profiles/slurm", "--default-resources", "slurm_partition=ci", "--slurm-no-account",
                "--slurm-status-command", "squeue", "--slurm-init-seconds-before-status-checks", "2",
                "--seconds-between-status-checks", "2"]


def _squeue():
    out = subprocess.run(["squeue", "-h", "-o", "%i|%T|%k"], capture_output=True, text=True,
                         env={**os.environ, "SLURM_CONF": SLURM_CONF}).stdout
    return [line.split("|") for line in out.splitlines() if line.strip()]


def _cancel_first_running_chunk(done: threading.Event, cancelled: list):
    """Watch the queue; scancel the first solve_chunk job seen running for a moment."""
    seen = {}
    while not done.is_set() and not cancelled:
        for jid, state, comment in _squeue():
            if state == "RUNNING" and comment.startswith("rule_solve_chunk"):
                seen.setdefault(jid, time.monotonic())
                if time.monotonic() - seen[jid] > 1.0:
                    subprocess.run(["scancel", jid], env={**os.environ, "SLURM_CONF": SLURM_CONF}, check=True)
                    cancelled.append(jid)
                    return
        time.sleep(0.3)


def _physics(path, cols):
    t = pq.read_table(path)
    return t.select(cols).to_pylist()


def test_scan_on_slurm_equals_local_and_survives_scancel(tmp_path):
    local = workspace(tmp_path / "local", CONFIG)
    run(local)
    ws = workspace(tmp_path / "slurm", CONFIG)
    env = {**os.environ, "SLURM_CONF": SLURM_CONF}
    done, cancelled = threading.Event(), []
    watcher = threading.Thread(target=_cancel_first_running_chunk, args=(done, cancelled), daemon=True)
    watcher.start()
    t0 = time.monotonic()
    p = subprocess.run([sys.executable, "-m", "snakemake", *CLUSTER_ARGS], cwd=ws, capture_output=True,
                       text=True, timeout=480, env=env)
    done.set()
    wall = time.monotonic() - t0
    assert p.returncode == 0, p.stdout[-4000:] + p.stderr[-4000:]
    print(f"SLURM scan: {wall:.1f} s wall, cancelled job(s): {cancelled}")
    # the cancelled job was seen failing and resubmitted (retries in the profile)
    assert cancelled, "no chunk job was caught running: the cancel test did not happen"
    log = p.stdout + p.stderr
    assert f"SLURM-job '{cancelled[0]}' failed" in log or "CANCELLED" in log, log[-3000:]
    assert "Trying to restart job" in log or "retry" in log.lower(), log[-3000:]
    # every physics column of every table equals the local run's, row for row
    for name, cols in (("points.parquet", PHYSICS_COLUMNS), ("phases.parquet", PHASE_PHYSICS)):
        assert _physics(ws / "results" / "cluster" / name, cols) == _physics(local / "results" / "cluster" / name, cols)
    # every grid point exactly once, and nothing unsealed is ever read: the store holds only
    # sealed, verified segments (a killed job leaves at most a dot-named temporary file)
    t = pq.read_table(ws / "results" / "cluster" / "points.parquet")
    keys = t["point_key"].to_pylist()
    assert len(set(keys)) == 110 + 48 and len(keys) == len(set(keys))
    idx = index_store(ws / "results" / "cluster" / "segments")
    assert not idx.invalid
    assert set(keys) <= set(idx.where)
