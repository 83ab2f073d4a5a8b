"""Chunk sizing from measured cost: how many points one job should solve.

With ``job_minutes`` in the scan config, a model without its own ``points_per_job`` gets
``points_per_job = floor(job_minutes * 60 / seconds_per_point)`` (at least 1), where
``seconds_per_point`` is, in order of preference:

1. measured: the mean over the model's points in the last assembled table of the scan of the
   time each point took (its ``wall_time``; a point solved in a batch carries its share of the
   batch), stored in ``results/<scan>/costs.json`` by assembly under a key of the model context
   (spec, solver settings, physics code);
2. probed: one point (the middle of the model's grid) solved at planning time in the main process
   (for a kind that solves points in batches, a batch of 16, time per point), stored in the same
   file so that every later plan (and every cluster job) sizes chunks alike.

Each chunk's expected time (its points times the per-point cost) sets the runtime a job asks the
scheduler for: three times the expectation, at least 10 minutes, times the attempt number.
"""
from __future__ import annotations

import hashlib
import json
import math
import time
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


def probe(model, settings, points, batch: int = 16) -> float:
    """Seconds per point, measured now: the middle point of ``points`` (all branches); for a kind
    that solves many points at once (``solve_many``), a batch of up to ``batch`` points around the
    middle, whose time per point includes the kind's once-per-process set-up shared among them."""
    from ..point import solve_points

    pts = sorted(points)
    k = 1 if getattr(model, "solve_many", None) is None else min(batch, len(pts))
    mid = len(pts) // 2
    chosen = pts[max(0, mid - k // 2): max(0, mid - k // 2) + k]
    t0 = time.perf_counter()
    solve_points(model, chosen, settings)
    return (time.perf_counter() - t0) / len(chosen)


def measured(table, keys_by_model: dict) -> dict:
    """Costs entries from a points table (Arrow; columns model_id, point_key, wall_time): the mean over
    each model's points of the point's solve time (its rows' largest ``wall_time``; a point solved in
    a batch carries its share of the batch)."""
    import pyarrow.compute as pc

    t = table.select(["model_id", "point_key", "wall_time"])
    t = t.filter(pc.is_finite(t["wall_time"]))
    per_point = t.group_by(["model_id", "point_key"]).aggregate([("wall_time", "max")])
    per_model = per_point.group_by("model_id").aggregate([("wall_time_max", "mean"), ("wall_time_max", "count")])
    out = {}
    for m, mean, n in zip(*(per_model[c].to_pylist() for c in ("model_id", "wall_time_max_mean", "wall_time_max_count"))):
        if m in keys_by_model and n:
            out[keys_by_model[m]] = {"model_id": m, "seconds_per_point": float(mean), "points": int(n),
                                     "source": "measured"}
    return out
