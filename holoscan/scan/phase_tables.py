"""The phase-structure tables of a scan: phases (one row per grid point), transitions (one row per
located line point) and critical points, with the points table's provenance columns and metadata.

Units as in the points table: T, mu [E]; latent heat [E^d]; s, rho jumps [E^(d-1)].
"""
from __future__ import annotations

import json
from collections import Counter, defaultdict

import pyarrow as pa
import pyarrow.parquet as pq

from .isentropes import isentropes_table
from .landmarks import families_table
from .store import atomic_write_table
from .tables import F64, I64, STR, file_metadata, table_from_rows
from .uncertainty import with_uncertainty

LSTR, LF64 = pa.list_(STR), pa.list_(F64)

PROVENANCE = [
    ("lines_key", STR, "", "hash of model spec, solver settings, code hash and grid of the job that located the row"),
    ("code_hash", STR, "", "hash of the holoscan physics sources that produced the row"),
    ("package_version", STR, "", "holoscan version"),
    ("host", STR, "", "host name of the machine that located the row"),
    ("start_time", STR, "ISO 8601 UTC", "when the job started"),
    ("end_time", STR, "ISO 8601 UTC", "when the job ended"),
    ("log_file", STR, "", "log file of the job"),
]

TRANSITION_COLUMNS = [
    ("model_id", STR, "", "model id from the config"),
    ("kind", STR, "", "model kind"),
    ("type", STR, "", "first-order | second-order | crossover | instability"),
    ("method", STR, "", "how the point was located"),
    ("T", F64, "E", "temperature of the line point"),
    ("mu", F64, "E", "chemical potential of the line point"),
    ("mu_over_T", F64, "1", "mu / T"),
    ("T_err", F64, "E", "absolute uncertainty of T"),
    ("mu_err", F64, "E", "absolute uncertainty of mu"),
    ("latent_heat", F64, "E^d", "first-order: T (s_high - s_low)"),
    ("rho_jump", F64, "E^(d-1)", "first-order: rho_high - rho_low (high/low: entropy sides)"),
    ("s_high", F64, "E^(d-1)", "first-order: entropy density on the high-entropy side"),
    ("s_low", F64, "E^(d-1)", "first-order: entropy density on the low-entropy side"),
    ("status", STR, "", "ok | not converged | failed"),
    ("message", STR, "", "reason for the status, in words"),
    ("shots", I64, "", "ODE shots spent by the job up to this row"),
    ("wall_time", F64, "s", "time spent up to this row"),
    ("extra", STR, "", "method-specific diagnostics, JSON"),
    *PROVENANCE,
]

CRITICAL_COLUMNS = [
    ("model_id", STR, "", "model id from the config"),
    ("kind", STR, "", "model kind"),
    ("method", STR, "", "how the point was located"),
    ("T", F64, "E", "temperature of the critical endpoint"),
    ("mu", F64, "E", "chemical potential of the critical endpoint"),
    ("T_err", F64, "E", "absolute uncertainty of T"),
    ("mu_err", F64, "E", "absolute uncertainty of mu"),
    ("status", STR, "", "ok | failed"),
    ("message", STR, "", "reason for the status, in words"),
    ("shots", I64, "", "ODE shots spent"),
    ("wall_time", F64, "s", "time spent"),
    ("extra", STR, "", "method-specific diagnostics, JSON"),
    *PROVENANCE,
]

PHASE_COLUMNS = [
    ("model_id", STR, "", "model id from the config"),
    ("kind", STR, "", "model kind"),
    ("T", F64, "E", "temperature"),
    ("mu", F64, "E", "chemical potential"),
    ("n_branches", I64, "", "branches found at this point (all statuses)"),
    ("dominant_branch", I64, "", "branch index of the dominant phase, -1 if none"),
    ("dominant_phase", STR, "", "phase label of the dominant branch ('' if none)"),
    ("Omega", F64, "E^d", "grand potential density of the dominant branch"),
    ("omega_gap", F64, "E^d", "Omega of the next locally stable branch minus the dominant's (null if none)"),
    ("branch_Omega", LF64, "E^d", "Omega of every branch, in branch order (null where not solved)"),
    ("branch_phase", LSTR, "", "phase label of every branch"),
    ("branch_flag", LSTR, "", "stable | metastable | unstable | unknown, per branch"),
    ("status", STR, "", "ok (every branch ok) | incomplete (some branch not ok) | the points' status if none ok"),
    ("message", STR, "", "reason for the status, in words"),
    ("point_key", STR, "", "point key of the rows in the points table"),
    ("code_hash", STR, "", "hash of the holoscan physics sources that produced the rows"),
    ("package_version", STR, "", "holoscan version"),
]

#: physics columns of the phase tables (bit-identical for the same config and code)
TRANSITION_PHYSICS = ["model_id", "type", "T", "mu", "T_err", "mu_err", "latent_heat", "rho_jump", "s_high", "s_low",
                      "status"]
CRITICAL_PHYSICS = ["model_id", "T", "mu", "T_err", "mu_err", "status"]
PHASE_PHYSICS = ["model_id", "T", "mu", "n_branches", "dominant_branch", "dominant_phase", "Omega", "omega_gap",
                 "branch_Omega", "branch_flag", "status"]


def phases_from_points(points: pa.Table) -> list[dict]:
    """One row per (model, T, mu) of a points table, from its branch rows' phase flags."""
    groups = defaultdict(list)
    for r in points.select(["model_id", "kind", "T", "mu", "branch", "Omega", "phase", "phase_flag", "dominant",
                            "status", "message", "point_key", "code_hash", "package_version"]).to_pylist():
        groups[(r["model_id"], r["T"], r["mu"])].append(r)
    out = []
    for (mid, T, mu), rows in groups.items():
        rows.sort(key=lambda r: r["branch"])
        win = [r for r in rows if r["dominant"]]
        stable_omegas = sorted(r["Omega"] for r in rows if r["phase_flag"] in ("stable", "metastable"))
        ok = [r for r in rows if r["status"] == "ok"]
        if len(ok) == len(rows):
            status, msg = "ok", "" if win else "no locally stable branch"
        elif ok:
            status = "incomplete"
            msg = "; ".join(f"branch {r['branch']}: {r['status']}: {r['message']}" for r in rows if r["status"] != "ok")
        else:
            status = rows[0]["status"]
            msg = rows[0]["message"]
        out.append({
            "model_id": mid, "kind": rows[0]["kind"], "T": T, "mu": mu, "n_branches": len(rows),
            "dominant_branch": win[0]["branch"] if win else -1, "dominant_phase": win[0]["phase"] if win else "",
            "Omega": win[0]["Omega"] if win else None,
            "omega_gap": stable_omegas[1] - stable_omegas[0] if len(stable_omegas) > 1 else None,
            "branch_Omega": [r["Omega"] for r in rows], "branch_phase": [r["phase"] for r in rows],
            "branch_flag": [r["phase_flag"] for r in rows], "status": status, "message": msg,
            "point_key": rows[0]["point_key"], "code_hash": rows[0]["code_hash"],
            "package_version": rows[0]["package_version"],
        })
    return out


def build_phase_tables(points_file, line_files, critical_files, out_phases, out_transitions, out_critical,
                       models: dict | None = None, out_families=None, out_isentropes=None) -> dict:
    """Write the three phase tables and, with ``out_families``, the families table of the plan's
    ``models`` (:func:`holoscan.scan.landmarks.families_table`); returns a summary dict (counts per model)."""
    points = pq.read_table(points_file)
    meta = file_metadata(points)
    order = {m: i for i, m in enumerate(dict.fromkeys(points["model_id"].to_pylist()))}
    phases = phases_from_points(points)
    lines = [r for f in line_files for r in pq.read_table(f).to_pylist()]
    crit = [r for f in critical_files for r in pq.read_table(f).to_pylist()]
    key = lambda r: (order.get(r["model_id"], len(order)), r.get("type", ""), r["mu"] if r["mu"] is not None else 0.0,
                     r["T"] if r["T"] is not None else 0.0)
    lines.sort(key=key)
    crit.sort(key=key)
    atomic_write_table(table_from_rows(phases, PHASE_COLUMNS, meta), out_phases)
    atomic_write_table(table_from_rows(lines, TRANSITION_COLUMNS, meta), out_transitions)
    atomic_write_table(table_from_rows(crit, CRITICAL_COLUMNS, meta), out_critical)
    if out_families:
        atomic_write_table(families_table(models or {}, lines, crit, meta), out_families)
    if out_isentropes:
        atomic_write_table(isentropes_table(points, models or {}, meta, lines), out_isentropes)
    summary = {}
    for m in order:
        summary[m] = {
            "dominant_phases": dict(Counter(r["dominant_phase"] or "(none)" for r in phases if r["model_id"] == m)),
            "line_points": dict(Counter(f"{r['type']} ({r['status']})" for r in lines if r["model_id"] == m)),
            "critical_points": [{k: r[k] for k in ("T", "mu", "T_err", "mu_err", "status")}
                                for r in crit if r["model_id"] == m],
        }
    return summary


def phase_summary_text(summary: dict) -> str:
    lines = ["phase structure per model"]
    for m, s in summary.items():
        ph = ", ".join(f"{k} {v}" for k, v in sorted(s["dominant_phases"].items()))
        lines.append(f"  {m}: dominant phases: {ph}")
        if s["line_points"]:
            lines.append("    line points: " + ", ".join(f"{k} {v}" for k, v in sorted(s["line_points"].items())))
        for c in s["critical_points"]:
            if c["status"] == "ok":  # digits as the uncertainty supports (scan/uncertainty.py)
                (T, dT), (mu, dmu) = with_uncertainty(c["T"], c["T_err"]), with_uncertainty(c["mu"], c["mu_err"])
                lines.append(f"    critical point: T = {T} +- {dT}, mu = {mu} +- {dmu}")
            else:
                lines.append(f"    critical point: {c['status']}")
    return "\n".join(lines) + "\n"


def dump_json(obj) -> str:
    return json.dumps(obj, indent=2, sort_keys=True, default=str)
