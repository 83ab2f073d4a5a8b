"""Solve one chunk manifest into a sealed segment. One bad point never stops the chunk."""
from __future__ import annotations

import json
import socket
import time
import traceback
from pathlib import Path

from .. import __version__
from ..kinds import model_from_block
from ..point import solve_points
from ..result import Status
from ..settings import SolverSettings
from .manifests import check_code, read_manifest, utc_now
from .shared_state import adopt_states
from .store import write_segment
from .tables import rows_to_table


def solve_manifest(manifest: dict, *, log_file: str = "", log=print, root=None) -> list[dict]:
    """Rows (dicts in the table schema) for every point of ``manifest``; with ``root`` (the scan's
    results folder) its models first adopt the shared states the manifest names."""
    check_code(manifest)
    host = socket.gethostname()
    models = {mid: (model_from_block(m["spec"], f"manifest.models.{mid}"), SolverSettings(**m["solver"]))
              for mid, m in manifest["models"].items()}
    if root is not None:
        adopt_states(manifest, models, root, log)
    rows = []
    base = {"chunk_id": manifest["chunk"], "code_hash": manifest["code_hash"], "package_version": __version__,
            "host": host, "log_file": log_file}
    groups: dict = {}
    for mid, T, mu, key in manifest["points"]:
        groups.setdefault(mid, []).append((T, mu, key))
    for mid, pts in groups.items():
        model, settings = models[mid]
        for block in _batches(model, pts):
            rows += _solve_block(model, settings, mid, block, base, log)
    return rows


def _batches(model, pts):
    """Points of one model in solve order: one batch for a kind that solves many at once."""
    if model.batched:
        return [pts]
    return [[p] for p in pts]


def _solve_block(model, settings, mid, block, base, log) -> list[dict]:
    """Rows of a block of points of one model; an exception in a batch falls back to one by one,
    and one in a point becomes that point's failed row."""
    start = utc_now()
    t0 = time.perf_counter()
    try:
        per_point = [[r.to_dict() for r in rs] for rs in solve_points(model, [(T, mu) for T, mu, _ in block], settings)]
    except Exception as exc:  # noqa: BLE001 - a bug must not cost the other points: record it, then go one by one
        if len(block) == 1:
            T, mu, _ = block[0]
            per_point = [[{"model_id": mid, "kind": model.kind, "d": model.d, "branch": 0, "T": T,
                           "mu": mu, "status": Status.FAILED.value, "method": settings.method,
                           "message": f"internal error: {type(exc).__name__}: {exc}",
                           "wall_time": time.perf_counter() - t0}]]
            log(traceback.format_exc())
        else:
            log(traceback.format_exc())
            log(f"{mid}: batch of {len(block)} points failed; solving them one by one")
            return [r for p in block for r in _solve_block(model, settings, mid, [p], base, log)]
    end = utc_now()
    rows = []
    per = (time.perf_counter() - t0) / len(block)
    for (T, mu, key), results in zip(block, per_point):
        out = results
        for r in out:
            r["extra"] = json.dumps(r.get("extra", {}), sort_keys=True, default=str)
            r.update(base, point_key=key, start_time=start, end_time=end, accept_error=settings.accept_error)
            rows.append(r)
        st = ", ".join(r["status"] for r in out)
        log(f"{mid} T={T!r} mu={mu!r} key={key}: {st} ({per:.3f} s{' per point of a batch' if len(block) > 1 else ''})")
    return rows


def run_chunk(manifest_path, out_path, log_file: str = "", log=print) -> int:
    """Solve the manifest and write the sealed segment ``out_path``. Returns the number of rows."""
    manifest = read_manifest(manifest_path)
    root = Path(out_path).resolve().parent.parent  # results/<scan>/segments/<chunk>.parquet
    rows = solve_manifest(manifest, log_file=log_file, log=log, root=root)
    write_segment(rows_to_table(rows), Path(out_path), [p[3] for p in manifest["points"]], manifest["code_hash"])
    return len(rows)
