"""A scan cannot be confused or silently damaged: own configs, tables tied to their plan, planning
without side effects, damaged files never trusted and never allowed to delete good data, size limits.

Scenarios run the real Snakemake workflow on tiny closed-form (Reissner-Nordstrom-AdS) grids. The
expectations are the project's own contract, common practice for build systems with sealed
artefacts (content hashes checked before use), no source.
"""
from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
import time
from pathlib import Path

import pyarrow.parquet as pq
import pytest
import yaml
from workflow_helpers import run, snakemake_cmd, workspace

from holoscan.scan.config import validate_scan_config
from holoscan.scan.plan import make_plan
from holoscan.scan.snakemake_glue import start_run

DEMO = {  # plays the part of the shipped default config/config.yaml
    "scan": "d",
    "models": [{"id": "a", "kind": "rn", "d": 4, "kappa_sq": 0.5, "e_sq": 2.0}],
    "grid": {"T": {"min": 0.1, "max": 1.0, "num": 3, "spacing": "log"}, "mu": {"min": 0.0, "max": 1.0, "num": 2}},
}
A = {"scan": "u", "models": [{"id": "a", "kind": "rn", "d": 4, "kappa_sq": 0.5, "e_sq": 2.0}],
     "grid": {"T": {"min": 0.2, "max": 0.8, "num": 4}, "mu": [0.0, 0.5]}}
B = {"scan": "u", "models": [{"id": "a", "kind": "rn", "d": 4, "kappa_sq": 0.5, "e_sq": 2.0}],
     "grid": {"T": {"min": 0.2, "max": 0.8, "num": 3}, "mu": [0.0, 1.5]}}


def _write(ws: Path, name: str, doc) -> Path:
    p = ws / name
    p.write_text(doc if isinstance(doc, str) else yaml.safe_dump(doc, sort_keys=False))
    return p


def _snapshot(ws: Path) -> dict:
    """Every file outside .snakemake with its size and mtime (Snakemake's own records excluded)."""
    out = {}
    for p in ws.rglob("*"):
        rel = p.relative_to(ws)
        if p.is_file() and rel.parts[0] != ".snakemake":
            st = p.stat()
            out[str(rel)] = (st.st_size, st.st_mtime_ns)
    return out


def _holoscan(*args, cwd=None, timeout=120):
    return subprocess.run([sys.executable, "-m", "holoscan", *args], cwd=cwd, capture_output=True, text=True,
                          timeout=timeout)


def _mus(ws, scan):
    t = pq.read_table(ws / "results" / scan / "points.parquet")
    return sorted(set(t["mu"].to_pylist())), sorted(set(t["T"].to_pylist()))


# --- own configs ---------------------------------------------------------------------------------

@pytest.mark.workflow
def test_a_given_config_is_whole_by_itself(tmp_path):
    ws = workspace(tmp_path, DEMO)
    # no 'scan': refused (it would otherwise have run as the default's scan)
    no_scan = _write(ws, "noscan.yaml", {k: v for k, v in A.items() if k != "scan"})
    p, _ = run(ws, "--configfile", str(no_scan), check=False)
    assert p.returncode != 0 and "scan" in p.stderr and "required" in p.stderr
    assert not (ws / "results").exists()
    # a linear axis stays linear (the default's 'spacing: log' is not merged in), and a mu_over_T
    # grid is accepted though the default grid has 'mu'
    lin = _write(ws, "lin.yaml", {"scan": "lin", "models": A["models"],
                                  "grid": {"T": {"min": 0.2, "max": 0.8, "num": 4}, "mu_over_T": [0.0, 1.0]}})
    run(ws, "--configfile", str(lin))
    _, Ts = _mus(ws, "lin")
    assert Ts == pytest.approx([0.2, 0.4, 0.6, 0.8], rel=1e-12)
    assert not (ws / "results" / "d").exists()
    # no models: refused, not the default's models
    nomodels = _write(ws, "nomodels.yaml", {"scan": "x", "grid": A["grid"]})
    p, _ = run(ws, "--configfile", str(nomodels), check=False)
    assert p.returncode != 0 and "models" in p.stderr


@pytest.mark.workflow
@pytest.mark.parametrize("doc", [
    {k: v for k, v in A.items() if k != "scan"},
    {"scan": "x", "grid": A["grid"]},
    {**A, "grid": {"T": {"min": 0.2, "max": 0.8, "num": 4}, "mu_over_T": [0.0, 1.0]}},
    {**A, "solver": {"rtol": 0.5}},
    "scan: x\nmodels:\n  - {id: a, kind: rn, d: 4, kappa_sq: 0.5, e_sq: 2.0}\ngrid:\n  T: [1.0e-1, 2e-1]\n  mu: [0]\n",
])
def test_check_and_the_workflow_judge_a_file_alike(tmp_path, doc):
    ws = workspace(tmp_path, DEMO)
    f = _write(ws, "c.yaml", doc)
    chk = _holoscan("check", "--config", str(f))
    p = subprocess.run(snakemake_cmd("-n", "--configfile", str(f)), cwd=ws, capture_output=True, text=True,
                       timeout=300)
    assert (chk.returncode == 0) == (p.returncode == 0), (chk.stderr, p.stderr[-2000:])


@pytest.mark.workflow
def test_point_takes_a_scan_config(tmp_path):
    cfg = {"scan": "x", "models": [{"id": "s", "kind": "rn", "d": 3, "kappa_sq": 1.2, "e_sq": 0.8,
                                     "solver": {"method": "shooting", "rtol": 1e-10},
                                     "grid": {"T": [0.5], "mu": [0.3]}, "points_per_job": 5}]}
    f = _write(tmp_path, "scan.yaml", cfg)
    p = _holoscan("point", "--config", str(f), "--model", "s", "--T", "0.5", "--mu", "0.3")
    assert p.returncode == 0, p.stderr
    assert json.loads(p.stdout)["method"] == "shooting"


@pytest.mark.workflow
def test_tolerance_limits_are_the_same_for_point_and_scan(tmp_path):
    for rtol, ok in ((0.005, True), (0.5, False)):
        model = {"id": "s", "kind": "rn", "d": 3, "kappa_sq": 1.2, "e_sq": 0.8}
        pf = _write(tmp_path, "p.yaml", {"models": [model], "solver": {"rtol": rtol}})
        sf = _write(tmp_path, "s.yaml", {"scan": "x", "models": [model], "solver": {"rtol": rtol},
                                         "grid": {"T": [0.5], "mu": [0.0]}})
        p = _holoscan("point", "--config", str(pf), "--model", "s", "--T", "0.5", "--mu", "0.0")
        c = _holoscan("check", "--config", str(sf))
        assert (p.returncode == 0) == ok and (c.returncode == 0) == ok, (p.stderr, c.stderr)


# --- tables tied to their plan -------------------------------------------------------------------

@pytest.mark.workflow
@pytest.mark.parametrize("how", ["mtime-trigger", "metadata-removed"])
def test_switching_back_rebuilds_the_table(tmp_path, how):
    ws = workspace(tmp_path, DEMO)
    a, b = _write(ws, "a.yaml", A), _write(ws, "b.yaml", B)
    run(ws, "--configfile", str(a))
    want = _mus(ws, "u")
    run(ws, "--configfile", str(b))
    assert _mus(ws, "u") != want
    extra = ("--rerun-triggers", "mtime") if how == "mtime-trigger" else ()
    if how == "metadata-removed":
        shutil.rmtree(ws / ".snakemake" / "metadata")
    run(ws, "--configfile", str(a), *extra)
    assert _mus(ws, "u") == want
    # and a run right after has nothing left to do
    p, _ = run(ws, "--configfile", str(a))
    assert "Nothing to be done" in p.stdout + p.stderr


@pytest.mark.workflow
def test_a_damaged_table_is_made_again_and_never_certified(tmp_path):
    ws = workspace(tmp_path, A)
    run(ws)
    root = ws / "results" / "u"
    good = (root / "points.parquet").read_bytes()
    # a flipped byte: provenance refuses to certify it, and the next run rebuilds it
    data = bytearray(good)
    data[len(data) // 2] ^= 0x01
    (root / "points.parquet").write_bytes(bytes(data))
    prov = _holoscan("provenance", str(root), "--out", str(tmp_path / "prov.json"))
    assert prov.returncode != 0 and "points.parquet" in prov.stderr and "Traceback" not in prov.stderr
    assert not (tmp_path / "prov.json").exists()
    run(ws)
    t = pq.read_table(root / "points.parquet")
    assert t.equals(pq.read_table(pa_buffer(good)))
    # a truncated one: no traceback, rebuilt
    (root / "points.parquet").write_bytes(good[: len(good) // 3])
    p, _ = run(ws)
    assert "Traceback" not in p.stderr
    assert pq.read_table(root / "points.parquet").equals(t)


def pa_buffer(data: bytes):
    import pyarrow as pa

    return pa.BufferReader(data)


# --- planning without side effects ---------------------------------------------------------------

@pytest.mark.workflow
def test_dry_run_unlock_lint_and_a_refused_run_change_nothing(tmp_path):
    cfg = {**A, "job_minutes": 1.0}  # sizing from cost: must not probe in a dry run
    ws = workspace(tmp_path, cfg)
    before = _snapshot(ws)
    for args in (("-n",), ("--unlock",), ("--lint",)):
        subprocess.run(snakemake_cmd(*args), cwd=ws, capture_output=True, text=True, timeout=300)
        assert _snapshot(ws) == before, args
    run(ws)
    root = ws / "results" / "u"
    # damage a segment: a dry run reports it but neither moves it nor solves anything
    seg = sorted((root / "segments").glob("*.json"))[0]
    seg.write_text("null")
    before = _snapshot(ws)
    p = subprocess.run(snakemake_cmd("-n"), cwd=ws, capture_output=True, text=True, timeout=300)
    assert "not used" in p.stderr
    assert _snapshot(ws) == before
    # a run refused by the lock changes nothing either
    locks = ws / ".snakemake" / "locks"
    locks.mkdir(parents=True, exist_ok=True)
    (locks / "0.output.lock").write_text("results/u/points.parquet\n")
    p = subprocess.run(snakemake_cmd(), cwd=ws, capture_output=True, text=True, timeout=300)
    assert p.returncode != 0 and "lock" in (p.stdout + p.stderr).lower()
    assert _snapshot(ws) == before
    shutil.rmtree(locks)
    # the real run quarantines the damaged segment and solves its points again
    p, _ = run(ws)
    assert (root / "quarantine" / seg.name).exists()
    # a report writes its own file and nothing else
    before = _snapshot(ws)
    p = subprocess.run(snakemake_cmd("--report", "report.html"), cwd=ws, capture_output=True, text=True,
                       timeout=300)
    assert p.returncode == 0, p.stderr[-2000:]
    after = _snapshot(ws)
    assert set(after) - set(before) == {"report.html"}
    assert {k: v for k, v in after.items() if k != "report.html"} == before


@pytest.mark.workflow
def test_a_config_that_is_not_utf8_is_one_line(tmp_path):
    ws = workspace(tmp_path, DEMO)
    f = ws / "latin1.yaml"
    f.write_bytes(yaml.safe_dump(A).replace("scan: u", "scan: u # caf\xe9").encode("latin-1"))
    c = _holoscan("check", "--config", str(f))
    assert c.returncode != 0 and "UTF-8" in c.stderr and "Traceback" not in c.stderr
    p = subprocess.run(snakemake_cmd("-n", "--configfile", str(f)), cwd=ws, capture_output=True, text=True,
                       timeout=300)
    assert p.returncode != 0 and "Traceback" not in p.stderr


def test_a_seal_younger_than_its_run_is_left_alone(tmp_path):
    cfg = validate_scan_config(A)
    seg_dir = tmp_path / "results" / "u" / "segments"
    seg_dir.mkdir(parents=True)
    (seg_dir / "0123456789abcdef.json").write_text(json.dumps({"sha256": "0" * 64, "keys": []}))
    plan = make_plan(cfg, tmp_path / "results")
    assert "0123456789abcdef" in plan.invalid
    run_start = time.time() - 60  # the seal was written after the run began: in progress
    assert start_run(plan, run_start) == []
    assert (seg_dir / "0123456789abcdef.json").exists()
    old = time.time() - 3600
    os.utime(seg_dir / "0123456789abcdef.json", (old, old))
    assert [c for c, _ in start_run(plan, run_start)] == ["0123456789abcdef"]
    assert (tmp_path / "results" / "u" / "quarantine" / "0123456789abcdef.json").exists()


# --- damaged manifests, seals and cost files -----------------------------------------------------

@pytest.mark.workflow
def test_a_damaged_manifest_never_deletes_a_good_segment(tmp_path):
    ws = workspace(tmp_path, A)
    run(ws)
    root = ws / "results" / "u"
    segs = {p.name: p.read_bytes() for p in (root / "segments").iterdir()}
    for m in (root / "plan").glob("*.json"):
        if not m.name.startswith("table-"):
            m.write_text("{not json")  # damaged, and newer than the segment
    run(ws)
    assert {p.name: p.read_bytes() for p in (root / "segments").iterdir()} == segs


@pytest.mark.parametrize("seal", ["null", '{"sha256": "x"}', '{"keys": ["a"]}', "[1, 2]", "\xff"])
def test_a_malformed_seal_is_not_trusted_and_does_not_stop_planning(tmp_path, seal):
    cfg = validate_scan_config(A)
    seg_dir = tmp_path / "results" / "u" / "segments"
    seg_dir.mkdir(parents=True)
    (seg_dir / "0123456789abcdef.parquet").write_bytes(b"PAR1")
    (seg_dir / "0123456789abcdef.json").write_text(seal, encoding="latin-1")
    plan = make_plan(cfg, tmp_path / "results")
    assert plan.n_missing == plan.n_points and "0123456789abcdef" in plan.invalid


@pytest.mark.parametrize("costs", ['{"k": {"seconds_per_point": NaN}}', '{"k": {"seconds_per_point": -1}}',
                                   '{"k": null}', "[]", "{broken"])
def test_a_damaged_cost_file_does_not_stop_planning(tmp_path, costs):
    cfg = validate_scan_config({**A, "job_minutes": 1.0})
    root = tmp_path / "results" / "u"
    root.mkdir(parents=True)
    (root / "costs.json").write_text(costs)
    plan = make_plan(cfg, tmp_path / "results")
    key = plan.sizing[0]
    assert key[1] >= 1 and key[3] == "default"


# --- size limits -----------------------------------------------------------------------------------

HUGE = {**A, "grid": {"T": {"min": 0.1, "max": 1.0, "num": 100000}, "mu": {"min": 0.0, "max": 1.0, "num": 100000}}}
BOMB = "scan: x\na: &a [1, 1, 1, 1, 1, 1, 1, 1, 1]\nb: &b [*a, *a, *a, *a, *a, *a, *a, *a, *a]\n" \
       "c: &c [*b, *b, *b, *b, *b, *b, *b, *b, *b]\nd: &d [*c, *c, *c, *c, *c, *c, *c, *c, *c]\n" \
       "e: &e [*d, *d, *d, *d, *d, *d, *d, *d, *d]\nf: &f [*e, *e, *e, *e, *e, *e, *e, *e, *e]\n" \
       "g: &g [*f, *f, *f, *f, *f, *f, *f, *f, *f]\nh: [*g, *g, *g, *g, *g, *g, *g, *g, *g]\nmodels: []\n"


@pytest.mark.workflow
@pytest.mark.parametrize("doc,needle", [(HUGE, "max_points"), (BOMB, "alias")])
def test_huge_inputs_are_refused_quickly_in_one_line(tmp_path, doc, needle):
    from holoscan.errors import InputError
    from holoscan.scan.config import read_scan_config

    f = _write(tmp_path, "big.yaml", doc)
    t0 = time.perf_counter()
    with pytest.raises(InputError, match=needle):
        read_scan_config(f)
    assert time.perf_counter() - t0 < 1.0  # before anything is materialised
    t0 = time.perf_counter()
    c = _holoscan("check", "--config", str(f))
    assert c.returncode != 0 and needle in c.stderr and len(c.stderr.strip().splitlines()) == 1
    p = _holoscan("point", "--config", str(f), "--model", "a", "--T", "0.5", "--mu", "0")
    assert p.returncode != 0 and needle in p.stderr and "Traceback" not in p.stderr
    # each refusal, interpreter start included, well under the 28 s a materialised grid took
    assert time.perf_counter() - t0 < 20
    ws = workspace(tmp_path / "ws", DEMO)
    t0 = time.perf_counter()
    s = subprocess.run(snakemake_cmd("-n", "--configfile", str(f)), cwd=ws, capture_output=True, text=True,
                       timeout=300)
    assert s.returncode != 0 and needle in s.stderr and "Traceback" not in s.stderr
    assert time.perf_counter() - t0 < 30


def test_max_points_can_be_raised():
    small = {**A, "max_points": 4}
    with pytest.raises(Exception, match="max_points"):
        validate_scan_config(small)
    assert validate_scan_config({**A, "max_points": 8}).n_points == 8
