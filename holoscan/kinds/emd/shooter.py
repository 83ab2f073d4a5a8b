"""Targeted solves of a charged brane with a dynamical scalar, on every branch.

Horizon data are ``q = (phi0, u)`` with ``Phi1 = u * Phi1_max(phi0)`` (``Phi1_max`` makes the horizon
slope ``A'(0)`` vanish). One shot gives dimensionless observables (:mod:`holoscan.bulk.scalar_brane`):
``x = mu/T``, the dimensionless source ``j = J/T^(d-Delta)``, ``s/T^(d-1)`` and ``rho/T^(d-1)``.
A target is two conditions on ``q``:

- sourced scalar (non-conformal; units of the source, ``J = 1``): ``T = j^(-1/(d-Delta))`` and
  ``x = mu/T``, written as ``F = (-log(j)/(d-Delta) - log(T), x - mu/T)``;
- unsourced scalar (a conformal family): ``F = (j, x - mu/T)``, then the scaling symmetry sets T.

All branches: a coarse scan of horizon data (loose tolerance, short runs) is made once per model. For
a sourced scalar every triangle of the scan grid whose image encloses ``F = 0`` seeds a Newton
iteration (finite-difference Jacobian) at full tolerance; for an unsourced one the ``j = 0`` family
is traced through the scan (one point per ``phi0`` node) and every crossing of the target ``mu/T``
along it is a seed; converged roots closer than ``1e-7`` in ``q`` are one branch. No root is
"no solution". ``mu < 0`` uses the sign symmetry (``rho`` odd).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ...bulk.scalar_brane import ScalarBrane
from ...numerics import Counters, ShootSettings
from ...numerics.batch import dop853_batch

#: boundary dimension of the emd kind (five bulk dimensions)
D_BOUNDARY = 4


def physical(o, d: int, D: float) -> np.ndarray:
    """Dimensionless observations ``(x, j, s/T^(d-1), rho/T^(d-1))`` (one row or rows) to
    ``(T, mu, s, rho)`` in units of the source, ``J^(1/(d - Delta)) = 1`` (same shape)."""
    o = np.asarray(o, float)
    rows = np.atleast_2d(o)
    with np.errstate(invalid="ignore", divide="ignore"):
        T = rows[:, 1] ** (-1.0 / (d - D))
        X = np.column_stack([T, rows[:, 0] * T, rows[:, 2] * T ** (d - 1), rows[:, 3] * T ** (d - 1)])
    return X[0] if o.ndim == 1 else X


@dataclass(frozen=True)
class Grid:
    """Coarse scan of horizon data: ``phi0`` and ``u`` nodes and the observables at each node."""

    phi0: np.ndarray
    u: np.ndarray
    obs: np.ndarray = field(repr=False)  # (n_phi0, n_u, 4): x, j, s_hat, rho_hat (NaN where a shot failed)


class EMDShooter:
    """Shoot one model at horizon data ``(phi0, u)``; counts every shot."""

    def __init__(self, brane: ScalarBrane, kappa_sq: float, sourced: bool, phi0_max: float = 6.0,
                 n_phi0: int = 33, n_u: int = 13, u_max: float = 0.96):
        self.brane, self.kappa_sq, self.sourced = brane, kappa_sq, sourced
        self.phi0_max, self.n_phi0, self.n_u, self.u_max = phi0_max, n_phi0, n_u, u_max
        self._grid = None
        #: coarse scans only seed Newton: a loose tolerance and a shorter run suffice
        self.coarse_settings = ShootSettings(rtol=1e-6)
        self.coarse_brane = ScalarBrane(brane.d, brane.V, brane.f, brane.delta, A_end=min(brane.A_end, 10.0))
        self.cache: dict = {}  # model-level results shared by the points of a process (pressure reference)

    def phi0_nodes(self) -> np.ndarray:
        """Coarse-scan nodes: geometric in (1e-2, phi0_max] for a sourced scalar (phi0 > 0 is the
        sign of a positive source), symmetric and denser near 0 for an unsourced one."""
        if self.sourced:
            return np.geomspace(1e-2, self.phi0_max, self.n_phi0)
        k = np.linspace(-1.0, 1.0, self.n_phi0)
        return self.phi0_max * np.sign(k) * k**2

    def Phi1_max(self, phi0: float) -> float:
        V = float(self.brane.V.derivs(phi0)[0])
        f = float(self.brane.f.derivs(phi0)[0])
        return math.sqrt(max(-2.0 * V / f, 0.0))

    def observe(self, q, ss: ShootSettings, cnt: Counters | None = None, record: bool = False,
                brane: ScalarBrane | None = None) -> np.ndarray | None:
        """Observables at one horizon datum q, or None (see :meth:`observe_many`)."""
        o = self.observe_many([q], ss, cnt, record, brane)[0]
        return o if np.all(np.isfinite(o)) else None

    def observe_many(self, Q, ss: ShootSettings, cnt: Counters | None = None, record: bool = False,
                     brane: ScalarBrane | None = None, detail: dict | None = None,
                     readout_check: float = 0.0) -> np.ndarray:
        """Observables ``(x, j, s_hat, rho_hat)`` at many horizon data ``Q`` (shape (B, 2)) in one
        batched integration (rows of NaN where a shot failed). The integration variable is the warp
        factor ``A`` itself, so every column ends exactly at ``A_end``. ``detail`` (a dict) receives
        per-shot arrays ``residual`` (field-equation residual and frame mismatch, when ``record``),
        ``nfev`` and ``nsteps``; with ``readout_check > 0`` also ``early``: the observables read off on
        the way, at ``A_end - readout_check`` (a check of the boundary read-out's truncation)."""
        brane = brane or self.brane
        Q = np.atleast_2d(np.asarray(Q, dtype=float))
        nb = len(Q)
        with np.errstate(all="ignore"):
            Pm = np.sqrt(np.maximum(-2.0 * np.asarray(brane.V.derivs(Q[:, 0])[0], float)
                                    / np.asarray(brane.f.derivs(Q[:, 0])[0], float), 0.0))
        y0 = brane.start_states(Q[:, 0], Q[:, 1] * Pm, ss.horizon_offset)
        good = np.all(np.isfinite(y0), axis=0)
        out = np.full((nb, 4), np.nan)
        if detail is not None:
            detail.update(residual=np.full(nb, np.nan), nfev=np.zeros(nb, np.int64), nsteps=np.zeros(nb, np.int64))
        if not np.any(good):
            return out
        yg = y0[:, good]

        def fun(y):
            return brane.rhs(None, y) / y[1]

        monitor = (lambda y: brane.residual(None, y)) if record else None
        early = None
        if detail is not None and readout_check > 0:
            # two legs: read off at A_end - readout_check on the way (no extra steps), then at A_end
            leg = dop853_batch(fun, yg[0], yg, brane.A_end - readout_check, ss.rtol, monitor=monitor)
            early = brane.boundary_dimensionless_many(leg.y, self.kappa_sq)
            res = dop853_batch(fun, np.full(yg.shape[1], brane.A_end - readout_check), leg.y, brane.A_end, ss.rtol,
                               monitor=monitor)
            res.ok &= leg.ok
            res.nfev += leg.nfev
            res.nsteps += leg.nsteps
            res.residual = np.maximum(res.residual, leg.residual)
        else:
            res = dop853_batch(fun, yg[0], yg, brane.A_end, ss.rtol, monitor=monitor)
        if cnt is not None:
            cnt.nfev += int(res.nfev.sum())
            cnt.nsteps += int(res.nsteps.sum())
            cnt.shots += int(good.sum())
        cols = np.flatnonzero(good)
        if detail is not None:
            detail["nfev"][cols], detail["nsteps"][cols] = res.nfev, res.nsteps
        o = brane.boundary_dimensionless_many(res.y, self.kappa_sq)
        rows = np.column_stack([o["x"], o["j"], o["s_hat"], o["rho_hat"]])
        fine = res.ok & np.all(np.isfinite(rows), axis=1)
        out[cols[fine]] = rows[fine]
        if early is not None:
            ext = np.full((nb, 4), np.nan)
            rows1 = np.column_stack([early["x"], early["j"], early["s_hat"], early["rho_hat"]])
            ext[cols[fine]] = rows1[fine]
            detail["early"] = ext
        if record:
            r = np.maximum(res.residual, o["frame_mismatch"])
            if cnt is not None and np.any(fine):
                cnt.residual = max(cnt.residual, float(np.max(r[fine])))
            if detail is not None:
                detail["residual"][cols[fine]] = r[fine]
        return out

    def grid(self) -> Grid:
        """The coarse scan (loose tolerance), computed once per shooter."""
        if self._grid is None:
            phi0 = self.phi0_nodes()
            u = np.linspace(0.0, self.u_max, self.n_u)
            P, W = np.meshgrid(phi0, u, indexing="ij")
            obs = self.observe_many(np.column_stack([P.ravel(), W.ravel()]), self.coarse_settings,
                                    brane=self.coarse_brane)
            self._grid = Grid(phi0, u, obs.reshape(len(phi0), len(u), 4))
        return self._grid

    # -- residual of a target -----------------------------------------------------------------------
    def residual(self, o: np.ndarray, T_hat: float, x: float) -> np.ndarray:
        d, D = self.brane.d, self.brane.delta
        if self.sourced:
            first = -math.log(o[1]) / (d - D) - math.log(T_hat) if o[1] > 0 else math.nan
        else:
            first = o[1]
        return np.array([first, o[0] - x])


def _seeds(sh: EMDShooter, T_hat: float, x: float) -> list[np.ndarray]:
    g = sh.grid()
    F = np.full(g.obs.shape[:2] + (2,), np.nan)
    for i in range(len(g.phi0)):
        for m in range(len(g.u)):
            if np.all(np.isfinite(g.obs[i, m])):
                F[i, m] = sh.residual(g.obs[i, m], T_hat, x)
    seeds = []
    for i in range(len(g.phi0) - 1):
        for m in range(len(g.u) - 1):
            corners = [(i, m), (i + 1, m), (i + 1, m + 1), (i, m + 1)]
            for tri in (corners[:3], [corners[0], corners[2], corners[3]]):
                P = np.array([F[a, b] for a, b in tri])
                if not np.all(np.isfinite(P)):
                    continue
                M = np.array([P[1] - P[0], P[2] - P[0]]).T
                if abs(np.linalg.det(M)) < 1e-300:
                    continue
                lam = np.linalg.solve(M, -P[0])
                l0 = 1.0 - lam.sum()
                if min(l0, lam[0], lam[1]) >= -0.1:
                    Q = np.array([[g.phi0[a], g.u[b]] for a, b in tri])
                    seeds.append(Q[0] + lam[0] * (Q[1] - Q[0]) + lam[1] * (Q[2] - Q[0]))
    return seeds


def _newton(sh: EMDShooter, q, T_hat, x, ss, cnt, tol=1e-12, accept=1e-8, maxiter=30):
    """Damped Newton on F(q) = 0 with a forward-difference Jacobian.

    Stops when ``|F| < tol`` or when the step falls below ``1e-13 (1 + |q|)`` (the noise floor of the
    shots: the source ``j`` is a difference of nearly equal boundary terms); succeeds if then
    ``|F| < accept``. Returns (q, |F|, iterations, observables) or None.
    """
    q = np.array(q, float)
    o = sh.observe(q, ss, cnt)
    if o is None:
        return None
    F = sh.residual(o, T_hat, x)
    for it in range(1, maxiter + 1):
        if not np.all(np.isfinite(F)):
            return None
        nF = float(np.max(np.abs(F)))
        if nF < tol:
            return q, nF, it - 1, o
        dq = np.array([1e-7 * max(1.0, abs(q[0])), 1e-7])
        pts = sh.observe_many([q + [dq[0], 0.0], q + [0.0, dq[1]]], ss, cnt)
        if not np.all(np.isfinite(pts)):
            return None
        J = np.column_stack([(sh.residual(pts[k], T_hat, x) - F) / dq[k] for k in range(2)])
        try:
            step = np.linalg.solve(J, -F)
        except np.linalg.LinAlgError:
            return None
        if np.max(np.abs(step)) < 1e-13 * (1.0 + np.max(np.abs(q))):
            return (q, nF, it, o) if nF < accept else None
        lam = 1.0
        while lam > 1e-4:
            qn = q + lam * step
            on = sh.observe(qn, ss, cnt) if abs(qn[1]) < 1.0 else None
            if on is not None:
                Fn = sh.residual(on, T_hat, x)
                nFn = float(np.max(np.abs(Fn))) if np.all(np.isfinite(Fn)) else np.inf
                if nFn < max(nF * (1 - 1e-4 * lam), 1e-2 * accept):
                    if nF < accept and nFn > 0.5 * nF:  # at the noise floor: no more progress to make
                        return (qn, nFn, it, on) if nFn <= nF else (q, nF, it, o)
                    q, o, F = qn, on, Fn
                    break
            lam *= 0.5
        else:
            return (q, nF, it, o) if nF < accept else None
    nF = float(np.max(np.abs(F)))
    return (q, nF, maxiter, o) if nF < accept else None


def family_curve(sh: EMDShooter, iterations: int = 6) -> np.ndarray:
    """Unsourced models: points ``(phi0, u, x)`` on the ``j = 0`` family, one per coarse ``phi0`` node.

    At each node the first sign change of ``j`` along the coarse ``u`` nodes is refined by a few
    batched regula-falsi (Illinois) steps at loose tolerance: these points are seeds only.
    """
    if "family" in sh.cache:
        return sh.cache["family"]
    g = sh.grid()
    ss, coarse = sh.coarse_settings, sh.coarse_brane
    exact, brackets = [], []
    for i, p in enumerate(g.phi0):
        js = g.obs[i, :, 1]
        for m in range(len(g.u) - 1):
            a, b = js[m], js[m + 1]
            if not (np.isfinite(a) and np.isfinite(b)):
                break
            if a == 0.0:
                exact.append((p, g.u[m], g.obs[i, m, 0]))
                break
            if a * b < 0:
                brackets.append([p, g.u[m], g.u[m + 1], a, b])
                break
    pts = list(exact)
    if brackets:
        br = np.array(brackets)
        for _ in range(iterations):
            w = br[:, 1] - br[:, 3] * (br[:, 2] - br[:, 1]) / (br[:, 4] - br[:, 3])
            o = sh.observe_many(np.column_stack([br[:, 0], w]), ss, brane=coarse)
            jw = o[:, 1]
            left = np.sign(jw) == np.sign(br[:, 3])
            # Illinois: halve the value kept at the stale end
            br[:, 4] = np.where(left, br[:, 4] * 0.5, br[:, 4])
            br[:, 3] = np.where(~left, br[:, 3] * 0.5, br[:, 3])
            br[:, 1] = np.where(left, w, br[:, 1])
            br[:, 3] = np.where(left, jw, br[:, 3])
            br[:, 2] = np.where(~left, w, br[:, 2])
            br[:, 4] = np.where(~left, jw, br[:, 4])
        last = sh.observe_many(np.column_stack([br[:, 0], w]), ss, brane=coarse)
        for k in range(len(br)):
            if np.all(np.isfinite(last[k])):
                pts.append((br[k, 0], w[k], last[k, 0]))
    fam = np.array(sorted(pts)).reshape(-1, 3)
    sh.cache["family"] = fam
    return fam


def _family_seeds(sh: EMDShooter, x: float) -> list[np.ndarray]:
    fam = family_curve(sh)
    seeds = [p[:2].copy() for p in fam if p[2] == x]
    for k in range(len(fam) - 1):
        a, b = fam[k, 2] - x, fam[k + 1, 2] - x
        if a * b < 0:
            t = a / (a - b)
            seeds.append(fam[k, :2] + t * (fam[k + 1, :2] - fam[k, :2]))
    return seeds


def find_branches(sh: EMDShooter, T_hat: float, x: float, ss: ShootSettings, cnt: Counters):
    """All roots ``q`` of the target; list of (q, |F|, iterations, observables), sorted by phi0."""
    roots = []
    seeds = _seeds(sh, T_hat, x) if sh.sourced else _family_seeds(sh, x)
    loose = ShootSettings(rtol=max(ss.rtol, 1e-7), horizon_offset=ss.horizon_offset)
    for seed in seeds:
        if any(np.max(np.abs(seed - r[0])) < 1e-3 for r in roots):
            continue  # a neighbouring triangle already led to this root
        # cheap iterations at a loose tolerance first, then polish at the requested one
        r0 = _newton(sh, seed, T_hat, x, loose, cnt, tol=1e-8, accept=1e-5)
        r = _newton(sh, r0[0] if r0 is not None else seed, T_hat, x, ss, cnt)
        if r is None:
            continue
        q = r[0]
        if abs(q[1]) < 1e-14:
            q = np.array([q[0], 0.0])
        if not any(np.max(np.abs(q - o[0])) < 1e-7 for o in roots):
            roots.append((q, *r[1:]))
    return sorted(roots, key=lambda r: r[0][0])
