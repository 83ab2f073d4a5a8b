"""A model family through the whole workflow (Snakemake): tables, families.parquet, figures, the
command line with a member id, and a rerun after one value of the family changed.

Scenario: a Reissner-Nordstrom-AdS5 family over the Maxwell coupling e^2 (two members) beside a
plain model. The rows are checked against the rn closed form (Chamblin, Emparan, Johnson & Myers
1999, Phys. Rev. D 60, 064018; validated against published values in tests/test_rn_thermo.py).
"""
from __future__ import annotations

import json
import subprocess
import sys
from datetime import datetime

import pyarrow.parquet as pq
import pytest
from workflow_helpers import run, scanned_workspace, solved_since, table, write_config

from holoscan import RNModel, SolverSettings, solve_point
from holoscan.scan.figures import family_figure_stems

pytestmark = pytest.mark.workflow

CFG = {
    "scan": "famwf",
    "models": [
        {"id": "plain", "kind": "rn", "d": 3, "kappa_sq": 1.0, "e_sq": 1.0},
        {"id": "q", "kind": "rn", "d": 4, "kappa_sq": 0.5, "e_sq": 1.0, "vary": {"e_sq": [0.5, 2.0]}},
    ],
    "grid": {"T": [0.3, 0.6], "mu": [0.0, 1.0]},
}


@pytest.fixture(scope="module")
def scan(tmp_path_factory):
    return scanned_workspace(tmp_path_factory, CFG)


def test_family_tables_figures_and_member_ids(scan):
    ws, root = scan
    t = pq.read_table(root / "points.parquet").to_pandas()
    assert list(dict.fromkeys(t["model_id"])) == ["plain", "q_e_sq0.5", "q_e_sq2"]
    assert t.loc[t.model_id == "plain", "family"].isna().all()
    for r in t[t.family == "q"].itertuples():
        (c,) = solve_point(RNModel(r.model_id, 4, kappa_sq=0.5, e_sq=r.vary_e_sq), r.T, r.mu,
                           SolverSettings(method="closed-form"))
        assert (r.s, r.rho, r.P) == (c.s, c.rho, c.P)
    fam = pq.read_table(root / "families.parquet").to_pandas()
    assert fam["model_id"].tolist() == ["q_e_sq0.5", "q_e_sq2"] and fam["vary_e_sq"].tolist() == [0.5, 2.0]
    assert set(fam["crossover_T_mu0_status"]) == {"absent"}   # rn has no transition lines
    for stem in family_figure_stems("q"):
        for ext in ("png", "pdf"):
            assert (root / f"{stem}.{ext}").stat().st_size > 1000
    assert "families.parquet" in (root / "provenance.json").read_text()   # recorded as a derived table
    # the command line takes a member id
    p = subprocess.run([sys.executable, "-m", "holoscan", "point", "--config", "config/config.yaml",
                        "--model", "q_e_sq2", "--T", "0.3", "--mu", "1.0"], cwd=ws, capture_output=True,
                       text=True, timeout=120)
    assert p.returncode == 0, p.stderr
    row = t[(t.model_id == "q_e_sq2") & (t["T"] == 0.3) & (t["mu"] == 1.0)].iloc[0]
    assert json.loads(p.stdout)["s"] == row.s


def test_changing_one_value_solves_only_that_member(scan):
    ws, _ = scan
    cfg = {**CFG, "models": [CFG["models"][0], {**CFG["models"][1], "vary": {"e_sq": [0.5, 3.0]}}]}
    write_config(ws, cfg)
    _, start = run(ws)
    t = table(ws, "famwf")
    assert solved_since(t, start) == 4                  # the new member's 2 x 2 grid, nothing else
    df = t.to_pandas()
    fresh = [datetime.fromisoformat(s) >= start for s in df["start_time"]]
    assert sorted(df.loc[fresh, "model_id"].unique()) == ["q_e_sq3"]
