"""Folds of a conformal (unsourced) dilaton family: the lines ``mu/T = x*`` where a branch ends.

The unsourced branes form a one-parameter family (horizon scalar ``phi0``, with ``u`` fixed by a
zero source ``j = 0``); ``x = mu/T`` along it is the only dimensionless label of a state. Where
``x(phi0)`` has a local extremum ``x*`` two branches merge: the map from horizon data to ``(T, mu)``
is singular there, the Hessian of ``P`` passes through infinity and the branch on one side is
locally unstable. In the ``(mu, T)`` plane the fold is the straight line ``mu = x* T`` (the
instability locus; for the one-charge black hole ``x* = pi/sqrt 2``).

Each extremum of ``x`` on the coarse family is refined by a bounded scalar minimisation in
``phi0`` of ``-x`` (or ``x``) where every evaluation solves ``j = 0`` for ``u`` at the full
tolerance; the error estimate is the change of ``x*`` re-evaluated at 10x tighter tolerances.
"""
from __future__ import annotations

import math

import numpy as np

from ...numerics import Counters, ShootSettings
from .fixed_mu import newton_u
from .shooter import family_curve


def x_on_family(sh, phi0: float, u_guess: float, ss: ShootSettings, cnt: Counters) -> tuple[float, float]:
    """``(x, u)`` of the unsourced brane with horizon scalar ``phi0`` (NaN if the solve failed)."""
    U, O = newton_u(sh, np.array([phi0]), np.array([u_guess]), lambda o: o[:, 1], ss, cnt)
    return float(O[0, 0]), float(U[0])


def folds(sh, ss: ShootSettings, cnt: Counters) -> list[dict]:
    """Every local extremum of ``x = mu/T`` along the family, refined: dicts with ``x``, ``phi0``,
    ``kind`` (``max`` or ``min``) and ``error_estimate`` (absolute, in ``x``)."""
    from scipy.optimize import minimize_scalar

    fam = family_curve(sh)
    ug = lambda p: float(np.interp(p, fam[:, 0], fam[:, 1]))  # u along the coarse family, a Newton guess
    out = []
    for i in range(1, len(fam) - 1):
        a, b, c = fam[i - 1, 2], fam[i, 2], fam[i + 1, 2]
        if not (b > a and b >= c) and not (b < a and b <= c):
            continue
        sign = -1.0 if b > a else 1.0
        lo, hi = fam[i - 1, 0], fam[i + 1, 0]

        def f(p, sign=sign):
            x, _ = x_on_family(sh, p, ug(p), ss, cnt)
            return sign * x if math.isfinite(x) else math.inf

        r = minimize_scalar(f, bounds=(lo, hi), method="bounded", options={"xatol": 1e-9 * max(1.0, hi)})
        x = sign * float(r.fun)
        x_t, _ = x_on_family(sh, float(r.x), ug(float(r.x)), ss.tighter(10), cnt)
        if not (math.isfinite(x) and math.isfinite(x_t)):
            continue
        out.append({"x": x, "phi0": float(r.x), "kind": "max" if sign < 0 else "min",
                    "error_estimate": abs(x_t - x)})
    return out
