"""Chunk sizing from measured cost (README "Running on a cluster"; the rule is ours, common practice,
no source): with job_minutes, a model without its own points_per_job gets
floor(job_minutes * 60 / seconds_per_point) points per job, the cost probed at the first plan and
measured from the assembled table afterwards; a model's own points_per_job always wins."""
import json
import math

from holoscan.scan.config import validate_scan_config
from holoscan.scan.plan import make_plan
from holoscan.scan.sizing import COSTS_FILE
from workflow_helpers import run, workspace

CONFIG = {
    "scan": "size",
    "job_minutes": 0.02,  # 1.2 s per job: a few shooting points each
    "models": [
        {"id": "shoot", "kind": "rn", "d": 3, "kappa_sq": 1.2, "e_sq": 0.8, "solver": {"method": "shooting"},
         "grid": {"T": {"min": 0.2, "max": 1.0, "num": 6}, "mu_over_T": [0.0, 1.0, 3.0]}},
        {"id": "fixed", "kind": "rn", "d": 4, "kappa_sq": 0.5, "e_sq": 2.0, "points_per_job": 7},
    ],
    "grid": {"T": [0.5, 1.0], "mu": [0.0, 0.5, 1.0, 1.5, 2.0, 2.5, 3.0]},
}


def _costs(ws):
    return {v["model_id"]: v for v in json.loads((ws / "results" / "size" / COSTS_FILE).read_text()).values()}


def test_chunks_follow_the_probed_then_measured_cost(tmp_path):
    ws = workspace(tmp_path, CONFIG)
    p, _ = run(ws)
    probed = _costs(ws)
    assert "measured" == probed["shoot"]["source"] and probed["shoot"]["points"] == 18
    assert "probed one point" in p.stderr and "model 'shoot'" in p.stderr
    # the first plan sized 'shoot' from its probe, and 'fixed' kept its own points_per_job
    line = next(ln for ln in p.stderr.splitlines() if ln.startswith("holoscan: model 'shoot'") and "->" in ln)
    sec, ppj = float(line.split(":")[2].split("s per point")[0]), int(line.split("->")[1].split()[0])
    assert ppj == max(1, math.floor(0.02 * 60 / sec))
    segs = sorted((ws / "results" / "size" / "segments").glob("*.json"))
    n_keys = sorted(len(json.loads(s.read_text())["keys"]) for s in segs)
    assert sum(n_keys) == 18 + 14
    assert n_keys.count(7) == 2  # 'fixed': 14 points, 7 per job
    # a new plan of more points uses the measured cost
    cfg = dict(CONFIG, models=[dict(CONFIG["models"][0], grid={"T": {"min": 0.2, "max": 1.0, "num": 11},
                                                             "mu_over_T": [0.0, 1.0, 3.0]}), CONFIG["models"][1]])
    plan = make_plan(validate_scan_config(cfg), ws / "results", write=False, log=lambda m: None)
    sizing = {m: (ppj, sec, src) for m, ppj, sec, src in plan.sizing}
    ppj, sec, src = sizing["shoot"]
    assert src == "measured" and sec == probed["shoot"]["seconds_per_point"]
    assert ppj == max(1, math.floor(0.02 * 60 / sec))
    assert sizing["fixed"][0] == 7 and sizing["fixed"][2] == "config"
    assert plan.n_missing == 15  # the refined T axis adds 5 temperatures x 3 ratios
    assert len(plan.chunk_ids) == math.ceil(15 / ppj)
