"""Plan a scan: grid points -> point keys -> what is missing from the store -> chunks.

A chunk is a list of missing points solved by one job. Its id is the hash of its sorted key list,
so a chunk's name fixes its content: the same missing points always give the same chunk files, and
a chunk's manifest never changes once written. Chunk size is ``points_per_job``, raised when needed
so that one plan never has more than ``max_jobs`` chunks.

Each model with transition lines to locate (:func:`holoscan.phases.lines.has_lines`) gets one
lines job, ``plan/lines-<key>.json``, keyed by the model context (spec, solver, code) and its grid.

The plan also writes ``plan/table-<hash>.json``: every point of the current config with its key and
the chunk that holds (or will hold) it. Assembly reads only that file and the segments it names.
"""
from __future__ import annotations

import hashlib
import json
import math
from dataclasses import dataclass
from pathlib import Path

from .. import __version__
from ..phases.lines import has_lines
from .config import ScanConfig
from .identity import code_hash, config_hash, model_context, point_key
from .sizing import cost_key, points_per_job, probe, read_costs, write_costs
from .store import atomic_write_text, index_store


@dataclass(frozen=True)
class Plan:
    scan: str
    root: Path  # results/<scan>
    n_points: int
    n_missing: int
    chunk_ids: tuple  # new chunks to solve
    segment_ids: tuple  # every segment the table needs (old and new)
    table_file: Path  # plan/table-<hash>.json
    plan_hash: str
    quarantined: tuple
    chunk_size: int
    lines_ids: tuple = ()  # one lines job per model with lines to locate
    chunk_seconds: dict = None  # new chunk id -> expected seconds (its points x per-point cost), if known
    sizing: tuple = ()  # (model id, points per job, seconds per point or None, where the cost came from)

    def lines_manifest(self, key: str) -> Path:
        return self.root / "plan" / f"lines-{key}.json"

    def lines_outputs(self, key: str) -> tuple[Path, Path]:
        return self.root / "lines" / f"{key}.parquet", self.root / "lines" / f"{key}-critical.parquet"

    def manifest(self, chunk: str) -> Path:
        return self.root / "plan" / f"{chunk}.json"

    def segment(self, chunk: str) -> Path:
        return self.root / "segments" / f"{chunk}.parquet"


def _write_once(path: Path, text: str) -> None:
    """Write a plan file unless it already holds ``text``. No fsync: plan files are recomputed and
    compared on every run, so a file torn by a crash is simply rewritten."""
    if not path.exists() or path.read_text() != text:
        atomic_write_text(path, text, durable=False)


def _sizing(cfg: ScanConfig, mp, ctx: str, missing: list, costs: dict, write: bool, log) -> tuple:
    """(points per job, seconds per point or None, source) for one model (see scan/sizing.py)."""
    key = cost_key(ctx)
    known = costs.get(key, {}).get("seconds_per_point")
    if mp.explicit_points_per_job or cfg.job_minutes is None:
        return mp.points_per_job, known, "config" if mp.explicit_points_per_job else "default"
    if known is None:
        if not (write and missing):
            return mp.points_per_job, None, "default"
        known = probe(mp.model, mp.settings, [(p[1], p[2]) for p in missing])
        costs[key] = {"model_id": mp.model.id, "seconds_per_point": known, "points": 1, "source": "probe"}
        log(f"holoscan: model '{mp.model.id}': probed one point in {known:.3g} s to size its chunks")
        return points_per_job(cfg.job_minutes, known), known, "probe"
    return points_per_job(cfg.job_minutes, known), known, costs[key].get("source", "measured")


def make_plan(cfg: ScanConfig, results_dir="results", *, write: bool = True, log=None) -> Plan:
    """Compute keys, compare with the store, pack missing points into chunks, write manifests.

    With ``write=False`` nothing on disk changes (no manifests, no quarantine, no cost probe): used
    inside jobs.
    """
    import sys

    log = log or (lambda msg: print(msg, file=sys.stderr))
    root = Path(results_dir) / cfg.scan
    code = code_hash()
    chash = config_hash(cfg.canonical_json())
    index = index_store(root / "segments", quarantine=write)
    models, table, missing, per_model, lines = {}, [], [], [], []
    costs, sizing, cost_of = read_costs(root), [], {}
    n_costs = len(costs)
    for mp in cfg.models:
        spec, solver = mp.model.spec(), mp.settings.canonical()
        models[mp.model.id] = {"spec": spec, "solver": solver}
        ctx = model_context(spec, solver, code)
        if has_lines(mp.model):
            grid = sorted(map(list, mp.points))
            lkey = hashlib.sha256(json.dumps([ctx, grid]).encode()).hexdigest()[:16]
            lines.append({"scan": cfg.scan, "key": lkey, "code_hash": code, "model_id": mp.model.id, "spec": spec,
                          "solver": solver, "points": grid})
        start = len(missing)
        for T, mu in mp.points:
            k = point_key(ctx, T, mu)
            table.append([mp.model.id, T, mu, k])
            if k not in index.where:
                missing.append([mp.model.id, T, mu, k])
        ppj, sec, source = _sizing(cfg, mp, ctx, missing[start:], costs, write, log)
        models[mp.model.id]["cost_key"] = cost_key(ctx)
        sizing.append((mp.model.id, ppj, sec, source))
        cost_of[mp.model.id] = sec
        per_model.append((ppj, missing[start:]))
    # Chunks never mix models; a model's points are dealt round-robin over its chunks so that an
    # expensive region (a first-order fold, low T) does not land in one job. Sizes grow uniformly
    # if needed so that one plan has about max_jobs chunks at most.
    n_jobs = sum(math.ceil(len(m) / ppj) for ppj, m in per_model if m)
    grow = max(1.0, n_jobs / cfg.max_jobs)
    chunk_of = dict(index.where)
    new_chunks = []
    chunk_seconds = {}
    size = 0
    for ppj, pts_m in per_model:
        step = max(1, math.ceil(ppj * grow))
        size = max(size, step)
        n_chunks = math.ceil(len(pts_m) / step)
        for i in range(n_chunks):
            pts = pts_m[i::n_chunks]  # dealt round-robin: costly regions spread over the chunks
            cid = hashlib.sha256("\n".join(sorted(p[3] for p in pts)).encode()).hexdigest()[:16]
            new_chunks.append((cid, pts))
            if cost_of.get(pts[0][0]) is not None:
                chunk_seconds[cid] = len(pts) * cost_of[pts[0][0]]
            for p in pts:
                chunk_of[p[3]] = cid
    rows = [[*p, chunk_of[p[3]]] for p in table]
    plan_hash = hashlib.sha256(json.dumps([rows, [m["key"] for m in lines]]).encode()).hexdigest()[:16]
    table_file = root / "plan" / f"table-{plan_hash}.json"
    if write:
        if len(costs) != n_costs:
            write_costs(root, costs)
        for cid, pts in new_chunks:
            used = sorted({p[0] for p in pts})
            manifest = {"scan": cfg.scan, "chunk": cid, "code_hash": code, "config_hash": chash,
                        "package_version": __version__, "models": {m: models[m] for m in used}, "points": pts}
            _write_once(root / "plan" / f"{cid}.json", json.dumps(manifest, sort_keys=True))
        for m in lines:
            _write_once(root / "plan" / f"lines-{m['key']}.json", json.dumps(m, sort_keys=True))
        doc = {"scan": cfg.scan, "code_hash": code, "config_hash": chash, "config": cfg.raw,
               "package_version": __version__, "models": models,
               "model_order": [mp.model.id for mp in cfg.models],
               "columns": ["model_id", "T", "mu", "point_key", "chunk"], "rows": rows,
               "lines": [[m["model_id"], m["key"]] for m in lines]}
        _write_once(table_file, json.dumps(doc, sort_keys=True, default=str))
    return Plan(
        scan=cfg.scan, root=root, n_points=len(table), n_missing=len(missing),
        chunk_ids=tuple(c for c, _ in new_chunks), segment_ids=tuple(sorted({r[4] for r in rows})),
        table_file=table_file, plan_hash=plan_hash, quarantined=tuple(index.quarantined),
        chunk_size=size or cfg.points_per_job, lines_ids=tuple(m["key"] for m in lines),
        chunk_seconds=chunk_seconds, sizing=tuple(sizing),
    )
