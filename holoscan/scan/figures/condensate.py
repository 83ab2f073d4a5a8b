"""The condensate of a charged-scalar model against T/T_c, at several mu.

``<O>`` (``extra.condensate``, dimension ``E^Delta``) is divided by ``T_c^Delta`` with ``T_c`` the
onset temperature at the row's own ``mu`` (``extra.T_c``), so in a conformal model every ``mu``
falls on one curve. Rows: the dominant branch, status ``ok``, ``mu != 0`` (at ``mu = 0``,
``T_c = 0``). Points below ``T_c`` are joined by lines, those above (normal branch, ``<O> = 0``) are
not joined to them. The guide ``C (1 - T/T_c)^(1/2)`` is the mean-field shape of a second-order onset
(common practice, no source), its amplitude ``C`` fitted by least squares to the condensed points
with ``T/T_c >= 0.9`` (or the one nearest ``T_c`` if none is that close). It is a guide, not a fit of
the exponent.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .data import ScanTables, extra_field, grid_text, model_info
from .eos import dominant_ok, pick_mu
from .style import OKABE_ITO, SERIES, new_figure, no_data, title

FIT_FROM = 0.9
T_MAX = 1.6  # normal points beyond this T/T_c are not drawn


@dataclass
class CondensateFigure:
    """The figure, its axes, the curves ``curves[mu] = (T/T_c, <O>/T_c^Delta)`` and the guide's amplitude."""

    fig: object
    ax: object
    curves: dict = field(default_factory=dict)
    amplitude: float | None = None


def mean_field_amplitude(t, y, t_from: float = FIT_FROM) -> tuple[float | None, float | None]:
    """Least-squares ``C`` of ``y = C (1 - t)^(1/2)`` over the points ``t_from <= t < 1`` with y > 0
    (or the one such point nearest ``t = 1`` if none reaches ``t_from``), and the lowest ``t`` used."""
    t, y = np.asarray(t, float), np.asarray(y, float)
    cond = (t < 1) & (y > 0) & np.isfinite(y)
    if not cond.any():
        return None, None
    near = cond & (t >= t_from)
    if not near.any():
        near = cond & (t == t[cond].max())
    w = np.sqrt(1 - t[near])
    return float(np.dot(y[near], w) / np.dot(w, w)), float(t[near].min())


def plot_condensate(tables: ScanTables, model_id: str, kind: str) -> CondensateFigure:
    """Draw ``<O>/T_c^Delta`` against ``T/T_c`` (see the module docstring)."""
    info = model_info(tables, model_id, kind)
    fig = new_figure((8.4, 4.8), left=0.8, right=3.3, bottom=0.6, top=0.65)
    ax = fig.add_subplot()
    out = CondensateFigure(fig, ax)
    pts = tables.points[tables.points["model_id"] == model_id] if len(tables.points) else tables.points
    dl = f"{info.delta:g}" if info.delta is not None else r"\Delta"
    title(fig, f"{info.title}: condensate of the dominant branch, $\\Delta$ = {dl}\n{grid_text(pts)}; "
                 f"{info.unit_note}")
    ax.set_xlabel(r"$T/T_c(\mu)$")
    ax.set_ylabel(rf"$\langle O\rangle / T_c^{{{dl}}}$")
    rows = dominant_ok(tables, model_id)
    rows = rows[rows["mu"] != 0] if len(rows) else rows
    if not len(rows):
        no_data(ax, "no ok dominant rows with mu != 0")
        return out
    rows = rows.assign(T_c=extra_field(rows["extra"], "T_c").to_numpy(),
                       O=extra_field(rows["extra"], "condensate").to_numpy())
    rows = rows[(rows["T_c"] > 0) & np.isfinite(rows["O"])]
    power = info.delta if info.delta is not None else 1.0
    all_t, all_y = [], []
    condensed_mu = rows.loc[rows["T"] < rows["T_c"], "mu"]
    for i, mu in enumerate(pick_mu(condensed_mu if len(condensed_mu) else rows["mu"], 7) if len(rows) else []):
        g = rows[np.isclose(rows["mu"], mu, rtol=0, atol=1e-12)]
        t = (g["T"] / g["T_c"]).to_numpy(float)
        y = (g["O"] / g["T_c"] ** power).to_numpy(float)
        order = np.argsort(t)
        t, y = t[order], y[order]
        keep = t <= T_MAX
        t, y = t[keep], y[keep]
        out.curves[float(mu)] = (t, y)
        all_t.append(t)
        all_y.append(y)
        # the condensed points (t < 1) are joined; the normal ones (t >= 1) are not joined to them
        j = int(np.searchsorted(t, 1.0))
        ax.plot(np.insert(t, j, np.nan), np.insert(y, j, np.nan), "-o", color=SERIES[i % len(SERIES)], ms=4, lw=1.2, label=f"$\\mu$ = {mu:.4g} {info.unit}")
    if not len(condensed_mu):
        no_data(ax, "no condensed point on this grid")
    if not all_t:
        no_data(ax, "no row with an onset temperature T_c > 0")
        return out
    t, y = np.concatenate(all_t), np.concatenate(all_y)
    C, t_used = mean_field_amplitude(t, y)
    out.amplitude = C
    if C is not None:
        tg = np.linspace(0.7, 1.0, 200)
        ax.plot(tg, C * np.sqrt(1 - tg), "--", color=OKABE_ITO["black"], lw=1.2,
                label=f"guide: {C:.3g} $(1-T/T_c)^{{1/2}}$ (mean-field shape,\n amplitude fitted at $T/T_c \\geq$ {t_used:.3g})")
    ax.axvline(1.0, color="0.5", lw=0.8, ls=":")
    ax.axhline(0.0, color="0.5", lw=0.8)
    ax.set_xlim(0, T_MAX)
    ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False)
    return out
