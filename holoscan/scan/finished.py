"""Open the folder of a finished scan (``results/<scan>/``) for reading: its tables and its plan.

A folder counts as finished when it holds the four tables the workflow writes last (``points``,
``phases``, ``transitions``, ``critical_points``, as ``<name>.parquet``). The plan those tables were
assembled from is the one named in the points table's ``holoscan`` file metadata (key ``plan``), not
the newest plan file, which a later dry run may have written. Anything missing is an
:class:`~holoscan.errors.InputError` whose key is the command-line argument (``RESULTS_DIR``).
"""
from __future__ import annotations

import json
from pathlib import Path

import pyarrow.parquet as pq

from ..errors import InputError
from .tables import META_KEY

TABLES = ("points", "phases", "transitions", "critical_points")
KEY = "RESULTS_DIR"


def scan_folder(path) -> Path:
    """The folder ``path`` if it is a scan folder with all four tables, else InputError."""
    root = Path(path)
    if not root.is_dir():
        raise InputError(KEY, str(path), "no such folder (give results/<scan> of a finished scan)")
    for name in TABLES:
        table_path(root, name)
    return root


def table_path(root: Path, name: str) -> Path:
    p = Path(root) / f"{name}.parquet"
    if not p.is_file():
        raise InputError(KEY, str(root), f"{p.name} is missing: the scan is not finished (run the workflow)")
    return p


def read_table(root: Path, name: str, columns=None):
    """One of the four tables (pyarrow Table); unreadable or missing -> InputError."""
    p = table_path(root, name)
    try:
        return pq.read_table(p, columns=columns)
    except Exception as exc:  # noqa: BLE001 - any reader failure is a bad input file
        raise InputError(KEY, str(root), f"{p.name} cannot be read as Parquet ({exc})") from None


def run_metadata(root: Path) -> dict:
    """The ``holoscan`` file metadata of the points table (schema_version, code_hash, plan, ...)."""
    p = table_path(root, "points")
    raw = (pq.read_schema(p).metadata or {}).get(META_KEY)
    if not raw:
        raise InputError(KEY, str(root), "points.parquet has no 'holoscan' metadata: not written by the workflow")
    return json.loads(raw)


def read_plan(root: Path, meta: dict | None = None) -> tuple[Path, dict]:
    """(path, document) of the plan file the tables were assembled from."""
    meta = meta if meta is not None else run_metadata(root)
    p = Path(root) / "plan" / str(meta.get("plan", ""))
    if not p.is_file():
        raise InputError(KEY, str(root), f"the plan file plan/{meta.get('plan')} named by points.parquet is missing")
    return p, json.loads(p.read_text())


def require_file(root: Path, rel: str) -> Path:
    p = Path(root) / rel
    if not p.is_file():
        raise InputError(KEY, str(root), f"{rel} is missing (the tables name it; run the workflow again)")
    return p
