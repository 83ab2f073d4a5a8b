"""``holoscan export``: one model's equation of state on its (T, mu) grid, read back.

Scenario: a scan through the workflow of a closed-form Reissner-Nordstrom-AdS5 model and a
shooting RN-AdS4 model with one temperature (1e-300) whose T^3 leaves double precision (that
point must come out marked, with empty values). Checks: reading the CSV back gives the table's
values at every grid point to the bit; the header states model, units, code hash and grid; a
scale converts every column by its power of E (dimensional analysis, common practice, no source);
the rn closed form's cumulants (Chamblin, Emparan, Johnson & Myers 1999, Phys. Rev. D 60, 064018)
are carried through.
"""
from __future__ import annotations

import json
import subprocess
import sys

import pandas as pd
import pyarrow.parquet as pq
import pytest
from workflow_helpers import scanned_workspace

pytestmark = pytest.mark.workflow  # one Snakemake scan for the file; the command in subprocesses

CFG = {
    "scan": "exp",
    "models": [
        {"id": "a", "kind": "rn", "d": 4, "kappa_sq": 0.5, "e_sq": 2.0},
        {"id": "s", "kind": "rn", "d": 3, "kappa_sq": 1.0, "e_sq": 1.0, "solver": {"method": "shooting"},
         "grid": {"T": [1e-300, 0.5], "mu": [0.0, 1.0]}},
    ],
    "grid": {"T": {"min": 0.2, "max": 1.0, "num": 3}, "mu": [-1.0, 0.0, 1.0]},
}
NUM = ["T", "mu", "P", "s", "rho", "epsilon", "cs2", "chi2", "chi3", "chi4"]


@pytest.fixture(scope="module")
def scan(tmp_path_factory):
    return scanned_workspace(tmp_path_factory, CFG)


def export(root, *args):
    p = subprocess.run([sys.executable, "-m", "holoscan", "export", str(root), *args], capture_output=True,
                       text=True, timeout=120)
    return p


def test_csv_round_trips_the_table_and_states_its_header(scan, tmp_path):
    _, root = scan
    out = tmp_path / "a.csv"
    p = export(root, "--model", "a", "--out", str(out))
    assert p.returncode == 0, p.stderr
    lines = out.read_text().splitlines()
    header = json.loads(lines[0].split("holoscan export: ", 1)[1])
    meta = json.loads(pq.read_schema(root / "points.parquet").metadata[b"holoscan"])
    assert header["model"] == "a" and header["d"] == 4 and header["code_hash"] == meta["code_hash"]
    assert header["grid"] == {"T": [0.2, 1.0, 3], "mu": [-1.0, 1.0, 3], "points": 9}
    assert header["units"]["P"] == "E^4" and header["units"]["chi4"] == "1"
    back = pd.read_csv(out, comment="#")
    t = pq.read_table(root / "points.parquet").to_pandas()
    t = t[(t.model_id == "a") & t.dominant].sort_values(["T", "mu"])
    assert len(back) == len(t) == 9 and (back["status"] == "ok").all()
    for c in NUM:
        assert back[c].tolist() == t[c].tolist(), c        # the same doubles, bit for bit
    assert back["chi4"].notna().all()                      # the closed form's cumulants are there


def test_a_point_that_is_not_ok_is_marked_never_filled(scan, tmp_path):
    _, root = scan
    out = tmp_path / "s.parquet"
    assert export(root, "--model", "s", "--format", "parquet", "--out", str(out)).returncode == 0
    back = pq.read_table(out).to_pandas()
    bad = back[back["T"] == 1e-300]
    assert len(bad) == 2 and (bad["status"] == "out of range").all()
    assert bad[["P", "s", "rho", "epsilon", "chi2"]].isna().all().all()
    assert (back.loc[back["T"] == 0.5, "status"] == "ok").all()
    header = json.loads(pq.read_schema(out).metadata[b"holoscan-export"])
    assert header["statuses"] == {"ok": 2, "out of range": 2}


def test_a_scale_converts_every_column_by_its_power_of_E(scan, tmp_path):
    _, root = scan
    plain, scaled = tmp_path / "p.csv", tmp_path / "q.csv"
    assert export(root, "--model", "a", "--out", str(plain)).returncode == 0
    assert export(root, "--model", "a", "--out", str(scaled), "--unit", "MeV", "--scale", "200").returncode == 0
    a, b = pd.read_csv(plain, comment="#"), pd.read_csv(scaled, comment="#")
    for c, power in (("T", 1), ("mu", 1), ("P", 4), ("s", 3), ("rho", 3), ("epsilon", 4), ("cs2", 0),
                     ("chi2", 2), ("chi3", 1), ("chi4", 0)):
        assert b[c].tolist() == pytest.approx((a[c] * 200.0**power).tolist(), rel=1e-15), c
    assert "T [MeV]" in scaled.read_text().splitlines()[1]
    p = export(root, "--model", "a", "--unit", "MeV")
    assert p.returncode == 2 and "--unit" in p.stderr and "--scale" in p.stderr
    p = export(root, "--model", "zz")
    assert p.returncode == 2 and "--model = 'zz'" in p.stderr
