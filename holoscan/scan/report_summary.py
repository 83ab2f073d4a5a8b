"""A short text summary of a finished scan (``holoscan summary RESULTS_DIR``).

Read from the folder's tables and plan only (nothing is solved):

- models in config order with kind, grid points (from the plan) and rows (branches) in the table;
- rows by status per model (points table), grid points by dominant phase (phases table; ``(none)``
  when no branch is locally stable);
- transition-line points by type and status (transitions table), critical points with their
  uncertainties (``+-`` is ``T_err``/``mu_err``);
- the 5 slowest grid points: a point's time is ``end_time - start_time`` of its solve (all its
  branches, in seconds; every branch row of a point carries the same two times). Points solved
  together in one batch (a kind that solves many points at once) share one start and end: such a
  point's time is the batch's time divided by the batch's number of points, and the line says so
  and gives the batch's own time;
- the 5 least converged rows: the largest ``error_estimate`` (the solver's own estimate, in the
  unit of the quantity it was measured on; see README "The table"); rows without one are skipped.

Values are printed with 6 significant digits, except a critical point's T and mu, printed with the
digits their uncertainty supports (:mod:`holoscan.scan.uncertainty`); T and mu in the model's units.
"""
from __future__ import annotations

from collections import Counter
from datetime import datetime

from ..result import Status
from . import finished
from .uncertainty import with_uncertainty

N_TOP = 5


def collect(results_dir) -> dict:
    """Everything the summary prints, as plain data (dicts and lists)."""
    root = finished.scan_folder(results_dir)
    meta = finished.run_metadata(root)
    _, plan = finished.read_plan(root, meta)
    pts = finished.read_table(root, "points", ["model_id", "T", "mu", "branch", "status", "error_estimate",
                                               "point_key", "start_time", "end_time"]).to_pylist()
    phases = finished.read_table(root, "phases", ["model_id", "dominant_phase"]).to_pylist()
    trans = finished.read_table(root, "transitions", ["model_id", "type", "status"]).to_pylist()
    crit = finished.read_table(root, "critical_points",
                               ["model_id", "T", "mu", "T_err", "mu_err", "status"]).to_pylist()
    order = list(plan["model_order"])
    grid = Counter(r[0] for r in plan["rows"])
    models = [{"model_id": m, "kind": plan["models"][m]["spec"]["kind"], "grid_points": grid[m],
               "rows": sum(r["model_id"] == m for r in pts)} for m in order]
    by_status = {m: Counter() for m in order}
    for r in pts:
        by_status[r["model_id"]][r["status"]] += 1
    by_phase = {m: Counter() for m in order}
    for r in phases:
        by_phase[r["model_id"]][r["dominant_phase"] or "(none)"] += 1
    by_type = {m: Counter() for m in order}
    for r in trans:
        by_type[r["model_id"]][f"{r['type']} ({r['status']})"] += 1
    slow = sorted(point_seconds(pts), key=lambda x: -x[0])[:N_TOP]
    errs = [r for r in pts if r["error_estimate"] is not None and r["error_estimate"] == r["error_estimate"]]
    worst = sorted(errs, key=lambda r: -r["error_estimate"])[:N_TOP]
    return {
        "scan": plan["scan"], "package_version": meta.get("package_version"), "code_hash": meta.get("code_hash"),
        "created": meta.get("created"), "models": models,
        "by_status": {m: dict(c) for m, c in by_status.items()},
        "by_phase": {m: dict(c) for m, c in by_phase.items()},
        "transitions": {m: dict(c) for m, c in by_type.items()},
        "critical_points": crit,
        "slowest": [{"model_id": r["model_id"], "T": r["T"], "mu": r["mu"], "seconds": sec, "batch_points": n,
                     "batch_seconds": sec * n} for sec, n, r in slow],
        "least_converged": [{k: r[k] for k in ("model_id", "T", "mu", "branch", "status", "error_estimate")}
                            for r in worst],
    }


def point_seconds(rows) -> list[tuple[float, int, dict]]:
    """``(seconds, batch size, first row)`` per grid point (distinct ``point_key``): rows with the
    same model, chunk, start and end times were solved in one batch of as many points as they have
    distinct keys, and each of those points is given the batch's time divided by that number."""
    groups: dict = {}
    for r in rows:
        if not (r.get("start_time") and r.get("end_time")):
            continue
        g = groups.setdefault((r["model_id"], r.get("chunk_id"), r["start_time"], r["end_time"]), {})
        g.setdefault(r["point_key"], r)
    out = []
    for (_, _, start, end), points in groups.items():
        try:
            dt = (datetime.fromisoformat(end) - datetime.fromisoformat(start)).total_seconds()
        except (TypeError, ValueError):
            continue
        n = len(points)
        out.extend((dt / n, n, r) for r in points.values())
    return out


def _g(v, fmt=".6g") -> str:
    return "n/a" if v is None else format(v, fmt)


def _counts(c: dict) -> str:
    return ", ".join(f"{k} {v}" for k, v in sorted(c.items())) or "none"


def summary_text(s: dict) -> str:
    """The printed summary of :func:`collect`'s data."""
    head = (f"scan '{s['scan']}': holoscan {s['package_version']}, physics code {s['code_hash']}, "
            f"tables of {s['created']}")
    out = [head, "models:"]
    statuses = [st.value for st in Status]
    for m in s["models"]:
        mid = m["model_id"]
        out.append(f"  {mid} ({m['kind']}): {m['grid_points']} grid points, {m['rows']} rows")
        st = s["by_status"][mid]
        names = statuses + sorted(set(st) - set(statuses))
        out.append("    status: " + ", ".join(f"{k} {st.get(k, 0)}" for k in names))
        out.append(f"    dominant phase: {_counts(s['by_phase'][mid])}")
        out.append(f"    transition points: {_counts(s['transitions'][mid])}")
    out.append("critical points:" if s["critical_points"] else "critical points: none")
    for c in s["critical_points"]:
        if c["status"] == "ok":
            (T, dT), (mu, dmu) = with_uncertainty(c["T"], c["T_err"]), with_uncertainty(c["mu"], c["mu_err"])
            out.append(f"  {c['model_id']}: T = {T} +- {dT}, mu = {mu} +- {dmu}")
        else:
            out.append(f"  {c['model_id']}: {c['status']}")
    out.append(f"slowest {len(s['slowest'])} grid points:")
    for r in s["slowest"]:
        n = r.get("batch_points", 1)
        how = (f" per point (a batch of {n} points solved together in {r['batch_seconds']:.3g} s, divided evenly)"
               if n > 1 else "")
        out.append(f"  {r['model_id']}  T = {r['T']:.6g}  mu = {r['mu']:.6g}  {r['seconds']:.3g} s{how}")
    out.append(f"least converged {len(s['least_converged'])} rows (largest error_estimate):")
    for r in s["least_converged"]:
        out.append(f"  {r['model_id']}  T = {r['T']:.6g}  mu = {r['mu']:.6g}  branch {r['branch']}  "
                   f"error_estimate {r['error_estimate']:.3g}  ({r['status']})")
    return "\n".join(out) + "\n"
