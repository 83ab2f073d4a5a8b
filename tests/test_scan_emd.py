"""An Einstein-Maxwell-dilaton model through the Snakemake workflow: every branch is a row, and
"no solution" past the bound is a row too. Reference: the one-charge black hole (Behrndt, Cvetic &
Sabra 1999, Nucl. Phys. B 553, 317; DeWolfe, Gubser & Rosen 2011, Phys. Rev. D 83, 086005)."""
import pytest
from test_emd_onecharge import ONE_CHARGE, closed
from workflow_helpers import scanned_workspace, table

pytestmark = pytest.mark.workflow  # one Snakemake scan for the file

# one scan serves every test of this file (a workflow run of a dilaton family costs about a minute)
CONFIG = {"scan": "q", "models": [dict(ONE_CHARGE), {"id": "r", "kind": "rn", "d": 4, "kappa_sq": 0.5, "e_sq": 2.0}],
          "grid": {"T": [1.0, 2.0], "mu_over_T": [0.5, 1.5, 2.5]}, "points_per_job": 3}


@pytest.fixture(scope="module")
def scanned(tmp_path_factory):
    return scanned_workspace(tmp_path_factory, CONFIG)[0]


def test_one_charge_branches_through_the_workflow(scanned):
    df = table(scanned, "q").to_pandas()
    df = df[(df.model_id == "1q") & (df["T"] == 1.0)]
    assert list(df["mu"]) == [0.5, 0.5, 1.5, 1.5, 2.5]
    assert list(df["branch"]) == [0, 1, 0, 1, 0]
    assert list(df["status"])[2:] == ["ok", "ok", "no solution"]
    for mu in (0.5, 1.5):
        rows = df[df.mu == mu].sort_values("s", ascending=False)
        assert list(rows["stability"]) == ["stable", "unstable"]
        # the stable branch is ok; at mu/T = 0.5 the unstable one sits at phi0 ~ -4.3, where the
        # read-out check at Delta = 2 may flag it (tests/test_emd_atlas.py): its estimate bounds its error
        assert rows.iloc[0].status == "ok" and rows.iloc[1].status in ("ok", "not converged")
        for b, (_, r) in enumerate(rows.iterrows()):
            s, rho, _ = closed(1.0, mu, b)
            assert r.s == pytest.approx(s, rel=1e-6) and r.rho == pytest.approx(rho, rel=1e-6)
            assert abs(r.s / float(s) - 1) <= max(r.error_estimate, 1e-12)
    assert "mu/T" in df.iloc[4]["message"]


def test_phase_tables_through_the_workflow(scanned):
    """phases, transitions and critical-point tables of a one-charge scan: the instability line at
    mu/T = pi/sqrt 2 (DeWolfe, Gubser & Rosen 2011), the stable branch dominant at every point with a
    solution, and the provenance metadata shared with the points table."""
    import math

    import pyarrow.parquet as pq

    from holoscan.scan.tables import file_metadata

    root = scanned / "results" / "q"
    points, phases = pq.read_table(root / "points.parquet"), pq.read_table(root / "phases.parquet")
    trans, crit = pq.read_table(root / "transitions.parquet"), pq.read_table(root / "critical_points.parquet")
    assert file_metadata(phases)["code_hash"] == file_metadata(points)["code_hash"] == file_metadata(trans)["code_hash"]
    ph = phases.to_pandas()
    assert len(ph) == 12  # one row per grid point and model
    q = ph[ph.model_id == "1q"].sort_values(["T", "mu"])
    # mu/T = 0.5: "incomplete" when the unstable branch is flagged by the read-out check (see above)
    assert [st if st != "incomplete" else "ok" for st in q["status"]] == ["ok", "ok", "no solution"] * 2
    assert set(q.status[q.mu == 0.5]) <= {"ok", "incomplete"}
    assert list(q["dominant_phase"]) == ["high-entropy", "high-entropy", ""] * 2
    pts = points.to_pandas()
    for _, row in q[q.status.isin(["ok", "incomplete"])].iterrows():
        br = pts[(pts.model_id == "1q") & (pts["T"] == row["T"]) & (pts.mu == row.mu)]
        assert list(row.branch_flag) == ["unknown" if ok != "ok" else ("stable" if st == "stable" else "unstable")
                                         for st, ok in zip(br.stability, br.status)]
        assert row.Omega == min(br.Omega[br.stability == "stable"])
    assert set(ph[ph.model_id == "r"]["dominant_phase"]) == {"unique"}
    tr = trans.to_pandas()
    assert set(tr.model_id) == {"1q"} and set(tr.type) == {"instability"}
    assert sorted(tr["T"]) == [1.0, 2.0]
    assert all(abs(tr.mu_over_T - math.pi / math.sqrt(2)) < 1e-6)
    assert crit.num_rows == 0
