"""Folds of a conformal (unsourced) dilaton family: the lines ``mu/T = x*`` where a branch ends.

The unsourced branes form a one-parameter family (horizon scalar ``phi0``, with ``u`` fixed by a
zero source ``j = 0``); ``x = mu/T`` along it is the only dimensionless label of a state. Where
``x(phi0)`` has a local extremum ``x*`` two branches merge: the map from horizon data to ``(T, mu)``
is singular there, the Hessian of ``P`` passes through infinity and the branch on one side is
locally unstable. In the ``(mu, T)`` plane the fold is the straight line ``mu = x* T`` (the
instability locus; for the one-charge black hole ``x* = pi/sqrt 2``).

Each extremum of ``x`` on the coarse family is refined in rounds: ``x`` is solved (``j = 0`` for
``u`` at the full tolerance) at ``REFINE_NODES`` Chebyshev-Lobatto values of ``phi0`` at once (one
batched Newton), the extremum of their interpolant is located, and the bracket shrinks around it
by ``REFINE_SHRINK``; after ``REFINE_ROUNDS`` rounds ``x*`` is a direct solve at the located
``phi0``. Its error estimate adds the change of ``x*`` at 10x tighter tolerances, the
difference between the last interpolant and the direct solve there (near an extremum an error
``dphi0`` of its location moves ``x*`` only by ``O(dphi0^2)``), and the change of ``x*`` when the
boundary is read off earlier (:func:`readout_change`).
"""
from __future__ import annotations

import math

import numpy as np

from ...numerics import Counters, ShootSettings
from ...numerics.cheb import interpolant, lobatto
from .fixed_mu import newton_u
from .shooter import family_curve


def x_on_family(sh, phi0: float, u_guess: float, ss: ShootSettings, cnt: Counters) -> tuple[float, float]:
    """``(x, u)`` of the unsourced brane with horizon scalar ``phi0`` (NaN if the solve failed)."""
    U, O = newton_u(sh, np.array([phi0]), np.array([u_guess]), lambda o: o[:, 1], ss, cnt)
    return float(O[0, 0]), float(U[0])


#: nodes per refinement round, rounds, and the factor by which the bracket shrinks each round
REFINE_NODES = 13
REFINE_ROUNDS = 3
REFINE_SHRINK = 8.0


def _extremum(sh, lo: float, hi: float, sign: float, ug, ss: ShootSettings, cnt: Counters) -> tuple[float, float]:
    """``(phi0*, interpolated x there)`` of the extremum of ``x`` in ``[lo, hi]`` (``sign`` -1: a
    maximum, +1: a minimum), by rounds of batched solves at Lobatto nodes (module docstring)."""
    a0, b0 = lo, hi
    p_star = x_int = math.nan
    for _ in range(REFINE_ROUNDS):
        P = lo + 0.5 * (lobatto(REFINE_NODES) + 1.0) * (hi - lo)
        _, O = newton_u(sh, P, np.array([ug(p) for p in P]), lambda o: o[:, 1], ss, cnt)
        X = O[:, 0]
        ok = np.isfinite(X)
        if ok.sum() < REFINE_NODES - 2:
            raise ArithmeticError(f"x could not be solved at {int((~ok).sum())} of {REFINE_NODES} nodes in "
                                  f"phi0 [{lo:.6g}, {hi:.6g}]")
        f = interpolant(P[ok], X[ok], lo, hi)
        dense = np.linspace(lo, hi, 4001)
        j = int(np.argmin(sign * f(dense)))
        p_star = float(dense[j])
        df = f.deriv()
        a, b = dense[max(j - 1, 0)], dense[min(j + 1, len(dense) - 1)]
        if df(a) * df(b) < 0:
            from scipy.optimize import brentq

            p_star = float(brentq(df, a, b, xtol=1e-15 * max(1.0, abs(p_star)), rtol=1e-15))
        x_int = float(f(p_star))
        half = (hi - lo) / (2.0 * REFINE_SHRINK)
        lo, hi = max(a0, p_star - half), min(b0, p_star + half)
    return p_star, x_int


def folds(sh, ss: ShootSettings, cnt: Counters) -> list[dict]:
    """Every local extremum of ``x = mu/T`` along the family, refined: dicts with ``x``, ``phi0``,
    ``kind`` (``max`` or ``min``) and ``error_estimate`` (absolute, in ``x``)."""
    fam = family_curve(sh)

    def ug(p):  # u along the coarse family, a Newton guess
        return float(np.interp(p, fam[:, 0], fam[:, 1]))

    out = []
    for i in range(1, len(fam) - 1):
        a, b, c = fam[i - 1, 2], fam[i, 2], fam[i + 1, 2]
        if not (b > a and b >= c) and not (b < a and b <= c):
            continue
        sign = -1.0 if b > a else 1.0
        try:
            p_star, x_int = _extremum(sh, fam[i - 1, 0], fam[i + 1, 0], sign, ug, ss, cnt)
        except ArithmeticError:
            continue
        x, u = x_on_family(sh, p_star, ug(p_star), ss, cnt)
        x_t, _ = x_on_family(sh, p_star, ug(p_star), ss.tighter(10), cnt)
        drift = readout_change(sh, p_star, u, ss, cnt)
        if not (math.isfinite(x) and math.isfinite(x_t) and math.isfinite(drift)):
            continue
        out.append({"x": x, "phi0": p_star, "kind": "max" if sign < 0 else "min",
                    "error_estimate": abs(x_t - x) + abs(x_int - x) + drift})
    return out


#: how far before the end of the integration the boundary read-out is repeated (as in the batch
#: solver's verification shots, holoscan.kinds.emd.batch.READOUT_CHECK)
READOUT_CHECK = 2.0


def readout_change(sh, phi0: float, u: float, ss: ShootSettings, cnt: Counters) -> float:
    """How much ``x`` at zero source moves when the boundary is read off ``READOUT_CHECK`` before the
    end of the integration: the change of ``x`` less the part that re-imposing ``j = 0`` (through
    ``u``, to first order) takes back. At ``Delta = d/2`` the source's logarithmic falloff makes
    this the largest error of ``x*``; elsewhere it is at the level of round-off."""
    h = 1e-6 * max(1.0, abs(u))
    det: dict = {}
    o = sh.observe_many(np.array([[phi0, u], [phi0, u + h], [phi0, u - h]]), ss, cnt, detail=det,
                        readout_check=READOUT_CHECK)
    e = det["early"]
    dx_du, dj_du = (o[1, 0] - o[2, 0]) / (2 * h), (o[1, 1] - o[2, 1]) / (2 * h)
    if not dj_du:
        return math.nan
    return float(abs((e[0, 0] - o[0, 0]) - dx_du / dj_du * (e[0, 1] - o[0, 1])))
