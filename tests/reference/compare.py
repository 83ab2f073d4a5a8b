"""Compare holoscan rows with reference branches.

Actual relative error of each observable q: |q - q_ref| / max(|q_ref|, floor_q) with floors
  rho:  1e-3 * s_ref   (rho vanishes at mu = 0)
  chi2: 1e-3 * s_ref / T (chi2 ~ s/T in size)
  P, epsilon: 1e-3 * T * s_ref (the pressure and energy density pass through zero in sourced models)
  s, cs2: no floor (s > 0, cs2 is a ratio) -- a floor of 1e-300 only to avoid division by zero.

A reference branch may carry its own error bound ('error': relative errors per observable, as
emd_zgauge.solve states them; a closed form carries none and counts as exact). The measured
difference then bounds the actual error of a row only up to that bound, so two counts are kept:
rows whose error_estimate is below the raw difference, and rows whose error_estimate plus the
reference's own bound is below it (a conclusive under-estimate). "ok but off" uses the raw
difference, with no allowance.
"""
from __future__ import annotations

import math

import numpy as np

OBS = ("s", "rho", "P", "epsilon", "chi2", "cs2")


def _floor(q, ref):
    s, T = abs(ref["s"]), abs(ref["T"])
    return {"rho": 1e-3 * s, "chi2": 1e-3 * s / max(T, 1e-300), "P": 1e-3 * T * s,
            "epsilon": 1e-3 * T * s}.get(q, 1e-300)


def _ref_bound(q, ref):
    """The reference's own error of q, relative in the measure of _floor (0 for a closed form)."""
    rel = (ref.get("error") or {}).get(q)
    if rel is None or not np.isfinite(rel):
        return 0.0
    s = abs(ref["s"])
    own_denominator = max(abs(ref[q]), 1e-3 * s) if q in ("rho", "chi2") else abs(ref[q])
    return rel * own_denominator / max(abs(ref[q]), _floor(q, ref))


def _rows(rows):
    if hasattr(rows, "to_dict"):
        return rows.to_dict("records")
    return list(rows)


def compare(rows, refs, accept_error=1e-8):
    """rows: holoscan rows (dicts/DataFrame: T, mu, branch, s, rho, P, epsilon, chi2, cs2, status,
    error_estimate). refs: dict {(T, mu): [reference branch dicts]} or a list of reference dicts.
    Each row is matched to the reference branch at its (T, mu) with the closest (s, rho)."""
    rows = _rows(rows)
    if not isinstance(refs, dict):
        d = {}
        for r in refs:
            d.setdefault((round(r["T"], 12), round(r["mu"], 12)), []).append(r)
        refs = d
    else:
        refs = {(round(k[0], 12), round(k[1], 12)): v for k, v in refs.items()}
    worst = {q: 0.0 for q in OBS}
    n_ok = n_ok_off = n_underestimated = n_conclusive = n_unmatched = 0
    worst_ratio = worst_net_ratio = 0.0
    matched = {}
    details = []
    for row in rows:
        key = (round(float(row["T"]), 12), round(float(row["mu"]), 12))
        cands = refs.get(key, [])
        status = row.get("status")
        status = getattr(status, "value", status)
        if not cands:
            n_unmatched += 1
            continue
        ref = min(cands, key=lambda r: abs(row["s"] - r["s"]) / abs(r["s"])
                  + abs(row["rho"] - r["rho"]) / max(abs(r["rho"]), 1e-3 * abs(r["s"])))
        matched.setdefault(key, set()).add(id(ref))
        errs, net = {}, {}
        for q in OBS:
            if q not in ref or ref[q] is None or not np.isfinite(ref[q]) or row.get(q) is None:
                continue
            errs[q] = abs(float(row[q]) - ref[q]) / max(abs(ref[q]), _floor(q, ref))
            net[q] = max(errs[q] - _ref_bound(q, ref), 0.0)
        actual = max(errs.values()) if errs else math.nan
        beyond_reference = max(net.values()) if net else math.nan
        est = float(row.get("error_estimate", math.nan))
        if status == "ok":
            n_ok += 1
            for q, e in errs.items():
                worst[q] = max(worst[q], e)
            if actual > accept_error:
                n_ok_off += 1
            if not (est >= actual):
                n_underestimated += 1
            if not (est >= beyond_reference):
                n_conclusive += 1
            worst_ratio = max(worst_ratio, actual / est if est > 0 else math.inf)
            worst_net_ratio = max(worst_net_ratio, beyond_reference / est if est > 0 else math.inf)
        details.append(dict(T=key[0], mu=key[1], branch=row.get("branch"), status=status, actual=actual,
                            beyond_reference=beyond_reference, estimate=est, **{"err_" + q: e for q, e in errs.items()}))
    missed = []
    for key, cands in refs.items():
        for r in cands:
            if id(r) not in matched.get(key, set()):
                missed.append(dict(T=key[0], mu=key[1], s=r["s"], rho=r["rho"], phi_h=r.get("phi_h")))
    return dict(rows=len(rows), ok=n_ok, ok_but_off=n_ok_off, estimate_below_actual=n_underestimated,
                estimate_below_actual_beyond_reference=n_conclusive, worst_actual_over_estimate=worst_ratio,
                worst_beyond_reference_over_estimate=worst_net_ratio, worst=worst, missed_branches=len(missed),
                missed=missed, unmatched_rows=n_unmatched, details=details)


def format_counts(name, c, accept_error):
    lines = [f"[{name}] rows {c['rows']}, ok {c['ok']}, ok but off by more than {accept_error:g}: {c['ok_but_off']}",
             f"  rows with error_estimate < actual error: {c['estimate_below_actual']}; worst actual/estimate: "
             f"{c['worst_actual_over_estimate']:.3g}",
             f"  ... beyond the reference's own error bound: {c['estimate_below_actual_beyond_reference']}; "
             f"worst (difference - reference bound)/estimate: {c['worst_beyond_reference_over_estimate']:.3g}",
             "  worst actual error (ok rows): " + ", ".join(f"{q} {e:.2e}" for q, e in c["worst"].items()),
             f"  reference branches holoscan missed: {c['missed_branches']}; rows with no reference point: "
             f"{c['unmatched_rows']}"]
    return "\n".join(lines)
