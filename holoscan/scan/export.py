"""``holoscan export``: one model's equation of state for other codes, in one of two layouts.

Layout ``T-mu`` (the default): one row per grid point of the model (T outer, mu inner, both
ascending), from the dominant branch of that point: ``T, mu, P, s, rho, epsilon, cs2, chi2, chi3,
chi4`` and ``status``. A point whose dominant branch is not ``ok`` (or that has no dominant branch)
keeps its ``T, mu`` and ``status`` and has empty values: nothing is interpolated or filled in.

Layout ``epsilon-rho``: one row per node of a regular grid of energy density and charge density
(epsilon outer, rho inner, both ascending and linearly spaced; ranges default to the span of the
model's usable points), as hydrodynamics codes read an equation of state: ``epsilon, rho, T, mu, P,
s, cs2, chi2``, an absolute error bound ``*_err`` of each of ``T, mu, P, s, cs2, chi2``, ``status``
and ``reason``. The node's ``(T, mu)`` is found by inverting the solved grid's dominant branch
(:mod:`holoscan.scan.invert`: piecewise-cubic interpolation in each grid cell, Newton on the
interpolant, error bounds from lower-order interpolants carried through the inversion's Jacobian);
the header's ``accuracy`` is the largest relative bound of each column over the ``ok`` nodes. The
grid must be a tensor product of T and mu values, or of T and mu/T ratios. A grid point is usable
when its dominant branch is ``ok`` with finite values and an error estimate; the grid's own error
estimates (with the floors of ``holoscan.thermo``) enter the bounds. Never interpolated across:

- a grid point that is not usable (status ``next to not ok``: the cells it touches are not used);
- a first- or second-order line located for the model (``transitions.parquet``, its points of one
  type joined in order of mu, the critical endpoints joined to the first-order line; cells it
  crosses, widened by its uncertainty, are status ``phase change``), and a change between phases
  the kind names (e.g. ``normal``/``condensed``). Labels by entropy order (``unique``,
  ``high-entropy``, ...) name no phase and are not compared. A model with metastable branches and no
  located first-order line has the cells touching those points marked instead;
- a fold: the dominant branch's map ``(T, mu) -> (epsilon, rho)`` has ``det = T det(Hess P) > 0``
  (``d epsilon = T ds + mu d rho``; common practice, no source), so it is one-to-one where the
  branch is locally stable; a node with several preimages, or whose cell's interpolant has a
  vanishing or negative determinant (near a critical point), is status ``fold``.

Nodes outside the covered region are ``outside grid``; nodes the interpolation cannot vouch for
(too few usable grid lines, a bound above a quarter of the cell, Newton not converged) are
``unresolved``. The reason says which grid point, line or cell; their values are empty.

Units: the model's energy unit E, with ``T, mu`` in E, ``P, epsilon`` in E^d, ``s, rho`` in
E^(d-1), ``chi2`` in E^(d-2), ``chi3`` in E^(d-3), ``chi4`` in E^(d-4), each ``*_err`` as its
column. With ``unit`` and ``scale`` (``unit`` per E, e.g. MeV), every column is converted by
``scale`` to its power; for a family member with a matched scale (``families.parquet``), ``unit``
alone takes that scale. Explicit ``epsilon-rho`` ranges are in the output units.

CSV: a header of ``#`` lines (model, kind, d, the grid, the units of every column, the code hash
and config hash of the tables, the scale, the counts of statuses; for ``epsilon-rho`` also the
source grid, the accuracy, the lines used and the method), then one line of column names and the
rows; numbers are written with ``repr`` (shortest exact form), so reading the file back gives the
doubles to the bit; a text cell with a comma is quoted. Parquet: the same columns, with the header
as the file's ``holoscan-export`` metadata key.
"""
from __future__ import annotations

import json
import math
from collections import Counter
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq

from ..errors import InputError
from ..phases.dominance import ENTROPY_ORDER_LABELS
from ..thermo import CS2_FLOOR, RHO_FLOOR
from .finished import read_table, run_metadata, scan_folder
from .invert import TensorGrid, invert, line_cuts
from .store import atomic_path, atomic_write_bytes

#: exported columns and the power of E of each
COLUMNS = (("T", 1), ("mu", 1), ("P", "d"), ("s", "d-1"), ("rho", "d-1"), ("epsilon", "d"), ("cs2", 0),
           ("chi2", "d-2"), ("chi3", "d-3"), ("chi4", "d-4"))
META_KEY = b"holoscan-export"
#: the layouts: the solved (T, mu) grid, and a regular (epsilon, rho) grid by inversion
LAYOUTS = ("T-mu", "epsilon-rho")
#: columns of the epsilon-rho layout (besides status and reason) and the power of E of each
INVERSE_COLUMNS = (("epsilon", "d"), ("rho", "d-1"), ("T", 1), ("mu", 1), ("P", "d"), ("s", "d-1"), ("cs2", 0),
                   ("chi2", "d-2"), ("T_err", 1), ("mu_err", 1), ("P_err", "d"), ("s_err", "d-1"), ("cs2_err", 0),
                   ("chi2_err", "d-2"))
DEFAULT_NODES = 50
MAX_NODES = 2000
#: relative round-off of a solved value, added to its error estimate as a node's error
NODE_ROUNDOFF = 1e-14
#: status column of the epsilon-rho layout from the inversion's status
STATUS_TEXT = {"ok": "ok", "outside": "outside grid", "unusable": "next to not ok", "change": "phase change",
               "fold": "fold", "unresolved": "unresolved"}


def _power(p, d: int) -> int:
    return p if isinstance(p, int) else d - int(p[2:]) if "-" in p else d


def _unit_text(p, unit: str) -> str:
    if p == 0:
        return "1"
    return unit if p == 1 else f"{unit}^{p}"


def _model_rows(results_dir, model_id: str, unit: str | None, scale: float | None):
    """(root, run metadata, the model's rows as a DataFrame, scale, d); bad model or scale -> InputError."""
    root = scan_folder(results_dir)
    meta = run_metadata(root)
    pts = read_table(root, "points").to_pandas()
    mine = pts[pts["model_id"] == model_id]
    if not len(mine):
        known = ", ".join(dict.fromkeys(pts["model_id"]))
        raise InputError("--model", model_id, f"no such model in {root}/points.parquet; models: {known}")
    if scale is None and unit is not None:
        scale = _family_scale(root, model_id, unit)
    check_scale(scale)
    return root, meta, mine, scale, int(mine["d"].iloc[0])


def check_scale(scale) -> None:
    """``--scale`` must be a positive finite number (or absent)."""
    if scale is not None and not (scale > 0 and math.isfinite(scale)):
        raise InputError("--scale", scale, "must be a positive finite number")


def export_table(results_dir, model_id: str, unit: str | None = None, scale: float | None = None) -> tuple[dict, list]:
    """``(header, rows)`` of the export (see the module docstring); rows are dicts."""
    _, meta, mine, scale, d = _model_rows(results_dir, model_id, unit, scale)
    factor = {n: (scale ** _power(p, d) if scale else 1.0) for n, p in COLUMNS}
    grid_T, grid_mu = sorted(mine["T"].unique()), sorted(mine["mu"].unique())
    dominant = mine[mine["dominant"]]
    by_point = {(r.T, r.mu): r for r in dominant.itertuples()}
    status_of = _point_status(mine)
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


def _point_status(mine) -> dict:
    """(T, mu) -> 'ok' when every branch row of the point is ok, else the first other status."""
    out: dict = {}
    for key, st in zip(zip(mine["T"].tolist(), mine["mu"].tolist()), mine["status"].tolist()):
        if out.get(key, "ok") == "ok":
            out[key] = st
    return out


# ---------------------------------------------------------------------------------------------------
# the (epsilon, rho) layout


@dataclass(frozen=True)
class InverseSpec:
    """The node grid of the ``epsilon-rho`` layout: nodes per axis, and ranges in the output units
    (None: the span of the solved ``ok`` dominant points)."""

    nodes: tuple
    epsilon_range: tuple | None = None
    rho_range: tuple | None = None


def layout_options(layout: str, nodes: str | None = None, epsilon_range: str | None = None,
                   rho_range: str | None = None) -> InverseSpec | None:
    """Check the layout options before any work: ``None`` for ``T-mu``, else the node grid.

    ``nodes`` is ``N`` (both axes) or ``NE,NR``, each an integer from 2 to ``MAX_NODES``;
    a range is ``MIN,MAX`` with finite ``MIN < MAX``. Bad values raise InputError naming the option.
    """
    if layout not in LAYOUTS:
        raise InputError("--layout", layout, f"must be one of {', '.join(LAYOUTS)}")
    if layout == LAYOUTS[0]:
        for key, value in (("--nodes", nodes), ("--epsilon-range", epsilon_range), ("--rho-range", rho_range)):
            if value is not None:
                raise InputError(key, value, f"applies only to --layout {LAYOUTS[1]}")
        return None
    return InverseSpec(_nodes(nodes), _range("--epsilon-range", epsilon_range), _range("--rho-range", rho_range))


def _nodes(text: str | None) -> tuple:
    if text is None:
        return (DEFAULT_NODES, DEFAULT_NODES)
    parts = str(text).split(",")
    try:
        counts = [int(p.strip()) for p in parts]
    except ValueError:
        counts = []
    if len(counts) == 1:
        counts = counts * 2
    if len(counts) != 2 or not all(2 <= c <= MAX_NODES for c in counts):
        raise InputError("--nodes", text, f"must be N or NE,NR: integers from 2 to {MAX_NODES} "
                         "(nodes along epsilon and along rho)")
    return tuple(counts)


def _range(key: str, text: str | None) -> tuple | None:
    if text is None:
        return None
    parts = str(text).split(",")
    try:
        lo, hi = (float(p) for p in parts)
    except ValueError:
        raise InputError(key, text, "must be MIN,MAX: two numbers separated by a comma") from None
    if not (math.isfinite(lo) and math.isfinite(hi) and lo < hi):
        raise InputError(key, text, "must be MIN,MAX with finite MIN < MAX (in the output units)")
    return (lo, hi)


def _measure(name: str, values: dict) -> np.ndarray:
    """The magnitude a column's error is measured against (README "Error evidence" floors)."""
    v = values[name]
    if name == "rho":
        return np.maximum(np.abs(v), RHO_FLOOR * np.abs(values["s"]))
    if name == "cs2":
        return np.maximum(np.abs(v), CS2_FLOOR)
    if name == "mu":
        return np.maximum(np.abs(v), np.abs(values["T"]))
    return np.abs(v)


def export_inverse(results_dir, model_id: str, spec: InverseSpec, unit: str | None = None,
                   scale: float | None = None) -> tuple[dict, list]:
    """``(header, rows)`` of the ``epsilon-rho`` layout (see the module docstring); rows are dicts."""
    root, meta, mine, scale, d = _model_rows(results_dir, model_id, unit, scale)
    factor = {n: (scale ** _power(p, d) if scale else 1.0) for n, p in INVERSE_COLUMNS}
    status_of = _point_status(mine)
    Ts, ys, ykind, node_of, mu_grid = _tensor_grid(model_id, status_of)
    shape = mu_grid.shape
    names = ("epsilon", "rho", "P", "s", "cs2", "chi2")
    values = {n: np.full(shape, np.nan) for n in names}
    ee = np.full(shape, np.nan)
    phase = np.full(shape, "", dtype=object)
    status = np.full(shape, "no dominant branch", dtype=object)
    for key, st in status_of.items():
        if st != "ok":
            status[node_of[key]] = st
    for r in mine[mine["dominant"]].itertuples():
        k = node_of[(r.T, r.mu)]
        status[k] = r.status
        if r.status == "ok":
            for n in names:
                v = getattr(r, n)
                values[n][k] = np.nan if v is None else float(v)
            ee[k] = np.nan if r.error_estimate is None else float(r.error_estimate)
            phase[k] = str(r.phase)
    usable = (status == "ok") & np.isfinite(ee)
    for n in names[:5]:
        usable &= np.isfinite(values[n])
    measure = {n: _measure(n, values) for n in names}
    errors = {n: np.where(usable, (np.nan_to_num(ee) + NODE_ROUNDOFF) * measure[n], 0.0) for n in names}
    if ykind != "mu":      # a node sits at mu/T = its ratio to ~1e-12: that offset times the slope
        offset = np.abs(mu_grid / Ts[:, None] - ys[None, :])
        for n in names:
            errors[n] = errors[n] + 2.0 * offset * _slope(values[n], ys, usable)
    for n in names:
        values[n] = np.where(usable, values[n], 0.0)
    # branches named by the kind are phases; names by entropy order are not (one label for them)
    ident = np.where(np.isin(phase, ENTROPY_ORDER_LABELS), "", phase)
    labels = {p: k for k, p in enumerate(sorted(set(ident[usable])))}
    label = np.array([[labels.get(ident[i, j], -1) for j in range(shape[1])] for i in range(shape[0])])
    metastable = np.zeros(shape, bool)
    for r in mine[(mine["phase_flag"] == "metastable") & (mine["status"] == "ok")].itertuples():
        metastable[node_of[(r.T, r.mu)]] = True
    lines, line_note = _lines(root, model_id, ykind)
    cut_x, cut_y, blocked = line_cuts(Ts, ys, [pl for _, pl in lines])
    cell_why = {}
    for kind, pl in lines:
        cx, cy, bl = line_cuts(Ts, ys, [pl])
        for i, j in zip(*np.nonzero(bl)):
            cell_why.setdefault((i, j), f"the {kind} line ends in the cell")
        for i, j in zip(*np.nonzero(cx)):
            for c in ((i, j - 1), (i, j)):
                cell_why.setdefault(c, f"the {kind} line crosses the cell")
        for i, j in zip(*np.nonzero(cy)):
            for c in ((i - 1, j), (i, j)):
                cell_why.setdefault(c, f"the {kind} line crosses the cell")
    if metastable.any() and not any(kind == "first-order" for kind, _ in lines):
        touch = metastable[:-1, :-1] | metastable[1:, :-1] | metastable[:-1, 1:] | metastable[1:, 1:]
        blocked |= touch
        for i, j in zip(*np.nonzero(touch)):
            cell_why.setdefault((i, j), "a corner has a metastable branch (two phases coexist there) and no "
                                        "first-order line is located for the model")
        line_note += "; no first-order line located: cells touching points with a metastable branch are not used"
    grid = TensorGrid(Ts, ys, values, errors, usable, label, cut_x, cut_y, blocked)

    if usable.any():
        span = {n: (float(values[n][usable].min()) * factor[n], float(values[n][usable].max()) * factor[n])
                for n in ("epsilon", "rho")}
    else:
        span = {"epsilon": (0.0, 1.0), "rho": (0.0, 1.0)}
    e_lo, e_hi = spec.epsilon_range or span["epsilon"]
    r_lo, r_hi = spec.rho_range or span["rho"]
    if not (e_lo < e_hi and r_lo < r_hi):
        raise InputError("--model", model_id, "its ok dominant points span no range of epsilon or rho: "
                         "give --epsilon-range and --rho-range")
    e_out = np.linspace(e_lo, e_hi, spec.nodes[0])
    r_out = np.linspace(r_lo, r_hi, spec.nodes[1])
    inv = invert(grid, "epsilon", "rho", e_out / factor["epsilon"], r_out / factor["rho"],
                 ["P", "s", "cs2", "chi2"], orientation=1)

    shown = unit or "E"
    where_text = _Where(Ts, ys, ykind, mu_grid, factor["T"], shown, status, phase, cell_why)
    rows, counts = [], Counter()
    if ykind == "mu":
        got = {"T": inv.x, "mu": inv.y, "T_err": inv.x_err, "mu_err": inv.y_err}
    else:                  # mu = (mu/T) T
        mu_err = np.abs(inv.y) * inv.x_err + (np.abs(inv.x) + inv.x_err) * inv.y_err
        got = {"T": inv.x, "mu": inv.y * inv.x, "T_err": inv.x_err, "mu_err": mu_err + 1e-16 * np.abs(inv.y * inv.x)}
    for n in ("P", "s", "cs2", "chi2"):
        got[n], got[n + "_err"] = inv.values[n], inv.errors[n]
    nR = len(r_out)
    for k, st in enumerate(inv.status):
        text, reason = where_text(st, inv.where[k])
        row = {"epsilon": float(e_out[k // nR]), "rho": float(r_out[k % nR]), "status": text, "reason": reason}
        for n, _ in INVERSE_COLUMNS[2:]:
            v = got[n][k]
            row[n] = float(v) * factor[n] if st == "ok" and math.isfinite(v) else None
        counts[text] += 1
        rows.append(row)
    header = {
        "layout": LAYOUTS[1], "model": model_id, "kind": str(mine["kind"].iloc[0]), "d": d,
        "scan": meta.get("scan"), "code_hash": meta.get("code_hash"), "config_hash": meta.get("config_hash"),
        "grid": {"epsilon": [float(e_out[0]), float(e_out[-1]), len(e_out)],
                 "rho": [float(r_out[0]), float(r_out[-1]), len(r_out)], "nodes": len(rows),
                 "order": "epsilon outer, rho inner, both ascending (linearly spaced)"},
        "source_grid": {"T": [float(Ts[0]), float(Ts[-1]), len(Ts)], _AXIS[ykind]: [float(ys[0]), float(ys[-1]), len(ys)],
                        "points": len(status_of), "usable": int(usable.sum())},
        "units": {n: _unit_text(_power(p, d), shown) for n, p in INVERSE_COLUMNS},
        "scale": None if scale is None else {"unit": unit, "per_E": scale},
        "statuses": dict(counts),
        "accuracy": _accuracy(inv.status, got),
        "lines": line_note,
        "accuracy_note": "largest error estimate over the ok nodes, relative to T (T), max(|mu|, T) (mu), |P|, |s|, "
                         "max(|cs2|, 0.1) (cs2), |chi2|; each node's absolute bound is in the *_err columns",
        "method": "tensor-product cubic Lagrange interpolation of the solved dominant branch in each (T, mu) cell, "
                  "Newton on the interpolant; error bound: the linear interpolant's difference in each direction, "
                  "the grid's own error estimates and round-off, carried through the inversion's Jacobian",
        "note": "not ok nodes (status and reason given) have empty values: outside the solved region, next to a "
                "grid point that is not ok, across a change of the dominant phase, on a fold, or unresolved; "
                "never interpolated across",
    }
    return header, rows


_AXIS = {"mu": "mu", "mu/T": "mu_over_T"}


def _tensor_grid(model_id: str, status_of: dict):
    """The model's grid as a tensor grid: ``(Ts, ys, kind, node_of, mu_grid)`` with ``ys`` the mu values
    (kind ``mu``) or, for a grid given by ``mu_over_T`` ratios, the ratios (kind ``mu/T``: each node
    then has ``mu = canon(ratio T)``, its ratio to about 1e-12); ``node_of`` maps each point (T, mu)
    to its indices and ``mu_grid`` holds every node's mu."""
    Ts = np.array(sorted({T for T, _ in status_of}))
    rows = {T: sorted(mu for t, mu in status_of if t == T) for T in Ts}
    counts = {len(v) for v in rows.values()}
    if len(Ts) < 2 or min(counts) < 2:
        raise InputError("--layout", LAYOUTS[1], f"the grid of model {model_id} has {len(Ts)} T values and "
                         f"{min(counts)} mu values at some T: at least 2 of each are needed to interpolate")
    mu_grid = np.array([rows[T] for T in Ts]) if len(counts) == 1 else None
    if mu_grid is not None and (mu_grid == mu_grid[0]).all():
        return Ts, mu_grid[0].copy(), "mu", {(T, mu): (i, j) for i, T in enumerate(Ts)
                                             for j, mu in enumerate(mu_grid[i])}, mu_grid
    if mu_grid is not None:
        ratio = mu_grid / Ts[:, None]
        ys = np.median(ratio, axis=0)
        if (np.abs(ratio - ys) <= 1e-10 * np.maximum(np.abs(ys), 1e-300)).all() and (np.diff(ys) > 0).all():
            return Ts, ys, "mu/T", {(T, mu): (i, j) for i, T in enumerate(Ts)
                                    for j, mu in enumerate(mu_grid[i])}, mu_grid
    raise InputError("--layout", LAYOUTS[1], f"the grid of model {model_id} is neither a tensor product of T and mu "
                     "values nor of T and mu/T ratios ({len(status_of)} points): the layout interpolates on such grids")


def _slope(v, ys, usable) -> np.ndarray:
    """Largest |difference quotient| along the second axis next to each node (0 where none)."""
    q = np.abs(np.diff(v, axis=1)) / np.diff(ys)[None, :]
    q = np.where(usable[:, 1:] & usable[:, :-1], q, 0.0)
    out = np.zeros_like(v)
    out[:, 1:] = q
    out[:, :-1] = np.maximum(out[:, :-1], q)
    return np.nan_to_num(out)


def _accuracy(status: list, got: dict) -> dict:
    """Largest relative error estimate of each output column over the ok nodes (model units)."""
    ok = np.array([st == "ok" for st in status], dtype=bool)
    if not ok.any():
        return {}
    T, mu = got["T"][ok], got["mu"][ok]
    rel = {"T": got["T_err"][ok] / np.abs(T), "mu": got["mu_err"][ok] / np.maximum(np.abs(mu), np.abs(T))}
    for n in ("P", "s", "cs2", "chi2"):
        v = got[n][ok]
        m = np.maximum(np.abs(v), CS2_FLOOR) if n == "cs2" else np.abs(v)
        r = got[n + "_err"][ok] / m
        if np.isfinite(r).any():
            rel[n] = r[np.isfinite(r)]
    out = {n: float(r.max()) for n, r in rel.items()}
    out["all"] = max(out.values())
    return out


def _lines(root: Path, model_id: str, ykind: str) -> tuple[list, str]:
    """The model's located first- and second-order lines as polylines ``(kind, (T, mu, T_err, mu_err))``
    (points of one type joined in order of mu, then T; the critical endpoints join the first-order
    line), and a note saying what was used."""
    trans = read_table(root, "transitions").to_pandas()
    crit = read_table(root, "critical_points").to_pandas()
    trans = trans[(trans["model_id"] == model_id) & (trans["status"] == "ok")]
    crit = crit[(crit["model_id"] == model_id) & (crit["status"] == "ok")]
    out, used = [], []
    for kind in ("first-order", "second-order"):
        pts = trans[trans["type"] == kind][["T", "mu", "T_err", "mu_err"]]
        if kind == "first-order" and len(pts):
            pts = pd.concat([pts, crit[["T", "mu", "T_err", "mu_err"]]]) if len(crit) else pts
        if not len(pts):
            continue
        pts = pts.fillna(0.0).sort_values(["mu", "T"], kind="stable")
        T, mu, eT, emu = (pts[c].to_numpy(float) for c in ("T", "mu", "T_err", "mu_err"))
        if ykind != "mu":      # the grid's second axis is mu/T
            mu, emu = mu / T, emu / T + np.abs(mu) * eT / T**2
        out.append((kind, (T, mu, eT, emu)))
        used.append(f"{len(pts)} {kind} line points")
    note = ("cells crossed by " + " and ".join(used) + " (transitions.parquet, critical_points.parquet) are not used"
            if used else "no first- or second-order line located for the model")
    return out, note


class _Where:
    """Status and reason text of a node from the inversion's status and grid indices."""

    def __init__(self, Ts, ys, ykind, mu_grid, per_E, unit, status, phase, cell_why):
        self.Ts, self.ys, self.ykind, self.mu_grid, self.f, self.u = Ts, ys, ykind, mu_grid, per_E, unit
        self.status, self.phase, self.cell_why = status, phase, cell_why

    def _axis(self, a, b):
        if self.ykind == "mu":
            return f"mu {a * self.f:.12g} to {b * self.f:.12g} {self.u}"
        return f"mu/T {a:.12g} to {b:.12g}"

    def _pt(self, i, j):
        return f"T {self.Ts[i] * self.f:.12g} {self.u} and mu {self.mu_grid[i, j] * self.f:.12g} {self.u}"

    def _cell(self, i, j):
        f, u = self.f, self.u
        return f"cell T {self.Ts[i] * f:.12g} to {self.Ts[i + 1] * f:.12g} {u} and {self._axis(self.ys[j], self.ys[j + 1])}"

    def __call__(self, st, where):
        if st == "ok":
            return "ok", ""
        if st == "outside":
            f, u = self.f, self.u
            return STATUS_TEXT[st], (f"outside the region covered by the solved grid (T {self.Ts[0] * f:.12g} to "
                                     f"{self.Ts[-1] * f:.12g} {u} and {self._axis(self.ys[0], self.ys[-1])})")
        if st == "unusable":
            pts = "; ".join(f"the point {self._pt(i, j)} is {self.status[i, j]}" for i, j in where)
            return STATUS_TEXT[st], f"in a cell touched by a grid point whose dominant branch is not ok: {pts}"
        if st == "change":
            (i, j), = where
            why = self.cell_why.get((i, j))
            if why is None:
                phases = " / ".join(dict.fromkeys(self.phase[a, b] for a in (i, i + 1) for b in (j, j + 1)))
                why = f"the dominant phase changes ({phases})"
            return STATUS_TEXT[st], (f"{why}: {self._cell(i, j)}; the equation of state is not smooth across it "
                                     "and is not interpolated there")
        if st == "fold":
            cells = "; ".join(self._cell(i, j) for i, j in where)
            return STATUS_TEXT[st], (f"the interpolated map from (T, mu) to (epsilon, rho) folds: {len(where)} "
                                     f"preimage(s) or a vanishing Jacobian in {cells}")
        (i, j), = where
        why = {"no stencil": "fewer than 4 usable grid lines of the cell's phase in T or mu for the interpolation",
               "coarse": "the error bound exceeds a quarter of the cell (refine the (T, mu) grid)",
               "no convergence": "Newton's method did not converge inside the cell"}[st]
        return STATUS_TEXT["unresolved"], f"unresolved in the {self._cell(i, j)}: {why}"


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
    if isinstance(v, float):
        return repr(float(v))
    text = str(v)
    return '"' + text.replace('"', '""') + '"' if any(c in text for c in ',"\n') else text


def write_export(header: dict, rows: list, out, fmt: str) -> None:
    """Write ``(header, rows)`` of either layout as CSV or Parquet (see the module docstring)."""
    inverse = header.get("layout") == LAYOUTS[1]
    numeric = [n for n, _ in (INVERSE_COLUMNS if inverse else COLUMNS)]
    texts = ["status", "reason"] if inverse else ["status"]
    names = numeric + texts
    if fmt == "csv":
        lines = [f"# holoscan export: {json.dumps(header, sort_keys=True)}",
                 f"# units: {', '.join(f'{n} [{u}]' for n, u in header['units'].items())}",
                 f"# {header['note']}", ",".join(names)]
        lines += [",".join(_cell(r[n]) for n in names) for r in rows]
        atomic_write_bytes(Path(out), ("\n".join(lines) + "\n").encode(), durable=False)
        return
    if fmt != "parquet":
        raise InputError("--format", fmt, "must be csv or parquet")
    arrays = [pa.array([r[n] for r in rows], pa.float64()) for n in numeric] + \
             [pa.array([r[n] for r in rows], pa.string()) for n in texts]
    t = pa.Table.from_arrays(arrays, names=names).replace_schema_metadata(
        {META_KEY: json.dumps(header, sort_keys=True).encode()})
    with atomic_path(Path(out), durable=False) as tmp:
        pq.write_table(t, tmp)
