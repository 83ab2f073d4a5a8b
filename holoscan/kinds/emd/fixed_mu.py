"""Solutions of a sourced dilaton model at one chemical potential, as a curve in horizon data.

At fixed ``mu`` (units of the source) the branes form a curve in the horizon data ``(phi0, u)``,
parametrised here by ``l = log phi0`` (``phi0`` grows monotonically from hot to cold along it for
the models we have met; the code checks the curve is single-valued where it samples it). Along the
curve the first law reads ``dP = s dT``, so pressure differences between branches need no
reference: ``P_b - P_a = integral of s dT`` along the curve from a to b.

The curve is sampled at ``n`` Chebyshev-Lobatto nodes in ``l`` on an interval chosen from the
coarse scan of horizon data; ``T``, ``s`` and ``rho`` become Chebyshev series, and all that follows
is done on the series (spectral accuracy):

- *folds*: zeros of ``dT/dl``. Between a local minimum and a local maximum of ``T`` three branches
  coexist; a fold is where a branch stops being locally stable (``ds/dT`` at fixed ``mu`` passes
  through infinity), i.e. the instability locus (spinodal);
- *first-order point*: the ``T*`` where the hot and cold branches have equal ``Omega``,
  ``integral of s dT`` from the hot to the cold branch = 0 (a root in ``T`` by Brent's method);
- *crossover*: without folds, the maximum of ``ds/dT`` at fixed ``mu`` inside the interval;
- *fold measure* ``g = max over the interval of (dT/dl) / T``: positive exactly when folds exist,
  so the critical endpoint is the root of ``g(mu)`` (see :func:`critical_point`).

Every result carries an uncertainty: the same quantity from the interpolant on the
``(n + 1) / 2``-node subset of the same Lobatto nodes (no extra solves), whose difference bounds
the interpolation error of the ``n``-node result.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.polynomial import chebyshev as C

from ...numerics import Counters, ShootSettings
from ...numerics.cheb import lobatto, lobatto_fit
from .shooter import physical


def coarse_curve(sh, mu: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """``(l, u, T)`` of the fixed-``mu`` curve at the coarse scan's ``phi0`` nodes (first root in ``u``
    of ``mu(phi0, u) = mu`` along the coarse ``u`` nodes, and ``T`` there, by linear interpolation);
    nodes without a root are left out."""
    g = sh.grid()
    d, D = sh.brane.d, sh.brane.delta
    ls, us, Ts = [], [], []
    for i, p in enumerate(g.phi0):
        X = physical(g.obs[i], d, D)
        if mu == 0.0:
            ls.append(math.log(p))
            us.append(0.0)
            Ts.append(X[0, 0])
            continue
        m = X[:, 1] - mu
        for k in range(len(g.u) - 1):
            if np.isfinite(m[k]) and np.isfinite(m[k + 1]) and m[k] <= 0.0 < m[k + 1]:
                t = -m[k] / (m[k + 1] - m[k])
                ls.append(math.log(p))
                us.append(g.u[k] - m[k] * (g.u[k + 1] - g.u[k]) / (m[k + 1] - m[k]))
                Ts.append(X[k, 0] + t * (X[k + 1, 0] - X[k, 0]))
                break
    return np.array(ls), np.array(us), np.array(Ts)


def newton_u(sh, P: np.ndarray, U: np.ndarray, residual, ss: ShootSettings, cnt: Counters,
             maxiter: int = 30) -> tuple[np.ndarray, np.ndarray]:
    """Batched Newton (forward-difference derivative) for ``u`` at each ``phi0`` in ``P`` such that
    ``residual(observables) = 0`` (``residual`` maps rows ``(x, j, s_hat, rho_hat)`` to a relative
    mismatch per row), from the guesses ``U``: iterations at a loose tolerance (rtol 1e-7) to
    ``1e-6``, then at ``ss`` to ``1e-12`` or the noise floor of the shots (a node whose mismatch
    stops halving below ``1e-9``). Returns ``(U, O)`` with the observables ``O`` at ``ss``; rows
    that fail (a failed shot, or a final mismatch above ``1e-9``) are NaN."""
    U = np.array(U, float)
    loose = ShootSettings(rtol=max(ss.rtol, 1e-7), atol=0.0, horizon_offset=ss.horizon_offset)
    O = np.full((len(P), 4), np.nan)
    R = np.full(len(P), np.nan)
    alive = np.ones(len(P), bool)
    for settings, tol in ((loose, 1e-6), (ss, 1e-12)):
        done = ~alive.copy()
        prev = np.full(len(P), np.inf)
        for _ in range(maxiter):
            act = np.flatnonzero(~done)
            if len(act) == 0:
                break
            h = 1e-7
            Q = np.concatenate([np.column_stack([P[act], U[act]]), np.column_stack([P[act], U[act] + h])])
            Oa = sh.observe_many(Q, settings, cnt, record=settings is ss)
            with np.errstate(invalid="ignore", divide="ignore"):
                f0, f1 = residual(Oa[: len(act)]), residual(Oa[len(act):])
            step = -f0 * h / (f1 - f0)
            for k, i in enumerate(act):
                if not (np.isfinite(step[k]) and np.isfinite(f0[k])):
                    done[i], alive[i] = True, False  # a failed shot: this node is dropped
                    continue
                O[i], R[i] = Oa[k], abs(f0[k])
                # converged, or at the noise floor of the shots (no halving of the mismatch)
                if R[i] <= tol or abs(step[k]) < 1e-14 or (R[i] < 1e-9 and R[i] > 0.5 * prev[i]):
                    done[i] = True
                    continue
                prev[i] = R[i]
                U[i] = min(max(U[i] + float(np.clip(step[k], -0.05, 0.05)), 0.0), 0.999)
    O[~alive | ~(R <= 1e-9)] = np.nan
    return U, O


def solve_u(sh, P: np.ndarray, U: np.ndarray, mu: float, ss: ShootSettings, cnt: Counters):
    """``u`` at each ``phi0`` in ``P`` with ``mu(phi0, u) = mu`` (source units); returns ``(U, X)``,
    ``X`` rows ``(T, mu, s, rho)`` (NaN where a node failed)."""
    d, D = sh.brane.d, sh.brane.delta
    if mu == 0.0:
        U = np.zeros(len(P))
        return U, physical(sh.observe_many(np.column_stack([P, U]), ss, cnt, record=True), d, D)
    scale = max(abs(mu), 1.0)
    U, O = newton_u(sh, P, U, lambda o: (physical(o, d, D)[:, 1] - mu) / scale, ss, cnt)
    return U, physical(O, d, D)


@dataclass
class Curve:
    """Chebyshev interpolants of ``T``, ``s``, ``rho`` along the fixed-``mu`` curve on ``[la, lb]``."""

    mu: float
    la: float
    lb: float
    cT: np.ndarray
    cs: np.ndarray
    crho: np.ndarray

    def log_phi0(self, z):
        return self.la + 0.5 * (self.lb - self.la) * (np.asarray(z) + 1.0)

    def T(self, z):
        return C.chebval(z, self.cT)

    def folds(self) -> list[float]:
        """Interior zeros of ``dT/dz`` (ascending), simple roots only."""
        r = C.chebroots(C.chebder(self.cT))
        r = np.sort(r[np.abs(r.imag) < 1e-9].real)
        return [float(z) for z in r if -1.0 < z < 1.0]

    def fold_measure(self) -> tuple[float, float]:
        """``max (dT/dl)/T`` over the interval and where (z) it is reached."""
        z = np.linspace(-1.0, 1.0, 4001)
        w = C.chebval(z, C.chebder(self.cT)) / C.chebval(z, self.cT) * 2.0 / (self.lb - self.la)
        k = int(np.argmax(w))
        if 0 < k < len(z) - 1:
            from scipy.optimize import minimize_scalar

            f = lambda t: -(C.chebval(t, C.chebder(self.cT)) / C.chebval(t, self.cT))
            r = minimize_scalar(f, bounds=(z[k - 1], z[k + 1]), method="bounded", options={"xatol": 1e-12})
            return float(-r.fun * 2.0 / (self.lb - self.la)), float(r.x)
        return float(w[k]), float(z[k])

    def _root_T(self, T, a, b) -> float:
        from scipy.optimize import brentq

        return brentq(lambda z: C.chebval(z, self.cT) - T, a, b, xtol=1e-15, rtol=1e-15)

    def coexistence(self) -> dict | None:
        """The equal-Omega point between the hot (small l) and cold (large l) branches, or None.

        Needs exactly two folds, a minimum of T at the smaller l and a maximum at the larger, and an
        interval reaching past both spinodal temperatures on either side."""
        from scipy.optimize import brentq

        f = self.folds()
        if len(f) != 2:
            return None
        z1, z2 = f
        T1, T2 = self.T(z1), self.T(z2)
        if not (T1 < T2 and self.T(-1.0) > T2 and self.T(1.0) < T1):
            return None
        w = C.chebint(C.chebmul(self.cs, C.chebder(self.cT)))

        def ends(T):
            return self._root_T(T, -1.0, z1), self._root_T(T, z2, 1.0)

        def dP(T):  # P_cold - P_hot at temperature T
            zh, zc = ends(T)
            return C.chebval(zc, w) - C.chebval(zh, w)

        eps = 1e-12 * (T2 - T1)
        Ts = brentq(dP, T1 + eps, T2 - eps, xtol=1e-15, rtol=1e-15)
        zh, zc = ends(Ts)
        s_h, s_c = C.chebval(zh, self.cs), C.chebval(zc, self.cs)
        r_h, r_c = C.chebval(zh, self.crho), C.chebval(zc, self.crho)
        return {"T": float(Ts), "z_hot": zh, "z_cold": zc, "s_hot": float(s_h), "s_cold": float(s_c),
                "rho_hot": float(r_h), "rho_cold": float(r_c), "latent_heat": float(Ts * (s_h - s_c)),
                "T_spinodal_low": float(T1), "T_spinodal_high": float(T2),
                "phi0_hot": float(math.exp(self.log_phi0(zh))), "phi0_cold": float(math.exp(self.log_phi0(zc)))}

    def crossover(self) -> dict | None:
        """The interior maximum of ``ds/dT`` at fixed mu (no folds), or None."""
        from scipy.optimize import minimize_scalar

        if self.folds():
            return None
        dT, ds = C.chebder(self.cT), C.chebder(self.cs)
        z = np.linspace(-1.0, 1.0, 4001)
        c = C.chebval(z, ds) / C.chebval(z, dT)
        k = int(np.argmax(c))
        if not 2 <= k <= len(z) - 3:
            return None
        r = minimize_scalar(lambda t: -C.chebval(t, ds) / C.chebval(t, dT), bounds=(z[k - 2], z[k + 2]),
                            method="bounded", options={"xatol": 1e-12})
        return {"T": float(self.T(r.x)), "z": float(r.x), "ds_dT": float(-r.fun),
                "s": float(C.chebval(r.x, self.cs)), "phi0": float(math.exp(self.log_phi0(r.x)))}


def sample(sh, mu: float, la: float, lb: float, n: int, ss: ShootSettings, cnt: Counters) -> tuple[Curve, Curve]:
    """The curve at ``n`` Lobatto nodes (``n`` odd) and its interpolant on the ``(n+1)/2`` subset."""
    if n % 2 == 0:
        raise ValueError("n must be odd (the coarse subset shares the nodes)")
    z = lobatto(n)
    L = la + 0.5 * (lb - la) * (z + 1.0)
    lc, uc, _ = coarse_curve(sh, mu)
    if len(lc) < 2:
        raise ArithmeticError(f"no brane at mu = {mu:.6g} in the coarse scan")
    U0 = np.interp(L, lc, uc)
    _, X = solve_u(sh, np.exp(L), U0, mu, ss, cnt)
    if not np.all(np.isfinite(X)):
        bad = int(np.sum(~np.isfinite(X[:, 0])))
        raise ArithmeticError(f"{bad} of {n} curve nodes at mu = {mu:.6g} did not converge")
    fine = Curve(mu, la, lb, *(lobatto_fit(X[:, k]) for k in (0, 2, 3)))
    # every other node of an odd Lobatto set is the Lobatto set of (n + 1) / 2 points
    half = Curve(mu, la, lb, *(lobatto_fit(X[::2, k]) for k in (0, 2, 3)))
    return fine, half


def window(sh, mu: float, T_lo: float, T_hi: float) -> tuple[float, float] | None:
    """Interval in ``l = log phi0`` whose coarse-curve temperatures span ``[T_lo, T_hi]`` (one coarse
    node of margin on each side), or None when the coarse curve does not reach that range."""
    lc, _, Ts = coarse_curve(sh, mu)
    if len(lc) < 3:
        return None
    inside = np.flatnonzero((Ts >= T_lo) & (Ts <= T_hi))
    if len(inside) == 0:
        return None
    i0, i1 = max(int(inside[0]) - 1, 0), min(int(inside[-1]) + 1, len(lc) - 1)
    return float(lc[i0]), float(lc[i1])
