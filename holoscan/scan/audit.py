"""Everything recorded about one row of a table, and an optional fresh re-solve to compare.

The table must be a points table (``results/<scan>/points.parquet``): a file that is not Parquet,
another holoscan table (phases, transitions, critical points) or a table whose columns audit reads
are missing or of another type is an :class:`~holoscan.errors.InputError` naming ``TABLE``.

Log lines: a row names the log file of the job that solved it, relative to the folder the
workflow ran in. The file is looked for as given (absolute, or relative to the current folder),
then relative to each folder above the table (so ``holoscan audit /path/results/<scan>/points.parquet``
finds ``/path/logs/...`` from anywhere). A line belongs to the row when it carries the row's point
key (``key=<point_key>``, an exact token); in a log written without keys, when its model id, T
and mu (``<model> T=<repr> mu=<repr>:``) are exactly the row's. When no line is found the report
says why in ``log_note``.
"""
from __future__ import annotations

import json
import re
from pathlib import Path

import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.parquet as pq

from ..errors import InputError
from ..point import solve_point
from ..result import OBSERVABLES
from .config import validate_scan_config
from .grid import canon
from .identity import code_hash
from .tables import META_KEY

#: columns audit reads, with the Arrow type a points table gives them
NEEDED = {"model_id": pa.string(), "T": pa.float64(), "mu": pa.float64(), "branch": pa.int64(),
          "status": pa.string(), "extra": pa.string(), "log_file": pa.string(), "point_key": pa.string(),
          "code_hash": pa.string(), **{k: pa.float64() for k in OBSERVABLES[2:]}}
#: columns that name another holoscan table, and its name
OTHER_TABLES = (("dominant_branch", "the phases table (one row per grid point)"),
                ("mu_over_T", "the transitions table"),
                ("T_err", "the critical-points table"))
#: how many folders above the table are searched for a log file
LOG_SEARCH_DEPTH = 4


def _check_schema(schema: pa.Schema, path: str) -> None:
    names = set(schema.names)
    missing = [c for c in NEEDED if c not in names]
    if missing:
        for col, what in OTHER_TABLES:
            if col in names:
                raise InputError("TABLE", path, f"this is {what}, not a points table: audit reads the points "
                                 "table (points.parquet in the same folder)")
        raise InputError("TABLE", path, "not a holoscan points table: missing column(s) " + ", ".join(missing))
    for c, t in NEEDED.items():
        have = schema.field(c).type
        if have != t:
            raise InputError("TABLE", path, f"column '{c}' has type {have}; a points table has {t}")


def _metadata(schema: pa.Schema) -> dict:
    raw = (schema.metadata or {}).get(META_KEY)
    try:
        meta = json.loads(raw) if raw else {}
    except ValueError:
        return {}
    return meta if isinstance(meta, dict) else {}


def find_rows(table_path, model_id: str, T: float, mu: float):
    """Rows (dicts, one per branch) of ``model_id`` at the grid point ``(T, mu)``, and the file metadata."""
    p = Path(table_path)
    if not p.is_file():
        raise InputError("TABLE", str(table_path), "no such file")
    try:
        schema = pq.read_schema(p)
    except Exception as exc:  # noqa: BLE001 - unreadable or not Parquet
        raise InputError("TABLE", str(table_path), f"not a readable Parquet table ({type(exc).__name__})") from None
    _check_schema(schema, str(table_path))
    try:
        table = pq.read_table(p)
    except Exception as exc:  # noqa: BLE001 - a damaged file behind a readable footer
        raise InputError("TABLE", str(table_path), f"cannot be read ({type(exc).__name__})") from None
    meta = _metadata(schema)
    sub = table.filter(pc.equal(table["model_id"], model_id))
    if sub.num_rows == 0:
        ids = sorted({m for m in table["model_id"].to_pylist() if m is not None})
        raise InputError("--model", model_id, f"not in this table; models: {', '.join(ids) or '(none)'}")
    Tc, muc = canon(T), canon(mu)
    hit = sub.filter(pc.and_(pc.equal(sub["T"], Tc), pc.equal(sub["mu"], muc)))
    if hit.num_rows == 0:
        pts = [(a, b) for a, b in zip(sub["T"].to_pylist(), sub["mu"].to_pylist()) if a is not None and b is not None]
        if not pts:
            raise InputError("--T/--mu", (T, mu), "no row at this point, and no row of this model has T and mu")
        a, b = min(pts, key=lambda q: ((q[0] - T) / T) ** 2 + (q[1] - mu) ** 2 / max(T, 1e-300) ** 2)
        raise InputError("--T/--mu", (T, mu), f"no row at this point; nearest grid point: --T {a!r} --mu {b!r}")
    return hit.to_pylist(), meta


def find_log(log_file: str, table_path) -> Path | None:
    """The log file named by a row (see the module docstring), or None."""
    if not log_file:
        return None
    given = Path(log_file)
    if given.is_file():
        return given
    if given.is_absolute():
        return None
    for folder in list(Path(table_path).resolve().parents)[:LOG_SEARCH_DEPTH]:
        if (folder / given).is_file():
            return folder / given
    return None


_LINE = re.compile(r"^(?P<mid>\S+) T=(?P<T>\S+) mu=(?P<mu>[^\s:]+)(?: key=(?P<key>[^\s:]+))?:")


def _belongs(line: str, row: dict) -> bool:
    m = _LINE.match(line)
    if m is None:
        return False
    if m["key"] is not None:
        return m["key"] == row["point_key"]
    try:
        return m["mid"] == row["model_id"] and float(m["T"]) == row["T"] and float(m["mu"]) == row["mu"]
    except ValueError:
        return False


def log_lines(row: dict, table_path=".") -> tuple[list[str], Path | None, str]:
    """``(lines, log file found, note)``: the log lines of the row's point (module docstring); the
    note says in words why there are none."""
    name = row.get("log_file") or ""
    if not name:
        return [], None, "the row names no log file"
    path = find_log(name, table_path)
    if path is None:
        where = [str(Path.cwd())] + [str(f) for f in list(Path(table_path).resolve().parents)[:LOG_SEARCH_DEPTH]]
        return [], None, (f"no log lines found: the log file {name!r} does not exist relative to "
                          + ", ".join(dict.fromkeys(where)))
    try:
        text = path.read_text(errors="replace")
    except OSError as exc:
        return [], path, f"no log lines found: {path} cannot be read ({type(exc).__name__})"
    lines = [ln.rstrip() for ln in text.splitlines() if _belongs(ln, row)]
    return lines, path, "" if lines else f"no log lines found: {path} has no line of point key {row['point_key']}"


def recompute(rows: list[dict], meta: dict) -> dict:
    """Solve the point again now with the model and solver stored in the table's metadata."""
    if not isinstance(meta.get("config"), dict):
        raise InputError("--recompute", True, "the table's metadata holds no scan config to solve the point with")
    cfg = validate_scan_config(meta["config"])
    mid = rows[0]["model_id"]
    mp = next((m for m in cfg.models if m.model.id == mid), None)
    if mp is None:
        raise InputError("--recompute", True, f"model {mid!r} is not in the scan config stored in the table")
    new = [r.to_dict() for r in solve_point(mp.model, rows[0]["T"], rows[0]["mu"], mp.settings)]
    diffs = []
    for old, cur in zip(rows, new):
        d = {}
        for k in OBSERVABLES[2:]:
            a, b = old[k], cur[k]
            d[k] = {"recorded": a, "now": b, "abs_diff": abs(a - b) if a is not None and b is not None else None,
                    "rel_diff": abs(a - b) / abs(a) if a not in (None, 0.0) and b is not None else None}
        diffs.append({"branch": old["branch"], "status_recorded": old["status"], "status_now": cur["status"],
                      "values": d})
    return {"code_hash_recorded": rows[0]["code_hash"], "code_hash_now": code_hash(),
            "same_code": rows[0]["code_hash"] == code_hash(), "branches_recorded": len(rows),
            "branches_now": len(new), "comparison": diffs}


def _extra(text):
    try:
        return json.loads(text or "{}")
    except ValueError:
        return {"unparsed": text}


def audit_report(table_path, model_id, T, mu, *, do_recompute=False) -> dict:
    rows, meta = find_rows(table_path, model_id, T, mu)
    lines, found, note = log_lines(rows[0], table_path)
    out = {
        "table": str(table_path),
        "table_metadata": {k: meta.get(k) for k in ("schema_version", "package_version", "code_hash", "config_hash",
                                                      "scan", "created", "host", "plan")},
        "rows": [{**r, "extra": _extra(r["extra"])} for r in rows],
        "log_file": rows[0].get("log_file"),
        "log_file_found": str(found) if found else None,
        "log_lines": lines,
    }
    if note:
        out["log_note"] = note
    if do_recompute:
        out["recompute"] = recompute(rows, meta)
    return out
