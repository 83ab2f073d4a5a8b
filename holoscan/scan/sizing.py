"""Chunk sizing from measured cost: how many points one job should solve.

With ``job_minutes`` in the scan config, a model without its own ``points_per_job`` gets
``points_per_job = floor(job_minutes * 60 / seconds_per_point)`` (at least 1), where
``seconds_per_point`` is, in order of preference:

1. measured: the mean over the model's points in the last assembled table of the scan of the
   time each point took (``end_time - start_time``), stored in ``results/<scan>/costs.json`` by
   assembly under a key of the model context (spec, solver settings, physics code);
2. probed: one point (the middle of the model's grid) solved at planning time in the main process,
   stored in the same file so that every later plan (and every cluster job) sizes chunks alike.

Each chunk's expected time (its points times the per-point cost) sets the runtime a job asks the
scheduler for: three times the expectation, at least 10 minutes, times the attempt number.
"""
from __future__ import annotations

import hashlib
import json
import math
import statistics
import time
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
    p = Path(root) / COSTS_FILE
    try:
        doc = json.loads(p.read_text())
    except (OSError, ValueError):
        return {}
    return doc if isinstance(doc, dict) else {}


def write_costs(root, costs: dict) -> None:
    atomic_write_text(Path(root) / COSTS_FILE, json.dumps(costs, indent=1, sort_keys=True), durable=False)


def points_per_job(job_minutes: float, seconds_per_point: float) -> int:
    return max(1, int(math.floor(job_minutes * 60.0 / max(seconds_per_point, 1e-6))))


def runtime_minutes(expected_seconds: float, attempt: int = 1) -> int:
    """Runtime to ask the scheduler for (minutes)."""
    return int(max(MIN_RUNTIME_MINUTES, math.ceil(RUNTIME_SAFETY * expected_seconds / 60.0)) * attempt)


def probe(model, settings, points) -> float:
    """Seconds to solve the middle point of ``points`` (all branches), measured now."""
    from ..point import solve_point

    T, mu = sorted(points)[len(points) // 2]
    t0 = time.perf_counter()
    solve_point(model, T, mu, settings)
    return time.perf_counter() - t0


def measured(rows, keys_by_model: dict) -> dict:
    """Costs entries from table rows (dicts with model_id, point_key, start_time, end_time)."""
    per_point: dict = {}
    for r in rows:
        per_point[(r["model_id"], r["point_key"])] = (r["start_time"], r["end_time"])
    by_model: dict = {}
    for (mid, _), (a, b) in per_point.items():
        try:
            dt = (datetime.fromisoformat(b) - datetime.fromisoformat(a)).total_seconds()
        except (TypeError, ValueError):
            continue
        by_model.setdefault(mid, []).append(dt)
    return {keys_by_model[m]: {"model_id": m, "seconds_per_point": statistics.fmean(v), "points": len(v),
                               "source": "measured"}
            for m, v in by_model.items() if m in keys_by_model and v}
