"""Phase diagram of one model in the (mu, T) plane.

Shading: the dominant phase at each grid point (``phases.parquet``), each grid point filling its
own cell (see :mod:`.raster`). Lines (``transitions.parquet``): first-order solid, second-order
dashed, crossover dotted, instability loci (spinodals, folds of a conformal family) thin; line
points are joined in order of mu on each side of ``mu = 0``, and first-order lines and spinodals
are drawn to the model's critical point, where they end. Critical points carry their error bars
(``T_err``, ``mu_err``). Grid points that failed, and points where some branch did not converge,
are marked. Axes: ``mu`` and ``T`` in the model's energy unit (see :class:`.data.ModelInfo`).
"""
from __future__ import annotations

import json
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from matplotlib.colors import BoundaryNorm, ListedColormap
from matplotlib.lines import Line2D
from matplotlib.patches import Patch

from .data import ScanTables, grid_text, log_T_axis, model_info
from .raster import nearest_raster
from .style import (BAD_MARKERS, FAILED_STATUSES, LINE_STYLES, OKABE_ITO, PHASE_COLOURS,
                    UNCONVERGED_STATUSES, new_figure, no_data, plain_log_ticks, title)

_EXTRA_COLOURS = ["#BFD9A6", "#C9B3E0", "#F2E08C", "#9FC5E8"]


@dataclass
class PhaseDiagram:
    """The drawn figure and what is on it (for checks): line artists by transition type, the
    shaded raster (phase index per pixel, -1 outside) with its pixel edges and phase names, and
    the (mu, T) of the marked failed / unconverged grid points."""

    fig: object
    ax: object
    lines: dict = field(default_factory=dict)
    phase_names: list = field(default_factory=list)
    raster: np.ndarray | None = None
    mu_edges: np.ndarray | None = None
    T_edges: np.ndarray | None = None
    marked: dict = field(default_factory=dict)
    critical: list = field(default_factory=list)


def _grid_phases(tables: ScanTables, model_id: str) -> pd.DataFrame:
    """One row per grid point: T, mu, phase (dominant, or 'none'), status."""
    ph = tables.phases
    if len(ph) and (ph["model_id"] == model_id).any():
        ph = ph[ph["model_id"] == model_id]
        phase = np.where(ph["dominant_branch"] >= 0, ph["dominant_phase"].fillna("none"), "none")
        return pd.DataFrame({"T": ph["T"].to_numpy(), "mu": ph["mu"].to_numpy(), "phase": phase,
                             "status": ph["status"].to_numpy()})
    pts = tables.points[tables.points["model_id"] == model_id] if len(tables.points) else tables.points
    if not len(pts):
        return pd.DataFrame(columns=["T", "mu", "phase", "status"])
    rows = []
    for (T, mu), g in pts.groupby(["T", "mu"], sort=True):
        dom = g[g["dominant"].fillna(False).astype(bool)]
        statuses = set(g["status"])
        status = "ok" if statuses == {"ok"} else ("incomplete" if "ok" in statuses else sorted(statuses)[0])
        rows.append({"T": T, "mu": mu, "phase": dom["phase"].iloc[0] if len(dom) else "none", "status": status})
    return pd.DataFrame(rows)


def _colour(name: str, i: int) -> str:
    return PHASE_COLOURS.get(name, _EXTRA_COLOURS[i % len(_EXTRA_COLOURS)])


def _branch_name(s) -> str:
    """``extra.branch`` of a line point (which spinodal), or ''."""
    try:
        return str(json.loads(s).get("branch", "")) if s else ""
    except (TypeError, ValueError, AttributeError):
        return ""


def _segments(rows: pd.DataFrame, cp: pd.DataFrame, to_cp: bool):
    """(mu, T) arrays of the pieces of one line type: per side of mu = 0 and per branch label,
    ordered by mu; with ``to_cp`` the critical point on the same side is added at the end nearest it."""
    out = []
    if not len(rows):
        return out
    branch = rows["extra"].map(_branch_name) if "extra" in rows.columns else pd.Series("", index=rows.index)
    for sign in (1, -1):
        if not (np.sign(rows["mu"]) == sign).any():
            continue
        side = rows[(np.sign(rows["mu"]) == sign) | (rows["mu"] == 0)]
        for _, g in side.groupby(branch.loc[side.index], sort=True):
            g = g.sort_values(["mu", "T"])
            mu, T = g["mu"].to_numpy(float), g["T"].to_numpy(float)
            c = cp[np.sign(cp["mu"]) == sign] if (to_cp and len(cp)) else cp.iloc[0:0]
            if len(c):
                cm, cT = float(c["mu"].iloc[0]), float(c["T"].iloc[0])
                mu = np.concatenate([[cm], mu] if sign > 0 else [mu, [cm]])
                T = np.concatenate([[cT], T] if sign > 0 else [T, [cT]])
            out.append((mu, T))
    return out


def plot_phase_diagram(tables: ScanTables, model_id: str, kind: str) -> PhaseDiagram:
    """Draw the phase diagram of one model (see the module docstring); the caller saves it."""
    info = model_info(tables, model_id, kind)
    grid = _grid_phases(tables, model_id)
    fig = new_figure((8.6, 5.0), left=0.8, right=3.5, bottom=0.6, top=0.6)
    ax = fig.add_subplot()
    out = PhaseDiagram(fig, ax)
    pts = tables.points[tables.points["model_id"] == model_id] if len(tables.points) else tables.points
    title(fig, f"{info.title}: dominant phase and located lines\n{grid_text(pts)}; {info.unit_note}")
    ax.set_xlabel(rf"chemical potential $\mu$ [{info.unit}]")
    ax.set_ylabel(f"temperature T [{info.unit}]")
    if not len(grid):
        no_data(ax, "no grid points of this model in the tables")
        return out
    log_T = log_T_axis(grid["T"])
    if log_T:
        ax.set_yscale("log")
        plain_log_ticks(ax.yaxis, float(grid["T"].min()), float(grid["T"].max()))
    handles = []

    names = list(dict.fromkeys(sorted(grid["phase"].astype(str), key=lambda p: (p == "none", p))))
    code = grid["phase"].astype(str).map({n: i for i, n in enumerate(names)}).to_numpy()
    mu_e, T_e, idx = nearest_raster(grid["mu"].to_numpy(float), grid["T"].to_numpy(float), log_T)
    img = np.where(idx >= 0, code[np.clip(idx, 0, None)], -1)
    cmap = ListedColormap([_colour(n, i) for i, n in enumerate(names)])
    ax.pcolormesh(mu_e, T_e, np.ma.masked_less(img, 0), cmap=cmap,
                  norm=BoundaryNorm(np.arange(len(names) + 1) - 0.5, len(names)), rasterized=True,
                  shading="flat")
    out.phase_names, out.raster, out.mu_edges, out.T_edges = names, img, mu_e, T_e
    handles.append(Patch(facecolor="none", edgecolor="none", label="shading: dominant phase at the\nnearest grid point"))
    for i, n in enumerate(names):
        text = {"none": "no locally stable branch", "unique": "unique (the only branch)"}.get(n, n)
        handles.append(Patch(facecolor=_colour(n, i), edgecolor="0.5", label=text))
    if len(grid) <= 600:
        ax.plot(grid["mu"], grid["T"], ".", ms=2.5, color="0.35", zorder=2)
        handles.append(Line2D([], [], ls="", marker=".", ms=4, color="0.35", label="grid point"))

    tr = tables.transitions
    tr = tr[tr["model_id"] == model_id] if len(tr) else tr
    cp = tables.critical
    cp = cp[cp["model_id"] == model_id] if len(cp) else cp
    cp_ok = cp[cp["status"] == "ok"] if len(cp) else cp
    for typ, (colour, ls, lw, text) in LINE_STYLES.items():
        rows = tr[tr["type"] == typ] if len(tr) else tr
        ok = rows[rows["status"] == "ok"] if len(rows) else rows
        drawn = []
        for mu, T in _segments(ok, cp_ok, to_cp=typ in ("first-order", "instability")):
            marker = "o" if len(mu) <= 30 else None
            (ln,) = ax.plot(mu, T, ls=ls, lw=lw, color=colour, marker=marker, ms=3 if typ != "instability" else 2,
                            zorder=4 if typ != "instability" else 3)
            drawn.append(ln)
        if drawn:
            out.lines[typ] = drawn
            x = np.unique(np.round(np.abs(ok["mu_over_T"].dropna().to_numpy(float)), 6))
            if len(x) == 1 and typ != "crossover":
                text = f"{text}:\n$|\\mu|/T$ = {x[0]:.6g}"
            handles.append(Line2D([], [], ls=ls, lw=lw, color=colour, label=text))
        bad = rows[rows["status"] != "ok"] if len(rows) else rows
        if len(bad):
            ax.plot(bad["mu"], bad["T"], ls="", marker="x", ms=7, mew=1.8, color=colour, zorder=6)
            handles.append(Line2D([], [], ls="", marker="x", ms=7, mew=1.8, color=colour,
                                  label=f"{typ} point not located (status not ok)"))
    if len(cp):
        for _, c in cp.iterrows():
            good = c["status"] == "ok"
            eb = ax.errorbar([c["mu"]], [c["T"]], xerr=[[abs(c["mu_err"] or 0)]], yerr=[[abs(c["T_err"] or 0)]],
                             fmt="*" if good else "x", ms=13 if good else 9, mfc=OKABE_ITO["yellow"] if good else "none",
                             mec="black", ecolor="black", capsize=3, zorder=7)
            out.critical.append((float(c["mu"]), float(c["T"]), eb))
        handles.append(Line2D([], [], ls="", marker="*", ms=12, mfc=OKABE_ITO["yellow"], mec="black",
                              label="critical point (error bars: T_err, mu_err)"))
    if not len(tr) and not len(cp):
        handles.append(Patch(facecolor="none", edgecolor="none", label="no transition lines located\nfor this model"))

    for key, statuses in (("failed", FAILED_STATUSES), ("unconverged", UNCONVERGED_STATUSES)):
        marker, face, edge, text = BAD_MARKERS[key]
        sel = grid[grid["status"].isin(statuses)]
        out.marked[key] = list(zip(sel["mu"].astype(float), sel["T"].astype(float)))
        if len(sel):
            ax.plot(sel["mu"], sel["T"], ls="", marker=marker, ms=9, mfc=face, mec=edge, mew=1.6, zorder=8,
                    clip_on=False)
            handles.append(Line2D([], [], ls="", marker=marker, ms=8, mfc=face, mec=edge, mew=1.6,
                                  label=f"grid point {text}"))
    ax.set_xlim(mu_e[0], mu_e[-1])
    ax.set_ylim(T_e[0], T_e[-1])
    ax.legend(handles=handles, loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False)
    return out
