"""Landmarks of each family member and the table ``families.parquet`` (one row per member).

A member's landmarks come from its rows in the transitions and critical-point tables, that is from
the same line finders as a single model's tables; no kind is named here, a landmark is present
when the member's lines hold it:

``crossover_T_mu0``
    T of the crossover row at mu = 0 (a sourced ``emd`` model) [E];
``cep_T``, ``cep_mu``
    the critical endpoint [E];
``instability_mu_over_T``
    |mu|/T of the instability locus where it is one ratio (an unsourced ``emd`` model; the spinodals
    of a model with a scale, at many ratios, are not a landmark) [1];
``onset_mu_over_T``
    mu/T_c of the second-order line (``charged-scalar``) [1];
``first_order_mu``, ``first_order_T``
    the first-order line: T* at each grid mu where it was located (lists) [E].

Each scalar landmark has ``<name>_err`` (the finder's uncertainty) and ``<name>_status`` (``ok``,
the row's own status, or ``absent`` when the member's lines have no such row).

Matching a scale (``match: {landmark, value, unit}`` in the family block): each member's
``scale`` is ``value / landmark`` (the member's energy unit E expressed in ``unit``), so that the
chosen landmark equals ``value`` for every member; the landmarks in E are then also given in
``unit`` (``<name>_in_unit``; ratios need none). The solve itself is in the model's units: the
matching converts its results, it does not re-solve.
"""
from __future__ import annotations

import math

import pyarrow as pa

from .tables import F64, STR, family_columns

LF64 = pa.list_(F64)

#: scalar landmarks: (name, unit) with "E" an energy, "1" a ratio
SCALAR = (("crossover_T_mu0", "E"), ("cep_T", "E"), ("cep_mu", "E"),
          ("instability_mu_over_T", "1"), ("onset_mu_over_T", "1"))
NAMES = tuple(n for n, _ in SCALAR)
MATCHABLE = tuple(n for n, u in SCALAR if u == "E")


def _ok(rows):
    return [r for r in rows if r.get("status") == "ok"]


def member_landmarks(transitions: list[dict], critical: list[dict]) -> dict:
    """The landmarks of one model from its transition and critical-point rows (dicts)."""
    out = {}

    def put(name, value, err, status):
        out[name], out[name + "_err"], out[name + "_status"] = value, err, status

    def absent(name):
        put(name, None, None, "absent")

    by_type: dict = {}
    for r in transitions:
        by_type.setdefault(r.get("type"), []).append(r)
    cross = [r for r in by_type.get("crossover", []) if r.get("mu") == 0.0]
    if cross:
        r = (_ok(cross) or cross)[0]
        put("crossover_T_mu0", r["T"], r.get("T_err"), r["status"])
    else:
        absent("crossover_T_mu0")
    if critical:
        c = (_ok(critical) or critical)[0]
        put("cep_T", c["T"], c.get("T_err"), c["status"])
        put("cep_mu", c["mu"], c.get("mu_err"), c["status"])
    else:
        absent("cep_T")
        absent("cep_mu")
    inst = [r for r in by_type.get("instability", []) if r.get("T")]
    ratios = [abs(r["mu"]) / r["T"] for r in _ok(inst)]
    if inst and ratios and (max(ratios) - min(ratios)) > 1e-6 * max(ratios):
        inst = []  # spinodals along a first-order line (a model with a scale): no single ratio
    if inst:
        r = (_ok(inst) or inst)[0]
        x = abs(r["mu"]) / r["T"]
        err = math.hypot(r.get("mu_err") or 0.0, x * (r.get("T_err") or 0.0)) / r["T"]
        put("instability_mu_over_T", x, err, r["status"])
    else:
        absent("instability_mu_over_T")
    onset = [r for r in by_type.get("second-order", []) if r.get("T") and r.get("mu")]
    if onset:
        r = (_ok(onset) or onset)[0]
        x = r["mu"] / r["T"]
        err = math.hypot(r.get("mu_err") or 0.0, x * (r.get("T_err") or 0.0)) / r["T"]
        put("onset_mu_over_T", x, err, r["status"])
    else:
        absent("onset_mu_over_T")
    fo = sorted(_ok(by_type.get("first-order", [])), key=lambda r: r["mu"])
    out["first_order_mu"] = [r["mu"] for r in fo]
    out["first_order_T"] = [r["T"] for r in fo]
    out["first_order_T_err"] = [r.get("T_err") for r in fo]
    return out


def _match(lm: dict, match: dict | None) -> dict:
    """Scale columns of one member (see the module docstring)."""
    cols = {"match_landmark": None, "match_value": None, "match_unit": None, "scale": None, "scale_err": None}
    for n in MATCHABLE:
        cols[n + "_in_unit"] = None
    cols["first_order_T_in_unit"] = []
    if not match:
        return cols
    cols.update(match_landmark=match["landmark"], match_value=match["value"], match_unit=match["unit"])
    ref, ref_err = lm.get(match["landmark"]), lm.get(match["landmark"] + "_err")
    if lm.get(match["landmark"] + "_status") != "ok" or not ref:
        return cols
    scale = match["value"] / ref
    cols["scale"] = scale
    cols["scale_err"] = scale * (ref_err or 0.0) / ref
    for n in MATCHABLE:
        cols[n + "_in_unit"] = None if lm.get(n) is None else lm[n] * scale
    cols["first_order_T_in_unit"] = [t * scale for t in lm["first_order_T"]]
    return cols


def families_table(models: dict, transitions: list[dict], critical: list[dict], meta: dict | None = None):
    """``families.parquet``: one row per family member of ``models`` (the plan's models: id ->
    record with ``family``), in plan order; an empty table with the same columns when the scan has
    no family."""
    from .tables import make_schema

    families = {m: d.get("family") for m, d in models.items()}
    columns = [("model_id", STR, "", "member id")] + family_columns(families)
    for n, u in SCALAR:
        columns += [(n, F64, u, f"landmark {n}"), (n + "_err", F64, u, f"uncertainty of {n}"),
                    (n + "_status", STR, "", f"ok, the line row's status, or absent ({n})")]
    columns += [("first_order_mu", LF64, "E", "grid mu of the first-order line's points"),
                ("first_order_T", LF64, "E", "T* of the first-order line at first_order_mu"),
                ("first_order_T_err", LF64, "E", "uncertainty of first_order_T")]
    columns += [("match_landmark", STR, "", "the landmark that fixed the scale (null: no matching)"),
                ("match_value", F64, "match_unit", "the value it was set to"),
                ("match_unit", STR, "", "the physical unit of the matching"),
                ("scale", F64, "match_unit per E", "the member's energy unit E in match_unit"),
                ("scale_err", F64, "match_unit per E", "uncertainty of scale from the landmark's")]
    columns += [(n + "_in_unit", F64, "match_unit", f"{n} in match_unit") for n in MATCHABLE]
    columns += [("first_order_T_in_unit", LF64, "match_unit", "first_order_T in match_unit")]
    rows = []
    for mid, fam in families.items():
        if not fam:
            continue
        lm = member_landmarks([r for r in transitions if r["model_id"] == mid],
                              [r for r in critical if r["model_id"] == mid])
        row = {"model_id": mid, "family": fam["id"], **{f"vary_{k}": x for k, x in fam["values"].items()}, **lm}
        row.update(_match(lm, fam.get("match")))
        rows.append(row)
    sch = make_schema(columns, meta)
    return pa.Table.from_arrays([pa.array([r.get(n) for r in rows], t) for n, t, _, _ in columns], schema=sch)
