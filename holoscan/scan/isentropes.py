"""Isentropes: the paths of fixed ``s/rho`` through the (T, mu) plane, from a model's solved grid.

For every requested value ``v`` of ``s/rho`` (a model block's ``isentropes: [v, ...]``) and every
grid temperature, the chemical potential where the dominant branch has ``s/rho = v`` is located
between the two neighbouring grid points of that temperature whose ``s/rho`` brackets ``v``: by
inverse interpolation of ``s/rho`` in ``mu`` through the bracketing points (linear) and through
their outer neighbours (cubic, where there are four points of one phase); ``mu`` is the cubic
value and ``mu_err`` the difference between the two (the linear value alone, and ``mu_err`` its
distance to the bracket's nearer end, where only two points are available).

A row per (model, value, grid T) that has a crossing, with ``status``:

- ``ok``: located as above, both bracketing points ``ok`` and of the same dominant phase;
- ``coexistence``: the dominant phase changes inside the bracket (a first-order line): the path
  follows the coexistence region there, ``mu`` is the bracket's midpoint and ``mu_err`` its half
  width;
- ``not ok``: a grid point between the two ``ok`` points that bracket the value is not ``ok``
  (its status in ``message``); ``mu`` is null.

No solve is made: the accuracy is that of the grid (``mu_err``). For a conformal model ``s/rho``
depends on ``mu/T`` alone, so on a grid given as ``mu_over_T`` ratios the path is exactly a line
``mu/T = const``. ``s/rho`` is taken as ``s/|rho|`` with the sign of ``mu``'s side, and only
``mu >= 0`` is searched (``s/rho`` is odd in ``mu``).
"""
from __future__ import annotations

import itertools

import numpy as np
import pyarrow as pa

from .tables import F64, STR, make_schema

COLUMNS = [
    ("model_id", STR, "", "model id"),
    ("s_over_rho", F64, "1", "the requested value of s/rho"),
    ("T", F64, "E", "grid temperature"),
    ("mu", F64, "E", "chemical potential where s/rho has the value (null when not located)"),
    ("mu_err", F64, "E", "uncertainty of mu from the grid (see holoscan.scan.isentropes)"),
    ("mu_over_T", F64, "1", "mu / T"),
    ("status", STR, "", "ok | coexistence | not ok"),
    ("message", STR, "", "why, in words"),
]


def _inverse(mu, v, target):
    """mu where the interpolant through the points (v, mu) takes ``target`` (inverse interpolation)."""
    order = np.argsort(v)
    return float(np.polyval(np.polyfit(v[order], mu[order], len(v) - 1), target))


def locate(model_id: str, rows, values) -> list[dict]:
    """Isentrope rows of one model from one row per grid point (dicts with T, mu, s, rho, status,
    phase: the dominant branch's, or the point's status where there is none) for each of ``values``."""
    out = []
    by_T: dict = {}
    for r in rows:
        if r["mu"] >= 0:
            by_T.setdefault(r["T"], []).append(r)
    for target in values:
        for T in sorted(by_T):
            pts = sorted(by_T[T], key=lambda r: r["mu"])
            good = [k for k, r in enumerate(pts) if r["status"] == "ok" and r["rho"]]
            v = {k: pts[k]["s"] / pts[k]["rho"] for k in good}
            for j, k in itertools.pairwise(good):
                if not ((v[j] - target) * (v[k] - target) <= 0 and v[j] != v[k]):
                    continue
                a, b = pts[j], pts[k]
                row = {"model_id": model_id, "s_over_rho": target, "T": T}
                if k - j > 1:
                    bad = pts[j + 1]
                    out.append({**row, "mu": None, "mu_err": None, "mu_over_T": None, "status": "not ok",
                                "message": f"grid point mu = {bad['mu']:g} inside the bracket: {bad['status']}"})
                    continue
                if a["phase"] != b["phase"]:
                    m = 0.5 * (a["mu"] + b["mu"])
                    out.append({**row, "mu": m, "mu_err": 0.5 * (b["mu"] - a["mu"]), "mu_over_T": m / T,
                                "status": "coexistence",
                                "message": f"the dominant phase changes from {a['phase']} to {b['phase']} "
                                           "inside the bracket: the path follows the coexistence region"})
                    continue
                lin = _inverse(np.array([a["mu"], b["mu"]]), np.array([v[j], v[k]]), target)
                four = [q for q in (j - 1, j, k, k + 1) if q in v and pts[q]["phase"] == a["phase"]]
                if len(four) == 4 and four == list(range(j - 1, k + 2)):
                    cub = _inverse(np.array([pts[q]["mu"] for q in four]), np.array([v[q] for q in four]), target)
                    m, err, how = cub, abs(cub - lin), "cubic inverse interpolation"
                else:
                    m, err, how = lin, min(lin - a["mu"], b["mu"] - lin), "linear inverse interpolation"
                out.append({**row, "mu": m, "mu_err": err, "mu_over_T": m / T, "status": "ok", "message": how})
    return out


def isentropes_table(points, models: dict, meta: dict | None = None) -> pa.Table:
    """``isentropes.parquet`` for the models of the plan (``models``: id -> record with an
    ``isentropes`` list) from the points table (pyarrow)."""
    rows = []
    wanted = {m: d.get("isentropes") for m, d in models.items() if d.get("isentropes")}
    if wanted:
        t = points.select(["model_id", "T", "mu", "s", "rho", "status", "phase", "dominant"]).to_pylist()
        for mid, values in wanted.items():
            per_point: dict = {}
            for r in t:
                if r["model_id"] == mid:
                    key = (r["T"], r["mu"])
                    if r["dominant"]:
                        per_point[key] = r
                    else:
                        per_point.setdefault(key, {**r, "status": r["status"] if r["status"] != "ok"
                                                   else "no dominant branch"})
            rows += locate(mid, list(per_point.values()), values)
    sch = make_schema(COLUMNS, meta)
    return pa.Table.from_arrays([pa.array([r[n] for r in rows], typ) for n, typ, _, _ in COLUMNS], schema=sch)
