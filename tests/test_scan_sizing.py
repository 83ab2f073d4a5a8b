"""Chunk sizing from measured cost (README "Running on a cluster"; the rule is ours, common practice,
no source): with job_minutes, a model without its own points_per_job gets
floor(job_minutes * 60 / seconds_per_point) points per job from the cost its plan knows (the
seconds per point in costs.json), its points_per_job while none is known, and the cost measured from
the assembled table afterwards; a model's own points_per_job always wins. Every expectation is
computed here from the exact seconds the plan used or that costs.json holds, never from printed text.
"""
import json
import math

import pyarrow.parquet as pq
import pytest
from workflow_helpers import run, workspace

from holoscan.scan.config import validate_scan_config
from holoscan.scan.plan import make_plan
from holoscan.scan.sizing import COSTS_FILE

pytestmark = pytest.mark.workflow  # the test runs the Snakemake workflow

JOB_MINUTES = 0.02  # 1.2 s per job: a few shooting points each
CONFIG = {
    "scan": "size",
    "job_minutes": JOB_MINUTES,
    "models": [
        {"id": "shoot", "kind": "rn", "d": 3, "kappa_sq": 1.2, "e_sq": 0.8, "solver": {"method": "shooting"},
         "grid": {"T": {"min": 0.2, "max": 1.0, "num": 6}, "mu_over_T": [0.0, 1.0, 3.0]}},
        {"id": "fixed", "kind": "rn", "d": 4, "kappa_sq": 0.5, "e_sq": 2.0, "points_per_job": 7},
    ],
    "grid": {"T": [0.5, 1.0], "mu": [0.0, 0.5, 1.0, 1.5, 2.0, 2.5, 3.0]},
}


def _costs(ws):
    return {v["model_id"]: v for v in json.loads((ws / "results" / "size" / COSTS_FILE).read_text()).values()}


def _rule(seconds, default):
    """Points per job by the sizing rule, from the exact seconds per point (None: not known)."""
    return default if seconds is None else max(1, math.floor(JOB_MINUTES * 60 / seconds))


def _dealt(n, per_job):
    """Sizes of the chunks of n points dealt round-robin over ceil(n / per_job) chunks."""
    k = math.ceil(n / per_job)
    return sorted(len(range(i, n, k)) for i in range(k))


def _segment_sizes(ws):
    """Points (distinct keys) per segment of the workflow, by model."""
    out = {}
    for seg in sorted((ws / "results" / "size" / "segments").glob("*.parquet")):
        t = pq.read_table(seg, columns=["model_id", "point_key"])
        (mid,) = set(t["model_id"].to_pylist())  # chunks never mix models
        out.setdefault(mid, []).append(len(set(t["point_key"].to_pylist())))
    return {m: sorted(v) for m, v in out.items()}


def test_chunks_follow_the_known_then_measured_cost(tmp_path):
    ws = workspace(tmp_path, CONFIG)
    cfg = validate_scan_config(CONFIG)
    default = {mp.model.id: mp.points_per_job for mp in cfg.models}
    # the first plan of this folder: its sizing by the rule, from the seconds it knows
    first = {m: (ppj, sec, src) for m, ppj, sec, src in make_plan(cfg, ws / "results").sizing}
    ppj, sec, _ = first["shoot"]
    assert ppj == _rule(sec, default["shoot"])
    assert first["fixed"][0] == 7 and first["fixed"][2] == "config"
    assert math.ceil(18 / ppj) + 2 <= cfg.max_jobs  # no chunk grows to respect max_jobs
    run(ws)
    # the workflow solved exactly those chunks: 18 points of 'shoot' dealt by that size, 'fixed' 7 + 7
    sizes = _segment_sizes(ws)
    assert sizes["shoot"] == _dealt(18, ppj) and sum(sizes["shoot"]) == 18
    assert sizes["fixed"] == [7, 7]
    # assembly stored the measured cost of 'shoot' (18 points); a new plan with more points uses it
    measured = _costs(ws)["shoot"]
    assert measured["source"] == "measured" and measured["points"] == 18
    cfg2 = dict(CONFIG, models=[dict(CONFIG["models"][0], grid={"T": {"min": 0.2, "max": 1.0, "num": 11},
                                                              "mu_over_T": [0.0, 1.0, 3.0]}), CONFIG["models"][1]])
    plan = make_plan(validate_scan_config(cfg2), ws / "results")
    sizing = {m: (ppj, sec, src) for m, ppj, sec, src in plan.sizing}
    ppj2, sec2, src2 = sizing["shoot"]
    assert src2 == "measured" and sec2 == measured["seconds_per_point"]
    assert ppj2 == _rule(measured["seconds_per_point"], default["shoot"])
    assert sizing["fixed"][0] == 7 and sizing["fixed"][2] == "config"
    assert plan.n_missing == 15  # the refined T axis adds 5 temperatures x 3 ratios
    assert len(plan.chunk_ids) == math.ceil(15 / ppj2)
