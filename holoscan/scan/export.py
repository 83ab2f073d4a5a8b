"""``holoscan export``: one model's equation of state on its regular (T, mu) grid, for other codes.

One row per grid point of the model (T outer, mu inner, both ascending), from the dominant branch
of that point: ``T, mu, P, s, rho, epsilon, cs2, chi2, chi3, chi4`` and ``status``. A point whose
dominant branch is not ``ok`` (or that has no dominant branch) keeps its ``T, mu`` and ``status``
and has empty values: nothing is interpolated or filled in.

Units: the model's energy unit E, with ``T, mu`` in E, ``P, epsilon`` in E^d, ``s, rho`` in
E^(d-1), ``chi2`` in E^(d-2), ``chi3`` in E^(d-3), ``chi4`` in E^(d-4). With ``unit`` and
``scale`` (``unit`` per E, e.g. MeV), every column is converted by ``scale`` to its power; for a
family member with a matched scale (``families.parquet``), ``unit`` alone takes that scale.

CSV: a header of ``#`` lines (model, kind, d, the grid, the units of every column, the code hash
and config hash of the tables, the scale, the counts of statuses), then one line of column names
and the rows; numbers are written with ``repr`` (shortest exact form), so reading the file back
gives the table's doubles to the bit. Parquet: the same columns, with the header as the file's
``holoscan-export`` metadata key.
"""
from __future__ import annotations

import json
import math
from collections import Counter
from pathlib import Path

import pyarrow as pa
import pyarrow.parquet as pq

from ..errors import InputError
from .finished import read_table, run_metadata, scan_folder
from .store import atomic_path, atomic_write_bytes

#: exported columns and the power of E of each
COLUMNS = (("T", 1), ("mu", 1), ("P", "d"), ("s", "d-1"), ("rho", "d-1"), ("epsilon", "d"), ("cs2", 0),
           ("chi2", "d-2"), ("chi3", "d-3"), ("chi4", "d-4"))
META_KEY = b"holoscan-export"


def _power(p, d: int) -> int:
    return p if isinstance(p, int) else d - int(p[2:]) if "-" in p else d


def _unit_text(p, unit: str) -> str:
    if p == 0:
        return "1"
    return unit if p == 1 else f"{unit}^{p}"


def export_table(results_dir, model_id: str, unit: str | None = None, scale: float | None = None) -> tuple[dict, list]:
    """``(header, rows)`` of the export (see the module docstring); rows are dicts."""
    root = scan_folder(results_dir)
    meta = run_metadata(root)
    pts = read_table(root, "points").to_pandas()
    mine = pts[pts["model_id"] == model_id]
    if not len(mine):
        known = ", ".join(dict.fromkeys(pts["model_id"]))
        raise InputError("--model", model_id, f"no such model in {root}/points.parquet; models: {known}")
    if scale is None and unit is not None:
        scale = _family_scale(root, model_id, unit)
    if scale is not None and not (scale > 0 and math.isfinite(scale)):
        raise InputError("--scale", scale, "must be a positive finite number")
    d = int(mine["d"].iloc[0])
    factor = {n: (scale ** _power(p, d) if scale else 1.0) for n, p in COLUMNS}
    grid_T, grid_mu = sorted(mine["T"].unique()), sorted(mine["mu"].unique())
    dominant = mine[mine["dominant"]]
    by_point = {(r.T, r.mu): r for r in dominant.itertuples()}
    status_of = mine.groupby(["T", "mu"])["status"].agg(lambda s: "ok" if (s == "ok").all() else
                                                        next(x for x in s if x != "ok")).to_dict()
    rows, counts = [], Counter()
    for (T, mu) in sorted(status_of):
        r = by_point.get((T, mu))
        status = r.status if r is not None else ("no dominant branch" if status_of[(T, mu)] == "ok"
                                                 else status_of[(T, mu)])
        row = {"T": T * factor["T"], "mu": mu * factor["mu"], "status": status}
        for n, _ in COLUMNS[2:]:
            v = getattr(r, n, None) if r is not None and status == "ok" else None
            row[n] = None if v is None or (isinstance(v, float) and math.isnan(v)) else v * factor[n]
        counts[status] += 1
        rows.append(row)
    shown = unit or "E"
    header = {
        "model": model_id, "kind": str(mine["kind"].iloc[0]), "d": d, "scan": meta.get("scan"),
        "code_hash": meta.get("code_hash"), "config_hash": meta.get("config_hash"),
        "grid": {"T": [float(grid_T[0]), float(grid_T[-1]), len(grid_T)],
                 "mu": [float(grid_mu[0]), float(grid_mu[-1]), len(grid_mu)], "points": len(rows)},
        "units": {n: _unit_text(_power(p, d), shown) for n, p in COLUMNS},
        "scale": None if scale is None else {"unit": unit, "per_E": scale},
        "statuses": dict(counts),
        "note": "dominant branch at each grid point; points that are not ok have empty values (never interpolated)",
    }
    return header, rows


def _family_scale(root: Path, model_id: str, unit: str) -> float:
    p = root / "families.parquet"
    if p.is_file():
        f = pq.read_table(p).to_pandas()
        row = f[f["model_id"] == model_id]
        if len(row) and row["match_unit"].iloc[0] == unit and row["scale"].notna().iloc[0]:
            return float(row["scale"].iloc[0])
    raise InputError("--unit", unit, f"no scale for model {model_id} in {unit}: give --scale (the size of E in {unit}), "
                     "or match the family's scale in the config")


def _cell(v) -> str:
    if v is None:
        return ""
    return repr(float(v)) if isinstance(v, float) else str(v)


def write_export(header: dict, rows: list, out, fmt: str) -> None:
    names = [n for n, _ in COLUMNS] + ["status"]
    if fmt == "csv":
        lines = [f"# holoscan export: {json.dumps(header, sort_keys=True)}",
                 f"# units: {', '.join(f'{n} [{u}]' for n, u in header['units'].items())}",
                 f"# {header['note']}", ",".join(names)]
        lines += [",".join(_cell(r[n]) for n in names) for r in rows]
        atomic_write_bytes(Path(out), ("\n".join(lines) + "\n").encode(), durable=False)
        return
    if fmt != "parquet":
        raise InputError("--format", fmt, "must be csv or parquet")
    arrays = [pa.array([r[n] for r in rows], pa.float64()) for n, _ in COLUMNS] + [pa.array([r["status"] for r in rows],
                                                                                            pa.string())]
    t = pa.Table.from_arrays(arrays, names=names).replace_schema_metadata(
        {META_KEY: json.dumps(header, sort_keys=True).encode()})
    with atomic_path(Path(out), durable=False) as tmp:
        pq.write_table(t, tmp)
