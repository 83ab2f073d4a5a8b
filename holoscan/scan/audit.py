"""Everything recorded about one row of a table, and an optional fresh re-solve to compare."""
from __future__ import annotations

import json
from pathlib import Path

import pyarrow.compute as pc
import pyarrow.parquet as pq

from ..errors import InputError
from ..point import solve_point
from ..result import OBSERVABLES
from .config import validate_scan_config
from .grid import canon
from .identity import code_hash
from .tables import file_metadata


def find_rows(table_path, model_id: str, T: float, mu: float):
    """Rows (dicts, one per branch) of ``model_id`` at the grid point ``(T, mu)``, and the file metadata."""
    p = Path(table_path)
    if not p.is_file():
        raise InputError("TABLE", str(table_path), "no such file")
    try:
        table = pq.read_table(p)
    except Exception as exc:  # unreadable or not Parquet
        raise InputError("TABLE", str(table_path), f"not a readable Parquet table ({type(exc).__name__})") from None
    meta = file_metadata(table)
    sub = table.filter(pc.equal(table["model_id"], model_id))
    if sub.num_rows == 0:
        ids = sorted(set(table["model_id"].to_pylist()))
        raise InputError("--model", model_id, f"not in this table; models: {', '.join(ids)}")
    Tc, muc = canon(T), canon(mu)
    hit = sub.filter(pc.and_(pc.equal(sub["T"], Tc), pc.equal(sub["mu"], muc)))
    if hit.num_rows == 0:
        Ts, mus = sub["T"].to_pylist(), sub["mu"].to_pylist()
        i = min(range(len(Ts)), key=lambda j: ((Ts[j] - T) / T) ** 2 + (mus[j] - mu) ** 2 / max(T, 1e-300) ** 2)
        raise InputError("--T/--mu", (T, mu), f"no row at this point; nearest grid point: --T {Ts[i]!r} --mu {mus[i]!r}")
    return hit.to_pylist(), meta


def log_lines(row: dict) -> list[str]:
    p = Path(row.get("log_file") or "")
    if not row.get("log_file") or not p.is_file():
        return []
    tag = f"T={row['T']!r} mu={row['mu']!r}"
    return [ln.rstrip() for ln in p.read_text().splitlines() if tag in ln and ln.startswith(row["model_id"] + " ")]


def recompute(rows: list[dict], meta: dict) -> dict:
    """Solve the point again now with the model and solver stored in the table's metadata."""
    cfg = validate_scan_config(meta["config"])
    mid = rows[0]["model_id"]
    mp = next(m for m in cfg.models if m.model.id == mid)
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


def audit_report(table_path, model_id, T, mu, *, do_recompute=False) -> dict:
    rows, meta = find_rows(table_path, model_id, T, mu)
    out = {
        "table": str(table_path),
        "table_metadata": {k: meta.get(k) for k in ("schema_version", "package_version", "code_hash", "config_hash",
                                                      "scan", "created", "host", "plan")},
        "rows": [{**r, "extra": json.loads(r["extra"] or "{}")} for r in rows],
        "log_file": rows[0].get("log_file"),
        "log_lines": log_lines(rows[0]),
    }
    if do_recompute:
        out["recompute"] = recompute(rows, meta)
    return out
