"""The condensate of a charged-scalar model against T/T_c, at several mu.

``<O>`` (``extra.condensate``, dimension ``E^Delta``) is divided by ``T_c^Delta`` with ``T_c`` the
onset temperature at the row's own ``mu`` (``extra.T_c``), so in a conformal model every ``mu``
falls on one curve. Rows: the dominant branch, status ``ok``, ``mu != 0`` (at ``mu = 0``,
``T_c = 0``). Points below ``T_c`` are joined by lines, those above (normal branch, ``<O> = 0``) are
not joined to them. The guide ``C (1 - T/T_c)^(1/2)`` is the mean-field shape of a second-order onset
(common practice, no source), its amplitude ``C`` fitted by least squares to the condensed points
with ``0.9 <= T/T_c < 1``, only when there are at least ``MIN_FIT_POINTS`` of them: fitted on fewer
it would show the shape of the onset where the grid does not resolve it. Otherwise the guide is
omitted and the legend and caption say why. It is a guide, not a fit of the exponent. Values that
are not drawable (:func:`.data.drawable`) are left out and counted in the caption.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .data import ScanTables, count_text, drawable, extra_field, grid_text, model_info, provenance_text
from .eos import dominant_ok, pick_mu
from .style import OKABE_ITO, SERIES, new_figure, no_data, title

FIT_FROM = 0.9
#: fewest condensed points with FIT_FROM <= T/T_c < 1 the guide is fitted on
MIN_FIT_POINTS = 4
T_MAX = 1.6  # normal points beyond this T/T_c are not drawn


@dataclass
class CondensateFigure:
    """The figure, its axes, the curves ``curves[mu] = (T/T_c, <O>/T_c^Delta)``, the guide's
    amplitude (None when omitted), the number of points it was (or would have been) fitted on, and
    the caption."""

    fig: object
    ax: object
    curves: dict = field(default_factory=dict)
    amplitude: float | None = None
    fit_points: int = 0
    caption: str = ""


def near_onset(t, y, t_from: float = FIT_FROM) -> np.ndarray:
    """Mask of the condensed points near the onset: ``t_from <= t < 1``, ``y > 0`` and finite."""
    t, y = np.asarray(t, float), np.asarray(y, float)
    with np.errstate(invalid="ignore"):
        return (t >= t_from) & (t < 1) & (y > 0) & np.isfinite(y) & np.isfinite(t)


def mean_field_amplitude(t, y, t_from: float = FIT_FROM,
                         min_points: int = MIN_FIT_POINTS) -> tuple[float | None, float | None]:
    """Least-squares ``C`` of ``y = C (1 - t)^(1/2)`` over the points of :func:`near_onset`, and the
    lowest ``t`` used; ``(None, None)`` when there are fewer than ``min_points`` of them."""
    t, y = np.asarray(t, float), np.asarray(y, float)
    near = near_onset(t, y, t_from)
    if int(near.sum()) < min_points:
        return None, None
    w = np.sqrt(1 - t[near])
    return float(np.dot(y[near], w) / np.dot(w, w)), float(t[near].min())


def plot_condensate(tables: ScanTables, model_id: str, kind: str) -> CondensateFigure:
    """Draw ``<O>/T_c^Delta`` against ``T/T_c`` (see the module docstring)."""
    info = model_info(tables, model_id, kind)
    fig = new_figure((8.4, 4.8), left=0.8, right=3.3, bottom=0.6, top=0.65)
    ax = fig.add_subplot()
    out = CondensateFigure(fig, ax)
    pts = tables.rows("points", model_id)
    dl = f"{info.delta:g}" if info.delta is not None else r"\Delta"
    title(fig, f"{info.title}: condensate of the dominant branch, $\\Delta$ = {dl}\n{info.unit_note}")
    ax.set_xlabel(r"$T/T_c(\mu)$")
    ax.set_ylabel(rf"$\langle O\rangle / T_c^{{{dl}}}$")
    caption = [f"Condensate <O>/T_c^Delta of the dominant ok branch of model {info.model_id} "
               f"(charged-scalar, d = {info.d}, Delta = {dl}) against T/T_c(mu), at several mu",
               grid_text(pts), info.unit_plain, provenance_text(tables)]
    notes = list(tables.notes)

    def done():
        out.caption = "; ".join(caption + notes) + "."
        return out

    rows = dominant_ok(tables, model_id)
    if len(rows) and {"mu", "T", "extra"} <= set(rows.columns):
        rows = rows[(rows["mu"] != 0) & drawable(rows["mu"]) & drawable(rows["T"])]
    else:
        rows = rows.iloc[0:0]
    if not len(rows):
        no_data(ax, "no ok dominant rows with mu != 0")
        notes.append("no ok dominant rows with mu != 0: nothing drawn")
        return done()
    rows = rows.assign(T_c=extra_field(rows["extra"], "T_c").to_numpy(),
                       O=extra_field(rows["extra"], "condensate").to_numpy())
    power = info.delta if info.delta is not None else 1.0
    with np.errstate(all="ignore"):
        t_all = (rows["T"] / rows["T_c"]).to_numpy(float)
        y_all = (rows["O"] / rows["T_c"] ** power).to_numpy(float)
    keep = (rows["T_c"] > 0).to_numpy() & drawable(t_all) & drawable(y_all)
    if (~keep).any():
        notes.append(f"{count_text(int((~keep).sum()), 'row')} without a drawable T/T_c or condensate left out")
    rows = rows[keep]
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
        ax.plot(np.insert(t, j, np.nan), np.insert(y, j, np.nan), "-o", color=SERIES[i % len(SERIES)], ms=4, lw=1.2,
                label=f"$\\mu$ = {mu:.4g} {info.unit}")
    if not len(condensed_mu):
        no_data(ax, "no condensed point on this grid")
    if not all_t:
        no_data(ax, "no row with an onset temperature T_c > 0")
        notes.append("no row with an onset temperature T_c > 0: nothing drawn")
        return done()
    t, y = np.concatenate(all_t), np.concatenate(all_y)
    out.fit_points = int(near_onset(t, y).sum())
    C, t_used = mean_field_amplitude(t, y)
    out.amplitude = C
    if C is not None:
        tg = np.linspace(0.7, 1.0, 200)
        ax.plot(tg, C * np.sqrt(1 - tg), "--", color=OKABE_ITO["black"], lw=1.2,
                label=f"guide: {C:.3g} $(1-T/T_c)^{{1/2}}$ (mean-field shape,\n amplitude fitted on "
                      f"{out.fit_points} points at $T/T_c \\geq$ {t_used:.3g})")
        caption.append(f"dashed: the mean-field shape C (1 - T/T_c)^(1/2), C fitted on the {out.fit_points} "
                       f"condensed points with {FIT_FROM:g} <= T/T_c < 1")
    else:
        why = (f"no mean-field guide: {count_text(out.fit_points, 'condensed point')} with "
               f"{FIT_FROM:g} <= T/T_c < 1, at least {MIN_FIT_POINTS} needed to fit it")
        ax.plot([], [], ls="", label=f"no mean-field guide: only\n{count_text(out.fit_points, 'condensed point')} "
                                     f"with\n$T/T_c \\geq$ {FIT_FROM:g} ({MIN_FIT_POINTS} needed)")
        caption.append(why)
    ax.axvline(1.0, color="0.5", lw=0.8, ls=":")
    ax.axhline(0.0, color="0.5", lw=0.8)
    ax.set_xlim(0, T_MAX)
    ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False)
    return done()
