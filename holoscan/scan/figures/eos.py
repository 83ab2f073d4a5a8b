"""Equation of state of one model along its dominant branch, in reduced (dimensionless) form.

Panels: ``s/T^(d-1)``, ``P/T^d``, the trace anomaly ``(epsilon - (d-1) P)/T^d``, ``chi2/T^(d-2)``
and the speed of sound squared ``cs2``, with their conformal values drawn (trace anomaly 0,
``cs2 = 1/(d-1)``; both follow from ``epsilon = (d-1) P``, common practice, no source).

A model with a scale (sourced ``emd``) is drawn against ``T`` at several fixed ``mu``; a conformal
model's reduced quantities depend on ``mu/T`` only, so it is drawn against ``mu/T`` (all grid points
collapse onto one curve), with the ``mu/T`` of its located lines marked. Only rows that are the
dominant branch and ``ok`` are used; curves are broken where a located transition lies between
two grid points (first-order ``T*`` at fixed ``mu``; the ``mu/T`` of a conformal model's lines).
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .data import ScanTables, grid_text, model_info
from .style import LINE_STYLES, OKABE_ITO, SERIES, new_figure, no_data, title

QUANTITIES = ("s_hat", "P_hat", "trace_anomaly", "chi2_hat", "cs2")


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
    """The figure, its panels by quantity and the plotted curves: ``curves[label] = (x, {q: y})``."""

    fig: object
    axes: dict = field(default_factory=dict)
    curves: dict = field(default_factory=dict)
    x_name: str = ""


def pick_mu(values, k: int = 6) -> list[float]:
    """Up to ``k`` grid values of mu spread evenly over the non-negative ones (all if none is)."""
    u = np.unique(np.asarray(values, float))
    if (u >= 0).any():
        u = u[u >= 0]
    if len(u) <= k:
        return list(u)
    return list(u[np.unique(np.round(np.linspace(0, len(u) - 1, k)).astype(int))])


def first_order_T(tables: ScanTables, model_id: str, mu: float) -> list[float]:
    """Temperatures T* of the model's located first-order points at this mu."""
    tr = tables.transitions
    if not len(tr):
        return []
    sel = tr[(tr["model_id"] == model_id) & (tr["type"] == "first-order") & (tr["status"] == "ok")
             & np.isclose(tr["mu"], mu, rtol=0, atol=1e-12)]
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
    p = tables.points
    if not len(p):
        return p
    return p[(p["model_id"] == model_id) & p["dominant"].fillna(False).astype(bool) & (p["status"] == "ok")]


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
    pts = tables.points[tables.points["model_id"] == model_id] if len(tables.points) else tables.points
    how = "against $\\mu/T$ (conformal: depends on $\\mu/T$ only)" if info.conformal else "against T at fixed $\\mu$"
    title(fig, f"{info.title}: equation of state of the dominant branch, {how}\n{grid_text(pts)}; {info.unit_note}")
    rows = dominant_ok(tables, model_id)
    labels = _labels(d)
    for q, ax in panels.items():
        ax.set_ylabel(labels[q])
        ax.set_xlabel(r"$\mu/T$" if info.conformal else f"temperature T [{info.unit}]")
    if not len(rows):
        for ax in panels.values():
            no_data(ax, "no ok dominant rows")
        return out

    if info.conformal:
        x = (rows["mu"] / rows["T"]).to_numpy(float)
        order = np.argsort(x, kind="stable")
        xs = x[order]
        keep = np.concatenate([[True], np.diff(np.round(xs, 9)) != 0])
        xs = xs[keep]
        ys = {q: rows[q].to_numpy(float)[order][keep] for q in QUANTITIES}
        out.curves["all grid points"] = (xs, ys)
        out.x_name = "mu/T"
        tr = tables.transitions
        tr = tr[(tr["model_id"] == model_id) & (tr["status"] == "ok")] if len(tr) else tr
        x_lines = sorted(set(np.round(tr["mu_over_T"].dropna().astype(float), 9))) if len(tr) else []
        xb, yb = _break_at(xs, ys, [x for x in x_lines if x not in set(np.round(xs, 9))])
        x_all = (rows["mu"] / rows["T"]).to_numpy(float)
        for q, ax in panels.items():
            ax.plot(xb, yb[q], "-", color=SERIES[0], lw=1.4, label=f"dominant branch ({len(rows)} grid points)")
            if len(rows) <= 600:  # every grid point, so a spread at equal mu/T would show
                ax.plot(x_all, rows[q].to_numpy(float), "o", color=SERIES[0], ms=3, mfc="none", mew=0.8)
        for typ, (colour, ls, lw, text) in LINE_STYLES.items():
            sel = tr[tr["type"] == typ]["mu_over_T"].dropna() if len(tr) else []
            for i, xv in enumerate(np.unique(np.round(np.asarray(sel, float), 9))):
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
    if info.conformal:
        for q in ("s_hat", "P_hat", "chi2_hat"):
            y = out.curves["all grid points"][1][q]
            y = y[np.isfinite(y)]
            if len(y) and y.min() > 0 and y.max() / y.min() > 100:
                panels[q].set_yscale("log")
    panels["cs2"].axhline(1.0 / (d - 1), color=OKABE_ITO["black"], ls="--", lw=1.0,
                          label=f"conformal limits: $c_s^2$ = 1/{d - 1}, trace anomaly 0")
    panels["trace_anomaly"].axhline(0.0, color=OKABE_ITO["black"], ls="--", lw=1.0)
    handles, labs = panels["cs2"].get_legend_handles_labels()
    seen = dict(zip(labs, handles))
    legend_title = None if info.conformal else f"$\\mu$ [{info.unit}]; lines broken at located\nfirst-order transitions"
    legend_ax.legend(seen.values(), seen.keys(), loc="center", frameon=False, title=legend_title)
    return out
