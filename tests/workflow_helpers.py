"""Run the Snakemake workflow on a small config in a temporary folder (shared by workflow tests)."""
from __future__ import annotations

import os
import shutil
import signal
import subprocess
import sys
import time
from datetime import UTC, datetime
from pathlib import Path

import pyarrow.parquet as pq
import yaml

REPO = Path(__file__).resolve().parents[1]


def workspace(tmp: Path, config: dict) -> Path:
    """A folder with the Snakefile, workflow/, profiles/ and config/config.yaml = ``config``."""
    tmp.mkdir(parents=True, exist_ok=True)
    shutil.copy(REPO / "Snakefile", tmp / "Snakefile")
    for d in ("workflow", "profiles"):
        if not (tmp / d).exists():
            shutil.copytree(REPO / d, tmp / d)
    write_config(tmp, config)
    return tmp


def write_config(ws: Path, config: dict) -> None:
    (ws / "config").mkdir(exist_ok=True)
    (ws / "config" / "config.yaml").write_text(yaml.safe_dump(config, sort_keys=False))


def snakemake_cmd(*extra):
    return [sys.executable, "-m", "snakemake", "--cores", "2", *extra]


def run(ws: Path, *extra, env=None, timeout=600, check=True):
    """Run the workflow to completion; returns (CompletedProcess, UTC start time)."""
    start = datetime.now(UTC)
    p = subprocess.run(snakemake_cmd(*extra), cwd=ws, capture_output=True, text=True, timeout=timeout,
                       env={**os.environ, **(env or {})})
    if check and p.returncode != 0:
        raise AssertionError(f"snakemake failed ({p.returncode}):\n{p.stdout[-3000:]}\n{p.stderr[-3000:]}")
    return p, start


def scanned_workspace(tmp_path_factory, config: dict) -> tuple[Path, Path]:
    """A workspace for ``config`` in a fresh temporary folder, run to completion once (for a
    module-scoped fixture); returns (workspace, its results/<scan> folder)."""
    ws = workspace(tmp_path_factory.mktemp(config["scan"]), config)
    run(ws)
    return ws, ws / "results" / config["scan"]


def run_and_kill(ws: Path, after: float, env=None) -> bool:
    """Start the workflow and SIGKILL its whole process group after ``after`` seconds.

    Returns True if it was killed, False if it finished first."""
    p = subprocess.Popen(snakemake_cmd(), cwd=ws, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                         env={**os.environ, **(env or {})}, start_new_session=True)
    try:
        p.wait(timeout=after)
        return False
    except subprocess.TimeoutExpired:
        os.killpg(p.pid, signal.SIGKILL)
        p.wait()
        time.sleep(0.2)
        return True


def unlock(ws: Path, env=None) -> None:
    subprocess.run(snakemake_cmd("--unlock"), cwd=ws, capture_output=True, text=True, timeout=120,
                   env={**os.environ, **(env or {})}, check=True)


def table(ws: Path, scan: str):
    return pq.read_table(ws / "results" / scan / "points.parquet")


def solved_since(tab, since: datetime) -> int:
    """Rows whose solve started at or after ``since`` (from the per-point metadata)."""
    return sum(datetime.fromisoformat(s) >= since for s in tab["start_time"].to_pylist())
