"""Tables in-process (no Snakemake): schema with units in Arrow field metadata, the file-level
`holoscan` key, pandas round trip, failures as rows, per-model summary, audit.

Expectations are the project's documented table and audit contract (README "The table", "Auditing a
number"; common practice, no source), except where a check names its reference.
"""
import json
import math

import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

import holoscan.scan.chunk as chunk_mod
from holoscan.scan.assemble import assemble
from holoscan.scan.chunk import run_chunk
from holoscan.scan.config import validate_scan_config
from holoscan.scan.identity import code_hash
from holoscan.scan.plan import make_plan, write_plan_files
from holoscan.scan.tables import COLUMNS, META_KEY, file_metadata

CFG = {
    "scan": "tab",
    "models": [
        {"id": "a", "kind": "rn", "d": 4, "kappa_sq": 0.5, "e_sq": 2.0},
        # T = 1e-300 is beyond double precision for d = 3 (T^3 underflows): a point that must come
        # back as a row of its own, status out of range
        {"id": "s", "kind": "rn", "d": 3, "kappa_sq": 1.0, "e_sq": 1.0, "solver": {"method": "shooting"},
         "grid": {"T": [1e-300, 0.5], "mu": [1.0]}},
    ],
    "grid": {"T": {"min": 0.2, "max": 1.0, "num": 3}, "mu": [-1.0, 0.0, 1.0]},
    "points_per_job": 4,
}


def build(tmp_path, cfg=CFG):
    plan = make_plan(validate_scan_config(cfg), tmp_path / "results")
    write_plan_files(plan)
    for c in plan.chunk_ids:
        log = tmp_path / f"{c}.log"
        with open(log, "w") as fh:  # the workflow sends a job's stdout to its log file in the same way
            run_chunk(plan.chunk_manifest(c), plan.segment(c), log_file=str(log), log=lambda m: print(m, file=fh))
    out = tmp_path / "points.parquet"
    summary = assemble(plan.table_file, out, tmp_path / "summary.json", tmp_path / "summary.txt")
    return plan, out, summary


def test_field_metadata_and_file_key_round_trip(tmp_path):
    # Arrow keeps field-level key/value metadata through Parquet (Apache Arrow documentation,
    # "store_schema"); our contract: every column carries its unit and meaning.
    _, out, _ = build(tmp_path)
    t = pq.read_table(out)
    assert t.num_rows == 11
    for name, typ, unit, desc in COLUMNS:
        f = t.schema.field(name)
        assert f.type == typ
        assert f.metadata[b"unit"].decode() == unit and f.metadata[b"description"].decode() == desc
    meta = json.loads(t.schema.metadata[META_KEY])
    for k in ("schema_version", "package_version", "code_hash", "config_hash", "config", "created"):
        assert k in meta
    assert meta["code_hash"] == code_hash() and meta["config"] == CFG

    # through pandas and back: values identical, metadata restored from the stored schema
    df = pd.read_parquet(out)
    assert list(df.columns) == [c[0] for c in COLUMNS]
    back = pa.Table.from_pandas(df, schema=t.schema, preserve_index=False)
    pq.write_table(back, tmp_path / "again.parquet")
    again = pq.read_table(tmp_path / "again.parquet")
    assert again.equals(t)  # values, and the schema with its metadata
    assert again.schema.field("s").metadata == t.schema.field("s").metadata
    assert file_metadata(again) == file_metadata(t)


def test_failed_point_is_a_row_and_the_chunk_goes_on(tmp_path, monkeypatch):
    real = chunk_mod.solve_points

    def flaky(model, targets, settings):  # a bug in one point must not cost the others
        if model.id == "a" and (0.6, 0.0) in targets:
            raise RuntimeError("simulated bug")
        return real(model, targets, settings)

    monkeypatch.setattr(chunk_mod, "solve_points", flaky)
    _, out, summary = build(tmp_path)
    df = pd.read_parquet(out)
    bad = df[(df.model_id == "a") & (df["T"] == 0.6) & (df.mu == 0.0)].iloc[0]
    assert bad.status == "failed" and "simulated bug" in bad.message and math.isnan(bad.s)
    cold = df[(df.model_id == "s") & (df["T"] == 1e-300)].iloc[0]
    assert cold.status == "out of range" and "T = 1e-300" in cold.message and math.isnan(cold.s)
    ok = df[df.status == "ok"]
    assert len(ok) == 9 and ok.s.notna().all()
    # the per-model summary counts what the table holds, every status listed
    assert summary["a"] == {"ok": 8, "not converged": 0, "failed": 1, "no solution": 0, "out of range": 0}
    assert sum(summary["s"].values()) == 2 and summary["s"]["ok"] == 1 and summary["s"]["out of range"] == 1
    text = (tmp_path / "summary.txt").read_text()
    assert "a" in text and "not converged" in text


@pytest.mark.workflow
def test_audit_prints_the_row_and_recomputes(tmp_path, run_cli):
    _, out, _ = build(tmp_path)
    r = run_cli("audit", out, "--model", "s", "--T", 0.5, "--mu", 1.0, "--recompute")
    assert r.returncode == 0, r.stderr
    rep = json.loads(r.stdout)
    (row,) = rep["rows"]
    for k in ("s", "rho", "status", "method", "rtol", "residual", "error_estimate", "code_hash",
              "package_version", "chunk_id", "log_file", "start_time", "end_time", "host"):
        assert k in row
    assert rep["table_metadata"]["config_hash"] and rep["table_metadata"]["code_hash"] == row["code_hash"]
    assert rep["log_lines"] and "T=0.5 mu=1.0" in rep["log_lines"][0]
    rc = rep["recompute"]
    assert rc["same_code"] is True
    # same code, same settings: the deterministic solver reproduces the row exactly
    assert all(v["rel_diff"] == 0.0 for v in rc["comparison"][0]["values"].values() if v["rel_diff"] is not None)
    # a point not on the grid: the error names the nearest grid point
    r = run_cli("audit", out, "--model", "a", "--T", 0.61, "--mu", 0.0)
    assert r.returncode == 2 and "nearest grid point" in r.stderr and "0.6" in r.stderr
    r = run_cli("audit", out, "--model", "zz", "--T", 0.6, "--mu", 0.0)
    assert r.returncode == 2 and "--model = 'zz'" in r.stderr and "Traceback" not in r.stderr


def test_bucketed_assembly_equals_one_bucket_and_leaves_nothing(tmp_path, monkeypatch):
    # assembly streams segments through (model, T) buckets and spill files (bounded memory); the
    # sort key (model, T, mu, branch) is unique, so the table must not depend on the bucket size or
    # on how often the spill buffers are flushed (common practice, no source)
    import holoscan.scan.assemble as asm

    cfg = {**CFG, "grid": {"T": {"min": 0.2, "max": 1.0, "num": 7}, "mu": {"min": -1.0, "max": 1.0, "num": 5}}}
    plan, out, summary = build(tmp_path, cfg)
    one = pq.read_table(out)
    assert pq.ParquetFile(out).metadata.num_row_groups == 2  # one bucket per model
    monkeypatch.setattr(asm, "BUCKET_POINTS", 4)
    monkeypatch.setattr(asm, "SPILL_ROWS", 3)
    again = tmp_path / "again.parquet"
    summary2 = assemble(plan.table_file, again, tmp_path / "s2.json")
    many = pq.read_table(again)
    assert pq.ParquetFile(again).metadata.num_row_groups > 5
    for name in many.column_names:
        assert many[name].equals(one[name]), name
    assert summary2 == summary
    # rows sorted by model (config order), T, mu, branch
    df = many.to_pandas()
    rank = df["model_id"].map({"a": 0, "s": 1})
    keys = list(zip(rank, df["T"], df["mu"], df["branch"]))
    assert keys == sorted(keys) and len(set(keys)) == len(keys)
    leftovers = [p.name for p in tmp_path.iterdir() if p.name.startswith(".")]
    assert leftovers == []
