"""Convergence map of a scan: ``error_estimate`` and ``P_mismatch`` over each model's grid.

Both are relative (dimensionless): ``error_estimate`` is the largest relative change of ``s, rho,
epsilon, P`` when the solve is repeated with 100x tighter tolerances, ``P_mismatch`` is
``|P - P_check| / |P|`` (two routes to the pressure; a first-law check). At each grid point the
worst branch is shown, on one logarithmic colour scale shared by all panels; values at or below
``FLOOR`` (exact zeros of closed forms included) are drawn at ``FLOOR``. The solver's acceptance
threshold (``accept_error``) is marked on the colour bar. Failed points (no value) and points where
some branch did not converge are marked. The colour scale spans the drawable values
(:func:`.data.drawable`); a value that is NaN, infinite or beyond it leaves its cell blank and is
counted in the caption.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from matplotlib.colors import LogNorm
from matplotlib.lines import Line2D

from .data import DRAW_MAX, ScanTables, count_text, drawable, log_T_axis, model_info, provenance_text
from .raster import nearest_raster
from .style import BAD_MARKERS, FAILED_STATUSES, new_figure, no_data, plain_log_ticks, title

FLOOR = 1e-16
COLUMNS = (("error_estimate", "error_estimate"), ("P_mismatch", "P_mismatch"))


@dataclass
class ConvergenceFigure:
    """The figure; ``panels[(model_id, column)] = (axes, per-point table)``; marked failed points;
    the colour norm and the caption."""

    fig: object
    panels: dict = field(default_factory=dict)
    marked: dict = field(default_factory=dict)
    norm: object = None
    caption: str = ""


def per_point(points: pd.DataFrame, model_id: str) -> pd.DataFrame:
    """Worst value of each column over the branches at each grid point, and the point's status.
    A NaN or infinite value counts as the worst (it is not drawn, see the module docstring)."""
    empty = pd.DataFrame(columns=["T", "mu", "status", *[c for c, _ in COLUMNS]])
    if not len(points) or not {"model_id", "T", "mu", "status"} <= set(points.columns):
        return empty
    p = points[(points["model_id"] == model_id) & drawable(points["T"]) & drawable(points["mu"])]
    if not len(p):
        return empty
    p = p.assign(**{c: (p[c].to_numpy(float) if c in p else np.nan) for c, _ in COLUMNS})
    # NaN where a value exists but is not finite or drawable would hide it behind max(): mark as inf
    p = p.assign(**{c: np.where(p[c].notna() & ~drawable(p[c]), np.inf, p[c]) for c, _ in COLUMNS})
    p = p.assign(_ok=(p["status"] == "ok").astype(int), _failed=p["status"].isin(FAILED_STATUSES).astype(int))
    agg = p.groupby(["T", "mu"], sort=True).agg(
        **{c: (c, "max") for c, _ in COLUMNS}, n_ok=("_ok", "sum"), n_failed=("_failed", "sum"),
        n=("status", "size")).reset_index()
    agg["status"] = np.where(agg["n_failed"] == agg["n"], "failed",
                             np.where(agg["n_ok"] == agg["n"], "ok", "unconverged"))
    return agg


def plot_convergence(tables: ScanTables, models: list[tuple[str, str]]) -> ConvergenceFigure:
    """Draw the convergence map of every model of the scan (see the module docstring)."""
    n = max(1, len(models))
    fig = new_figure((10.0, 2.8 * n + 1.6), left=0.8, right=1.45, bottom=0.9, top=1.0, wspace=0.3,
                     hspace=0.55 if n > 1 else None)
    axes = np.atleast_2d(fig.subplots(n, 2, squeeze=False))
    out = ConvergenceFigure(fig)
    pts = tables.points
    vals = np.concatenate([pts[c].to_numpy(float) for c, _ in COLUMNS if c in pts]) if len(pts) else np.array([])
    shown = vals[drawable(vals, log=True)]
    vmax = max(float(shown.max()) if len(shown) else FLOOR * 10, FLOOR * 10)
    accept = pts["accept_error"].to_numpy(float) if "accept_error" in pts else np.array([])
    accept = np.unique(accept[drawable(accept, log=True)])
    vmax = min(max(vmax, *[float(a) for a in accept], FLOOR * 10), DRAW_MAX)
    norm = LogNorm(vmin=FLOOR, vmax=vmax * 1.5)
    out.norm = norm
    title(fig, f"scan '{tables.scan}': convergence of every grid point (worst branch at each point)\n"
                 "left: error_estimate (relative change at 100x tighter tolerances); "
                 "right: P_mismatch = |P - P_check|/|P|")
    notes = list(tables.notes)
    hidden = int(np.sum(~np.isnan(vals) & ~drawable(vals)))
    if hidden:
        notes.append(f"{count_text(hidden, 'value')} infinite or beyond {DRAW_MAX:g} not drawn (blank cells)")
    mesh = None
    for r, (mid, kind) in enumerate(models):
        info = model_info(tables, mid, kind)
        pp = per_point(pts, mid)
        for c, (col, text) in enumerate(COLUMNS):
            ax = axes[r, c]
            out.panels[(mid, col)] = (ax, pp)
            ax.set_title(f"{mid}: {text}")
            ax.set_xlabel(rf"$\mu$ [{info.unit}]")
            ax.set_ylabel(f"T [{info.unit}]")
            if not len(pp):
                no_data(ax, "no grid points")
                continue
            log_T = log_T_axis(pp["T"])
            if log_T:
                ax.set_yscale("log")
                plain_log_ticks(ax.yaxis, float(pp["T"].min()), float(pp["T"].max()))
            mu_e, T_e, idx = nearest_raster(pp["mu"].to_numpy(float), pp["T"].to_numpy(float), log_T, n=160)
            v = pp[col].to_numpy(float)
            v = np.where(np.isfinite(v) & (v <= DRAW_MAX), np.clip(v, FLOOR, None), np.nan)
            img = np.where(idx >= 0, v[np.clip(idx, 0, None)], np.nan)
            mesh = ax.pcolormesh(mu_e, T_e, np.ma.masked_invalid(img), norm=norm, cmap="cividis",
                                 rasterized=True, shading="flat")
            if (pp[col].fillna(0) == 0).all() and pp[col].notna().any():
                ax.text(0.02, 0.95, "all values exactly 0", transform=ax.transAxes, va="top", color="white",
                        fontsize=8)
            for key, (marker, face, edge, _) in BAD_MARKERS.items():
                sel = pp[pp["status"] == key]
                out.marked[(mid, key)] = list(zip(sel["mu"].astype(float), sel["T"].astype(float)))
                if len(sel):
                    ax.plot(sel["mu"], sel["T"], ls="", marker=marker, ms=9, mfc=face if face != "none" else "none",
                            mec="white" if key == "failed" else edge, mew=1.6, color=edge, clip_on=False, zorder=5)
            ax.set_xlim(mu_e[0], mu_e[-1])
            ax.set_ylim(T_e[0], T_e[-1])
    if mesh is not None:
        W, _ = fig.get_size_inches()
        top, bottom = axes[0, -1].get_position().y1, axes[-1, -1].get_position().y0
        cax = fig.add_axes([1 - 1.3 / W, bottom, 0.18 / W, top - bottom])
        cb = fig.colorbar(mesh, cax=cax)
        acc = ", ".join(f"{float(a):g}" for a in accept)
        cb.set_label(f"relative value (values <= {FLOOR:g}, exact 0 included, drawn at {FLOOR:g})"
                     + (f"\nwhite line: accept_error = {acc}" if acc else ""))
        for a in accept:
            cb.ax.axhline(float(a), color="white", lw=2.0)
    counts = {k: sum(len(v) for (_, kk), v in out.marked.items() if kk == k) for k in BAD_MARKERS}
    handles = [Line2D([], [], ls="", marker=m, ms=8, mfc=f if f != "none" else "none", mec=e, mew=1.6,
                      color=e, label=f"grid point {t} ({counts[k]} in this scan)")
               for k, (m, f, e, t) in BAD_MARKERS.items()]
    fig.legend(handles=handles, loc="lower center", ncols=2, frameon=False)
    out.caption = "; ".join([f"Convergence map of scan '{tables.scan}': per model and grid point the worst "
                             "branch's error_estimate and P_mismatch on one logarithmic colour scale, "
                             f"values <= {FLOOR:g} drawn at {FLOOR:g}", provenance_text(tables), *notes]) + "."
    return out
