"""Assemble the phase-diagram table of the current plan from sealed segments."""
from __future__ import annotations

import json
import socket
from collections import Counter
from datetime import UTC, datetime
from pathlib import Path

import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.parquet as pq

from .. import __version__
from ..result import Status
from .plan import plan_hash_of
from .seals import write_seal
from .sizing import measured, read_costs, write_costs
from .store import atomic_write_table, atomic_write_text, seal_path, sha256_file
from .tables import SCHEMA_VERSION, schema


class AssemblyError(RuntimeError):
    pass


def _read_segment(path: Path, keys: set) -> pa.Table:
    seal = json.loads(seal_path(path).read_text())
    if seal["sha256"] != sha256_file(path):
        raise AssemblyError(f"{path}: checksum mismatch; run the workflow again (it quarantines the file)")
    t = pq.read_table(path)
    return t.filter(pc.is_in(t["point_key"], value_set=pa.array(sorted(keys), pa.string())))


def assemble(table_file, out_table, summary_json, summary_txt=None) -> dict:
    """Select one set of rows per current point key, write the table and the per-model summary."""
    text = Path(table_file).read_text()
    doc = json.loads(text)
    plan_hash = plan_hash_of(text)
    root = Path(table_file).parent.parent
    by_chunk: dict[str, set] = {}
    for _, _, _, key, chunk in doc["rows"]:
        by_chunk.setdefault(chunk, set()).add(key)
    parts = [_read_segment(root / "segments" / f"{c}.parquet", ks) for c, ks in sorted(by_chunk.items())]
    table = pa.concat_tables(parts) if parts else schema().empty_table()
    found = set(table["point_key"].to_pylist())
    wanted = {r[3] for r in doc["rows"]}
    if found != wanted:
        raise AssemblyError(f"{len(wanted - found)} point(s) missing from the segments; run the workflow again")
    if set(table["code_hash"].to_pylist()) - {doc["code_hash"]}:
        raise AssemblyError("segments from another physics-code version were selected")
    order = {m: i for i, m in enumerate(doc["model_order"])}
    rank = pa.array([order[m] for m in table["model_id"].to_pylist()], pa.int64())
    table = table.append_column("_rank", rank)
    table = table.sort_by([("_rank", "ascending"), ("T", "ascending"), ("mu", "ascending"), ("branch", "ascending")])
    table = table.drop_columns(["_rank"])
    meta = {
        "schema_version": SCHEMA_VERSION, "package_version": __version__, "code_hash": doc["code_hash"],
        "config_hash": doc["config_hash"], "config": doc["config"], "scan": doc["scan"],
        "created": datetime.now(UTC).isoformat(timespec="seconds"), "host": socket.gethostname(),
        "plan": Path(table_file).name, "plan_hash": plan_hash,
    }
    table = table.cast(schema(meta))
    atomic_write_table(table, out_table)
    keys = {m: d["cost_key"] for m, d in doc["models"].items() if "cost_key" in d}
    if keys:  # the per-point cost each model showed, for sizing the chunks of later plans
        costs = read_costs(root)
        costs.update(measured(table, keys))
        write_costs(root, costs)
    summary = summarize(table, doc["model_order"])
    atomic_write_text(Path(summary_json), json.dumps(summary, indent=2))
    if summary_txt:
        atomic_write_text(Path(summary_txt), summary_text(summary, doc["scan"]))
    for path in (out_table, summary_json, summary_txt):
        if path:
            write_seal(path, plan_hash)
    return summary



def summarize(table: pa.Table, model_order) -> dict:
    """Counts of rows by status, per model (every status listed, zeros included)."""
    counts = {m: Counter() for m in model_order}
    for m, s in zip(table["model_id"].to_pylist(), table["status"].to_pylist()):
        counts[m][s] += 1
    return {m: {st.value: c[st.value] for st in Status} for m, c in counts.items()}


def summary_text(summary: dict, scan: str) -> str:
    cols = [st.value for st in Status]
    w = max([len(m) for m in summary] + [5])
    lines = [f"holoscan scan '{scan}': rows per model and status",
             f"{'model':{w}s}  " + "  ".join(f"{c:>13s}" for c in cols)]
    for m, c in summary.items():
        lines.append(f"{m:{w}s}  " + "  ".join(f"{c[k]:13d}" for k in cols))
    return "\n".join(lines) + "\n"
