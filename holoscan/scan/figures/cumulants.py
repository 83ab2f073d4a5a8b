"""The kurtosis ratio ``T^2 chi4/chi2`` of the dominant branch against T, along lines of fixed mu/T.

``chi2 = d rho/d mu`` and ``chi4 = d^3 rho/d mu^3`` at fixed T (points table, units ``E^(d-2)`` and
``E^(d-4)``), so ``T^2 chi4/chi2`` is a pure number (``T^2`` times the table's ``kurtosis_ratio``);
for a conformal model it depends on ``mu/T`` alone, so it is constant along each line. The lines,
the values along them (grid rows, or cubic interpolation in ``mu`` at each grid T) and the error
bars are those of :mod:`.fixed_ratio`; the bound on a row's value is
``T^2 (chi4_err + |chi4| error_estimate)/|chi2|`` (``chi4_err`` the table's absolute bound on
``chi4``, ``error_estimate`` its relative bound on ``chi2``), not known where ``chi4_err`` is null.
A located critical endpoint's ``T_c`` is marked (dashed) on the line through it.

Drawn only for a model some row of which carries ``chi4`` (the kinds and methods that compute it;
the others leave it null): otherwise the file says that the figure is not drawn and why, and
``figures.json`` lists it under ``not_drawn``. The y axis is symmetric-logarithmic when the values
span more than ``SYMLOG_SPAN`` times their typical size (near a critical endpoint chi4/chi2 grows
without bound).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .data import ScanTables, count_text, drawable, grid_text, log_T_axis, model_info, provenance_text
from .fixed_ratio import (
    INTERP_SAFETY,
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

QUANTITY = "kurtosis"
#: symmetric-log y axis when max |y| exceeds this many times the 75th percentile of |y|
SYMLOG_SPAN = 50.0


@dataclass
class KurtosisFigure:
    """The figure, its axes, the lines chosen (:class:`.fixed_ratio.Lines`), the values along each
    ``curves[ratio]`` (:class:`.fixed_ratio.Line`), ``not_drawn`` (the reason, when the model's rows
    carry no chi4) and the caption."""

    fig: object
    ax: object
    lines: Lines | None = None
    curves: dict = field(default_factory=dict)
    not_drawn: str | None = None
    caption: str = ""


def kurtosis_value(rows: pd.DataFrame) -> np.ndarray:
    """``T^2 chi4/chi2`` of each row (NaN where a column is missing)."""
    with np.errstate(all="ignore"):
        return column(rows, "T") ** 2 * column(rows, "chi4") / column(rows, "chi2")


def kurtosis_bound(rows: pd.DataFrame) -> np.ndarray:
    """Bound on :func:`kurtosis_value` of each row: ``T^2 (chi4_err + |chi4| error_estimate)/|chi2|``
    (first order in the errors; NaN where ``chi4_err`` or ``error_estimate`` is null)."""
    with np.errstate(all="ignore"):
        return (column(rows, "T") ** 2 * (np.abs(column(rows, "chi4_err")) + np.abs(column(rows, "chi4"))
                                        * np.abs(column(rows, "error_estimate"))) / np.abs(column(rows, "chi2")))


def kurtosis_lines(rows: pd.DataFrame, ratios) -> dict:
    """``{ratio: Line}`` of ``T^2 chi4/chi2`` of the dominant ok rows along each ``mu/T = ratio``
    (:func:`.fixed_ratio.along`); ``rows``: one model's rows of the points table, all statuses."""
    grid = dominant_grid(rows, {QUANTITY: (kurtosis_value, kurtosis_bound)})
    return {float(r): along(grid, QUANTITY, r) for r in ratios}


def plot_kurtosis(tables: ScanTables, model_id: str, kind: str) -> KurtosisFigure:
    """Draw ``T^2 chi4/chi2`` against T along lines of fixed mu/T (module docstring)."""
    info = model_info(tables, model_id, kind)
    pts = tables.rows("points", model_id)
    caption = [f"Kurtosis ratio T^2 chi4/chi2 (chi_n = d^(n-1) rho/d mu^(n-1) at fixed T) of the dominant ok branch "
               f"of model {info.model_id} ({info.kind}, d = {info.d}) against T along lines of fixed mu/T",
               grid_text(pts), info.unit_plain, provenance_text(tables)]
    notes = list(tables.notes)
    if not carries(pts, "chi4"):
        reason = (f"no row of model {model_id} carries chi4 (its kind and method do not compute the higher "
                  "cumulants, or it has no rows)")
        fig, ax = not_drawn_figure(f"{info.title}: $T^2\\chi_4/\\chi_2$ along lines of fixed $\\mu/T$", reason)
        return KurtosisFigure(fig, ax, not_drawn=reason,
                              caption="; ".join(caption + ["not drawn: " + reason] + notes) + ".")
    fig = new_figure((9.6, 5.0), left=0.8, right=3.6, bottom=0.6, top=0.65)
    ax = fig.add_subplot()
    out = KurtosisFigure(fig, ax)
    title(fig, f"{info.title}: $T^2\\chi_4/\\chi_2$ of the dominant branch along lines of fixed $\\mu/T$\n"
               f"{info.unit_note}")
    ax.set_xlabel(f"temperature T [{info.unit}]")
    ax.set_ylabel(r"$T^2\chi_4/\chi_2$ (dimensionless)")

    def done():
        out.caption = "; ".join(caption + notes) + "."
        return out

    lines = line_ratios(tables, model_id, pts)
    out.lines = lines
    out.curves = kurtosis_lines(pts, lines.ratios)
    caption.append(lines_text(lines))
    caption.append(INTERP_TEXT)
    all_T = pts["T"].to_numpy(float)
    log_T = log_T_axis(all_T[(all_T > 0) & drawable(all_T)])
    if log_T:
        ax.set_xscale("log")
    for i, (r, line) in enumerate(out.curves.items()):
        draw_line(ax, line, SERIES[i % len(SERIES)], ratio_label(r, lines, i))
    if lines.critical_line is not None:
        mark_critical(ax, lines, SERIES[lines.critical_line % len(SERIES)], info.unit)
    ys = np.concatenate([c.y for c in out.curves.values()]) if out.curves else np.zeros(0)
    n_interp = sum(int(c.interpolated.sum()) for c in out.curves.values())
    unknown = sum(int(np.isnan(c.row_err).sum()) for c in out.curves.values())
    empty = [f"{r:.4g}" for r, c in out.curves.items() if not len(c.T)]
    if not len(ys):
        no_data(ax, "no ok dominant row with chi4 and chi2 on these lines")
        notes.append("no ok dominant row with a drawable T^2 chi4/chi2 on these lines: nothing drawn")
        ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False)
        return done()
    caption.append(f"{count_text(len(ys), 'value')}, {n_interp} interpolated")
    caption.append("error bars: chi4_err and chi2's error_estimate carried through the interpolation, plus the "
                   f"interpolation error estimate ({INTERP_SAFETY:g} x the largest fourth divided difference of "
                   "the five-point windows around the cubic's points times its node polynomial, plus round-off)"
                   + (f"; {count_text(unknown, 'value')} without chi4_err: bar from the interpolation alone"
                      if unknown else ""))
    if empty:
        notes.append("lines without a value on this grid: mu/T = " + ", ".join(empty))
    a = np.abs(ys)
    typical = float(np.percentile(a, 75))
    if typical > 0 and a.max() > SYMLOG_SPAN * typical:
        linthresh = 10.0 ** math.ceil(math.log10(typical))  # a power of ten: decade ticks clear of 0
        ax.set_yscale("symlog", linthresh=linthresh)
        caption.append(f"y axis symmetric-logarithmic, linear within +-{linthresh:g}")
    if log_T:
        T = np.concatenate([c.T for c in out.curves.values()])
        plain_log_ticks(ax.xaxis, float(T.min()), float(T.max()))
    ax.axhline(0.0, color="0.6", lw=0.7, zorder=0)
    ax.plot([], [], "o", color=OKABE_ITO["black"], ms=3.5, ls="", label="grid row")
    if n_interp:
        ax.plot([], [], "o", color=OKABE_ITO["black"], mfc="white", ms=3.5, ls="",
                label="interpolated in $\\mu$ at the grid T\n(cubic, 4 ok grid points of one phase)")
    ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False)
    return done()
