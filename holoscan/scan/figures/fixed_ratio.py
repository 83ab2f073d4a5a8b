"""Values of the dominant branch along lines of fixed ``mu/T``, for the figures drawn against T.

Used by :mod:`.cumulants` and :mod:`.transport`. No matplotlib here except in :func:`draw_line`
and :func:`mark_critical`, which draw on axes they are given.

Which lines (:func:`line_ratios`)
---------------------------------
A model with a located critical endpoint (``critical_points.parquet``, status ``ok``; the one on
the side of ``mu`` the grid covers, the highest in T if there are several) at ``(T_c, mu_c)``
gets the lines ``mu/T = 0, r_c (1 - 0.3), r_c (1 - 0.15), r_c, r_c (1 + 0.15), r_c (1 + 0.3)``
with ``r_c = mu_c/T_c``. Without one, ``0`` and four ratios evenly up to ``r_max = max mu / T_mid``
(``T_mid`` the median grid temperature, so the last line leaves the grid near the middle of its T
range), rounded to two significant digits. A grid with only negative ``mu`` gets the mirrored
(negative) ratios. Where the model's grid is given as ``mu/T`` ratios (``mu_over_T`` in its config
block or the scan's), each line is the grid ratio nearest to the one wanted (repeats dropped;
without a critical endpoint up to six grid ratios spread evenly), so every value is a grid row.

Values along a line (:func:`along`)
-----------------------------------
Only the dominant row of a grid point counts, and only when its status is ``ok`` and the value is
drawable (:func:`.data.drawable`). At every grid temperature ``T``, with ``mu* = r T``:

- a grid point at ``mu*`` (within ``1e-9 max(|mu*|, T)``): its value;
- otherwise the cubic (Lagrange) interpolant in ``mu`` at fixed T through the four grid points
  ``mu_0 < mu_1 < mu* < mu_2 < mu_3`` nearest ``mu*``, two on each side, when all four have a value
  and the same dominant phase, at least ``MIN_WINDOWS`` of the four five-point windows of grid
  points next to and over them (starting at the third, second, first point left of the stencil or
  at its second point) have values of that phase too (they give the error estimate below), and no
  step within these points exceeds ``MAX_STEP_T`` times T (mu enters the physics on the thermal
  scale; coarser grids do not resolve it, and there the estimate below was measured to fail);
  otherwise there is no value at this T. So nothing is interpolated across a grid point that is not
  ok or has no value, or across a change of the dominant phase (a first-order line); a conformal
  model's quantity, a function of ``mu/T`` alone, is interpolated the same way.

Consecutive values of a line are joined only when they come from consecutive grid temperatures and
have the same dominant phase.

Error bars (absolute, the quantity's units)
-------------------------------------------
``bar = row part + interpolation part``:

- row part: the bound on the quantity at each grid row, given by the caller (e.g. from ``chi4_err``
  and ``error_estimate``), carried through the interpolation weights, ``sum |l_j| e_j``; NaN (not
  known) when some row's bound is NaN, and then the bar is the interpolation part alone (the
  figures count these in their captions);
- interpolation part (zero at a grid row): the remainder of cubic interpolation is
  ``f''''(xi)/4! prod_j (mu* - mu_j)`` (common practice, no source); ``f''''/4!`` is estimated by the
  largest fourth divided difference over the available five-point windows, times
  ``INTERP_SAFETY``, plus ``ROUNDOFF`` times ``sum |l_j y_j|``. With one window only the estimate
  can vanish where ``f''''`` changes sign (measured: 27 times short next to a phase change), hence
  at least two.

Measured against the closed form of the RN-AdS brane (Chamblin, Emparan, Johnson & Myers 1999,
Phys. Rev. D 60, 064018; conductivity in the normalisation of Hartnoll 2009, Class. Quant. Grav. 26,
224002), values from holoscan's closed-form rows, reference from mpmath Taylor coefficients of
``rho(T, mu)`` at 30 digits: over d = 3, 4, 5, grid steps ``h/T`` from 0.01 to 0.4 (and 0.45, which
is refused), three offsets of the mu grid (0 on the grid, half and 0.31 of a step off), a dominant
phase label changing between grid points at none or one of five places, ``mu/T`` from 0 to 8 and the
three quantities ``T^2 chi4/chi2``, ``sigma/T^(d-3)``, ``D T`` (74025 interpolated values), the worst
ratio of actual error to the interpolation part was 0.71 (at ``h = 0.4 T``; 0.25 to 0.43 where
``h <= 0.1 T``). Steps up to ``0.5 T`` reached 0.83, up to ``T`` (with the two windows of the
stencil's own fifth points and a factor 2) 1.26, and ``5 T`` 24, hence ``MAX_STEP_T = 0.4``.
``tests/test_figures_cumulants.py`` checks a subset on every run.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ...errors import InputError
from .data import ScanTables, drawable

#: the lines through and around a critical endpoint, as multiples of r_c = mu_c/T_c (and mu/T = 0)
CEP_FACTORS = (0.7, 0.85, 1.0, 1.15, 1.3)
#: lines of a model without a critical endpoint: fractions of r_max (module docstring)
SPAN_FRACTIONS = (0.0, 0.25, 0.5, 0.75, 1.0)
#: most lines picked from a mu/T-ratio grid without a critical endpoint
MAX_GRID_LINES = 6
#: a grid point is at mu* when within this fraction of max(|mu*|, T)
HIT_TOL = 1e-9
#: largest grid step in mu, in units of T, across which a value is interpolated (module docstring)
MAX_STEP_T = 0.4
#: fewest five-point windows the interpolation error is estimated from (module docstring)
MIN_WINDOWS = 2
#: factor on the divided-difference estimate of the interpolation error (module docstring)
INTERP_SAFETY = 4.0
#: relative round-off allowed on each stencil value in the interpolation part (double precision,
#: with margin for the values' own rounding; common practice, no source)
ROUNDOFF = 1e-13
#: the phase of an ok dominant row that names none
UNNAMED = "(unnamed)"


@dataclass
class Critical:
    """A located critical endpoint: ``T``, ``mu``, ``T_err`` (E), ``ratio = mu/T``, and how many
    ok critical points the model has on that side of ``mu`` (the figure uses this one)."""

    T: float
    mu: float
    T_err: float
    ratio: float
    count: int = 1


@dataclass
class Lines:
    """The chosen ratios (signed, in drawing order), the critical endpoint (or None), the index of
    the line through it (or None), and whether the ratios are the grid's own (``mu_over_T`` grid)."""

    ratios: list
    critical: Critical | None = None
    critical_line: int | None = None
    ratio_grid: bool = False


@dataclass
class Line:
    """One quantity along one line of fixed ``mu/T``.

    ``T`` grid temperatures with a value (ascending), ``y`` the values, ``row_err`` the rows' bound
    carried through the interpolation (NaN: not known), ``interp_err`` the interpolation part (0 at
    grid rows), ``interpolated`` True where the value is interpolated, ``phase`` the dominant phase,
    ``joined[k]`` True when value ``k`` is joined to value ``k + 1``."""

    ratio: float
    T: np.ndarray = field(default_factory=lambda: np.zeros(0))
    y: np.ndarray = field(default_factory=lambda: np.zeros(0))
    row_err: np.ndarray = field(default_factory=lambda: np.zeros(0))
    interp_err: np.ndarray = field(default_factory=lambda: np.zeros(0))
    interpolated: np.ndarray = field(default_factory=lambda: np.zeros(0, bool))
    phase: np.ndarray = field(default_factory=lambda: np.zeros(0, object))
    joined: np.ndarray = field(default_factory=lambda: np.zeros(0, bool))

    @property
    def bar(self) -> np.ndarray:
        """The error bar: row part (where known) plus interpolation part."""
        return np.where(np.isfinite(self.row_err), self.row_err, 0.0) + self.interp_err

    def polyline(self) -> tuple[np.ndarray, np.ndarray]:
        """``(T, y)`` with NaN between values that are not joined (what the curve draws)."""
        cut = [k + 1 for k in range(len(self.T) - 1) if not self.joined[k]]
        return np.insert(self.T, cut, np.nan), np.insert(self.y, cut, np.nan)


# -- the grid of dominant values -----------------------------------------------------------------

@dataclass
class Grid:
    """Per grid temperature (ascending ``Ts``): the grid's ``mu`` (ascending, every grid point of
    the model whatever its status), the dominant phase (``''`` where no ok dominant row), and per
    quantity the value and the row bound (NaN where none)."""

    Ts: np.ndarray
    mus: dict
    phase: dict
    values: dict
    errors: dict


def column(rows: pd.DataFrame, name: str) -> np.ndarray:
    """A column of ``rows`` as floats (NaN throughout where the table has no such column)."""
    return rows[name].to_numpy(float) if name in rows.columns else np.full(len(rows), np.nan)


def carries(rows: pd.DataFrame, name: str) -> bool:
    """True when some row has a finite value in column ``name``."""
    return bool(np.isfinite(column(rows, name)).any())


def dominant_grid(rows: pd.DataFrame, quantities: dict) -> Grid:
    """The grid of one model's points rows with the dominant ok value of each quantity.

    ``quantities[name] = (value, error)``: two functions of the dominant ok rows (a DataFrame)
    returning arrays, the quantity and the bound on it (NaN where not known)."""
    need = {"T", "mu", "status", "dominant"}
    if not len(rows) or not need <= set(rows.columns):
        return Grid(np.zeros(0), {}, {}, {q: {} for q in quantities}, {q: {} for q in quantities})
    rows = rows[drawable(rows["T"]) & (rows["T"] > 0).to_numpy() & drawable(rows["mu"])]
    pts = rows[["T", "mu"]].astype(float).drop_duplicates().sort_values(["T", "mu"])
    dom = rows[rows["dominant"].fillna(False).astype(bool) & (rows["status"] == "ok")]
    dom = dom.drop_duplicates(["T", "mu"])
    # an ok dominant row without a phase name still counts (as one unnamed phase); '' marks none
    names = dom["phase"] if "phase" in dom else pd.Series(np.nan, index=dom.index, dtype=object)
    cols = {"phase": np.where(names.isna() | (names.astype(str) == ""), UNNAMED, names.astype(str)).astype(object)}
    with np.errstate(all="ignore"):
        for q, (value, error) in quantities.items():
            v = np.asarray(value(dom), float) if len(dom) else np.zeros(0)
            e = np.asarray(error(dom), float) if len(dom) else np.zeros(0)
            cols[f"v:{q}"] = np.where(drawable(v), v, np.nan)
            cols[f"e:{q}"] = np.where(np.isfinite(e) & (e >= 0), e, np.nan)
    dom = pd.DataFrame({"T": dom["T"].to_numpy(float), "mu": dom["mu"].to_numpy(float), **cols})
    merged = pts.merge(dom, on=["T", "mu"], how="left")
    merged["phase"] = merged["phase"].fillna("").astype(str)
    Ts = np.unique(merged["T"].to_numpy(float))
    mus, phase, values, errors = {}, {}, {q: {} for q in quantities}, {q: {} for q in quantities}
    for T, g in merged.groupby("T", sort=True):
        mus[T] = g["mu"].to_numpy(float)
        phase[T] = g["phase"].to_numpy(object)
        for q in quantities:
            values[q][T] = g[f"v:{q}"].to_numpy(float)
            errors[q][T] = g[f"e:{q}"].to_numpy(float)
    return Grid(Ts, mus, phase, values, errors)


# -- interpolation ------------------------------------------------------------------------------

def lagrange_weights(nodes, x: float) -> np.ndarray:
    """Weights ``l_j(x)`` of the Lagrange interpolant through ``nodes`` (distinct)."""
    nodes = np.asarray(nodes, float)
    w = np.ones(len(nodes))
    for j in range(len(nodes)):
        for k in range(len(nodes)):
            if k != j:
                w[j] *= (x - nodes[k]) / (nodes[j] - nodes[k])
    return w


def _usable(y, phase, idx, ph) -> bool:
    return all(0 <= k < len(y) and np.isfinite(y[k]) and phase[k] == ph for k in idx)


def value_at(mus, y, err, phase, m: float, tol: float, T: float):
    """The value at ``mu = m`` at one grid temperature (module docstring), or None.

    Returns ``(value, row_err, interp_err, phase, interpolated)``."""
    n = len(mus)
    j = int(np.searchsorted(mus, m))
    for k in (j - 1, j):
        if 0 <= k < n and abs(mus[k] - m) <= tol:
            if np.isfinite(y[k]) and phase[k]:
                return float(y[k]), float(err[k]), 0.0, phase[k], False
            return None
    idx = [j - 2, j - 1, j, j + 1]
    if j < 2 or j + 1 >= n:
        return None
    ph = phase[j]
    step = MAX_STEP_T * T * (1 + HIT_TOL)
    if not ph or not _usable(y, phase, idx, ph) or np.max(np.diff(mus[idx])) > step:
        return None
    x, v = mus[idx], y[idx]
    w = lagrange_weights(x, m)
    p3 = float(w @ v)
    row = float(np.abs(w) @ err[idx]) if np.all(np.isfinite(err[idx])) else math.nan
    # fourth divided differences of the five-point windows next to and over the stencil
    prod = abs(float(np.prod(m - x)))
    dd = []
    for lo in range(j - 4, j):
        win = list(range(lo, lo + 5))
        if _usable(y, phase, win, ph) and np.max(np.diff(mus[win])) <= step:
            dd.append(abs(_divided_difference(mus[win], y[win])))
    if len(dd) < MIN_WINDOWS:  # too few to estimate the interpolation error with: no value
        return None
    interp = INTERP_SAFETY * max(dd) * prod + ROUNDOFF * float(np.abs(w * v).sum())
    return p3, row, interp, ph, True


def _divided_difference(x, y) -> float:
    """The divided difference ``f[x_0, ..., x_n]`` of the values ``y`` at the nodes ``x``."""
    c = np.asarray(y, float).copy()
    x = np.asarray(x, float)
    for k in range(1, len(x)):
        c[k:] = (c[k:] - c[k - 1:-1]) / (x[k:] - x[:-k])
    return float(c[-1])


def along(grid: Grid, quantity: str, ratio: float) -> Line:
    """The values of ``quantity`` along ``mu/T = ratio`` (module docstring)."""
    T_out, y, row, interp, inter, phase, gi = [], [], [], [], [], [], []
    for i, T in enumerate(grid.Ts):
        m = ratio * T
        got = value_at(grid.mus[T], grid.values[quantity][T], grid.errors[quantity][T], grid.phase[T], m,
                       HIT_TOL * max(abs(m), T), T)
        if got is None:
            continue
        T_out.append(T)
        y.append(got[0])
        row.append(got[1])
        interp.append(got[2])
        phase.append(got[3])
        inter.append(got[4])
        gi.append(i)
    gi = np.asarray(gi, int)
    phase = np.asarray(phase, object)
    joined = (np.diff(gi) == 1) & (phase[1:] == phase[:-1]) if len(gi) > 1 else np.zeros(0, bool)
    return Line(float(ratio), np.asarray(T_out, float), np.asarray(y, float), np.asarray(row, float),
                np.asarray(interp, float), np.asarray(inter, bool), phase, np.asarray(joined, bool))


# -- choice of lines ------------------------------------------------------------------------------

def _two_digits(x: float) -> float:
    return float(f"{x:.2g}") if x else 0.0


def grid_ratios(tables: ScanTables, model_id: str) -> list[float] | None:
    """The ``mu_over_T`` values of the model's grid (its block's grid, else the scan's), or None
    when the grid is given in ``(T, mu)`` (or the metadata has no config)."""
    from ..grid import axis_values

    cfg = tables.meta.get("config") if isinstance(tables.meta, dict) else None
    block = tables.block(model_id)
    grid = block.get("grid") if isinstance(block.get("grid"), dict) else (
        cfg.get("grid") if isinstance(cfg, dict) else None)
    if not isinstance(grid, dict) or "mu_over_T" not in grid:
        return None
    try:
        return axis_values(grid["mu_over_T"], "grid.mu_over_T")
    except (InputError, KeyError, TypeError, ValueError):
        return None


def critical_endpoint(tables: ScanTables, model_id: str, side: float) -> Critical | None:
    """The model's located critical endpoint on this side of ``mu`` (module docstring), or None."""
    cp = tables.rows("critical", model_id)
    if not len(cp) or not {"T", "mu", "status"} <= set(cp.columns):
        return None
    cp = cp[(cp["status"] == "ok") & drawable(cp["T"]) & drawable(cp["mu"])]
    cp = cp[(cp["T"] > 0) & (np.sign(cp["mu"]) == side)]
    if not len(cp):
        return None
    cp = cp.sort_values("T", ascending=False)
    c = cp.iloc[0]
    T_err = float(c["T_err"]) if "T_err" in cp and drawable([c["T_err"]])[0] else math.nan
    return Critical(float(c["T"]), float(c["mu"]), abs(T_err), float(c["mu"]) / float(c["T"]), len(cp))


def line_ratios(tables: ScanTables, model_id: str, rows: pd.DataFrame | None = None) -> Lines:
    """The lines of fixed ``mu/T`` of one model (module docstring)."""
    rows = tables.rows("points", model_id) if rows is None else rows
    if len(rows) and {"T", "mu"} <= set(rows.columns):
        pts = rows[drawable(rows["T"]) & (rows["T"] > 0).to_numpy() & drawable(rows["mu"])]
        T, mu = pts["T"].to_numpy(float), pts["mu"].to_numpy(float)
    else:
        T = mu = np.zeros(0)
    side = -1.0 if len(mu) and not (mu > 0).any() and (mu < 0).any() else 1.0
    cep = critical_endpoint(tables, model_id, side) if len(mu) and (side * mu > 0).any() else None
    grid_r = grid_ratios(tables, model_id)
    if grid_r is not None:
        avail = np.asarray(sorted({r for r in grid_r if side * r >= 0}, key=abs), float)
        if not len(avail):
            return Lines([], cep, None, True)
        if cep is not None:
            want = [0.0] + [cep.ratio * f for f in CEP_FACTORS]
            near = [float(avail[int(np.argmin(abs(avail - w)))]) for w in want]
            ratios = list(dict.fromkeys(sorted(near, key=abs)))
            through = float(avail[int(np.argmin(abs(avail - cep.ratio)))])
            return Lines(ratios, cep, ratios.index(through), True)
        k = min(MAX_GRID_LINES, len(avail))
        pick = np.unique(np.round(np.linspace(0, len(avail) - 1, k)).astype(int))
        return Lines([float(avail[i]) for i in pick], None, None, True)
    if cep is not None:
        return Lines([0.0] + [cep.ratio * f for f in CEP_FACTORS], cep, 1 + CEP_FACTORS.index(1.0))
    if not len(T):
        return Lines([])
    r_max = float(np.max(side * mu)) / float(np.median(np.unique(T)))
    if not r_max > 0:
        return Lines([0.0])
    return Lines(list(dict.fromkeys(side * _two_digits(r_max * f) for f in SPAN_FRACTIONS)))


def ratio_label(ratio: float, lines: Lines, i: int) -> str:
    """Legend text of line ``i``: its ``mu/T``, and how it sits relative to the critical endpoint."""
    text = f"$\\mu/T$ = {ratio:.4g}"
    c = lines.critical
    if c is None or ratio == 0:
        return text
    if i == lines.critical_line:
        return text + (" ($r_c$)" if not lines.ratio_grid else " (grid ratio nearest $r_c$)")
    if not lines.ratio_grid:
        return text + f" ({ratio / c.ratio:.3g} $r_c$)"
    return text


# -- drawing helpers ------------------------------------------------------------------------------

def draw_line(ax, line: Line, colour: str, label: str, bars: bool = True) -> None:
    """Draw one line: the joined curve, filled markers at grid rows, open ones where interpolated,
    and the error bars that are not zero."""
    if not len(line.T):
        ax.plot([], [], "-o", color=colour, ms=3.5, lw=1.3, label=label + " (no value)")
        return
    x, y = line.polyline()
    ax.plot(x, y, "-", color=colour, lw=1.3, label=label, zorder=3)
    grid_rows = ~line.interpolated
    ax.plot(line.T[grid_rows], line.y[grid_rows], "o", color=colour, ms=3.5, ls="", zorder=4)
    ax.plot(line.T[~grid_rows], line.y[~grid_rows], "o", color=colour, mfc="white", ms=3.5, ls="", zorder=4)
    bar = line.bar
    show = np.isfinite(bar) & (bar > 0) & drawable(bar)
    if bars and show.any():
        ax.errorbar(line.T[show], line.y[show], yerr=bar[show], fmt="none", ecolor=colour, elinewidth=0.8,
                    capsize=2, zorder=2)


def mark_critical(ax, lines: Lines, colour: str, unit: str, label: bool = True) -> None:
    """Mark the critical endpoint's temperature on its line: a dashed vertical line in the line's
    colour, and the band ``T_c +- T_err``."""
    c = lines.critical
    if c is None or lines.critical_line is None:
        return
    text = (f"critical endpoint: $T_c$ = {c.T:.4g} {unit},\n$\\mu_c/T_c$ = {c.ratio:.4g}" if label else None)
    ax.axvline(c.T, color=colour, ls="--", lw=1.1, label=text, zorder=1)
    if math.isfinite(c.T_err) and c.T_err > 0:
        ax.axvspan(c.T - c.T_err, c.T + c.T_err, color=colour, alpha=0.15, lw=0, zorder=0)


def lines_text(lines: Lines) -> str:
    """The caption's account of the choice of lines."""
    rs = ", ".join(f"{r:.4g}" for r in lines.ratios)
    c = lines.critical
    if c is not None:
        how = (f"lines of fixed mu/T = {rs}: through the critical endpoint (T_c, mu_c) = ({c.T:.6g}, {c.mu:.6g}) "
               f"from critical_points.parquet (r_c = mu_c/T_c = {c.ratio:.6g}; its T_c dashed on its line"
               + (f", +- T_err = {c.T_err:.2g} shaded" if math.isfinite(c.T_err) and c.T_err > 0 else "")
               + "), on either side at r_c (1 +- 0.15), r_c (1 +- 0.3), and mu/T = 0")
        if c.count > 1:
            how += f" ({c.count} critical points located on this side; the highest in T is used)"
    else:
        how = f"lines of fixed mu/T = {rs} (no critical endpoint located for this model)"
    if lines.ratio_grid:
        how += "; the grid is given in mu/T, so each line is a grid ratio and every value a grid row"
    return how


INTERP_TEXT = ("filled markers: grid rows; open markers: interpolated in mu at the grid T by the cubic through "
               "the four nearest grid points, two on each side, all ok and of one dominant phase, with two "
               "five-point windows of such points around them for the error estimate and grid steps at most "
               f"{MAX_STEP_T:g} T (no value where this fails); curves are broken where a grid T has no value or "
               "the dominant phase changes")
