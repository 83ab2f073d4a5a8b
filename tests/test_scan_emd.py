"""An Einstein-Maxwell-dilaton model through the Snakemake workflow: every branch is a row, and
"no solution" past the bound is a row too. Reference: the one-charge black hole (Behrndt, Cvetic &
Sabra 1999, Nucl. Phys. B 553, 317; DeWolfe, Gubser & Rosen 2011, Phys. Rev. D 83, 086005)."""
import pytest

from test_emd_onecharge import ONE_CHARGE, closed
from workflow_helpers import run, table, workspace


def test_one_charge_branches_through_the_workflow(tmp_path):
    cfg = {"scan": "q", "models": [dict(ONE_CHARGE)],
           "grid": {"T": [1.0], "mu_over_T": [0.5, 1.5, 2.5]}, "points_per_job": 2}
    ws = workspace(tmp_path, cfg)
    run(ws)
    df = table(ws, "q").to_pandas()
    assert list(df["mu"]) == [0.5, 0.5, 1.5, 1.5, 2.5]
    assert list(df["branch"]) == [0, 1, 0, 1, 0]
    assert list(df["status"]) == ["ok", "ok", "ok", "ok", "no solution"]
    for mu in (0.5, 1.5):
        rows = df[df.mu == mu].sort_values("s", ascending=False)
        assert list(rows["stability"]) == ["stable", "unstable"]
        for b, (_, r) in enumerate(rows.iterrows()):
            s, rho, _ = closed(1.0, mu, b)
            assert r.s == pytest.approx(s, rel=1e-6) and r.rho == pytest.approx(rho, rel=1e-6)
    assert "mu/T" in df.iloc[4]["message"]
