"""Solve one lines manifest (one model's transition lines and critical points) into two tables."""
from __future__ import annotations

import json
import socket
import traceback
from pathlib import Path

from .. import __version__
from ..kinds import model_from_block
from ..phases.lines import CriticalPoint, LinePoint, locate
from ..settings import SolverSettings
from .manifests import check_code, read_manifest, utc_now
from .phase_tables import CRITICAL_COLUMNS, TRANSITION_COLUMNS
from .seals import write_seal
from .shared_state import adopt_earlier, context_of
from .store import atomic_write_table
from .tables import table_from_rows


def run_lines(manifest_path, out_lines, out_critical, log_file: str = "", log=print) -> tuple[int, int]:
    """Locate the lines of the manifest's model; write both tables (temporary name, then rename).
    Returns (line rows, critical-point rows)."""
    man = read_manifest(manifest_path)
    check_code(man)
    model = model_from_block(man["spec"], f"manifest.{man['model_id']}")
    settings = SolverSettings(**man["solver"])
    # the model's shared states (its atlas) built for this context, if any are on disk already
    shared = Path(out_lines).resolve().parent.parent / "shared"
    n = adopt_earlier(model, settings, shared, context_of(man), log)
    if n:
        log(f"{model.id}: adopted {n} shared state(s)")
    start = utc_now()
    try:
        rows, cps = locate(model, settings, [tuple(p) for p in man["points"]])
    except Exception as exc:  # noqa: BLE001 - a bug must not pass silently, nor leave nothing: record it
        log(traceback.format_exc())
        reason = f"internal error: {type(exc).__name__}: {exc}"
        rows = [LinePoint(model.id, "first-order", "", float("nan"), float("nan"), status="failed", message=reason)]
        cps = []
        if model.finds_critical_points():
            cps = [CriticalPoint(model.id, "", float("nan"), float("nan"), float("nan"), float("nan"), status="failed",
                                 message=reason)]
    base = {"kind": model.kind, "lines_key": man["key"], "code_hash": man["code_hash"], "package_version": __version__,
            "host": socket.gethostname(), "start_time": start, "end_time": utc_now(), "log_file": log_file}
    out_r = [{**r.to_dict(), **base} for r in rows]
    out_c = [{**c.to_dict(), **base} for c in cps]
    for r in out_r + out_c:
        r["extra"] = json.dumps(r.get("extra", {}), sort_keys=True, default=float)
        log(f"{r['model_id']} {r.get('type', 'critical point')}: T={r['T']!r} mu={r['mu']!r} {r['status']} {r['message']}")
    atomic_write_table(table_from_rows(out_r, TRANSITION_COLUMNS), out_lines)
    atomic_write_table(table_from_rows(out_c, CRITICAL_COLUMNS), out_critical)
    for path in (out_lines, out_critical):  # sealed with the lines key they were made for
        write_seal(path, man["key"])
    return len(out_r), len(out_c)
