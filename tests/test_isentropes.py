"""Isentropes (paths of fixed s/rho) traced from a solved grid, in process.

Scenario: Reissner-Nordstrom-AdS5 (closed form: Chamblin, Emparan, Johnson & Myers 1999, Phys. Rev.
D 60, 064018), a conformal model, so s/rho depends on mu/T alone (common practice, no source):
- on a grid given as mu/T ratios each isentrope must be exactly a line mu/T = const, at the ratio
  where the closed form's s/rho takes the value (found here by scipy's brentq on the closed form);
- on a grid given in mu, the located points must have the requested s/rho when the closed form is
  evaluated there, within the stated mu_err.
"""
from __future__ import annotations

import math

import pyarrow.parquet as pq
import pytest
from scipy.optimize import brentq

from holoscan import RNModel, SolverSettings, solve_point
from holoscan.scan.assemble import assemble
from holoscan.scan.chunk import run_chunk
from holoscan.scan.config import validate_scan_config
from holoscan.scan.isentropes import isentropes_table
from holoscan.scan.plan import make_plan, write_plan_files

CLOSED = SolverSettings(method="closed-form")
MODEL = {"id": "q", "kind": "rn", "d": 4, "kappa_sq": 0.5, "e_sq": 2.0}
VALUES = [20.0, 40.0]   # s/rho between 11 (mu/T = 4) and 79 (mu/T = 0.5) of this model


def s_over_rho(T, mu):
    (r,) = solve_point(RNModel("q", 4, kappa_sq=0.5, e_sq=2.0), T, mu, CLOSED)
    return r.s / r.rho


def traced(cfg, tmp_path):
    plan = make_plan(validate_scan_config(cfg), tmp_path)
    write_plan_files(plan)
    for c in plan.chunk_ids:
        run_chunk(plan.chunk_manifest(c), plan.segment(c), log_file="", log=lambda m: None)
    out = plan.root / "points.parquet"
    assemble(plan.table_file, out, plan.root / "summary.json")
    import json

    models = json.loads(plan.table_file.read_text())["models"]
    return isentropes_table(pq.read_table(out), models).to_pylist()


def test_isentropes_of_a_conformal_model_are_lines_of_fixed_mu_over_T(tmp_path):
    cfg = {"scan": "iso", "models": [{**MODEL, "isentropes": VALUES}],
           "grid": {"T": [0.2, 0.35, 0.6, 1.1], "mu_over_T": {"min": 0.0, "max": 4.0, "num": 41}}}
    rows = traced(cfg, tmp_path)
    for v in VALUES:
        mine = [r for r in rows if r["s_over_rho"] == v]
        assert len(mine) == 4 and all(r["status"] == "ok" for r in mine)
        x = [r["mu_over_T"] for r in mine]
        assert max(x) - min(x) <= 1e-12 * max(x)                       # one straight line
        exact = brentq(lambda y, v=v: s_over_rho(1.0, y) - v, 0.05, 4.0, xtol=1e-15, rtol=1e-15)
        err = max(r["mu_err"] / r["T"] for r in mine)
        assert abs(x[0] - exact) <= err, (x[0], exact, err)             # the estimate bounds the error


def test_isentropes_on_a_mu_grid_have_the_requested_s_over_rho(tmp_path):
    cfg = {"scan": "iso2", "models": [{**MODEL, "isentropes": VALUES}],
           "grid": {"T": [0.25, 0.5], "mu": {"min": 0.0, "max": 2.0, "num": 41}}}
    rows = traced(cfg, tmp_path)
    assert {r["status"] for r in rows} == {"ok"} and len(rows) == 4
    # the phase diagram draws them where the table puts them
    pytest.importorskip("matplotlib")
    import pyarrow as pa

    from holoscan.scan.figures.data import load_scan
    from holoscan.scan.figures.phase_diagram import plot_phase_diagram

    root = tmp_path / "iso2"
    pq.write_table(pa.Table.from_pylist(rows), root / "isentropes.parquet")
    fig = plot_phase_diagram(load_scan(root), "q", "rn")
    for v in VALUES:
        assert fig.isentropes[v] == [(r["mu"], r["T"]) for r in rows if r["s_over_rho"] == v]
    for r in rows:
        h = 1e-6
        slope = (s_over_rho(r["T"], r["mu"] + h) - s_over_rho(r["T"], r["mu"] - h)) / (2 * h)
        assert abs(s_over_rho(r["T"], r["mu"]) - r["s_over_rho"]) <= abs(slope) * r["mu_err"] * (1 + 1e-6)
    # a value outside the grid's range of s/rho has no crossing: no row, not a made-up one
    cfg["models"][0]["isentropes"] = [1e-3]
    assert traced(cfg, tmp_path / "again") == []


def test_isentropes_must_be_nonzero_numbers():
    from holoscan.errors import InputError

    with pytest.raises(InputError) as e:
        validate_scan_config({"scan": "x", "grid": {"T": [0.2], "mu": [0.0]}, "models": [{**MODEL, "isentropes": [0]}]})
    assert "models[0].isentropes[0]" in str(e.value)
    assert math.isfinite(VALUES[0])
