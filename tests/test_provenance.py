"""Provenance (W3C PROV, PROV-JSON), RO-Crate metadata, `holoscan summary` and the Snakemake report,
on one small real scan run through Snakemake.

References outside the project: the PROV-JSON document is read back with the general-purpose
`prov` library (its PROV-JSON reader, with its warnings turned into errors) and checked against the
PROV data model's rule that every relation names declared records (PROV-DM, W3C Recommendation
2013, and the PROV-JSON member submission for the record kinds); checksums are recomputed with
hashlib; activity times, hosts and counts are recomputed from the Parquet files with pyarrow;
the crate against the RO-Crate 1.1 requirements on the metadata descriptor and the root dataset.
"""
from __future__ import annotations

import hashlib
import json
import os
import re
import shutil
import subprocess
import sys
import warnings
from collections import Counter
from datetime import datetime
from pathlib import Path

import pyarrow.parquet as pq
import pytest
from test_tables import CFG as TABLE_CFG
from workflow_helpers import scanned_workspace, snakemake_cmd

import holoscan

prov_model = pytest.importorskip("prov.model")

pytestmark = pytest.mark.workflow  # one Snakemake scan for the file; holoscan and snakemake subprocesses

# the two rn models of test_tables.py (one of them with a failed row, so the status counts are not
# all ok) and a model with a lines job (condensation onset): lines files, transitions
CFG = {**TABLE_CFG, "scan": "pv", "models": [
    *TABLE_CFG["models"],
    {"id": "sc", "kind": "charged-scalar", "d": 3, "m_sq": -1.25, "delta": 2.5, "q": 3.0, "probe": True,
     "grid": {"T": [0.05, 0.1], "mu": [1.0]}},
]}
# record kinds of the PROV-JSON submission (section 2)
PROV_JSON_KINDS = {"prefix", "entity", "activity", "agent", "wasGeneratedBy", "used", "wasInformedBy",
                   "wasStartedBy", "wasEndedBy", "wasInvalidatedBy", "wasDerivedFrom", "wasAttributedTo",
                   "wasAssociatedWith", "actedOnBehalfOf", "wasInfluencedBy", "specializationOf",
                   "alternateOf", "hadMember", "mentionOf", "bundle"}
TABLES = ("points", "phases", "transitions", "critical_points")


def holoscan_cli(*args, cwd=None):
    return subprocess.run([sys.executable, "-m", "holoscan", *args], cwd=cwd, capture_output=True, text=True,
                          timeout=300)


@pytest.fixture(scope="module")
def scan(tmp_path_factory):
    return scanned_workspace(tmp_path_factory, CFG)


@pytest.fixture(scope="module")
def prov_doc(scan):
    _, root = scan
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # anything the reader would only warn about fails the test
        return prov_model.ProvDocument.deserialize(str(root / "provenance.json"), format="json")


def records(doc, cls):
    return list(doc.get_records(cls))


def ptype(rec):
    return {str(t) for t in rec.get_attribute("prov:type")}


def attr(rec, name):
    (v,) = rec.get_attribute(name)
    return v


def sha256(path):
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


def test_prov_json_is_valid_and_every_relation_names_declared_records(scan, prov_doc):
    _, root = scan
    raw = json.loads((root / "provenance.json").read_text())
    assert set(raw) <= PROV_JSON_KINDS
    declared = {r.identifier for r in records(prov_doc, prov_model.ProvElement)}
    assert len(declared) == sum(len(raw[k]) for k in ("entity", "activity", "agent"))
    rels = records(prov_doc, prov_model.ProvRelation)
    assert len(rels) == sum(len(v) for k, v in raw.items() if k not in ("prefix", "entity", "activity", "agent"))
    for rel in rels:
        for name, value in rel.formal_attributes:
            if value is not None and not isinstance(value, datetime):
                assert value in declared, f"{rel}: {name} = {value} is not a declared record"
    # the library's own PROV-JSON writer and reader give back the same document
    again = prov_model.ProvDocument.deserialize(content=prov_doc.serialize(format="json"), format="json")
    assert again == prov_doc


def test_each_chunk_solve_has_the_times_and_host_of_its_rows(scan, prov_doc):
    _, root = scan
    plan = json.loads(next((root / "plan").glob("table-*.json")).read_text())
    chunks = {r[4] for r in plan["rows"]}
    solves = {attr(a, "holoscan:chunk"): a for a in records(prov_doc, prov_model.ProvActivity)
              if "holoscan:ChunkSolve" in ptype(a)}
    assert set(solves) == chunks
    gen = {r.args[0]: r.args[1] for r in records(prov_doc, prov_model.ProvGeneration)}
    for chunk, act in solves.items():
        rows = pq.read_table(root / "segments" / f"{chunk}.parquet").to_pylist()
        assert act.get_startTime() == min(datetime.fromisoformat(r["start_time"]) for r in rows)
        assert act.get_endTime() == max(datetime.fromisoformat(r["end_time"]) for r in rows)
        assert attr(act, "holoscan:host") == ", ".join(sorted({r["host"] for r in rows}))
        seg = [e for e, a in gen.items() if a == act.identifier]
        assert len(seg) == 1 and attr(prov_doc.get_record(seg[0])[0], "holoscan:path") == f"segments/{chunk}.parquet"


def test_tables_are_generated_with_the_sha256_of_their_bytes(scan, prov_doc):
    _, root = scan
    gen = {r.args[0]: r.args[1] for r in records(prov_doc, prov_model.ProvGeneration)}
    files = {attr(e, "holoscan:path"): e for e in records(prov_doc, prov_model.ProvEntity)
             if e.get_attribute("holoscan:path")}
    for name in [f"{t}.parquet" for t in TABLES] + ["summary.json", "phase_summary.json"]:
        e = files[name]
        assert attr(e, "holoscan:sha256") == sha256(root / name)
        assert prov_doc.get_record(gen[e.identifier])[0].is_element()  # generated by a declared activity
    for path, e in files.items():  # every file named: segments, lines, plan files, figures too
        assert attr(e, "holoscan:sha256") == sha256(root / path), path
    points = files["points.parquet"].identifier
    derived = {r.args[1] for r in records(prov_doc, prov_model.ProvDerivation) if r.args[0] == points}
    segs = {e.identifier for p, e in files.items() if p.startswith("segments/")}
    assert derived == segs and segs


def test_software_agent_carries_version_and_code_hash(scan, prov_doc):
    _, root = scan
    meta = json.loads(pq.read_schema(root / "points.parquet").metadata[b"holoscan"])
    (agent,) = records(prov_doc, prov_model.ProvAgent)
    assert "prov:SoftwareAgent" in ptype(agent)
    assert attr(agent, "holoscan:version") == holoscan.__version__
    assert attr(agent, "holoscan:code_hash") == meta["code_hash"]
    assoc = {r.args[0] for r in records(prov_doc, prov_model.ProvAssociation) if r.args[1] == agent.identifier}
    assert assoc == {a.identifier for a in records(prov_doc, prov_model.ProvActivity)}


def test_provenance_command_is_deterministic_and_rejects_an_altered_segment(scan, tmp_path):
    _, root = scan
    out = tmp_path / "p.json"
    assert holoscan_cli("provenance", str(root), "--out", str(out)).returncode == 0
    assert out.read_bytes() == (root / "provenance.json").read_bytes()
    # the same files written again later (new modification times, same bytes): the same record
    later = tmp_path / "later"
    shutil.copytree(root, later)
    for f in [*later.glob("figures/*"), *later.glob("*.parquet"), *later.glob("*summary*")]:
        os.utime(f, (f.stat().st_atime + 3600, f.stat().st_mtime + 3600))
    again = tmp_path / "p2.json"
    assert holoscan_cli("provenance", str(later), "--out", str(again)).returncode == 0
    assert again.read_bytes() == out.read_bytes()
    copy = tmp_path / "pv"
    shutil.copytree(root, copy)
    seg = sorted((copy / "segments").glob("*.parquet"))[0]
    seg.write_bytes(seg.read_bytes()[:-10])
    p = holoscan_cli("provenance", str(copy), "--out", str(tmp_path / "q.json"))
    assert p.returncode == 2 and seg.name in p.stderr and len(p.stderr.strip().splitlines()) == 1


def test_ro_crate_metadata_follows_ro_crate_1_1(scan):
    _, root = scan
    crate = json.loads((root / "ro-crate-metadata.json").read_text())
    ctx = crate["@context"]
    assert ctx == "https://w3id.org/ro/crate/1.1/context" or ctx[0] == "https://w3id.org/ro/crate/1.1/context"
    graph = {e["@id"]: e for e in crate["@graph"]}
    desc = graph["ro-crate-metadata.json"]
    assert desc["@type"] == "CreativeWork" and desc["about"] == {"@id": "./"}
    assert desc["conformsTo"]["@id"].startswith("https://w3id.org/ro/crate/1.1")
    top = graph["./"]
    assert top["@type"] == "Dataset" and {"name", "description", "datePublished", "license"} <= set(top)
    parts = [p["@id"] for p in top["hasPart"]]
    assert "points.parquet" in parts and "provenance.json" in parts
    for p in parts:
        assert graph[p]["@type"] == "File" and (root / p).is_file()
        if "sha256" in graph[p]:
            assert graph[p]["sha256"] == sha256(root / p)
    for e in crate["@graph"]:
        if e["@type"] == "CreateAction":
            for ref in e["instrument"] + e["object"] + e["result"]:
                assert ref["@id"] in graph


def test_summary_counts_equal_the_tables(scan):
    _, root = scan
    p = holoscan_cli("summary", str(root))
    assert p.returncode == 0, p.stderr
    text = p.stdout
    pts = pq.read_table(root / "points.parquet").to_pylist()
    phases = pq.read_table(root / "phases.parquet").to_pylist()
    trans = pq.read_table(root / "transitions.parquet").to_pylist()
    blocks = dict(re.findall(r"^  (\S+) \(.*?\n((?:    .*\n)+)", text, re.MULTILINE))
    assert set(blocks) == {m["id"] for m in CFG["models"]}
    for m, block in blocks.items():
        first_line = block.splitlines()[0].split(": ", 1)[1]
        status = {k: int(v) for k, v in re.findall(r"([a-z ]+?) (\d+)(?:,|$)", first_line)}
        want = Counter(r["status"] for r in pts if r["model_id"] == m)
        assert {k.strip(): v for k, v in status.items() if v} == dict(want)
        phase_line = re.search(r"dominant phase: (.*)", block).group(1)
        want = Counter(r["dominant_phase"] or "(none)" for r in phases if r["model_id"] == m)
        assert phase_line == ", ".join(f"{k} {v}" for k, v in sorted(want.items()))
        tr_line = re.search(r"transition points: (.*)", block).group(1)
        want = Counter(f"{r['type']} ({r['status']})" for r in trans if r["model_id"] == m)
        assert tr_line == (", ".join(f"{k} {v}" for k, v in sorted(want.items())) or "none")
    assert "out of range 1" in blocks["s"]  # test_tables: T = 1e-300 is beyond double precision for d = 3
    # the slowest point is the one whose solve took longest, from the rows' own times (no model of
    # this scan solves points in batches, so each point's time is its own end - start)
    longest = max(pts, key=lambda r: datetime.fromisoformat(r["end_time"]) - datetime.fromisoformat(r["start_time"]))
    first = text.split("slowest", 1)[1].splitlines()[1].split()
    assert first[0] == longest["model_id"] and float(first[3]) == pytest.approx(longest["T"], rel=1e-5)
    worst = max((r for r in pts if r["error_estimate"] is not None), key=lambda r: r["error_estimate"])
    line = text.split("least converged", 1)[1].splitlines()[1]
    assert line.split()[0] == worst["model_id"] and f"{worst['error_estimate']:.3g}" in line


def test_summary_of_a_bad_folder_is_one_line_naming_the_key(scan, tmp_path):
    _, root = scan
    p = holoscan_cli("summary", str(tmp_path / "nowhere"))
    assert p.returncode == 2 and p.stderr.count("\n") == 1 and "RESULTS_DIR" in p.stderr
    copy = tmp_path / "pv"
    shutil.copytree(root, copy)
    (copy / "phases.parquet").unlink()
    p = holoscan_cli("summary", str(copy))
    assert p.returncode == 2 and "RESULTS_DIR" in p.stderr and "phases.parquet" in p.stderr


def test_snakemake_report_is_an_html_file_with_the_description_and_figures(scan):
    ws, root = scan
    out = root / "report.html"
    p = subprocess.run(snakemake_cmd("--report", str(out.relative_to(ws))), cwd=ws, capture_output=True, text=True,
                       timeout=300)
    assert p.returncode == 0, p.stderr[-2000:]
    html = out.read_text(errors="replace")
    assert html.lstrip().lower().startswith("<!doctype html") or "<html" in html[:2000].lower()
    assert "not predictions for QCD" in html  # workflow/report/workflow.rst
    assert "provenance.json" in html
    for fig in sorted((root / "figures").glob("*.png")) if (root / "figures").is_dir() else []:
        assert fig.name in html
