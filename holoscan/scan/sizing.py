"""Chunk sizing from measured cost: how many points one job should solve.

With ``job_minutes`` in the scan config, a model without its own ``points_per_job`` gets
``points_per_job = floor(job_minutes * 60 / seconds_per_point)`` (at least 1), where
``seconds_per_point`` is, in order of preference:

measured from the last assembled table of the scan: the time the model's chunks spent on it (first
start to last end of its points in each chunk: solves, a batch's set-up, bookkeeping) divided by
its number of points, stored in ``results/<scan>/costs.json`` by assembly under a key of the model
context (spec, solver settings, physics code). Planning never solves a point (a dry run must solve
nothing), so the first run of a model context sizes its chunks by ``points_per_job`` and every
later plan by the measured cost. An entry of the costs file that is not a finite positive number
of seconds is ignored (the file is rewritten by the next assembly).

Each chunk's expected time (its points times the per-point cost) sets the runtime a job asks the
scheduler for: three times the expectation, at least 10 minutes, times the attempt number.
"""
from __future__ import annotations

import hashlib
import json
import math
from datetime import datetime
from pathlib import Path

from .store import atomic_write_text

COSTS_FILE = "costs.json"
MIN_RUNTIME_MINUTES = 10
RUNTIME_SAFETY = 3.0


def cost_key(context: str) -> str:
    """Key of a model context (spec, solver, code) in the costs file."""
    return hashlib.sha256(context.encode()).hexdigest()[:16]


def read_costs(root) -> dict:
    """The costs file's valid entries (a damaged file or entry counts as unknown cost)."""
    p = Path(root) / COSTS_FILE
    try:
        doc = json.loads(p.read_text())
    except (OSError, ValueError, UnicodeDecodeError):
        return {}
    if not isinstance(doc, dict):
        return {}
    out = {}
    for k, e in doc.items():
        sec = e.get("seconds_per_point") if isinstance(e, dict) else None
        if isinstance(sec, (int, float)) and not isinstance(sec, bool) and math.isfinite(sec) and sec > 0:
            out[k] = e
    return out


def write_costs(root, costs: dict) -> None:
    atomic_write_text(Path(root) / COSTS_FILE, json.dumps(costs, indent=1, sort_keys=True), durable=False)


def points_per_job(job_minutes: float, seconds_per_point: float) -> int:
    return max(1, math.floor(job_minutes * 60.0 / max(seconds_per_point, 1e-6)))


def runtime_minutes(expected_seconds: float, attempt: int = 1) -> int:
    """Runtime to ask the scheduler for (minutes)."""
    return int(max(MIN_RUNTIME_MINUTES, math.ceil(RUNTIME_SAFETY * expected_seconds / 60.0)) * attempt)


def time_spent(table, into: dict | None = None) -> dict:
    """Add each model's ``[seconds, points]`` in ``table`` to ``into`` (a new dict by default). The
    sums are over (model, chunk) groups, so the tables of different chunks may be added one by one."""
    import pyarrow.compute as pc

    spent = {} if into is None else into
    t = table.select(["model_id", "chunk_id", "point_key", "start_time", "end_time"])
    t = t.filter(pc.invert(pc.or_(pc.is_null(t["start_time"]), pc.is_null(t["end_time"]))))
    g = t.group_by(["model_id", "chunk_id"]).aggregate(
        [("start_time", "min"), ("end_time", "max"), ("point_key", "count_distinct")])
    for m, a, b, n in zip(*(g[c].to_pylist() for c in ("model_id", "start_time_min", "end_time_max",
                                                         "point_key_count_distinct"))):
        try:
            dt = (datetime.fromisoformat(b) - datetime.fromisoformat(a)).total_seconds()
        except (TypeError, ValueError):
            continue
        tot = spent.setdefault(m, [0.0, 0])
        tot[0] += max(dt, 0.0)
        tot[1] += n
    return spent


def costs_from(spent: dict, keys_by_model: dict) -> dict:
    """Costs entries from the sums of :func:`time_spent`: per model, the time its chunks spent on it
    (first start to last end of its points in each chunk: solves, batch set-up and bookkeeping)
    divided by its number of points."""
    return {keys_by_model[m]: {"model_id": m, "seconds_per_point": sec / n, "points": n, "source": "measured"}
            for m, (sec, n) in spent.items() if m in keys_by_model and n}
