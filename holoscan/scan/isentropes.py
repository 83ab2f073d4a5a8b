"""Isentropes: the paths of fixed ``s/rho`` through the (T, mu) plane, from a model's solved grid.

No solve is made: every row is located between solved grid points (and, on a first-order line,
between the line's located points), with an uncertainty. ``s/rho`` is taken with the sign of ``mu``'s
side and only ``mu >= 0`` is searched (``s/rho`` is odd in ``mu``).

**Off the line** (``site = grid T``, status ``ok``). For every requested value ``v`` (a model
block's ``isentropes: [v, ...]``) and every grid temperature, the chemical potential where the
dominant branch has ``s/rho = v`` is located between the two neighbouring grid points of that
temperature whose ``s/rho`` brackets ``v``: by inverse interpolation of ``s/rho`` in ``mu`` through
the bracketing points (linear) and through their outer neighbours (cubic, where there are four
points of one phase with monotone ``s/rho``; where the first-order line passes between the bracket
and an outer neighbour, the line's point at that temperature takes the neighbour's place); ``mu`` is
the cubic value and ``mu_err`` the difference between the two (the linear value alone, and ``mu_err``
its distance to the bracket's nearer end, where only two points are available). Two grid points are
of one phase when
the recorded first-order line does not pass between them (a point beyond the line's first or last
located point counts as either side); for a model without one, when the dominant phase's labels
agree. Measured on Reissner-Nordstrom-AdS5 (grid step 0.1 in ``mu/T``): the actual error is 0.6%
to 2% of ``mu_err`` (tests/test_isentropes.py). For a conformal model ``s/rho`` depends on
``mu/T`` alone, so on a grid given as ``mu_over_T`` ratios the path is exactly a line
``mu/T = const``.

**On a first-order line.** Where a path meets a first-order line it does not jump across: the fluid
is a mixture of the two coexisting phases at ``(T*, mu*)`` on the line, a volume fraction
``lambda`` (column ``fraction_high_entropy``) of the high-entropy phase, with

    (lambda s_high + (1 - lambda) s_low) / (lambda rho_high + (1 - lambda) rho_low) = v,

and it leaves the line where ``lambda`` reaches 0 or 1 (there ``s_low/rho_low`` or
``s_high/rho_high`` equals ``v``). The line is the one the lines job located (the
``transitions.parquet`` rows of type ``first-order`` and status ``ok``: ``T*`` with ``T_err`` at each
grid ``mu``, ``s_high``, ``s_low`` and ``rho_jump = rho_high - rho_low``). What the line record
lacks, ``rho_high`` and ``rho_low`` themselves, is interpolated from the grid column of the same
``mu`` (:func:`phase_densities`): along each phase's own branch (the dominant branch on its side of
``T*``, its metastable continuation on the other), ``rho`` as a function of ``s`` (smooth through
the spinodal fold, where ``rho(T)`` is not), at the recorded ``s_high`` or ``s_low``; the other
phase's density then follows from ``rho_jump``, taking the phase whose interpolation is the better
one. Rows on the line carry status ``coexistence``:

- ``site = line point``: a located point ``(T*, mu)`` of the line inside the segment
  (``0 <= lambda <= 1``);
- ``site = enters line`` / ``leaves line``: the segment's ends, the higher- and the lower-temperature
  one (the order of a cooling fluid), where ``lambda`` is exactly 1 or 0; located by inverse
  interpolation of that phase's ``s/rho`` along the line points (cubic through four, linear through
  the two bracketing; ``mu_err`` their difference plus the densities' uncertainty over the slope);
- ``site = grid T``: at a grid temperature whose bracket the line crosses, the point of the line at
  that temperature (``mu`` by inverse interpolation of ``T*(mu)``) when the path is on the line there;
  when the path is still in one phase there, an ``ok`` row located between that phase's grid points
  and the line (the line's point with the phase's own ``s/rho`` is the last node).

Each coexistence row carries the phases' ``s_high, s_low, rho_high, rho_low`` with ``s_err`` and
``rho_err`` and the fraction's uncertainty ``fraction_err`` (first-order propagation of those). The
uncertainty of an interpolated density is ``DENSITY_SAFETY`` times the largest difference between the
polynomial through the 4 nearest nodes (in ``s``) and those through 2, 3 and 5, enlarged by the ratio
of the same interpolation's miss of the known ``T*`` to its own spread when that ratio exceeds 1, plus
the change of ``rho_jump`` over ``T_err``; ``s_err`` is ``T_err`` times ``ds/dT`` along the branch.
Along the line, values between located points are cubic through four points, with the difference to
the linear one, the points' own uncertainties and the position's uncertainty times the slope as their
uncertainty; a point of the line used as a node of an inverse interpolation is moved by its
uncertainties and the change is added.

Measured (2026-12-05) on the demo dilaton model (``config/config.yaml``, values 10 and 17) against
direct solves at the rows' own ``(T, mu)`` (method ``atlas``, error below ``1e-8``): the largest
actual error of the 18 densities at the 9 located line points was 0.87 of the stencil spread alone,
hence ``DENSITY_SAFETY = 3``; worst actual/estimate 0.27 for ``rho_high``, ``rho_low`` and the
fraction, 0.07 for the position of rows on the line (their distance from equal pressure of the two
phases), 0.25 for ``ok`` rows next to the line and 0.03 for the segment's ends (the phase's own
``s/rho`` there against the value). Against the closed form of a two-phase model
(tests/test_isentropes.py): 0.12 off the line, 0.065 on it, 0.067 and 0.052 for the ends' ``mu`` and
``T``, 0.11 for the fraction and the densities.

Other rows: ``not ok`` where a grid point between the two ``ok`` points that bracket the value is
not ``ok`` (its status in ``message``; ``mu`` null). A ``coexistence`` row at the bracket's midpoint,
``mu_err`` its half width and no fraction, where the line crosses a bracket but the coexisting phases'
densities are not resolved there (fewer than three nodes of either phase in the grid column, or a
located point with ``mu = 0``). A model without a recorded first-order line has no coexistence: where
the dominant phase's label changes inside a bracket (a second-order line such as a superconductor's
onset, where s and rho are continuous, or a change of branch name), the row is ``ok``, located by
linear inverse interpolation through the bracket with ``mu_err`` the distance to its farther end
(``s/rho`` is continuous there, so the value lies inside the bracket).
"""
from __future__ import annotations

import itertools
import math

import numpy as np
import pyarrow as pa

from .tables import F64, STR, make_schema

COLUMNS = [
    ("model_id", STR, "", "model id"),
    ("s_over_rho", F64, "1", "the requested value of s/rho"),
    ("site", STR, "", "grid T (T is a grid temperature) | line point (a located point of the first-order line) "
                      "| enters line | leaves line (the higher- and lower-temperature end of the path's "
                      "segment on the line)"),
    ("T", F64, "E", "temperature"),
    ("T_err", F64, "E", "uncertainty of T (0 at a grid temperature)"),
    ("mu", F64, "E", "chemical potential where s/rho has the value (null when not located)"),
    ("mu_err", F64, "E", "uncertainty of mu (see holoscan.scan.isentropes)"),
    ("mu_over_T", F64, "1", "mu / T"),
    ("fraction_high_entropy", F64, "1",
     "coexistence rows: volume fraction lambda of the high-entropy phase in the mixture, "
     "s = lambda s_high + (1 - lambda) s_low and rho likewise, so that s/rho has the value; null off the line"),
    ("fraction_err", F64, "1", "uncertainty of fraction_high_entropy"),
    ("s_high", F64, "E^(d-1)", "coexistence rows: entropy density of the high-entropy phase on the line"),
    ("s_low", F64, "E^(d-1)", "coexistence rows: entropy density of the low-entropy phase on the line"),
    ("rho_high", F64, "E^(d-1)", "coexistence rows: charge density of the high-entropy phase on the line"),
    ("rho_low", F64, "E^(d-1)", "coexistence rows: charge density of the low-entropy phase on the line"),
    ("s_err", F64, "E^(d-1)", "uncertainty of s_high and s_low"),
    ("rho_err", F64, "E^(d-1)", "uncertainty of rho_high and rho_low"),
    ("status", STR, "", "ok | coexistence | not ok"),
    ("message", STR, "", "why, in words"),
]

#: safety factor on the spread of the density interpolants at a line point (measured on the demo
#: dilaton model against direct solves: the actual error reached 0.87 of the spread; module docstring)
DENSITY_SAFETY = 3.0
HIGH, LOW = "high-entropy", "low-entropy"
_EMPTY = {"T_err": 0.0, "fraction_high_entropy": None, "fraction_err": None, "s_high": None, "s_low": None,
          "rho_high": None, "rho_low": None, "s_err": None, "rho_err": None}


def _inverse(mu, v, target):
    """mu where the interpolant through the points (v, mu) takes ``target`` (inverse interpolation)."""
    order = np.argsort(v)
    return float(np.polyval(np.polyfit(v[order], mu[order], len(v) - 1), target))


def _through(x, y, x0):
    """Value and slope at ``x0`` of the polynomial through the points (x, y) (centred and scaled)."""
    x, y = np.asarray(x, float), np.asarray(y, float)
    scale = float(np.max(np.abs(x - x0))) or 1.0
    c = np.polynomial.polynomial.polyfit((x - x0) / scale, y, len(x) - 1)
    return float(c[0]), float(c[1]) / scale if len(c) > 1 else 0.0


def _along(x, y, i, x0):
    """Interpolation at ``x0`` between nodes ``i`` and ``i + 1`` of (x, y): the cubic through nodes
    ``i-1 .. i+2`` (the quadratic through three where the ends allow no more), with its difference to
    the linear through ``i, i+1`` as the uncertainty (the full step ``|y[i+1] - y[i]|`` with two nodes).
    Returns ``(value, uncertainty, slope of the linear)``."""
    n = len(x)
    lin, slope = _through(x[i:i + 2], y[i:i + 2], x0)
    win = [k for k in range(i - 1, i + 3) if 0 <= k < n]
    if len(win) < 3:
        return lin, abs(y[i + 1] - y[i]), slope
    val, _ = _through([x[k] for k in win], [y[k] for k in win], x0)
    return val, abs(val - lin), slope


def _bracket(x, x0):
    """Index i with x0 between x[i] and x[i+1] (either order), or None."""
    for i in range(len(x) - 1):
        if min(x[i], x[i + 1]) <= x0 <= max(x[i], x[i + 1]) and x[i] != x[i + 1]:
            return i
    return None


def fraction(v, sh, sl, rh, rl, e_sh=0.0, e_sl=0.0, e_rho=0.0):
    """``(lambda, uncertainty)``: the volume fraction of the high-entropy phase whose mixture with the
    low-entropy one has ``s/rho = v`` (null when the mixture's s/rho does not depend on it)."""
    D = (sh - sl) - v * (rh - rl)
    if D == 0.0 or not math.isfinite(D):
        return None, None
    lam = (v * rl - sl) / D
    err = (abs(lam) * (e_sh + abs(v) * e_rho) + abs(1.0 - lam) * (e_sl + abs(v) * e_rho)) / abs(D)
    return lam, err


# -- the coexisting phases' densities at a located line point --------------------------------------

def _phase_nodes(column: list, T_star: float, phase: str) -> list:
    """(s, rho, T) of one phase along a grid column of fixed mu: the dominant ``ok`` branch on the
    phase's own side of ``T_star`` (above it for the high-entropy phase), and its locally stable
    continuation on the other side (the largest/smallest ``s`` among the stable and metastable
    branches, when that is not the dominant one)."""
    by_T: dict = {}
    for r in column:
        if r["status"] == "ok" and r["s"] is not None and r["rho"] is not None:
            by_T.setdefault(r["T"], []).append(r)
    out = []
    for T, rs in sorted(by_T.items()):
        own = (T_star < T) == (phase == HIGH)
        if own:
            pick = [r for r in rs if r["dominant"]]
        else:
            st = [r for r in rs if r["phase_flag"] in ("stable", "metastable")]
            if len(st) < 2:
                continue
            pick = [max(st, key=lambda r: r["s"]) if phase == HIGH else min(st, key=lambda r: r["s"])]
            pick = [r for r in pick if not r["dominant"]]
        if pick:
            out.append((pick[0]["s"], pick[0]["rho"], T))
    return out


def _density_at(nodes: list, s0: float, T_star: float):
    """``rho`` of one phase at ``s = s0`` from its nodes: value, uncertainty, ``drho/dT`` and ``ds/dT``
    along the branch (or None with fewer than three nodes)."""
    if len(nodes) < 3:
        return None
    s, rho, T = (np.array(c, float) for c in zip(*nodes))
    near = np.argsort(np.abs(s - s0), kind="stable")
    fits = {k: (_through(s[near[:k]], rho[near[:k]], s0), _through(s[near[:k]], T[near[:k]], s0))
            for k in range(2, min(5, len(s)) + 1)}
    best = min(4, len(s))
    (r0, dr), (t0, dt) = fits[best]
    spread = max(abs(f[0][0] - r0) for k, f in fits.items() if k != best)
    t_spread = max(abs(f[1][0] - t0) for k, f in fits.items() if k != best)
    # the same stencils must reproduce the known T*: a miss larger than their spread enlarges the estimate
    miss = abs(t0 - T_star)
    factor = max(1.0, miss / t_spread) if t_spread > 0 else (1.0 if miss == 0 else math.inf)
    if dt == 0.0:
        return None
    return r0, DENSITY_SAFETY * spread * factor, dr / dt, 1.0 / dt


def phase_densities(point: dict, column: list) -> dict | None:
    """``rho_high``, ``rho_low`` (with ``rho_err``) and ``s_err`` at one located first-order point
    (a transitions row) from the branch rows of its grid column (all branches at that ``mu``);
    None when neither phase has enough nodes there."""
    T, dT = point["T"], point["T_err"]
    sh, sl, jump = point["s_high"], point["s_low"], point["rho_jump"]
    hi = _density_at(_phase_nodes(column, T, HIGH), sh, T)
    lo = _density_at(_phase_nodes(column, T, LOW), sl, T)
    if hi is None and lo is None:
        return None
    e_jump = dT * abs(hi[2] - lo[2]) if hi and lo else 0.0
    if lo is None or (hi is not None and hi[1] <= lo[1]):
        rh, e = hi[0], hi[1]
        rl = rh - jump
    else:
        rl, e = lo[0], lo[1]
        rh = rl + jump
    e += e_jump
    if hi and lo:
        disc = abs(hi[0] - jump - lo[0])
        if disc > hi[1] + lo[1] + e_jump:   # the two routes disagree beyond their estimates
            e = max(e, disc)
    ds = [abs(x[3]) * dT for x in (hi, lo) if x]
    return {"rho_high": rh, "rho_low": rl, "rho_err": e, "s_err": max(ds) if ds else math.nan}


class Line:
    """A model's first-order line as located (points sorted by ``mu >= 0``) with the coexisting phases'
    densities at each point; ``ok[i]`` is False where those could not be resolved."""

    def __init__(self, points: list, branches: list):
        cols: dict = {}
        for r in branches:
            cols.setdefault(r["mu"], []).append(r)
        pts = sorted((p for p in points if p["type"] == "first-order" and p["status"] == "ok" and p["mu"] >= 0
                      and all(_finite(p[k]) for k in ("T", "T_err", "s_high", "s_low", "rho_jump"))),
                     key=lambda p: p["mu"])
        self.mu = np.array([p["mu"] for p in pts], float)
        self.T = np.array([p["T"] for p in pts], float)
        self.T_err = np.array([p["T_err"] for p in pts], float)
        self.sh = np.array([p["s_high"] for p in pts], float)
        self.sl = np.array([p["s_low"] for p in pts], float)
        dens = [phase_densities(p, cols.get(p["mu"], [])) for p in pts]
        nan = math.nan
        self.rh = np.array([d["rho_high"] if d else nan for d in dens], float)
        self.rl = np.array([d["rho_low"] if d else nan for d in dens], float)
        # a point without both densities, or with a vanishing one (mu = 0: s/rho unbounded), is not used
        self.ok = np.array([d is not None for d in dens], bool) & (self.rh != 0) & (self.rl != 0) \
            & np.isfinite(self.rh) & np.isfinite(self.rl)
        self.e_rho = np.array([d["rho_err"] if d else nan for d in dens], float)
        self.e_s = np.array([d["s_err"] if d else nan for d in dens], float)
        self.T_of = {float(m): float(t) for m, t in zip(self.mu, self.T)}

    def __len__(self):
        return len(self.mu)

    def side(self, T: float, mu: float):
        """``HIGH`` above the line (``T > T*(mu)``), ``LOW`` below, None where the line is not recorded."""
        Ts = self.T_of.get(float(mu))
        if Ts is None:
            i = _bracket(self.mu, mu)
            if i is None:
                return None
            Ts = _along(self.mu, self.T, i, mu)[0]
        return HIGH if Ts < T else LOW

    def point(self, i: int) -> dict:
        """The phases' densities at line point ``i``."""
        return {"s_high": self.sh[i], "s_low": self.sl[i], "rho_high": self.rh[i], "rho_low": self.rl[i],
                "s_err": self.e_s[i], "rho_err": self.e_rho[i]}

    def props(self, i: int, mu: float, mu_err: float) -> dict | None:
        """The phases' s and rho between line points ``i`` and ``i+1`` at ``mu`` (cubic along the line),
        with uncertainties (interpolation, the points' own and ``mu_err`` times the slope)."""
        win = [k for k in range(i - 1, i + 3) if 0 <= k < len(self)]
        if not all(self.ok[k] for k in win):
            return None
        out = {}
        for key, arr, e in (("s_high", self.sh, self.e_s), ("s_low", self.sl, self.e_s),
                            ("rho_high", self.rh, self.e_rho), ("rho_low", self.rl, self.e_rho)):
            val, err, slope = _along(self.mu, arr, i, mu)
            out[key] = val
            out[key + "_e"] = err + max(e[k] for k in win) + abs(slope) * mu_err
        out["s_err"] = max(out["s_high_e"], out["s_low_e"])
        out["rho_err"] = max(out["rho_high_e"], out["rho_low_e"])
        return out

    def at_T(self, T: float, lo: float, hi: float):
        """``(mu*, uncertainty, i)`` where the line has temperature ``T`` with ``mu*`` in [lo, hi]."""
        for i in range(len(self) - 1):
            if not min(self.T[i], self.T[i + 1]) <= T <= max(self.T[i], self.T[i + 1]):
                continue
            m, err, slope = _along(self.T, self.mu, i, T)
            if lo <= m <= hi:
                win = [k for k in range(i - 1, i + 3) if 0 <= k < len(self)]
                return m, err + abs(slope) * max(self.T_err[k] for k in win), i
        return None


def _finite(x) -> bool:
    return x is not None and math.isfinite(x)


def _monotone(y) -> bool:
    d = np.diff(np.asarray(y, float))
    return bool(np.all(d > 0) or np.all(d < 0))


# -- rows --------------------------------------------------------------------------------------------

def _coexistence_row(base: dict, T, T_err, mu, mu_err, p: dict, site: str, message: str, lam, lam_err) -> dict:
    return {**base, "site": site, "T": T, "T_err": T_err, "mu": mu, "mu_err": mu_err, "mu_over_T": mu / T,
            "fraction_high_entropy": lam, "fraction_err": lam_err,
            **{k: p[k] for k in ("s_high", "s_low", "rho_high", "rho_low", "s_err", "rho_err")},
            "status": "coexistence", "message": message}


def _ratio_err(p: dict, phase: str) -> tuple[float, float]:
    """``s/rho`` of one phase from the densities ``p`` and its uncertainty."""
    s, rho = (p["s_high"], p["rho_high"]) if phase == HIGH else (p["s_low"], p["rho_low"])
    r = s / rho
    return r, abs(r) * (p["s_err"] / abs(s) + p["rho_err"] / abs(rho))


def _line_rows(base: dict, v: float, line: Line) -> list[dict]:
    """The located line points inside the path's segment on the line (``v`` between the phases' own
    ``s/rho``), and the segment's ends (where one phase's ``s/rho`` crosses ``v`` between two points)."""
    out, ends = [], []
    n = len(line)
    with np.errstate(divide="ignore", invalid="ignore"):
        rH, rL = line.sh / line.rh, line.sl / line.rl
    inside = [bool(line.ok[i] and (rH[i] - v) * (rL[i] - v) <= 0) for i in range(n)]
    for i in range(n):
        if inside[i]:
            p = line.point(i)
            lam, lam_err = fraction(v, p["s_high"], p["s_low"], p["rho_high"], p["rho_low"], p["s_err"],
                                    p["s_err"], p["rho_err"])
            out.append(_coexistence_row(base, float(line.T[i]), float(line.T_err[i]), float(line.mu[i]), 0.0, p,
                                        "line point", "a located point of the first-order line: the path "
                                        "follows the coexisting phases here", lam, lam_err))
    for i in range(n - 1):
        if not (line.ok[i] and line.ok[i + 1]):
            continue
        for phase, r, edge in ((HIGH, rH, 1.0), (LOW, rL, 0.0)):
            if not (r[i] - v) * (r[i + 1] - v) < 0:
                continue
            win = [k for k in range(i - 1, i + 3) if 0 <= k < n and line.ok[k]]
            lin = _inverse(line.mu[[i, i + 1]], r[[i, i + 1]], v)
            if win == list(range(i - 1, i + 3)) and _monotone(r[win]):
                m = _inverse(line.mu[win], r[win], v)
                err = abs(m - lin)
            else:
                m, err = lin, min(lin - line.mu[i], line.mu[i + 1] - lin)
            # the densities' uncertainty moves the crossing by (uncertainty of s/rho) / slope
            slope = abs((r[i + 1] - r[i]) / (line.mu[i + 1] - line.mu[i]))
            e_r = max(_ratio_err(line.point(k), phase)[1] for k in (i, i + 1))
            err += e_r / slope
            T, T_int, T_slope = _along(line.mu, line.T, i, m)
            T_err = T_int + abs(T_slope) * err + max(line.T_err[k] for k in win)
            p = line.props(i, m, err)
            if p is None:
                continue
            words = ("the high-entropy phase's s/rho equals the value: fraction 1" if phase == HIGH else
                     "the low-entropy phase's s/rho equals the value: fraction 0")
            row = _coexistence_row(base, T, T_err, m, err, p, "", f"end of the path's segment on the first-order "
                                   f"line: {words}", edge, 0.0)
            ins = [k for k in (i, i + 1) if inside[k]]
            ends.append((row, i, float(line.T[ins[0]]) if len(ins) == 1 else None))
    for row, i, T_in in ends:
        if T_in is None:   # both ends between the same two points: the segment lies between them
            T_in = next((r["T"] for r, ii, _ in ends if ii == i and r is not row), math.nan)
        # a cooling fluid enters the segment at its hotter end
        row["site"] = "enters line" if T_in < row["T"] else "leaves line"
        out.append(row)
    return out


def _locate(nodes: list, b: int, target: float) -> tuple[float, float, str]:
    """``mu`` where ``s/rho = target`` between nodes ``b`` and ``b + 1`` of ``nodes`` ((mu, s/rho,
    uncertainty of mu, uncertainty of s/rho), sorted by mu): the cubic inverse interpolant through four
    nodes whose s/rho is monotone, with its difference to the linear one through the bracket as the
    uncertainty (the linear value alone, and its distance to the bracket's nearer end, otherwise);
    plus the change when an uncertain node (a point of the line) is moved by its uncertainties."""
    mus = np.array([x[0] for x in nodes], float)
    rs = np.array([x[1] for x in nodes], float)
    pair = [b, b + 1]

    def solve(mus, rs):
        lin = _inverse(mus[pair], rs[pair], target)
        if len(nodes) == 4 and _monotone(rs):
            cub = _inverse(mus, rs, target)
            return cub, abs(cub - lin), "cubic inverse interpolation"
        return lin, min(lin - mus[b], mus[b + 1] - lin), "linear inverse interpolation"

    m, err, how = solve(mus, rs)
    for q, (_, _, e_mu, e_r) in enumerate(nodes):
        for dm, dr in ((e_mu, 0.0), (0.0, e_r)):
            if dm or dr:
                mm, rr = mus.copy(), rs.copy()
                mm[q] += dm
                rr[q] += dr
                err += abs(solve(mm, rr)[0] - m)
    return m, err, how


def _grid_rows(base: dict, T: float, pts: list, vals: dict, j: int, k: int, sides: list, line: Line | None,
               same) -> list[dict]:
    """Rows at grid temperature ``T`` for the bracket ``(j, k)`` of ``ok`` points whose ``s/rho``
    (``vals``) brackets the value."""
    target = base["s_over_rho"]
    a, b = pts[j], pts[k]
    row = {**base, **_EMPTY, "site": "grid T", "T": T}
    if k - j > 1:
        bad = pts[j + 1]
        return [{**row, "mu": None, "mu_err": None, "mu_over_T": None, "status": "not ok",
                 "message": f"grid point mu = {bad['mu']:g} inside the bracket: {bad['status']}"}]
    if same(j, k):
        left = (pts[j - 1]["mu"], vals[j - 1], 0.0, 0.0) if j - 1 in vals and same(j - 1, j) else \
            _line_node(line, T, pts, j - 1, j, sides[j])
        right = (pts[k + 1]["mu"], vals[k + 1], 0.0, 0.0) if k + 1 in vals and same(k, k + 1) else \
            _line_node(line, T, pts, k, k + 1, sides[k])
        inner = [(a["mu"], vals[j], 0.0, 0.0), (b["mu"], vals[k], 0.0, 0.0)]
        if left and right:
            m, err, how = _locate([left, *inner, right], 1, target)
            if left[2] or right[2]:
                how += " (a point of the first-order line as an outer node)"
        else:
            m, err, how = _locate(inner, 0, target)
        return [{**row, "mu": m, "mu_err": err, "mu_over_T": m / T, "status": "ok", "message": how}]
    if line is None:
        # no first-order line is recorded: the label changes at a continuous transition (a
        # second-order line, where s and rho are continuous and only their derivatives jump) or
        # between branch names; s/rho is continuous through the bracket, so the value is taken
        # there, linearly, and the bracket bounds it (intermediate values)
        m, _, _ = _locate([(a["mu"], vals[j], 0.0, 0.0), (b["mu"], vals[k], 0.0, 0.0)], 0, target)
        err = max(m - a["mu"], b["mu"] - m)
        return [{**row, "mu": m, "mu_err": err, "mu_over_T": m / T, "status": "ok",
                 "message": f"the dominant phase's label changes from {a['phase']} to {b['phase']} inside the "
                            "bracket and no first-order line is recorded (s/rho continuous): linear inverse "
                            "interpolation, bounded by the bracket"}]
    # the first-order line crosses the bracket
    hit = line.at_T(T, a["mu"], b["mu"])
    p = line.props(hit[2], hit[0], hit[1]) if hit else None
    if p is None:
        m = 0.5 * (a["mu"] + b["mu"])
        return [{**row, "mu": m, "mu_err": 0.5 * (b["mu"] - a["mu"]), "mu_over_T": m / T, "status": "coexistence",
                 "message": "the first-order line crosses the bracket; the coexisting phases' densities are not "
                            "resolved there: the bracket's midpoint"}]
    m, m_err, _ = hit
    out = []
    (rH, _), (rL, _) = _ratio_err(p, HIGH), _ratio_err(p, LOW)
    if (rH - target) * (rL - target) <= 0:
        lam, lam_err = fraction(target, p["s_high"], p["s_low"], p["rho_high"], p["rho_low"], p["s_err"],
                                p["s_err"], p["rho_err"])
        out.append(_coexistence_row(base, T, 0.0, m, m_err, p, "grid T", "on the first-order line at this "
                                    "temperature: the path follows the coexisting phases", lam, lam_err))
    # the path may also cross this temperature in either phase, between its grid points and the line
    for q, step in ((j, -1), (k, 1)):
        r_line, e_line = _ratio_err(p, sides[q])
        if not (vals[q] - target) * (r_line - target) < 0:
            continue
        own = [q]   # the phase's own grid points next to the line, nearest first
        while len(own) < 3 and (own[-1] + step) in vals and sides[own[-1] + step] == sides[q]:
            own.append(own[-1] + step)
        nodes = sorted([(pts[x]["mu"], vals[x], 0.0, 0.0) for x in own] + [(m, r_line, m_err, e_line)])
        bi = len(nodes) - 2 if step < 0 else 0
        if len(nodes) not in (2, 4):
            nodes, bi = nodes[bi:bi + 2], 0
        mu_v, err, how = _locate(nodes, bi, target)
        # the phase's own s/rho puts the path between its grid point and the line
        lo, hi = min(pts[q]["mu"], m), max(pts[q]["mu"], m)
        err = min(err, max(mu_v - lo, hi - mu_v) + m_err)
        out.append({**row, "mu": mu_v, "mu_err": err, "mu_over_T": mu_v / T, "status": "ok",
                    "message": f"{how} in the {sides[q]} phase, between its grid points and the first-order line "
                               "(the line's point at this temperature is the last node)"})
    return out


def _line_node(line: Line | None, T: float, pts: list, p: int, q: int, phase: str):
    """The point of the line between grid points ``p`` and ``q`` at temperature ``T`` as a node of
    ``phase``'s s/rho: (mu*, s/rho, their uncertainties), or None."""
    if line is None or p < 0 or q >= len(pts):
        return None
    hit = line.at_T(T, pts[p]["mu"], pts[q]["mu"])
    props = line.props(hit[2], hit[0], hit[1]) if hit else None
    if props is None:
        return None
    r, e = _ratio_err(props, phase)
    return hit[0], r, hit[1], e


def locate(model_id: str, rows, values, branches=(), lines=()) -> list[dict]:
    """Isentrope rows of one model from one row per grid point (dicts with T, mu, s, rho, status,
    phase: the dominant branch's, or the point's status where there is none) for each of ``values``;
    with the model's branch rows (``branches``: every branch, with ``phase_flag`` and ``dominant``)
    and its located line points (``lines``, transitions rows), paths also follow its first-order line."""
    out = []
    line = Line(lines, branches) if lines else None
    if line is not None and len(line) < 2:
        line = None
    by_T: dict = {}
    for r in rows:
        if r["mu"] >= 0:
            by_T.setdefault(r["T"], []).append(r)
    for target in values:
        base = {"model_id": model_id, "s_over_rho": target}
        for T in sorted(by_T):
            pts = sorted(by_T[T], key=lambda r: r["mu"])
            good = [k for k, r in enumerate(pts) if r["status"] == "ok" and r["rho"]]
            vals = {k: pts[k]["s"] / pts[k]["rho"] for k in good}
            sides = [line.side(T, r["mu"]) if line is not None else None for r in pts]

            def same(p, q, pts=pts, sides=sides):
                """No phase boundary between grid points p and q: by the line where there is one (a
                point beyond its ends takes either side), else by the dominant phase's label."""
                if line is None:
                    return pts[p]["phase"] == pts[q]["phase"]
                return not (sides[p] and sides[q] and sides[p] != sides[q])

            for j, k in itertools.pairwise(good):
                if (vals[j] - target) * (vals[k] - target) <= 0 and vals[j] != vals[k]:
                    out += _grid_rows(base, T, pts, vals, j, k, sides, line, same)
        if line is not None:
            out += _line_rows(base, target, line)
    return out


def isentropes_table(points, models: dict, meta: dict | None = None, lines=None) -> pa.Table:
    """``isentropes.parquet`` for the models of the plan (``models``: id -> record with an
    ``isentropes`` list) from the points table (pyarrow) and the located line points (``lines``:
    transitions rows as dicts; a model's first-order line is followed where paths meet it)."""
    rows = []
    wanted = {m: d.get("isentropes") for m, d in models.items() if d.get("isentropes")}
    if wanted:
        t = points.select(["model_id", "T", "mu", "s", "rho", "status", "phase", "phase_flag",
                           "dominant"]).to_pylist()
        for mid, values in wanted.items():
            per_point: dict = {}
            mine = [r for r in t if r["model_id"] == mid]
            for r in mine:
                key = (r["T"], r["mu"])
                if r["dominant"]:
                    per_point[key] = r
                else:
                    per_point.setdefault(key, {**r, "status": r["status"] if r["status"] != "ok"
                                               else "no dominant branch"})
            own_lines = [r for r in (lines or ()) if r["model_id"] == mid and r["type"] == "first-order"]
            rows += locate(mid, list(per_point.values()), values, mine, own_lines)
    sch = make_schema(COLUMNS, meta)
    return pa.Table.from_arrays([pa.array([r[n] for r in rows], typ) for n, typ, _, _ in COLUMNS], schema=sch)
