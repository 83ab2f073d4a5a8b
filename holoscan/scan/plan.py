"""Plan a scan: grid points -> point keys -> what is missing from the store -> chunks.

A chunk is a list of missing points solved by one job. Its id is the hash of its sorted key list,
so a chunk's name fixes its content: the same missing points always give the same chunk files, and
a chunk's manifest never changes once written. Chunk size is ``points_per_job``, raised when needed
so that one plan never has more than ``max_jobs`` chunks.

Each model with transition lines to locate (:func:`holoscan.phases.lines.has_lines`) gets one
lines job, ``plan/lines-<key>.json``, keyed by the model context (spec, solver, code) and its grid.

The plan also holds the text of ``plan/table-<hash>.json``: every point of the current config with
its key and the chunk that holds (or will hold) it. Assembly reads only that file and the segments
it names. Planning only reads: the manifests and the table file are written by workflow jobs of a
run that holds the lock (so ``snakemake -n``, ``--unlock``, ``--lint`` or a run refused by the lock
change nothing), and a file on disk that differs from the plan's text is written again.
"""
from __future__ import annotations

import gc
import hashlib
import json
import math
from dataclasses import dataclass
from pathlib import Path

from .. import __version__
from ..phases.lines import has_lines
from .config import ScanConfig
from .identity import code_hash, config_hash, model_context, point_keys
from .seals import stale_files
from .sizing import cost_key, points_per_job, read_costs
from .store import atomic_write_text, index_store, text_hash


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
    invalid: dict  # chunk id -> reason: damaged or incomplete segments, quarantined by a locked run
    chunk_size: int
    lines_ids: tuple = ()  # one lines job per model with lines to locate
    chunk_seconds: dict = None  # new chunk id -> expected seconds (its points x per-point cost), if known
    sizing: tuple = ()  # (model id, points per job, seconds per point or None, where the cost came from)
    texts: dict = None  # plan file path (str) -> its exact text (manifests, lines manifests, table file)
    manifests: dict = None  # chunk id or "lines-<key>" -> manifest path
    remade: dict = None  # sealed outputs to make again -> reason (they gave the table file a new name)
    states: dict = None  # model id -> shared-state key, for models whose new chunks share a state

    def state_file(self, key: str) -> Path:
        """Where the shared state ``key`` (e.g. a model's atlas) is kept: ``shared/<key>.npz``."""
        return self.root / "shared" / f"{key}.npz"

    def chunk_states(self, chunk: str) -> list[Path]:
        """The shared-state files a new chunk's job adopts (none for a chunk this plan does not list)."""
        models = (self.chunk_models or {}).get(chunk, ())
        return [self.state_file(self.states[m]) for m in models if m in (self.states or {})]

    chunk_models: dict = None  # new chunk id -> ids of its models

    def lines_outputs(self, key: str) -> tuple[Path, Path]:
        return _lines_outputs(self.root, key)

    def segment(self, chunk: str) -> Path:
        return self.root / "segments" / f"{chunk}.parquet"

    def chunk_manifest(self, chunk: str) -> Path:
        """The manifest of a new chunk (in the main process) or, for a chunk this plan does not
        list (a cluster job re-planning after other chunks finished), the intact one on disk."""
        return self.manifests.get(chunk) or find_manifest(self.root / "plan", chunk)

    def state_manifest_file(self, key: str) -> Path:
        return self.manifests.get("state-" + key) or find_manifest(self.root / "plan", "state-" + key)

    def lines_manifest_file(self, key: str) -> Path:
        return self.manifests.get("lines-" + key) or find_manifest(self.root / "plan", "lines-" + key)


_ROWS_OPEN = ', "rows": [\n'


def table_document_text(doc: dict) -> str:
    """The table file's text: JSON, with ``rows`` last and one row per line, so that a reader can
    take the header from the first line and stream the rows (:func:`read_table_rows`) without
    holding a scan of millions of points in memory."""
    head = json.dumps({k: v for k, v in doc.items() if k != "rows"}, sort_keys=True, default=str)
    body = json.dumps(doc["rows"], separators=(",", ":"), allow_nan=False)[1:-1]
    # ids, keys and numbers never contain "],[" (ids are checked to be file-name safe)
    return head[:-1] + _ROWS_OPEN + body.replace("],[", "],\n[") + "\n]}\n"


def read_table_header(path) -> dict:
    """The table file's document without its rows (read from its first line only)."""
    with open(path, "rb") as f:
        first = f.readline()
    if not first.endswith(_ROWS_OPEN.encode()):
        raise ValueError(f"{path}: not a plan table file (rows not where they belong)")
    return json.loads(first[:-len(_ROWS_OPEN)] + b"}")


def read_table_rows(path, on_line=None):
    """``(header, rows)`` of a table file without loading it whole: ``header`` is the document
    without its rows, ``rows`` an iterator of ``[model_id, T, mu, point_key, chunk]``. ``on_line``,
    if given, is called with every line's bytes (to hash the text while it is read)."""
    f = open(path, "rb")  # noqa: SIM115 - closed by the generator
    first = f.readline()
    if on_line:
        on_line(first)
    if not first.endswith(_ROWS_OPEN.encode()):
        f.close()
        raise ValueError(f"{path}: not a plan table file (rows not where they belong)")
    header = json.loads(first[:-len(_ROWS_OPEN)] + b"}")

    def rows():
        with f:
            for line in f:
                if on_line:
                    on_line(line)
                line = line.strip()
                if line in (b"", b"]}"):
                    continue
                yield json.loads(line.rstrip(b","))
    return header, rows()


def plan_hash_of(table_text: str) -> str:
    """The plan hash: the first 16 hex digits of the sha256 of the plan's table file text."""
    return hashlib.sha256(table_text.encode()).hexdigest()[:16]


def _free_name(folder: Path, stem: str, text: str) -> Path:
    """``<stem>.json``, or ``<stem>.<n>.json`` with the first n whose file is absent or already
    holds ``text``: a damaged or foreign file under a plan file's name is never trusted and never
    overwritten, and a new name makes Snakemake write it (and remake what depends on it)."""
    data = text.encode()
    for n in range(1000):
        p = folder / (f"{stem}.json" if n == 0 else f"{stem}.{n}.json")
        try:
            if not p.exists() or p.read_bytes() == data:
                return p
        except OSError:
            continue
    raise RuntimeError(f"{folder}: no free name for {stem}")


def chunk_manifest_text(doc: dict, chunk: str, pts: list | None = None) -> str:
    """The manifest of chunk ``chunk``, made from the plan's table document alone (so a job can
    write it from the table file without planning again). ``pts``: the chunk's rows
    ``[model_id, T, mu, point_key]`` in table order, when the caller has grouped them already."""
    if pts is None:
        pts = [[m, T, mu, k] for m, T, mu, k, c in doc["rows"] if c == chunk]
    used = sorted({p[0] for p in pts})
    states = doc.get("states", {})
    shared = {m: states[m][0] for m in used if m in states and chunk in states[m][1]}
    return json.dumps({"scan": doc["scan"], "chunk": chunk, "code_hash": doc["code_hash"],
                       "config_hash": doc["config_hash"], "package_version": doc["package_version"],
                       "models": {m: doc["models"][m] for m in used}, "points": pts, "shared": shared},
                      sort_keys=True)


def lines_manifest_text(doc: dict, key: str) -> str:
    """The manifest of lines job ``key`` (one model's grid), made from the plan's table document."""
    mid = next(m for m, k in doc["lines"] if k == key)
    grid = sorted([T, mu] for m, T, mu, _, _ in doc["rows"] if m == mid)
    return json.dumps({"scan": doc["scan"], "key": key, "code_hash": doc["code_hash"], "model_id": mid,
                       "spec": doc["models"][mid]["spec"], "solver": doc["models"][mid]["solver"],
                       "points": grid}, sort_keys=True)


def state_manifest_text(doc: dict, key: str) -> str:
    """The manifest of shared-state job ``key``: the model and the points of its new chunks."""
    mid, chunks = next((m, c) for m, (k, c) in doc["states"].items() if k == key)
    chunks = set(chunks)
    pts = sorted([T, mu] for m, T, mu, _, c in doc["rows"] if m == mid and c in chunks)
    return json.dumps({"scan": doc["scan"], "key": key, "code_hash": doc["code_hash"], "model_id": mid,
                       "spec": doc["models"][mid]["spec"], "solver": doc["models"][mid]["solver"],
                       "points": pts}, sort_keys=True)


def write_manifest_from_table(table_file, out) -> None:
    """Write the manifest ``out`` (``<chunk>.<hash>[.n].json`` or ``lines-<key>.<hash>[...].json``)
    from the table file; refuses when the text would not match the hash in its name."""
    doc = json.loads(Path(table_file).read_text())
    name = Path(out).name
    ident, th = name.split(".")[:2]
    if ident.startswith("lines-"):
        text = lines_manifest_text(doc, ident[len("lines-"):])
    elif ident.startswith("state-"):
        text = state_manifest_text(doc, ident[len("state-"):])
    else:
        text = chunk_manifest_text(doc, ident)
    if text_hash(text) != th:
        raise ValueError(f"{out}: the plan in {Path(table_file).name} gives another manifest; run the workflow again")
    atomic_write_text(Path(out), text, durable=False)


def find_manifest(folder: Path, name: str) -> Path:
    """An intact manifest ``<name>.<text hash>[.<n>].json`` in ``folder`` (its text hashes to the
    hash in its name), the first in sorted order; the plain name if there is none (the job then
    fails with a clear message). Read-only."""
    for p in sorted(Path(folder).glob(f"{name}.*.json")):
        parts = p.name[len(name) + 1:].split(".")
        try:
            if text_hash(p.read_text()) == parts[0]:
                return p
        except (OSError, UnicodeDecodeError):
            continue
    return Path(folder) / f"{name}.json"


def write_plan_file(plan: Plan, path) -> None:
    """Write one plan file (manifest, lines manifest or table file) of ``plan``; for a workflow job
    of a run that holds the lock. No fsync: plan files are compared with the plan on every run, and
    one torn by a crash is written again."""
    text = (plan.texts or {}).get(str(path))
    if text is None:
        raise KeyError(f"{path} is not a file of the current plan")
    atomic_write_text(Path(path), text, durable=False)


def write_plan_files(plan: Plan) -> None:
    """Write every plan file of ``plan`` (table file and manifests): for running a plan without
    Snakemake (tests, scripts); the workflow writes them one job each."""
    for path in (plan.texts or {}):
        write_plan_file(plan, path)


def _sizing(cfg: ScanConfig, mp, ctx: str, costs: dict) -> tuple:
    """(points per job, seconds per point or None, source) for one model (see scan/sizing.py)."""
    key = cost_key(ctx)
    known = costs.get(key, {}).get("seconds_per_point")
    if mp.explicit_points_per_job or cfg.job_minutes is None:
        return mp.points_per_job, known, "config" if mp.explicit_points_per_job else "default"
    if known is None:
        return mp.points_per_job, None, "default"
    return points_per_job(cfg.job_minutes, known), known, costs[key].get("source", "measured")


def _chunk_id(keys, taken) -> str:
    """Hash of the sorted keys; salted with a counter while the name is held by a damaged or
    incomplete segment still on disk (so a re-solve never writes over it, and Snakemake, seeing a
    new file name, solves it whatever its records say)."""
    base = "\n".join(sorted(keys))
    cid = hashlib.sha256(base.encode()).hexdigest()[:16]
    n = 0
    while cid in taken:
        n += 1
        cid = hashlib.sha256(f"{base}\n#{n}".encode()).hexdigest()[:16]
    return cid


def make_plan(cfg: ScanConfig, results_dir="results") -> Plan:
    """Compute keys, compare with the store, pack missing points into chunks (see :func:`_make_plan`);
    the cyclic garbage collector is paused meanwhile: the plan builds millions of small lists that
    hold no cycles, and its passes over them took a third of the time of a 10^6-point plan."""
    paused = gc.isenabled()
    gc.disable()
    try:
        return _make_plan(cfg, results_dir)
    finally:
        if paused:
            gc.enable()


def _make_plan(cfg: ScanConfig, results_dir="results") -> Plan:
    """Compute keys, compare with the store, pack missing points into chunks. Read-only: nothing on
    disk changes (no manifests, no quarantine, no cost probe); the plan files are written by
    workflow jobs (:func:`write_plan_file`) and damaged segments moved by a run holding the lock.
    """
    root = Path(results_dir) / cfg.scan
    code = code_hash()
    chash = config_hash(cfg.canonical_json())
    index = index_store(root / "segments")
    models, table, missing, per_model, lines = {}, [], [], [], []
    costs, sizing, cost_of, shares = read_costs(root), [], {}, {}
    for mp in cfg.models:
        spec, solver = mp.model.spec(), mp.settings.canonical()
        models[mp.model.id] = {"spec": spec, "solver": solver, **({"family": mp.family} if mp.family else {}),
                               **({"isentropes": list(mp.isentropes)} if mp.isentropes else {})}
        ctx = model_context(spec, solver, code)
        if has_lines(mp.model):
            grid = sorted(map(list, mp.points))
            lkey = hashlib.sha256(json.dumps([ctx, grid]).encode()).hexdigest()[:16]
            lines.append({"scan": cfg.scan, "key": lkey, "code_hash": code, "model_id": mp.model.id, "spec": spec,
                          "solver": solver, "points": grid})
        start, mid, where = len(missing), mp.model.id, index.where
        for (T, mu), k in zip(mp.points, point_keys(ctx, mp.points)):
            row = [mid, T, mu, k]
            table.append(row)
            if k not in where:
                missing.append(row)
        shares[mp.model.id] = (ctx, mp.model.shares_state(mp.settings))
        ppj, sec, source = _sizing(cfg, mp, ctx, costs)
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
    # names held by damaged segments, here or already in quarantine: the same in every process,
    # before and after a run moves them (so a job re-planning gets the same chunk ids)
    qdir = root / "quarantine"
    taken = set(index.invalid) | ({p.stem for p in qdir.iterdir()} if qdir.is_dir() else set())
    new_chunks = []
    chunk_seconds = {}
    size = 0
    for ppj, pts_m in per_model:
        step = max(1, math.ceil(ppj * grow))
        size = max(size, step)
        n_chunks = math.ceil(len(pts_m) / step)
        for i in range(n_chunks):
            pts = pts_m[i::n_chunks]  # dealt round-robin: costly regions spread over the chunks
            cid = _chunk_id([p[3] for p in pts], taken)
            taken.add(cid)
            new_chunks.append((cid, pts))
            if cost_of.get(pts[0][0]) is not None:
                chunk_seconds[cid] = len(pts) * cost_of[pts[0][0]]
            for p in pts:
                chunk_of[p[3]] = cid
    rows = [[*p, chunk_of[p[3]]] for p in table]
    # one shared-state job per model whose kind shares a state (an atlas) between its new chunks,
    # keyed by the model context and the new points (so a state file never changes once written)
    states = {}
    for mid, (ctx, does) in shares.items():
        mine = [(cid, pts) for cid, pts in new_chunks if pts[0][0] == mid]
        if does and mine:
            keys = sorted(p[3] for _, pts in mine for p in pts)
            skey = hashlib.sha256("\n".join([ctx, *keys]).encode()).hexdigest()[:16]
            states[mid] = [skey, sorted(cid for cid, _ in mine)]
    pdir = root / "plan"
    doc = {"scan": cfg.scan, "code_hash": code, "config_hash": chash, "config": cfg.raw,
           "package_version": __version__, "models": models,
           "model_order": [mp.model.id for mp in cfg.models],
           "columns": ["model_id", "T", "mu", "point_key", "chunk"], "rows": rows,
           "lines": [[m["model_id"], m["key"]] for m in lines], "states": states}
    table_text = table_document_text(doc)
    plan_hash = plan_hash_of(table_text)
    texts, manifests = {}, {}
    by_chunk: dict[str, list] = {cid: [] for cid, _ in new_chunks}
    for m, T, mu, k, c in rows:
        if c in by_chunk:
            by_chunk[c].append([m, T, mu, k])
    for cid, _ in new_chunks:
        manifest = chunk_manifest_text(doc, cid, by_chunk[cid])
        path = _free_name(pdir, f"{cid}.{text_hash(manifest)}", manifest)
        texts[str(path)], manifests[cid] = manifest, path
    for skey, _ in states.values():
        text = state_manifest_text(doc, skey)
        path = _free_name(pdir, f"state-{skey}.{text_hash(text)}", text)
        texts[str(path)], manifests["state-" + skey] = text, path
    remade = {}
    for m in lines:
        text = lines_manifest_text(doc, m["key"])
        stale = stale_files({str(p): m["key"] for p in _lines_outputs(root, m["key"])})
        remade.update(stale)
        stem = f"lines-{m['key']}.{text_hash(text)}" + (f".r{_state_token(stale)}" if stale else "")
        path = _free_name(pdir, stem, text)
        texts[str(path)], manifests["lines-" + m["key"]] = text, path
    stale = stale_files({str(root / n): plan_hash for n in TABLE_FILES})
    remade.update(stale)
    used = None if stale else _table_file_used(root, plan_hash, table_text)
    table_file = used or _free_name(pdir, f"table-{plan_hash}" + (f".r{_state_token(stale)}" if stale else ""),
                                    table_text)
    texts[str(table_file)] = table_text
    return Plan(
        scan=cfg.scan, root=root, n_points=len(table), n_missing=len(missing),
        chunk_ids=tuple(c for c, _ in new_chunks), segment_ids=tuple(sorted({r[4] for r in rows})),
        table_file=table_file, plan_hash=plan_hash, invalid=dict(index.invalid),
        chunk_size=size or cfg.points_per_job, lines_ids=tuple(m["key"] for m in lines),
        chunk_seconds=chunk_seconds, sizing=tuple(sizing), texts=texts, manifests=manifests, remade=remade,
        states={m: k for m, (k, _) in states.items()},
        chunk_models={cid: (pts[0][0],) for cid, pts in new_chunks},
    )


#: the tables and summaries of a scan, sealed with the plan hash by the jobs that write them
TABLE_FILES = ("points.parquet", "summary.json", "summary.txt", "phases.parquet", "transitions.parquet",
               "critical_points.parquet", "families.parquet", "isentropes.parquet", "phase_summary.json",
               "phase_summary.txt")


def _table_file_used(root: Path, plan_hash: str, text: str) -> Path | None:
    """The table file the current tables were assembled from (named in points.parquet), when it is
    this plan's and intact: keeping its name keeps Snakemake's record of the inputs unchanged."""
    import pyarrow.parquet as pq

    from .tables import META_KEY

    try:
        meta = json.loads((pq.read_schema(root / "points.parquet").metadata or {}).get(META_KEY, b"{}"))
        name = Path(str(meta.get("plan", ""))).name
    except (OSError, ValueError, TypeError, AttributeError):
        return None
    p = root / "plan" / name
    if not name.startswith(f"table-{plan_hash}") or not p.is_file():
        return None
    try:
        return p if p.read_bytes() == text.encode() else None
    except OSError:
        return None


def _lines_outputs(root: Path, key: str) -> tuple[Path, Path]:
    return root / "lines" / f"{key}.parquet", root / "lines" / f"{key}-critical.parquet"


def _state_token(stale: dict) -> str:
    """A name part fixed by the present damage of the stale files: the same damage gives the same
    name in every process (the main one and cluster jobs), new damage a new one."""
    h = hashlib.sha256()
    for path in sorted(stale):
        p = Path(path)
        try:
            st = p.stat()
            h.update(f"{path}\0{stale[path]}\0{st.st_size}\0{st.st_mtime_ns}\n".encode())
        except OSError:
            h.update(f"{path}\0missing\n".encode())
    return h.hexdigest()[:8]
