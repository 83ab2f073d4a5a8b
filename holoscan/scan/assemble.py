"""Assemble the phase-diagram table of the current plan from sealed segments, in bounded memory.

The table is sorted by model (config order), T, mu and branch, and written as one Parquet file of
many row groups. Memory does not grow with the scan:

1. the plan's table file is streamed (:func:`~holoscan.scan.plan.read_table_rows`) into compact
   arrays: per point a 64-bit prefix of its key, the index of its chunk, its model's rank and T
   (28 bytes a point); from the ranks and temperatures the rows are cut into *buckets*, ranges of
   (model, T) of at most :data:`BUCKET_POINTS` points each (all points of one model at one T stay
   in one bucket);
2. each sealed segment is checked (checksum, code hash) and reduced to the points the plan takes
   from it; every :data:`SPILL_ROWS` rows, the segments read so far are cut by bucket and appended
   to the buckets' spill files (Parquet, in a hidden folder next to the table, removed afterwards,
   also on failure);
3. each bucket in turn is read, sorted and appended to the table as row groups.

The sort key (model, T, mu, branch) is unique, so the table does not depend on how the points were
cut into chunks or buckets.
"""
from __future__ import annotations

import hashlib
import json
import shutil
import socket
import tempfile
from collections import Counter
from datetime import UTC, datetime
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.parquet as pq

from .. import __version__
from ..result import Status
from .plan import read_table_rows
from .seals import write_seal
from .sizing import costs_from, read_costs, time_spent, write_costs
from .store import atomic_path, atomic_write_text, seal_path, sha256_file
from .tables import SCHEMA_VERSION, family_arrays, schema

#: points per bucket: the most rows (times the branches per point) sorted in memory at once
BUCKET_POINTS = 100_000
#: rows of segments read before they are spilled to their buckets (one row group per bucket)
SPILL_ROWS = 100_000
#: rows per row group of the table
ROW_GROUP = 65_536


class AssemblyError(RuntimeError):
    pass


def _key64(keys) -> np.ndarray:
    """The first 16 hex digits of each point key as an unsigned 64-bit integer."""
    return np.array([int(k[:16], 16) for k in keys], dtype=np.uint64)


class _PlanIndex:
    """What assembly needs of the plan's rows, in arrays (see the module docstring, step 1)."""

    def __init__(self, table_file: Path):
        h = hashlib.sha256()
        self.header, rows = read_table_rows(table_file, h.update)
        rank_of = {m: i for i, m in enumerate(self.header["model_order"])}
        self.chunks: dict[str, int] = {}
        parts, block = [], []
        for m, T, _mu, key, chunk in rows:
            c = self.chunks.setdefault(chunk, len(self.chunks))
            block.append((int(key[:16], 16), c, rank_of[m], T))
            if len(block) == 65536:
                parts.append(self._arrays(block))
                block = []
        parts.append(self._arrays(block))
        self.plan_hash = h.hexdigest()[:16]
        key, chunk, rank, T = (np.concatenate([p[i] for p in parts]) for i in range(4))
        self.n_points = len(key)
        self.bounds = self._bounds(rank, T)
        del rank, T
        order = np.lexsort((key, chunk))               # by chunk, then key
        self.key, self.chunk = key[order], chunk[order]
        self.starts = np.searchsorted(self.chunk, np.arange(len(self.chunks) + 1))

    @staticmethod
    def _arrays(block):
        a = np.array(block, dtype=[("k", np.uint64), ("c", np.int32), ("r", np.int16), ("T", np.float64)])
        return a["k"].copy(), a["c"].copy(), a["r"].copy(), a["T"].copy()

    @staticmethod
    def _bounds(rank, T) -> list[np.ndarray]:
        """Per model rank, the sorted temperatures at which a new bucket starts (the first is -inf)."""
        out = []
        for r in range(int(rank.max()) + 1 if len(rank) else 0):
            t = np.sort(T[rank == r])
            cuts = np.unique(t[BUCKET_POINTS::BUCKET_POINTS]) if len(t) > BUCKET_POINTS else t[:0]
            out.append(np.r_[-np.inf, cuts])
        return out

    def wanted(self, chunk: str) -> np.ndarray:
        """The sorted key prefixes of the points the plan takes from ``chunk``."""
        c = self.chunks[chunk]
        return self.key[self.starts[c]:self.starts[c + 1]]

    def bucket_ids(self) -> list[tuple[int, int]]:
        return [(r, j) for r, b in enumerate(self.bounds) for j in range(len(b))]

    def bucket_of(self, rank: np.ndarray, T: np.ndarray) -> np.ndarray:
        """Flat bucket index of each row (ranks in config order, then temperature ranges)."""
        offsets = np.cumsum([0] + [len(b) for b in self.bounds])
        out = np.empty(len(rank), dtype=np.int64)
        for r in np.unique(rank):
            sel = rank == r
            out[sel] = offsets[r] + np.searchsorted(self.bounds[r], T[sel], side="right") - 1
        return out


def _read_segment(path: Path, wanted: np.ndarray) -> pa.Table:
    """The rows of sealed segment ``path`` whose point key is in ``wanted`` (checksum checked)."""
    seal = json.loads(seal_path(path).read_text())
    if seal["sha256"] != sha256_file(path):
        raise AssemblyError(f"{path}: checksum mismatch; run the workflow again (it quarantines the file)")
    t = pq.read_table(path)
    k = _key64(t["point_key"].to_pylist())
    pos = np.minimum(np.searchsorted(wanted, k), max(len(wanted) - 1, 0))
    keep = (wanted[pos] == k) if len(wanted) else np.zeros(len(k), bool)
    return t.filter(pa.array(keep))


class _Spill:
    """Per bucket a Parquet spill file; rows arrive in batches of many segments at once, so each
    write is one row group per bucket and batch (no small tables held per bucket)."""

    def __init__(self, folder: Path):
        self.folder, self.writers = folder, {}

    def add(self, t: pa.Table, bucket: np.ndarray) -> None:
        """Append the rows of ``t`` to their buckets (``bucket``: one index per row)."""
        order = np.argsort(bucket, kind="stable")
        t, bucket = t.take(pa.array(order)), bucket[order]
        cuts = np.flatnonzero(np.diff(bucket)) + 1
        for lo, hi in zip(np.r_[0, cuts], np.r_[cuts, len(bucket)]):
            b = int(bucket[lo])
            w = self.writers.get(b)
            if w is None:
                w = self.writers[b] = pq.ParquetWriter(self.folder / f"{b}.parquet", t.schema)
            w.write_table(t.slice(lo, hi - lo))

    def read(self, b: int) -> pa.Table | None:
        """All rows of bucket ``b`` (closing its spill file), or None when it has none."""
        w = self.writers.pop(b, None)
        if w is None:
            return None
        w.close()
        return pq.read_table(self.folder / f"{b}.parquet")

    def close(self) -> None:
        for w in self.writers.values():
            w.close()


def assemble(table_file, out_table, summary_json, summary_txt=None) -> dict:
    """Select one set of rows per current point key, write the table and the per-model summary."""
    table_file, out_table = Path(table_file), Path(out_table)
    plan = _PlanIndex(table_file)
    doc = plan.header
    root = table_file.parent.parent
    model_order = doc["model_order"]
    rank_of = {m: i for i, m in enumerate(model_order)}
    meta = {
        "schema_version": SCHEMA_VERSION, "package_version": __version__, "code_hash": doc["code_hash"],
        "config_hash": doc["config_hash"], "config": doc["config"], "scan": doc["scan"],
        "created": datetime.now(UTC).isoformat(timespec="seconds"), "host": socket.gethostname(),
        "plan": table_file.name, "plan_hash": plan.plan_hash,
    }
    families = {m: d.get("family") for m, d in doc["models"].items()}
    target = schema(meta, families)
    buckets = plan.bucket_ids()
    spent: dict = {}
    counts = {m: Counter() for m in model_order}
    out_table.parent.mkdir(parents=True, exist_ok=True)
    folder = Path(tempfile.mkdtemp(prefix=".assemble-", dir=out_table.parent))
    spill = _Spill(folder)

    def flush(batch: list) -> None:
        if not batch:
            return
        t = pa.concat_tables(batch)
        batch.clear()
        rank = np.array([rank_of[m] for m in t["model_id"].to_pylist()], dtype=np.int64)
        b = plan.bucket_of(rank, t["T"].to_numpy(zero_copy_only=False))
        spill.add(t.append_column("_rank", pa.array(rank)), b)

    try:
        missing, batch, held = 0, [], 0
        for chunk in sorted(plan.chunks):
            wanted = plan.wanted(chunk)
            t = _read_segment(root / "segments" / f"{chunk}.parquet", wanted)
            missing += len(wanted) - len(np.unique(_key64(t["point_key"].to_pylist())))
            if t.num_rows and set(pc.unique(t["code_hash"]).to_pylist()) - {doc["code_hash"]}:
                raise AssemblyError("segments from another physics-code version were selected")
            time_spent(t, spent)
            batch.append(t)
            held += t.num_rows
            if held >= SPILL_ROWS:
                flush(batch)
                held = 0
        flush(batch)
        plan.key = plan.chunk = plan.starts = None   # pass 1 done: the key arrays are not needed
        pool = pa.default_memory_pool()
        pool.release_unused()
        if missing:
            raise AssemblyError(f"{missing} point(s) missing from the segments; run the workflow again")
        with atomic_path(out_table) as tmp, pq.ParquetWriter(tmp, target) as writer:
            for j in range(len(buckets)):
                t = spill.read(j)
                if t is None:
                    continue
                t = t.sort_by([("_rank", "ascending"), ("T", "ascending"), ("mu", "ascending"),
                               ("branch", "ascending")]).drop_columns(["_rank"])
                for name, col in family_arrays(t["model_id"].to_pylist(), families).items():
                    t = t.append_column(name, col)
                t = t.cast(target)
                g = t.group_by(["model_id", "status"]).aggregate([("status", "count")])
                for m, s, n in zip(*(g[c].to_pylist() for c in ("model_id", "status", "status_count"))):
                    counts[m][s] += n
                writer.write_table(t, row_group_size=ROW_GROUP)
                del t
                pool.release_unused()      # give the sorted bucket's memory back before the next
    finally:
        spill.close()
        shutil.rmtree(folder, ignore_errors=True)
    keys = {m: d["cost_key"] for m, d in doc["models"].items() if "cost_key" in d}
    if keys:  # the per-point cost each model showed, for sizing the chunks of later plans
        costs = read_costs(root)
        costs.update(costs_from(spent, keys))
        write_costs(root, costs)
    summary = {m: {st.value: c[st.value] for st in Status} for m, c in counts.items()}
    atomic_write_text(Path(summary_json), json.dumps(summary, indent=2))
    if summary_txt:
        atomic_write_text(Path(summary_txt), summary_text(summary, doc["scan"]))
    for path in (out_table, summary_json, summary_txt):
        if path:
            write_seal(path, plan.plan_hash)
    return summary


def summary_text(summary: dict, scan: str) -> str:
    cols = [st.value for st in Status]
    w = max([len(m) for m in summary] + [5])
    lines = [f"holoscan scan '{scan}': rows per model and status",
             f"{'model':{w}s}  " + "  ".join(f"{c:>13s}" for c in cols)]
    for m, c in summary.items():
        lines.append(f"{m:{w}s}  " + "  ".join(f"{c[k]:13d}" for k in cols))
    return "\n".join(lines) + "\n"
