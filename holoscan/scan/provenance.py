"""W3C PROV record of a finished scan, as PROV-JSON (see :mod:`holoscan.scan.prov_json`).

What it states, for the folder ``results/<scan>/`` of a finished scan:

Entities (files carry ``holoscan:path``, relative to the scan folder, ``holoscan:sha256`` of the
bytes, ``holoscan:bytes``, and ``holoscan:rows`` for Parquet):

- the config (``holoscan:Config``): its hash and canonical JSON text; a chunk manifest written under
  an earlier config points at a config entity that carries only that hash;
- the plan file the tables were assembled from (``prov:Plan``), each chunk manifest and lines
  manifest it relies on (``holoscan:Manifest``);
- each segment (``holoscan:Segment``), each lines file (``holoscan:Lines``), the four tables
  (``holoscan:Table``), the summaries (``holoscan:Summary``), each figure (``holoscan:Figure``).

Activities: one ``holoscan:ChunkSolve`` per segment (``prov:startTime``/``prov:endTime``: the
earliest start and latest end over its rows; ``holoscan:host``: the hosts of its rows, comma
separated; ``holoscan:log_file``, ``holoscan:rows``), one ``holoscan:LinesSolve`` per lines job
(times and host from its line rows, when it located any), ``holoscan:Assembly`` (end: the
``created`` time in the points table), ``holoscan:PhaseTables`` and ``holoscan:Figures`` (no times:
their files record none, and a file's modification time would make the record change whenever an
identical file is written again). Times that are not known are left out, as PROV allows; the
record depends only on the files' contents.

Agents: the software, ``prov:SoftwareAgent`` with ``holoscan:version`` and ``holoscan:code_hash``,
one per (version, physics-code hash) found in the rows; each activity ``wasAssociatedWith`` the one
that ran it (the segments' and lines' own columns; the tables' file metadata for assembly and phase
tables; figures, which record no version, are attributed to the tables' software).

Relations: ``used`` (manifests by solves, plan and segments by assembly, points and lines by the
phase tables, tables by figures), ``wasGeneratedBy`` for every output file, ``wasDerivedFrom`` (the
points table from each segment, phases from points, transitions and critical points from the lines
files, summaries from their tables, manifests and the plan from the config).

Identifiers: files are ``run:<path>`` in the namespace ``run`` =
``https://holoscan.example.org/run/<scan>/<plan hash>/``; vocabulary terms are in ``holoscan`` =
``https://holoscan.example.org/ns#``; software agents in ``hssw`` =
``https://holoscan.example.org/software/``. These IRIs are names, not web addresses.
"""
from __future__ import annotations

import json
from datetime import UTC, datetime
from pathlib import Path

import pyarrow.parquet as pq

from ..errors import InputError
from . import finished
from .identity import canonical_json
from .plan import find_manifest, plan_hash_of
from .prov_json import ProvDoc, qname
from .seals import seal_problem
from .store import atomic_write_text, seal_path, sha256_file

VOCAB = "https://holoscan.example.org/ns#"
SOFTWARE = "https://holoscan.example.org/software/"
SUMMARIES = {"summary.json": ("assemble", "points"), "summary.txt": ("assemble", "points"),
             "phase_summary.json": ("phase-tables", "phases"), "phase_summary.txt": ("phase-tables", "phases")}


def _utc(text: str) -> datetime:
    t = datetime.fromisoformat(text)
    return (t if t.tzinfo else t.replace(tzinfo=UTC)).astimezone(UTC)


def _iso(t: datetime | None) -> str | None:
    return None if t is None else t.isoformat()


def figure_files(root: Path) -> list[Path]:
    """Every file under ``<root>/figures`` (hidden files and folders excluded: temporary files and
    the cache of drawn figures), sorted."""
    d = Path(root) / "figures"
    if not d.is_dir():
        return []
    return sorted(p for p in d.rglob("*") if p.is_file()
                  and not any(part.startswith(".") for part in p.relative_to(d).parts))


class _Builder:
    def __init__(self, root: Path, meta: dict, plan_path: Path, plan: dict):
        self.root, self.meta, self.plan = Path(root).resolve(), meta, plan
        self.doc = ProvDoc({"holoscan": VOCAB, "hssw": SOFTWARE,
                            "run": f"https://holoscan.example.org/run/{plan['scan']}/{plan_path.stem[6:]}/"})
        self.plan_path = plan_path

    def file(self, path: Path, kind: str, extra: dict | None = None) -> str:
        path = Path(path).resolve()
        if not path.is_relative_to(self.root):
            raise InputError("--figures", str(path), f"not inside the scan folder {self.root}")
        rel = path.relative_to(self.root).as_posix()
        attrs = {"prov:type": qname(kind), "prov:label": rel, "holoscan:path": rel,
                 "holoscan:sha256": sha256_file(path), "holoscan:bytes": Path(path).stat().st_size}
        if rel.endswith(".parquet"):
            attrs["holoscan:rows"] = pq.read_metadata(path).num_rows
        return self.doc.entity(f"run:{rel}", {**attrs, **(extra or {})})

    def agent(self, version: str, code: str) -> str:
        return self.doc.agent(f"hssw:holoscan-{version}-{code}", {
            "prov:type": qname("prov:SoftwareAgent"), "prov:label": f"holoscan {version} (physics code {code})",
            "holoscan:version": str(version), "holoscan:code_hash": str(code)})

    def config(self, chash: str) -> str:
        attrs = {"prov:type": qname("holoscan:Config"), "holoscan:config_hash": chash}
        if chash == self.plan["config_hash"]:
            attrs.update({"holoscan:scan": self.plan["scan"], "prov:value": canonical_json(self.plan["config"])})
        return self.doc.entity(f"run:config-{chash}", attrs)

    def rows_activity(self, ident: str, kind: str, files, extra: dict) -> str:
        """An activity whose times, hosts and software come from the rows of ``files``."""
        cols = ["start_time", "end_time", "host", "package_version", "code_hash", "log_file"]
        rows = [r for f in files for r in pq.read_table(f, columns=cols).to_pylist()]
        starts = [_utc(r["start_time"]) for r in rows if r["start_time"]]
        ends = [_utc(r["end_time"]) for r in rows if r["end_time"]]
        hosts = sorted({r["host"] for r in rows if r["host"]})
        logs = sorted({r["log_file"] for r in rows if r["log_file"]})
        attrs = {"prov:type": qname(kind), "holoscan:rows": len(rows), **extra}
        if hosts:
            attrs["holoscan:host"] = ", ".join(hosts)
        if logs:
            attrs["holoscan:log_file"] = ", ".join(logs)
        act = self.doc.activity(ident, _iso(min(starts, default=None)), _iso(max(ends, default=None)), attrs)
        soft = sorted({(r["package_version"], r["code_hash"]) for r in rows})
        for version, code in soft or [(self.meta["package_version"], self.plan["code_hash"])]:
            self.doc.relate("wasAssociatedWith", act, self.agent(version, code))
        return act

    def gen(self, entity: str, activity: str) -> None:
        self.doc.relate("wasGeneratedBy", entity, activity)

    def used(self, activity: str, entity: str) -> None:
        self.doc.relate("used", activity, entity)

    def derived(self, new: str, old: str) -> None:
        self.doc.relate("wasDerivedFrom", new, old)


def _verified(path: Path, plan_hash: str) -> None:
    """Certify only a file whose seal names its plan and matches its bytes (scan/seals.py)."""
    problem = seal_problem(path, plan_hash)
    if problem:
        raise InputError(str(Path(path).name), plan_hash, f"not certified: {problem}; run the workflow again")


def build(results_dir, figures=None) -> ProvDoc:
    """The PROV document of the finished scan in ``results_dir`` (``results/<scan>``).

    ``figures``: the figure files to record (default: every file under ``results_dir/figures``).
    """
    root = finished.scan_folder(results_dir)
    meta = finished.run_metadata(root)
    plan_path, plan = finished.read_plan(root, meta)
    plan_hash = plan_hash_of(plan_path.read_text())
    if meta.get("plan_hash") not in (None, plan_hash):
        raise InputError(f"plan/{plan_path.name}", plan_hash, f"is not the plan {meta.get('plan_hash')} of points.parquet")
    for name in (*[f"{t}.parquet" for t in finished.TABLES], *SUMMARIES):
        if name.endswith(".parquet") or (root / name).is_file():
            _verified(root / name, plan_hash)
    b = _Builder(root, meta, plan_path, plan)
    doc = b.doc
    config = b.config(plan["config_hash"])
    plan_e = b.file(plan_path, "prov:Plan", {"holoscan:config_hash": plan["config_hash"]})
    b.derived(plan_e, config)
    table_agent = b.agent(meta["package_version"], meta["code_hash"])

    # chunk solves -> segments
    segments = []
    for chunk in sorted({r[4] for r in plan["rows"]}):
        seg = finished.require_file(root, f"segments/{chunk}.parquet")
        seal = json.loads(finished.require_file(root, seal_path(seg).relative_to(root).as_posix()).read_text())
        if seal.get("sha256") != sha256_file(seg):
            raise InputError(f"segments/{chunk}.parquet", seal.get("sha256"), "the file does not match its seal")
        seg_e = b.file(seg, "holoscan:Segment", {"holoscan:chunk": chunk})
        act = b.rows_activity(f"run:solve-{chunk}", "holoscan:ChunkSolve", [seg], {"holoscan:chunk": chunk})
        b.gen(seg_e, act)
        manifest = find_manifest(root / "plan", chunk)
        if manifest.is_file():
            chash = json.loads(manifest.read_text()).get("config_hash")
            man_e = b.file(manifest, "holoscan:Manifest", {"holoscan:config_hash": chash})
            b.used(act, man_e)
            if chash:
                b.derived(man_e, b.config(chash))
        segments.append(seg_e)

    # lines jobs -> lines files
    lines_of = {}
    for model_id, key in sorted(plan.get("lines", []), key=lambda x: x[1]):
        files = [finished.require_file(root, f"lines/{key}.parquet"),
                 finished.require_file(root, f"lines/{key}-critical.parquet")]
        for f in files:
            _verified(f, key)
        act = b.rows_activity(f"run:lines-{key}", "holoscan:LinesSolve", files,
                              {"holoscan:lines_key": key, "holoscan:model_id": model_id})
        ents = [b.file(f, "holoscan:Lines", {"holoscan:lines_key": key, "holoscan:model_id": model_id}) for f in files]
        for e in ents:
            b.gen(e, act)
        lines_of[key] = ents
        manifest = find_manifest(root / "plan", f"lines-{key}")
        if manifest.is_file():
            man_e = b.file(manifest, "holoscan:Manifest", {"holoscan:lines_key": key})
            b.used(act, man_e)
            b.derived(man_e, config)

    tables = {n: b.file(finished.table_path(root, n), "holoscan:Table") for n in finished.TABLES}

    # assembly: plan + segments -> points table (+ summary)
    created = meta.get("created")
    asm = doc.activity("run:assemble", None, _iso(_utc(created)) if created else None,
                       {"prov:type": qname("holoscan:Assembly"), "holoscan:host": meta.get("host")})
    doc.relate("wasAssociatedWith", asm, table_agent)
    b.used(asm, plan_e)
    for s in segments:
        b.used(asm, s)
        b.derived(tables["points"], s)
    b.gen(tables["points"], asm)

    # phase tables: points + lines -> phases, transitions, critical points (+ summary)
    pt = doc.activity("run:phase-tables", None, None, {"prov:type": qname("holoscan:PhaseTables")})
    doc.relate("wasAssociatedWith", pt, table_agent)
    for e in (plan_e, tables["points"], *[e for ents in lines_of.values() for e in ents]):
        b.used(pt, e)
    for n in ("phases", "transitions", "critical_points"):
        b.gen(tables[n], pt)
    b.derived(tables["phases"], tables["points"])
    for line_e, crit_e in lines_of.values():
        b.derived(tables["transitions"], line_e)
        b.derived(tables["critical_points"], crit_e)
    if (root / "families.parquet").is_file():  # the family members' landmarks, from the line tables
        fam = b.file(root / "families.parquet", "holoscan:Table")
        b.gen(fam, pt)
        b.derived(fam, tables["transitions"])
        b.derived(fam, tables["critical_points"])
    if (root / "isentropes.parquet").is_file():  # paths of fixed s/rho, from the points table
        iso = b.file(root / "isentropes.parquet", "holoscan:Table")
        b.gen(iso, pt)
        b.derived(iso, tables["points"])

    acts = {"assemble": asm, "phase-tables": pt}
    for name, (act, src) in SUMMARIES.items():
        if (root / name).is_file():
            e = b.file(root / name, "holoscan:Summary")
            b.gen(e, acts[act])
            b.derived(e, tables[src])

    figs = figure_files(root) if figures is None else [Path(f) for f in figures]
    if figs:
        fa = doc.activity("run:figures", None, None, {"prov:type": qname("holoscan:Figures")})
        doc.relate("wasAssociatedWith", fa, table_agent)
        for e in tables.values():
            b.used(fa, e)
        for f in figs:
            if not Path(f).is_file():
                raise InputError("--figures", str(f), "no such file")
            b.gen(b.file(f, "holoscan:Figure"), fa)
    return doc


def write(results_dir, out, figures=None) -> dict:
    """Write the PROV-JSON document of ``results_dir`` to ``out``; returns record counts by kind."""
    doc = build(results_dir, figures)
    text = doc.to_json()
    atomic_write_text(Path(out), text)
    return {k: len(v) for k, v in json.loads(text).items() if k != "prefix"}
