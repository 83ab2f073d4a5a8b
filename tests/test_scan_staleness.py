"""Point identity and staleness through the real Snakemake workflow (scenarios a to h: no change,
extended axes, a changed model, tolerance or physics code, damaged segments, kills).

Expectations are the project's own contract (only stale points are solved; a table never mixes code
versions; interrupted runs lose nothing): common practice for incremental build systems, no source.
Points solved in a run are counted from the per-point metadata (start_time) of the final table.
"""
import copy
import random
import shutil

import pyarrow.compute as pc
import pytest
from workflow_helpers import REPO, run, run_and_kill, solved_since, table, unlock, workspace

from holoscan.scan.tables import PHYSICS_COLUMNS

pytestmark = pytest.mark.workflow  # every test runs the Snakemake workflow

BASE = {
    "scan": "t",
    "models": [
        {"id": "a", "kind": "rn", "d": 4, "kappa_sq": 0.5, "e_sq": 2.0},
        {"id": "b", "kind": "rn", "d": 3, "kappa_sq": 1.2, "e_sq": 0.8},
    ],
    "grid": {"T": {"min": 0.1, "max": 1.0, "num": 10}, "mu": {"min": 0.0, "max": 1.8, "num": 10}},
    "points_per_job": 50,
}


def count(tab, model):
    return int(pc.sum(pc.equal(tab["model_id"], model)).as_py())


def test_only_stale_points_are_solved(tmp_path):
    cfg = copy.deepcopy(BASE)
    ws = workspace(tmp_path, cfg)
    _, t0 = run(ws)
    tab = table(ws, "t")
    assert tab.num_rows == 200 and solved_since(tab, t0) == 200

    # a. no change: nothing to do, no point solved
    p, t1 = run(ws)
    assert "Nothing to be done" in p.stdout + p.stderr
    assert solved_since(table(ws, "t"), t1) == 0

    # b. extend the mu axis by 10%: only the 10 new mu values x 10 T x 2 models
    cfg["grid"]["mu"] = {"min": 0.0, "max": 2.0, "num": 11}
    workspace(ws, cfg)
    _, t2 = run(ws)
    tab = table(ws, "t")
    assert tab.num_rows == 220 and solved_since(tab, t2) == 20

    # c. refine the T axis (old values kept, 9 new between them): 9 x 11 x 2 new points
    cfg["grid"]["T"] = {"min": 0.1, "max": 1.0, "num": 19}
    workspace(ws, cfg)
    _, t3 = run(ws)
    tab = table(ws, "t")
    assert tab.num_rows == 418 and solved_since(tab, t3) == 198

    # d. change one parameter of model b: all of b's points, none of a's
    cfg["models"][1]["kappa_sq"] = 1.25
    workspace(ws, cfg)
    _, t4 = run(ws)
    tab = table(ws, "t")
    new = tab.filter(pc.greater_equal(tab["start_time"], t4.isoformat()))
    assert set(new["model_id"].to_pylist()) == {"b"} and new.num_rows == count(tab, "b") == 209

    # e. change a solver tolerance: every point
    cfg["solver"] = {"rtol": 1e-9}
    workspace(ws, cfg)
    _, t5 = run(ws)
    assert solved_since(table(ws, "t"), t5) == 418


def test_physics_code_change_makes_every_point_stale(tmp_path):
    ws = workspace(tmp_path / "ws", BASE)
    run(ws)
    old = table(ws, "t")
    # A copy of the package with one physics module edited, first on the import path.
    pkg = tmp_path / "pkg"
    shutil.copytree(REPO / "holoscan", pkg / "holoscan", ignore=shutil.ignore_patterns("__pycache__"))
    with open(pkg / "holoscan" / "thermo.py", "a") as fh:
        fh.write("\n# edited: any change to the physics sources changes the code hash\n")
    env = {"PYTHONPATH": str(pkg)}
    _, t1 = run(ws, env=env)
    new = table(ws, "t")
    assert solved_since(new, t1) == new.num_rows == 200
    (h_old,) = set(old["code_hash"].to_pylist())
    (h_new,) = set(new["code_hash"].to_pylist())  # never a mix
    assert h_old != h_new
    from holoscan.scan.tables import file_metadata

    assert file_metadata(new)["code_hash"] == h_new
    # the unchanged code is a no-op for solved points: running the copy again solves nothing
    _, t2 = run(ws, env=env)
    assert solved_since(table(ws, "t"), t2) == 0


def test_deleted_or_corrupt_segments_are_resolved(tmp_path):
    ws = workspace(tmp_path, BASE)
    run(ws)
    segs = sorted((ws / "results" / "t" / "segments").glob("*.parquet"))
    assert len(segs) == 4
    import pyarrow.parquet as pq

    sizes = [pq.read_metadata(s).num_rows for s in segs[:3]]
    segs[0].unlink()  # deleted
    data = segs[1].read_bytes()
    segs[1].write_bytes(data[: len(data) // 2])  # truncated
    data = bytearray(segs[2].read_bytes())
    for i in range(100, 110):
        data[i] ^= 0xFF  # flipped bytes in the middle of the data pages
    segs[2].write_bytes(bytes(data))
    p, t1 = run(ws)
    assert solved_since(table(ws, "t"), t1) == sum(sizes)
    q = ws / "results" / "t" / "quarantine"
    assert {f.name for f in q.iterdir()} >= {segs[1].name, segs[2].name}
    assert "checksum mismatch" in p.stderr
    assert table(ws, "t").num_rows == 200


KILL_CFG = {
    "scan": "k",
    "models": [
        {"id": "a", "kind": "rn", "d": 4, "kappa_sq": 0.5, "e_sq": 2.0},
        {"id": "s", "kind": "rn", "d": 3, "kappa_sq": 1.2, "e_sq": 0.8, "solver": {"method": "shooting"},
         "grid": {"T": [0.2, 0.5], "mu_over_T": [0.0, 1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0]}},
    ],
    "grid": {"T": {"min": 0.1, "max": 1.0, "num": 6}, "mu": {"min": -1.0, "max": 1.0, "num": 5}},
    "points_per_job": 4,
}


def physics(tab):
    return tab.select(PHYSICS_COLUMNS).to_pandas()


def test_kill_minus_9_then_rerun_loses_nothing(tmp_path):
    ref_ws = workspace(tmp_path / "ref", KILL_CFG)
    run(ref_ws)
    ref = table(ref_ws, "k")
    # 6. same config, second clean run: identical physics columns, bit for bit
    ws2 = workspace(tmp_path / "ref2", KILL_CFG)
    run(ws2)
    assert physics(table(ws2, "k")).equals(physics(ref))

    rng = random.Random(20261201)
    moments = sorted(rng.uniform(0.5, 12.0) for _ in range(5))
    killed = 0
    for i, after in enumerate(moments):
        ws = workspace(tmp_path / f"kill{i}", KILL_CFG)
        killed += run_and_kill(ws, after)
        unlock(ws)
        run(ws)
        got = table(ws, "k")
        assert got.num_rows == ref.num_rows
        keys = list(zip(got["point_key"].to_pylist(), got["branch"].to_pylist()))
        assert len(set(keys)) == len(keys)  # no duplicate
        assert physics(got).equals(physics(ref)), f"kill after {after:.2f} s changed the physics"
        # nothing half-written remains visible
        assert not list((ws / "results" / "k" / "segments").glob(".*tmp*"))
    assert killed >= 4  # most moments fall inside the run
