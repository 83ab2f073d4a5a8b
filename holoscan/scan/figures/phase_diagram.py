"""Phase diagram of one model in the (mu, T) plane.

Shading: a continuous observable of the dominant branch, the reduced entropy density
``s/T^(d-1)`` (``s_hat`` of the points table; dimensionless), at each grid point, each grid point
filling its own cell (see :mod:`.raster`); a logarithmic colour scale when it spans more than a
factor of 20. A first-order line, where the dominant branch jumps, shows as a step of the shading;
a second-order line or a crossover as a change of its slope. Cells without a dominant ``ok``
branch are left white. The dominant phase's name is shown by the marker of each grid point
(up to 600 points).

Isentropes (``isentropes.parquet``, rows ``ok`` or ``coexistence``), when the model has any: fine
dark dotted lines, their ``s/rho`` values in the legend; where a path follows a first-order line
(coexistence rows with a phase fraction), that segment is drawn as a broad sky-blue band under the line.

Lines on top (``transitions.parquet``): first-order solid, second-order dashed, crossover dotted,
instability loci (spinodals, folds of a conformal family) thin; line points are joined in order of
mu on each side of ``mu = 0``, and first-order lines and spinodals are drawn to the model's critical
point, where they end. Critical points carry their error bars (``T_err``, ``mu_err``). Grid points
that failed, and points where some branch did not converge, are marked. Axes: ``mu`` and ``T`` in
the model's energy unit (see :class:`.data.ModelInfo`). Values that are not drawable
(:func:`.data.drawable`) are left out and counted in the caption.
"""
from __future__ import annotations

import json
import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from matplotlib.colors import LogNorm, Normalize
from matplotlib.lines import Line2D
from matplotlib.patches import Patch

from .data import ScanTables, count_text, drawable, grid_text, log_T_axis, model_info, provenance_text
from .raster import nearest_raster
from .style import (
    BAD_MARKERS,
    FAILED_STATUSES,
    LINE_STYLES,
    OKABE_ITO,
    UNCONVERGED_STATUSES,
    new_figure,
    no_data,
    plain_log_ticks,
    title,
)

#: marker of the grid points by dominant phase (others cycle through EXTRA_MARKERS)
PHASE_MARKERS = {"unique": ".", "normal": "o", "condensed": "s", "high-entropy": "^", "intermediate": "D",
                 "low-entropy": "v", "none": "x"}
EXTRA_MARKERS = ["P", "*", "h", "<", ">"]
#: colour map of the shading (perceptually uniform, colour-vision-deficiency friendly; common practice)
CMAP = "cividis"
#: a log colour scale when the shaded values span more than this factor
LOG_SPAN = 20.0


@dataclass
class PhaseDiagram:
    """The drawn figure and what is on it (for checks): line artists by transition type, the
    phase raster (phase index per pixel, -1 outside) with its pixel edges and phase names, the
    shaded raster ``values`` (``s_hat`` of the dominant branch per pixel, NaN where none) with its
    norm, the (mu, T) of the marked failed / unconverged grid points, the isentropes' (mu, T) points
    (``isentropes``; ``isentrope_mixed``: those on a first-order line) by value, and the caption."""

    fig: object
    ax: object
    lines: dict = field(default_factory=dict)
    phase_names: list = field(default_factory=list)
    raster: np.ndarray | None = None
    values: np.ndarray | None = None
    norm: object = None
    mu_edges: np.ndarray | None = None
    T_edges: np.ndarray | None = None
    marked: dict = field(default_factory=dict)
    critical: list = field(default_factory=list)
    isentropes: dict = field(default_factory=dict)
    isentrope_mixed: dict = field(default_factory=dict)
    caption: str = ""


def _status_of(statuses) -> str:
    st = set(statuses)
    return "ok" if st == {"ok"} else ("incomplete" if "ok" in st else sorted(map(str, st))[0])


def _grid_phases(tables: ScanTables, model_id: str) -> pd.DataFrame:
    """One row per grid point: T, mu, phase (dominant, or 'none'), status, and ``value``: s_hat of
    the dominant branch when it is ``ok`` (else NaN)."""
    cols = ["T", "mu", "phase", "status", "value"]
    ph = tables.rows("phases", model_id)
    pts = tables.rows("points", model_id)
    if len(ph) and {"T", "mu", "dominant_branch"} <= set(ph.columns):
        dom = ph["dominant_branch"].to_numpy(float)
        phase = ph["dominant_phase"].fillna("none").astype(str) if "dominant_phase" in ph else "none"
        out = pd.DataFrame({"T": ph["T"].to_numpy(float), "mu": ph["mu"].to_numpy(float),
                            "phase": np.where(dom >= 0, phase, "none"),
                            "status": ph["status"].astype(str).to_numpy() if "status" in ph else "ok",
                            "branch": dom})
        if len(pts) and {"T", "mu", "branch", "s_hat", "status"} <= set(pts.columns):
            ok = pts[pts["status"] == "ok"][["T", "mu", "branch", "s_hat"]].astype(float)
            ok = ok.drop_duplicates(["T", "mu", "branch"])
            out = out.merge(ok, on=["T", "mu", "branch"], how="left")
            out["value"] = out["s_hat"]
        else:
            out["value"] = np.nan
        return out[cols]
    if not len(pts) or not {"T", "mu", "status"} <= set(pts.columns):
        return pd.DataFrame(columns=cols)
    rows = []
    for (T, mu), g in pts.groupby(["T", "mu"], sort=True):
        dom = g[g["dominant"].fillna(False).astype(bool)] if "dominant" in g else g.iloc[0:0]
        value = math.nan
        if len(dom) and "s_hat" in dom and str(dom["status"].iloc[0]) == "ok":
            value = float(dom["s_hat"].iloc[0])
        phase = str(dom["phase"].iloc[0]) if len(dom) and "phase" in dom and dom["phase"].iloc[0] else "none"
        rows.append({"T": T, "mu": mu, "phase": phase if len(dom) else "none", "status": _status_of(g["status"]),
                     "value": value})
    return pd.DataFrame(rows, columns=cols)


def _marker(name: str, i: int) -> str:
    return PHASE_MARKERS.get(name, EXTRA_MARKERS[i % len(EXTRA_MARKERS)])


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


def _placed(df: pd.DataFrame, log_T: bool) -> pd.DataFrame:
    """Rows whose T and mu can be placed on the axes."""
    if not len(df) or not {"T", "mu"} <= set(df.columns):
        return df.iloc[0:0] if len(df.columns) else pd.DataFrame(columns=["T", "mu"])
    return df[drawable(df["T"], log=log_T) & drawable(df["mu"])]


def _err(x) -> float:
    x = float(x) if x is not None else math.nan
    return abs(x) if math.isfinite(x) and abs(x) <= 1e250 else 0.0


def plot_phase_diagram(tables: ScanTables, model_id: str, kind: str) -> PhaseDiagram:
    """Draw the phase diagram of one model (see the module docstring); the caller saves it."""
    info = model_info(tables, model_id, kind)
    d = info.d
    every = _grid_phases(tables, model_id)
    fig = new_figure((10.2, 5.0), left=0.8, right=5.0, bottom=0.6, top=0.6)
    ax = fig.add_subplot()
    out = PhaseDiagram(fig, ax)
    pts = tables.rows("points", model_id)
    shade = rf"$s/T^{{{d - 1}}}$"
    title(fig, f"{info.title}: {shade} of the dominant branch and located lines\n{info.unit_note}")
    ax.set_xlabel(rf"chemical potential $\mu$ [{info.unit}]")
    ax.set_ylabel(f"temperature T [{info.unit}]")
    notes = list(tables.notes)
    log_T = log_T_axis(every["T"]) if len(every) else False
    grid = _placed(every, log_T)
    if len(grid) < len(every):
        notes.append(f"{count_text(len(every) - len(grid), 'grid point')} with T or mu not drawable left out")
    caption = [f"Phase diagram of model {info.model_id} ({info.kind}, d = {d}): s/T^{d - 1} of the dominant "
               "branch (lowest grand potential among the locally stable ok branches) at the nearest grid "
               "point, located transition lines on top", grid_text(pts), info.unit_plain, provenance_text(tables)]
    if not len(grid):
        no_data(ax, "no grid points of this model in the tables")
        out.caption = "; ".join(caption + notes) + "."
        return out
    if log_T:
        ax.set_yscale("log")
        plain_log_ticks(ax.yaxis, float(grid["T"].min()), float(grid["T"].max()))
    handles = []

    # -- shading: s/T^(d-1) of the dominant branch, each grid point's own cell ----------------------
    values = grid["value"].to_numpy(float)
    good = drawable(values)
    if (~good & np.isfinite(values)).any() or (~np.isfinite(values) & grid["value"].notna().to_numpy()).any():
        notes.append(f"{count_text(int((~good & grid['value'].notna().to_numpy()).sum()), 'shaded value')} "
                     "not drawable left white")
    values = np.where(good, values, np.nan)
    names = list(dict.fromkeys(sorted(grid["phase"].astype(str), key=lambda p: (p == "none", p))))
    code = grid["phase"].astype(str).map({n: i for i, n in enumerate(names)}).to_numpy()
    mu_e, T_e, idx = nearest_raster(grid["mu"].to_numpy(float), grid["T"].to_numpy(float), log_T)
    inside = idx >= 0
    img = np.where(inside, code[np.clip(idx, 0, None)], -1)
    vimg = np.where(inside, values[np.clip(idx, 0, None)], np.nan)
    finite = values[np.isfinite(values)]
    if len(finite) and finite.min() > 0 and finite.max() / finite.min() > LOG_SPAN:
        norm = LogNorm(vmin=float(finite.min()), vmax=float(finite.max()))
    elif len(finite):
        lo, hi = float(finite.min()), float(finite.max())
        pad = max(0.01 * abs(lo), 1e-3) if hi == lo else 0.0
        norm = Normalize(vmin=lo - pad, vmax=hi + pad)
    else:
        norm = Normalize(vmin=0.0, vmax=1.0)
    mesh = ax.pcolormesh(mu_e, T_e, np.ma.masked_invalid(vimg), cmap=CMAP, norm=norm, rasterized=True,
                         shading="flat")
    out.phase_names, out.raster, out.values, out.norm = names, img, vimg, norm
    out.mu_edges, out.T_edges = mu_e, T_e
    W = fig.get_figwidth()
    box = ax.get_position()
    cax = fig.add_axes([box.x1 + 0.15 / W, box.y0, 0.15 / W, box.height])
    cb = fig.colorbar(mesh, cax=cax)
    cb.set_label(rf"{shade} of the dominant branch (dimensionless)")
    if not len(finite):
        no_data(ax, "no ok dominant branch with a drawable s/T^(d-1): nothing to shade")
    if (grid["phase"] == "none").any() or (inside & np.isnan(vimg)).any():
        handles.append(Patch(facecolor="white", edgecolor="0.5", label="white: no dominant ok branch"))
    show_points = len(grid) <= 600
    for i, n in enumerate(names):
        sel = grid[grid["phase"] == n]
        text = {"none": "none locally stable", "unique": "unique (one branch)"}.get(n, n)
        if show_points:
            m = _marker(n, i)
            ax.plot(sel["mu"], sel["T"], ls="", marker=m, ms=3.0 if m != "." else 3.5,
                    mfc="none" if m not in ".x" else "0.25", mec="0.25", mew=0.7, color="0.25", zorder=2)
            handles.append(Line2D([], [], ls="", marker=m, ms=5, mfc="none" if m not in ".x" else "0.25", mec="0.25",
                                  color="0.25", label=f"grid point; dominant phase {text}"))
    if not show_points:
        caption.append("dominant phase names: " + ", ".join(names) + " (grid markers omitted above 600 points)")

    # -- lines on top ---------------------------------------------------------------------------------
    tr = _placed(tables.rows("transitions", model_id), log_T)
    cp_all = tables.rows("critical", model_id)
    cp = _placed(cp_all, log_T)
    if len(cp) < len(cp_all):
        notes.append(f"{count_text(len(cp_all) - len(cp), 'critical point')} with T or mu not drawable left out")
    has_status = "status" in cp.columns
    cp_ok = cp[cp["status"] == "ok"] if has_status and len(cp) else cp.iloc[0:0]
    for typ, (colour, ls, lw, text) in LINE_STYLES.items():
        rows = tr[tr["type"] == typ] if len(tr) and "type" in tr else tr.iloc[0:0]
        ok = rows[rows["status"] == "ok"] if len(rows) and "status" in rows else rows.iloc[0:0]
        drawn = []
        for mu, T in _segments(ok, cp_ok, to_cp=typ in ("first-order", "instability")):
            marker = "o" if len(mu) <= 30 else None
            (ln,) = ax.plot(mu, T, ls=ls, lw=lw, color=colour, marker=marker, ms=3 if typ != "instability" else 2,
                            zorder=4 if typ != "instability" else 3)
            drawn.append(ln)
        if drawn:
            out.lines[typ] = drawn
            x = ok["mu_over_T"].to_numpy(float) if "mu_over_T" in ok else np.array([])
            x = np.unique(np.round(np.abs(x[drawable(x)]), 6))
            if len(x) == 1 and typ != "crossover":
                text = f"{text}:\n$|\\mu|/T$ = {x[0]:.6g}"
            handles.append(Line2D([], [], ls=ls, lw=lw, color=colour, label=text))
        bad = rows[rows["status"] != "ok"] if len(rows) and "status" in rows else rows.iloc[0:0]
        if len(bad):
            ax.plot(bad["mu"], bad["T"], ls="", marker="x", ms=7, mew=1.8, color=colour, zorder=6)
            handles.append(Line2D([], [], ls="", marker="x", ms=7, mew=1.8, color=colour,
                                  label=f"{typ} point not located (status not ok)"))
    if len(cp):
        for _, c in cp.iterrows():
            good_cp = has_status and c["status"] == "ok"
            eb = ax.errorbar([c["mu"]], [c["T"]], xerr=[[_err(c.get("mu_err"))]], yerr=[[_err(c.get("T_err"))]],
                             fmt="*" if good_cp else "x", ms=13 if good_cp else 9,
                             mfc=OKABE_ITO["yellow"] if good_cp else "none", mec="black", ecolor="black", capsize=3,
                             zorder=7)
            out.critical.append((float(c["mu"]), float(c["T"]), eb))
        handles.append(Line2D([], [], ls="", marker="*", ms=12, mfc=OKABE_ITO["yellow"], mec="black",
                              label="critical point (error bars: T_err, mu_err)"))
    if not len(tr) and not len(cp):
        handles.append(Patch(facecolor="none", edgecolor="none", label="no transition lines located\nfor this model"))
    iso = tables.rows("isentropes", model_id)
    if len(iso) and {"s_over_rho", "mu", "T", "status"} <= set(iso.columns):
        for v, g in iso[iso["status"].isin(["ok", "coexistence"])].groupby("s_over_rho", sort=True):
            g = g.sort_values("T")
            ax.plot(g["mu"], g["T"], color="0.15", ls=(0, (1, 1.5)), lw=1.1, zorder=6)
            out.isentropes[float(v)] = list(zip(g["mu"].astype(float), g["T"].astype(float)))
            if "fraction_high_entropy" in g:   # the segment on a first-order line: a mixture of the two phases
                on = g[(g["status"] == "coexistence") & g["fraction_high_entropy"].notna()]
                if len(on):
                    ax.plot(on["mu"], on["T"], color=OKABE_ITO["sky"], ls="-", lw=7.0, alpha=0.8, zorder=3.5,
                            solid_capstyle="round")
                    out.isentrope_mixed[float(v)] = list(zip(on["mu"].astype(float), on["T"].astype(float)))
        if out.isentropes:
            handles.append(Line2D([], [], color="0.15", ls=(0, (1, 1.5)), lw=1.1,
                                  label="isentropes s/rho = " + ", ".join(f"{v:g}" for v in out.isentropes)))
        if out.isentrope_mixed:
            handles.append(Line2D([], [], color=OKABE_ITO["sky"], ls="-", lw=7.0, alpha=0.8,
                                  label="isentrope on the first-order line\n(mixture of the coexisting phases)"))

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
    ax.legend(handles=handles, loc="upper left", bbox_to_anchor=(1.0 + 1.25 / box.width / W, 1.0), frameon=False)
    out.caption = "; ".join(caption + notes) + "."
    return out
