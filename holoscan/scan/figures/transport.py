"""Transport of the dominant branch against T along lines of fixed mu/T: ``sigma/T^(d-3)``,
``D_charge T`` and ``eta/s``.

``sigma`` (points table, ``E^(d-3)``) is the charge conductivity that stays finite at nonzero
density, ``D_charge = sigma/chi2`` (``E^(-1)``) the charge diffusion constant, ``eta_over_s`` the
shear viscosity over the entropy density; all three panels are pure numbers. For a conformal model
they depend on ``mu/T`` alone, so they are constant along each line. The eta/s panel carries the
value ``1/(4 pi)`` of two-derivative gravity duals (Kovtun, Son & Starinets 2005, Phys. Rev. Lett.
94, 111601) as a dashed line, and the caption states the range of the drawn eta/s.

The lines, the values along them and the error bars are those of :mod:`.fixed_ratio`. The tables
carry no error bound for the transport columns, so the bars show the interpolation error estimate
alone (zero at grid rows); the caption says so. A located critical endpoint's ``T_c`` is marked
(dashed) on the line through it.

Drawn only for a model some row of which carries ``sigma``: otherwise the file says that the
figure is not drawn and why, and ``figures.json`` lists it under ``not_drawn``.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .data import ScanTables, count_text, drawable, grid_text, log_T_axis, model_info, provenance_text
from .fixed_ratio import (
    INTERP_TEXT,
    Lines,
    along,
    carries,
    column,
    dominant_grid,
    draw_line,
    line_ratios,
    lines_text,
    mark_critical,
    ratio_label,
)
from .style import OKABE_ITO, SERIES, new_figure, no_data, not_drawn_figure, plain_log_ticks, title

QUANTITIES = ("sigma_hat", "D_T", "eta_over_s")
#: eta/s of two-derivative gravity duals (Kovtun, Son & Starinets 2005)
ETA_OVER_S = 1.0 / (4.0 * math.pi)


@dataclass
class TransportFigure:
    """The figure, its panels by quantity, the lines chosen, the values ``curves[q][ratio]``
    (:class:`.fixed_ratio.Line`), ``not_drawn`` (the reason, when the rows carry no sigma) and the
    caption."""

    fig: object
    axes: dict = field(default_factory=dict)
    lines: Lines | None = None
    curves: dict = field(default_factory=dict)
    not_drawn: str | None = None
    caption: str = ""


def transport_values(d: int) -> dict:
    """``{quantity: (value, bound)}`` for :func:`.fixed_ratio.dominant_grid`: ``sigma/T^(d-3)``,
    ``D_charge T`` (``sigma/chi2`` where the table has no ``D_charge`` column) and ``eta/s``; no
    bound is known (NaN)."""
    def unknown(rows):
        return np.full(len(rows), np.nan)

    def sigma_hat(rows):
        with np.errstate(all="ignore"):
            return column(rows, "sigma") / column(rows, "T") ** (d - 3)

    def D_T(rows):
        D = column(rows, "D_charge") if "D_charge" in rows.columns else column(rows, "sigma") / column(rows, "chi2")
        with np.errstate(all="ignore"):
            return D * column(rows, "T")

    return {"sigma_hat": (sigma_hat, unknown), "D_T": (D_T, unknown),
            "eta_over_s": (lambda rows: column(rows, "eta_over_s"), unknown)}


def transport_lines(rows: pd.DataFrame, ratios, d: int) -> dict:
    """``{quantity: {ratio: Line}}`` along each ``mu/T = ratio`` for one model's points rows."""
    grid = dominant_grid(rows, transport_values(d))
    return {q: {float(r): along(grid, q, r) for r in ratios} for q in QUANTITIES}


def sigma_name(d: int) -> str:
    """``sigma/T^(d-3)`` in plain text for captions (``sigma`` in d = 3, ``sigma/T`` in d = 4)."""
    return {0: "sigma", 1: "sigma/T"}.get(d - 3, f"sigma/T^{d - 3}")


def _labels(d: int) -> dict:
    power = {0: "", 1: "/T"}.get(d - 3, f"/T^{{{d - 3}}}")
    return {"sigma_hat": rf"conductivity $\sigma{power}$", "D_T": r"charge diffusion $D\,T$",
            "eta_over_s": r"$\eta/s$"}


def plot_transport(tables: ScanTables, model_id: str, kind: str) -> TransportFigure:
    """Draw the transport panels of one model (module docstring)."""
    info = model_info(tables, model_id, kind)
    d = info.d
    pts = tables.rows("points", model_id)
    caption = [f"Transport of the dominant ok branch of model {info.model_id} ({info.kind}, d = {d}) against T along "
               f"lines of fixed mu/T: {sigma_name(d)} (sigma: charge conductivity finite at nonzero density), "
               "D_charge T (D_charge = sigma/chi2) and eta/s", grid_text(pts), info.unit_plain,
               provenance_text(tables)]
    notes = list(tables.notes)
    if not carries(pts, "sigma"):
        reason = (f"no row of model {model_id} carries sigma (its kind and method do not compute transport, "
                  "or it has no rows)")
        fig, ax = not_drawn_figure(f"{info.title}: transport along lines of fixed $\\mu/T$", reason)
        return TransportFigure(fig, {"not drawn": ax}, not_drawn=reason,
                               caption="; ".join(caption + ["not drawn: " + reason] + notes) + ".")
    fig = new_figure((10.4, 6.8), left=0.8, right=0.2, bottom=0.6, top=0.75, wspace=0.33, hspace=0.35)
    grid_axes = fig.subplots(2, 2)
    out = TransportFigure(fig, dict(zip(QUANTITIES, grid_axes.ravel())))
    legend_ax = grid_axes.ravel()[3]
    legend_ax.axis("off")
    title(fig, f"{info.title}: transport of the dominant branch along lines of fixed $\\mu/T$\n{info.unit_note}")
    labels = _labels(d)
    for q, ax in out.axes.items():
        ax.set_xlabel(f"temperature T [{info.unit}]")
        ax.set_ylabel(labels[q] + " (dimensionless)")

    def done():
        out.caption = "; ".join(caption + notes) + "."
        return out

    lines = line_ratios(tables, model_id, pts)
    out.lines = lines
    out.curves = transport_lines(pts, lines.ratios, d)
    caption += [lines_text(lines), INTERP_TEXT]
    all_T = pts["T"].to_numpy(float)
    log_T = log_T_axis(all_T[(all_T > 0) & drawable(all_T)])
    for q, ax in out.axes.items():
        if log_T:
            ax.set_xscale("log")
        for i, (r, line) in enumerate(out.curves[q].items()):
            draw_line(ax, line, SERIES[i % len(SERIES)], ratio_label(r, lines, i))
        if lines.critical_line is not None:
            mark_critical(ax, lines, SERIES[lines.critical_line % len(SERIES)], info.unit)
        ys = np.concatenate([c.y for c in out.curves[q].values()]) if out.curves[q] else np.zeros(0)
        if not len(ys):
            no_data(ax, "no ok dominant row with a value on these lines")
        elif log_T:
            T = np.concatenate([c.T for c in out.curves[q].values()])
            plain_log_ticks(ax.xaxis, float(T.min()), float(T.max()))
    ax = out.axes["eta_over_s"]
    ax.axhline(ETA_OVER_S, color=OKABE_ITO["black"], ls="--", lw=1.0,
               label="$\\eta/s = 1/(4\\pi)$ (two-derivative gravity;\nKovtun, Son & Starinets 2005)")
    eta = np.concatenate([c.y for c in out.curves["eta_over_s"].values()])
    if len(eta):
        lo, hi = float(eta.min()), float(eta.max())
        span = max(0.05 * ETA_OVER_S, 2 * (hi - lo))
        ax.set_ylim(min(lo, ETA_OVER_S) - span, max(hi, ETA_OVER_S) + span)
        ax.ticklabel_format(axis="y", useOffset=False, style="plain")
        if np.allclose(eta, ETA_OVER_S, rtol=1e-12, atol=0):
            caption.append("eta/s = 1/(4 pi) at every drawn value (to 1e-12)")
        else:
            caption.append(f"eta/s from {lo:.6g} to {hi:.6g} (1/(4 pi) = {ETA_OVER_S:.6g} dashed)")
    else:
        caption.append("no eta/s value on these lines")
    counts = {q: sum(len(c.T) for c in out.curves[q].values()) for q in QUANTITIES}
    n_interp = sum(int(c.interpolated.sum()) for c in out.curves["sigma_hat"].values())
    caption.append("values: " + ", ".join(f"{q} {n}" for q, n in counts.items())
                   + f" ({n_interp} of the {sigma_name(d)} values interpolated)")
    caption.append("error bars: the interpolation error estimate alone (the tables carry no error bound for sigma, "
                   "D_charge, eta/s)")
    empty = [f"{r:.4g}" for r, c in out.curves["sigma_hat"].items() if not len(c.T)]
    if empty:
        notes.append("lines without a sigma value on this grid: mu/T = " + ", ".join(empty))
    if not counts["sigma_hat"]:
        notes.append(f"{count_text(0, 'value')} of sigma on these lines: nothing drawn")
    handles, labs = [], []
    for q in ("sigma_hat", "eta_over_s"):
        h, lab = out.axes[q].get_legend_handles_labels()
        for hh, ll in zip(h, lab):
            if ll not in labs:
                handles.append(hh)
                labs.append(ll)
    grid_marker = out.axes["sigma_hat"].plot([], [], "o", color=OKABE_ITO["black"], ms=3.5, ls="")[0]
    interp_marker = out.axes["sigma_hat"].plot([], [], "o", color=OKABE_ITO["black"], mfc="white", ms=3.5, ls="")[0]
    handles.append(grid_marker)
    labs.append("grid row")
    if n_interp:
        handles.append(interp_marker)
        labs.append("interpolated in $\\mu$ at the grid T\n(cubic, 4 ok grid points of one phase)")
    legend_ax.legend(handles, labs, loc="center", frameon=False)
    return done()
