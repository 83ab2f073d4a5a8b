"""Equation of state of one model along its dominant branch, in reduced (dimensionless) form.

Panels: ``s/T^(d-1)``, ``P/T^d``, the trace anomaly ``(epsilon - (d-1) P)/T^d``, ``chi2/T^(d-2)``
and the speed of sound squared ``cs2``, with their conformal values drawn (trace anomaly 0,
``cs2 = 1/(d-1)``; both follow from ``epsilon = (d-1) P``, common practice, no source).

A model with a scale (sourced ``emd``) is drawn against ``T`` at several fixed ``mu``; a conformal
model's reduced quantities depend on ``mu/T`` only, so it is drawn against ``mu/T`` (all grid points
collapse onto one curve), with the ``mu/T`` of its located lines marked. Only rows that are the
dominant branch and ``ok`` are used, and only drawable values (:func:`.data.drawable`); the others
are counted in the caption.

Located transitions between two grid points:

- a first-order line (``T*`` at fixed ``mu``), and the ``mu/T`` of a conformal model's other lines:
  the curve is broken there (the dominant branch jumps or kinks);
- a conformal model's second-order line at ``x_c = mu/T``: the curves are drawn up to the line.
  At a second-order transition ``P`` and its first derivatives are continuous and the second
  derivatives jump (Ehrenfest's classification; common practice, no source). So ``s/T^(d-1)``,
  ``P/T^d`` and the trace anomaly run through the line at the value of the branch that continues
  through it (the branch found at both neighbouring grid points, linearly interpolated to ``x_c``;
  linear interpolation of the two dominant neighbours if no branch continues); ``chi2/T^(d-2)`` and
  ``cs2`` end at the line on each side: the continuing branch at its interpolated value, the other
  branch at its linear extrapolation from its two grid points nearest the line (with only one
  point on that side, that side stops at its point).
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .data import ScanTables, count_text, drawable, grid_text, model_info, provenance_text
from .style import LINE_STYLES, OKABE_ITO, SERIES, new_figure, no_data, title

QUANTITIES = ("s_hat", "P_hat", "trace_anomaly", "chi2_hat", "cs2")
#: continuous at a second-order transition (P and its first derivatives); the others jump there
CONTINUOUS = ("s_hat", "P_hat", "trace_anomaly")
#: digits to which two mu/T values are the same abscissa
X_DIGITS = 9


def _pow(n: int) -> str:
    return "T" if n == 1 else f"T^{{{n}}}"


def _labels(d: int) -> dict:
    return {
        "s_hat": rf"entropy density $s/{_pow(d - 1)}$",
        "P_hat": rf"pressure $P/{_pow(d)}$",
        "trace_anomaly": rf"trace anomaly $(\varepsilon-{d - 1}P)/{_pow(d)}$",
        "chi2_hat": rf"susceptibility $\chi_2/{_pow(d - 2)}$",
        "cs2": r"speed of sound squared $c_s^2$",
    }


@dataclass
class EOSFigure:
    """The figure, its panels by quantity, the grid data ``curves[label] = (x, {q: y})``, the drawn
    line of each quantity ``drawn[q] = (x, y)`` (conformal models; NaN where the line is broken)
    and the caption."""

    fig: object
    axes: dict = field(default_factory=dict)
    curves: dict = field(default_factory=dict)
    drawn: dict = field(default_factory=dict)
    x_name: str = ""
    caption: str = ""


def pick_mu(values, k: int = 6) -> list[float]:
    """Up to ``k`` grid values of mu spread evenly over the non-negative ones (all if none is)."""
    u = np.unique(np.asarray(values, float))
    u = u[np.isfinite(u)]
    if (u >= 0).any():
        u = u[u >= 0]
    if len(u) <= k:
        return list(u)
    return list(u[np.unique(np.round(np.linspace(0, len(u) - 1, k)).astype(int))])


def first_order_T(tables: ScanTables, model_id: str, mu: float) -> list[float]:
    """Temperatures T* of the model's located first-order points at this mu."""
    tr = tables.rows("transitions", model_id)
    if not len(tr) or not {"type", "status", "mu", "T"} <= set(tr.columns):
        return []
    sel = tr[(tr["type"] == "first-order") & (tr["status"] == "ok") & np.isclose(tr["mu"], mu, rtol=0, atol=1e-12)]
    return sorted(sel["T"].astype(float))


def _break_at(T, ys: dict, T_star: list[float]):
    """Insert a gap (NaN) between consecutive abscissae that straddle a located transition (a
    first-order T*, or the mu/T of a conformal model's line): the dominant branch jumps or kinks
    there, so the points on either side are not joined."""
    T = np.asarray(T, float)
    cut = [i for i in range(len(T) - 1) if any(T[i] < t < T[i + 1] for t in T_star)]
    if not cut:
        return T, ys
    Tn = np.insert(T, [i + 1 for i in cut], np.nan)
    return Tn, {q: np.insert(np.asarray(y, float), [i + 1 for i in cut], np.nan) for q, y in ys.items()}


def _min_span(ax, centre: float, half: float) -> None:
    """Show at least ``centre +- half`` (so rounding noise about a constant is not magnified) and
    plain tick labels without an offset."""
    lo, hi = ax.get_ylim()
    ax.set_ylim(min(lo, centre - half), max(hi, centre + half))
    ax.ticklabel_format(axis="y", useOffset=False, style="plain")


def dominant_ok(tables: ScanTables, model_id: str) -> pd.DataFrame:
    p = tables.rows("points", model_id)
    if not len(p) or not {"dominant", "status"} <= set(p.columns):
        return p.iloc[0:0]
    return p[p["dominant"].fillna(False).astype(bool) & (p["status"] == "ok")]


def _interp(x0, y0, x1, y1, x):
    """The straight line through (x0, y0) and (x1, y1) at x (inter- or extrapolation)."""
    return y0 + (y1 - y0) * (x - x0) / (x1 - x0)


class _Branches:
    """The ok rows of every branch of a conformal model, by (rounded) mu/T and phase label."""

    def __init__(self, rows: pd.DataFrame):
        if not {"status", "T", "mu"} <= set(rows.columns):
            rows = rows.iloc[0:0]
        rows = rows[(rows["status"] == "ok") & drawable(rows["T"]) & (rows["T"] > 0)] if len(rows) else rows
        self.rows = rows.assign(_x=np.round((rows["mu"] / rows["T"]).to_numpy(float), X_DIGITS)) if len(rows) else rows

    def value(self, x: float, phase: str, q: str) -> float | None:
        if not len(self.rows) or "phase" not in self.rows:
            return None
        sel = self.rows[(self.rows["_x"] == round(x, X_DIGITS)) & (self.rows["phase"] == phase)]
        v = sel[q].to_numpy(float) if q in sel else np.array([])
        v = v[drawable(v)]
        return float(v[0]) if len(v) else None


def _to_line(xs, ys, phases, xc, q, branches: _Branches):
    """Values at the second-order line ``xc`` lying between xs[i] and xs[i+1] for quantity q:
    ``(left end, right end)`` (equal for a continuous quantity; None where a side cannot reach it)."""
    i = int(np.searchsorted(xs, xc)) - 1
    L, R = phases[i], phases[i + 1]
    cont = None
    for label in (L, R):
        a, b = branches.value(xs[i], label, q), branches.value(xs[i + 1], label, q)
        if a is not None and b is not None:
            cont = (label, _interp(xs[i], a, xs[i + 1], b, xc))
            break
    y = ys[q]
    if q in CONTINUOUS:
        if cont is not None:
            return cont[1], cont[1]
        if np.isfinite(y[i]) and np.isfinite(y[i + 1]):
            v = _interp(xs[i], y[i], xs[i + 1], y[i + 1], xc)
            return v, v
        return None, None

    def side(j, k):  # j: nearest point on that side, k: the next one further out
        if cont is not None and phases[j] == cont[0]:
            return cont[1]
        if 0 <= k < len(xs) and phases[k] == phases[j] and np.isfinite(y[j]) and np.isfinite(y[k]):
            return _interp(xs[k], y[k], xs[j], y[j], xc)
        return None

    return side(i, i - 1), side(i + 1, i + 2)


def _drawn_line(xs, ys, phases, q, second, other, branches):
    """(x, y) of the line of quantity q: the grid values, broken at ``other`` line positions and
    carried to each second-order line position (module docstring)."""
    x_out, y_out = [], []
    y = ys[q]
    for i in range(len(xs)):
        x_out.append(xs[i])
        y_out.append(y[i])
        if i == len(xs) - 1:
            break
        inner = [xc for xc in second if xs[i] < xc < xs[i + 1]]
        if inner:
            left, right = _to_line(xs, ys, phases, inner[0], q, branches)
            if q in CONTINUOUS and left is not None:
                x_out.append(inner[0])
                y_out.append(left)
            else:
                if left is not None:
                    x_out.append(inner[0])
                    y_out.append(left)
                x_out.append(np.nan)
                y_out.append(np.nan)
                if right is not None:
                    x_out.append(inner[0])
                    y_out.append(right)
        elif any(xs[i] < xl < xs[i + 1] for xl in other):
            x_out.append(np.nan)
            y_out.append(np.nan)
    return np.asarray(x_out, float), np.asarray(y_out, float)


def plot_eos(tables: ScanTables, model_id: str, kind: str) -> EOSFigure:
    """Draw the reduced equation of state of one model (see the module docstring)."""
    info = model_info(tables, model_id, kind)
    d = info.d
    fig = new_figure((11.0, 6.6), left=0.75, right=0.15, bottom=0.55, top=0.75, wspace=0.4, hspace=0.33)
    grid = fig.subplots(2, 3)
    panels = dict(zip(QUANTITIES, grid.ravel()))
    out = EOSFigure(fig, panels)
    legend_ax = grid.ravel()[5]
    legend_ax.axis("off")
    pts = tables.rows("points", model_id)
    how = "against $\\mu/T$ (conformal: depends on $\\mu/T$ only)" if info.conformal else "against T at fixed $\\mu$"
    title(fig, f"{info.title}: equation of state of the dominant branch, {how}\n{info.unit_note}")
    caption = [f"Equation of state of model {info.model_id} ({info.kind}, d = {d}) along its dominant ok branch, "
               + ("against mu/T" if info.conformal else "against T at fixed mu"), grid_text(pts), info.unit_plain,
               provenance_text(tables)]
    notes = list(tables.notes)
    rows = dominant_ok(tables, model_id)
    labels = _labels(d)
    for q, ax in panels.items():
        ax.set_ylabel(labels[q])
        ax.set_xlabel(r"$\mu/T$" if info.conformal else f"temperature T [{info.unit}]")
    if len(rows):
        placed = drawable(rows["T"]) & (rows["T"] > 0) & drawable(rows["mu"])
        if (~placed).any():
            notes.append(f"{count_text(int((~placed).sum()), 'row')} with T or mu not drawable left out")
        rows = rows[placed]
        missing = [q for q in QUANTITIES if q not in rows.columns]
        if missing:
            notes.append("columns missing from the points table: " + ", ".join(missing))
            rows = rows.assign(**{q: np.nan for q in missing})
        bad = {q: int((~drawable(rows[q])).sum()) for q in QUANTITIES}
        if any(bad.values()):
            notes.append("values not drawable (NaN, infinite or beyond 1e250) left out: "
                         + ", ".join(f"{q} {n}" for q, n in bad.items() if n))
        rows = rows.assign(**{q: np.where(drawable(rows[q]), rows[q].to_numpy(float), np.nan) for q in QUANTITIES})
    if not len(rows):
        for ax in panels.values():
            no_data(ax, "no ok dominant rows")
        out.caption = "; ".join(caption + ["no ok dominant rows: nothing drawn"] + notes) + "."
        return out

    if info.conformal:
        x = (rows["mu"] / rows["T"]).to_numpy(float)
        order = np.argsort(x, kind="stable")
        xs = x[order]
        keep = np.concatenate([[True], np.diff(np.round(xs, X_DIGITS)) != 0])
        xs = xs[keep]
        ys = {q: rows[q].to_numpy(float)[order][keep] for q in QUANTITIES}
        phases = (rows["phase"].astype(str).to_numpy()[order][keep] if "phase" in rows
                  else np.array([""] * len(xs)))
        out.curves["all grid points"] = (xs, ys)
        out.x_name = "mu/T"
        tr = tables.rows("transitions", model_id)
        need = {"type", "status", "mu_over_T"}
        tr = tr[(tr["status"] == "ok") & drawable(tr["mu_over_T"])] if len(tr) and need <= set(tr.columns) else tr.iloc[0:0]
        on_grid = set(np.round(xs, X_DIGITS))
        x_of = {typ: sorted(set(np.round(tr.loc[tr["type"] == typ, "mu_over_T"].astype(float), X_DIGITS)))
                for typ in LINE_STYLES} if len(tr) else {typ: [] for typ in LINE_STYLES}
        second = [xv for xv in x_of["second-order"] if xv not in on_grid]
        other = [xv for typ, xl in x_of.items() if typ != "second-order" for xv in xl if xv not in on_grid]
        branches = _Branches(tables.rows("points", model_id))
        x_all = (rows["mu"] / rows["T"]).to_numpy(float)
        for q, ax in panels.items():
            xq, yq = _drawn_line(xs, ys, phases, q, second, other, branches)
            out.drawn[q] = (xq, yq)
            ax.plot(xq, yq, "-", color=SERIES[0], lw=1.4, label=f"dominant branch ({len(rows)} grid points)")
            if len(rows) <= 600:  # every grid point, so a spread at equal mu/T would show
                ax.plot(x_all, rows[q].to_numpy(float), "o", color=SERIES[0], ms=3, mfc="none", mew=0.8)
        if second:
            caption.append("at a second-order line s/T^(d-1), P/T^d and the trace anomaly run through the value of "
                           "the branch continuing through it (interpolated), chi2/T^(d-2) and cs2 end at the line "
                           "on each side (the other branch extrapolated linearly from its two nearest grid points)")
        for typ, (colour, ls, _lw, text) in LINE_STYLES.items():
            for i, xv in enumerate(x_of[typ]):
                if xs.min() <= xv <= xs.max():
                    for ax in panels.values():
                        ax.axvline(xv, color=colour, ls=ls, lw=1.0,
                                   label=f"{text}:\n$|\\mu/T|$ = {abs(xv):.5g}" if i == 0 else None)
    else:
        out.x_name = "T"
        for i, mu in enumerate(pick_mu(rows["mu"])):
            g = rows[np.isclose(rows["mu"], mu, rtol=0, atol=1e-12)].sort_values("T")
            ys = {q: g[q].to_numpy(float) for q in QUANTITIES}
            lab = f"$\\mu$ = {mu:.4g}"
            T = g["T"].to_numpy(float)
            out.curves[lab] = (T, ys)
            Tb, yb = _break_at(T, ys, first_order_T(tables, model_id, mu))
            for q, ax in panels.items():
                ax.plot(Tb, yb[q], "-o", color=SERIES[i % len(SERIES)], ms=3.5, lw=1.3, label=lab)
    for q, centre in (("cs2", 1.0 / (d - 1)), ("trace_anomaly", 0.0)):
        _min_span(panels[q], centre, 0.05)
    for q in ("s_hat", "P_hat", "chi2_hat"):
        y = np.concatenate([c[1][q] for c in out.curves.values()]) if out.curves else np.array([])
        y = y[np.isfinite(y)]
        if info.conformal and len(y) and y.min() > 0 and y.max() / y.min() > 100:
            panels[q].set_yscale("log")
    panels["cs2"].axhline(1.0 / (d - 1), color=OKABE_ITO["black"], ls="--", lw=1.0,
                          label=f"conformal limits: $c_s^2$ = 1/{d - 1}, trace anomaly 0")
    panels["trace_anomaly"].axhline(0.0, color=OKABE_ITO["black"], ls="--", lw=1.0)
    handles, labs = panels["cs2"].get_legend_handles_labels()
    seen = dict(zip(labs, handles))
    legend_title = None if info.conformal else f"$\\mu$ [{info.unit}]; lines broken at located\nfirst-order transitions"
    legend_ax.legend(seen.values(), seen.keys(), loc="center", frameon=False, title=legend_title)
    out.caption = "; ".join(caption + notes) + "."
    return out
