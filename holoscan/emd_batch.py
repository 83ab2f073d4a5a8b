"""Many targeted Einstein-Maxwell-dilaton points at once, through the atlas of the model's
horizon-data map (:mod:`holoscan.atlas.brane_map`): the production path for kind ``emd``.

Per batch of targets ``(T, mu)`` (config units):

1. *Seeds* for every branch, vectorised: the triangles of the model's coarse scan whose image
   encloses the target (sourced), or the crossings of the target ``mu/T`` along the ``j = 0`` family
   (unsourced) -- the same seeds as the point-by-point solver (:mod:`holoscan.emd_solver`).
2. *Newton on the atlas* for all (target, seed) pairs together; roots closer than ``1e-7`` in
   horizon data are one branch.
3. *Verification*: one direct shot per root, all roots in one batched integration at the
   production tolerance. The atlas values at the root (``T``, ``mu``, ``s``, ``rho``) are compared
   with the shot's; the largest relative difference is the point's ``atlas_mismatch`` and enters its
   error estimate, and the shot gives the field-equation residual. Reported values are the atlas's
   (built from shots 100 times tighter).
4. *Thermodynamics* from the atlas's exact derivatives: the Hessian of P (chi2, cs2, stability);
   the pressure by the first law along two routes on the atlas (sourced), or ``P = (T s + mu rho)/d``
   (unsourced). ``deriv_error`` compares the derivatives with those of the atlas less its last two
   Chebyshev orders.

A target with a seed outside the atlas (``u > U_MAX``), or whose Newton iteration leaves it, is
solved point by point instead (``method`` then says ``shooting``). Every root is a row with its own
status, error estimate and evidence; ``wall_time`` is the batch's time shared equally by its targets.
"""
from __future__ import annotations

import math
import time

import numpy as np

from .atlas.brane_map import U_MAX, BraneMap
from .atlas.build import FLAG_NAMES
from .emd_pressure import lobatto
from .emd_solver import family_curve
from .result import PointResult, Status

D_BOUNDARY = 4
_GL_X, _GL_W = np.polynomial.legendre.leggauss(24)


# -- seeds -------------------------------------------------------------------------------------------
def _triangles(g, sourced, k):
    """Coarse-scan triangles: corner horizon data (N, 3, 2) and images (N, 3, 2) in (log T_hat or j, x)."""
    o = g.obs
    with np.errstate(all="ignore"):
        f1 = -np.log(o[..., 1]) / k if sourced else o[..., 1]
    img = np.stack([f1, o[..., 0]], axis=-1)
    P, W = np.meshgrid(g.phi0, g.u, indexing="ij")
    q = np.stack([P, W], axis=-1)
    tris_q, tris_f = [], []
    n0, n1 = len(g.phi0), len(g.u)
    for a, b, c in (((0, 0), (1, 0), (1, 1)), ((0, 0), (1, 1), (0, 1))):
        sl = [(slice(i, n0 - 1 + i), slice(j, n1 - 1 + j)) for i, j in (a, b, c)]
        tris_q.append(np.stack([q[s] for s in sl], axis=2).reshape(-1, 3, 2))
        tris_f.append(np.stack([img[s] for s in sl], axis=2).reshape(-1, 3, 2))
    Q, Fi = np.concatenate(tris_q), np.concatenate(tris_f)
    ok = np.all(np.isfinite(Fi), axis=(1, 2))
    return Q[ok], Fi[ok]


def sourced_seeds(sh, a, x, block: int = 512):
    """(target index, seed) pairs: triangles whose image encloses (a = log T_hat, x), with a 10% margin."""
    Q, Fi = _triangles(sh.grid(), True, sh.brane.d - sh.brane.delta)
    P0, E1, E2 = Fi[:, 0], Fi[:, 1] - Fi[:, 0], Fi[:, 2] - Fi[:, 0]
    det = E1[:, 0] * E2[:, 1] - E1[:, 1] * E2[:, 0]
    good = np.abs(det) > 1e-300
    P0, E1, E2, det, Q = P0[good], E1[good], E2[good], det[good], Q[good]
    out_t, out_q = [], []
    for s in range(0, len(a), block):
        ta, tx = a[s:s + block, None], x[s:s + block, None]
        r0, r1 = ta - P0[None, :, 0], tx - P0[None, :, 1]
        l1 = (r0 * E2[None, :, 1] - r1 * E2[None, :, 0]) / det[None, :]
        l2 = (E1[None, :, 0] * r1 - E1[None, :, 1] * r0) / det[None, :]
        hit = (l1 >= -0.1) & (l2 >= -0.1) & (1 - l1 - l2 >= -0.1)
        ti, tr = np.nonzero(hit)
        qq = Q[tr, 0] + l1[ti, tr, None] * (Q[tr, 1] - Q[tr, 0]) + l2[ti, tr, None] * (Q[tr, 2] - Q[tr, 0])
        out_t.append(ti + s)
        out_q.append(qq)
    return np.concatenate(out_t), np.concatenate(out_q).reshape(-1, 2)


def family_seeds(sh, x):
    """(target index, seed) pairs: crossings of x along the unsourced family."""
    fam = family_curve(sh)
    if len(fam) < 2:
        return np.zeros(0, np.int64), np.zeros((0, 2))
    fx = fam[:, 2]
    te, ke = np.nonzero(fx[None, :] == x[:, None])            # family nodes exactly on the target
    a, b = fx[None, :-1] - x[:, None], fx[None, 1:] - x[:, None]
    ti, k = np.nonzero(a * b < 0)
    t = a[ti, k] / (a[ti, k] - b[ti, k])
    q = fam[k, :2] + t[:, None] * (fam[k + 1, :2] - fam[k, :2])
    return np.concatenate([te, ti]), np.concatenate([fam[ke, :2], q]).reshape(-1, 2)


# -- the batch ---------------------------------------------------------------------------------------
class BatchSolver:
    """Batched solves of one model (see module docstring)."""

    def __init__(self, model, sh, settings):
        self.model, self.sh, self.settings = model, sh, settings
        self.ss = settings.shoot_settings()
        self.map = BraneMap(sh, self.ss)
        self.sourced = sh.sourced

    # coordinates of the atlas from horizon data
    def _coords(self, q):
        return (np.log(q[:, 0]) if self.sourced else q[:, 0]), np.abs(q[:, 1])

    def roots(self, T, mu):
        """Per target: list of (c0, c1, newton norm, iterations), or None (solve point by point)."""
        L = getattr(self.model, "energy_scale", 1.0)
        x = np.abs(mu) / T
        a = np.log(T / L)
        if self.sourced:
            ti, q = sourced_seeds(self.sh, a, x)
        else:
            ti, q = family_seeds(self.sh, x)
        out = [[] for _ in T]
        fallback = np.zeros(len(T), bool)
        outside = q[:, 1] > U_MAX
        fallback[ti[outside]] = True
        keep = ~outside & ~fallback[ti]
        ti, q = ti[keep], q[keep]
        if len(q):
            c0, c1 = self._coords(q)
            end, norm, iters = self.map.newton(np.column_stack([c0, c1]), a[ti], x[ti])
            for t, e, nm, it in zip(ti, end, norm, iters):
                if fallback[t]:
                    continue
                if not np.isfinite(nm) or nm > 1e-9:
                    continue      # this seed led nowhere (as in the point solver); others may
                if abs(e[1]) < 1e-14:
                    e = np.array([e[0], 0.0])
                if not any(abs(e[0] - r[0]) < 1e-7 * max(1.0, abs(e[0])) and abs(e[1] - r[1]) < 1e-7 for r in out[t]):
                    out[t].append((e[0], e[1], nm, int(it)))
        for t in range(len(T)):
            out[t].sort(key=lambda r: r[0])
        return [None if fallback[t] else out[t] for t in range(len(T))]

    def solve(self, T, mu):
        """Results per target (lists of PointResult, unclassified) for arrays T, mu."""
        t0 = time.perf_counter()
        T, mu = np.asarray(T, float), np.asarray(mu, float)
        roots = self.roots(T, mu)
        flat = [(t, r) for t, rs in enumerate(roots) if rs for r in rs]
        results: list[list[PointResult]] = [[] for _ in T]
        if flat:
            ti = np.array([t for t, _ in flat])
            C = np.array([[r[0], r[1]] for _, r in flat])
            rows = self._rows(T[ti], mu[ti], C, [r[2] for _, r in flat], [r[3] for _, r in flat])
            for t, row in zip(ti, rows):
                results[t].append(row)
        share = (time.perf_counter() - t0) / max(len(T), 1)
        from .models.emd import solve_family, solve_sourced  # point-by-point fallback
        for t, rs in enumerate(roots):
            if rs is None:
                fn = solve_sourced if self.sourced else solve_family
                results[t] = fn(self.model, self.sh, float(T[t]), float(mu[t]), self.settings)
                continue
            if not rs:
                results[t] = [self._no_solution(T[t], mu[t], share)]
                continue
            results[t] = [_with(r, branch=b, wall_time=share) for b, r in enumerate(results[t])]
        return results

    def _common(self, T, mu):
        return dict(model_id=self.model.id, kind=self.model.kind, d=D_BOUNDARY, method="atlas", T=float(T),
                    mu=float(mu), rtol=self.ss.rtol, atol=self.ss.atol)

    def _no_solution(self, T, mu, share):
        L = getattr(self.model, "energy_scale", 1.0)
        where = f"T/Lambda = {T / L:.6g}, mu/T = {abs(mu) / T:.6g}" if self.sourced else f"mu/T = {abs(mu) / T:.6g}"
        return PointResult(**self._common(T, mu), status=Status.NO_SOLUTION, wall_time=share,
                           message=f"no brane of this model at {where} (horizon data scanned up to "
                                   f"phi0 = {self.sh.phi0_max:g})")

    # -- rows -------------------------------------------------------------------------------------------
    def _rows(self, T, mu, C, norms, iters):
        m, d = self.map, D_BOUNDARY
        g, dg, leaf = m.evaluate(C[:, 0], C[:, 1])
        gt, dgt, _ = m.evaluate(C[:, 0], C[:, 1], truncate=2)
        vals, grads = m.physical(C[:, 1], g, dg)
        _, grads_t = m.physical(C[:, 1], gt, dgt)
        # verification: one direct shot per root
        Q = np.column_stack([m.phi0(C[:, 0]), C[:, 1]])
        det = {}
        o = self.sh.observe_many(Q, self.ss, record=True, detail=det)
        ok_shot = np.all(np.isfinite(o), axis=1)
        direct_vals, _ = m.physical(C[:, 1], m.functions(o, np.where(C[:, 1] > 0, C[:, 1], 1.0)),
                                    np.zeros((len(C), 4, 2)))
        compared = [0, 1, 2, 3]
        if not self.sourced:
            # compare x, s_hat, rho_hat; the source j = 0 is the target condition (its direct value
            # is kept as evidence: ``direct_source``)
            direct_vals, compared = o.copy(), [0, 2, 3]
        with np.errstate(all="ignore"):
            diff = np.abs(direct_vals - vals)[:, compared]
            mismatch = np.max(np.where(diff == 0, 0.0, diff / np.maximum(np.abs(vals[:, compared]), 1e-300)), axis=1)
            scale = np.maximum(np.abs(grads), 1e-300)
            deriv_err = np.max(np.abs(grads - grads_t) / np.max(scale, axis=2, keepdims=True), axis=(1, 2))
        if self.sourced:
            P1, P2 = self._pressure(C)
        rows = []
        for k in range(len(C)):
            common = self._common(T[k], mu[k])
            sign = -1.0 if mu[k] < 0 else 1.0
            flag = FLAG_NAMES[int(m.atlas.flags(np.array([leaf[k]]))[0])]
            extra = {"horizon_phi0": float(Q[k, 0]), "horizon_u": float(Q[k, 1]) * sign,
                     "target_mismatch": float(norms[k]), "atlas_mismatch": float(mismatch[k]),
                     "deriv_error": float(deriv_err[k]), "atlas_leaf": flag,
                     "atlas_tail": float(m.atlas.tails(np.array([leaf[k]]))[0]), "shots": 1}
            if not self.sourced:
                extra["direct_source"] = float(o[k, 1])
            counts = dict(nfev=int(det["nfev"][k]), nsteps=int(det["nsteps"][k]), niter=int(iters[k]))
            if not ok_shot[k]:
                rows.append(PointResult(**common, status=Status.FAILED, extra=extra, **counts,
                                        message="the verification shot at the atlas root failed"))
                continue
            residual = float(det["residual"][k])
            if self.sourced:
                rows.append(self._sourced_row(common, sign, vals[k], grads[k], P1[k], P2[k], mismatch[k],
                                              residual, extra, counts, norms[k]))
            else:
                rows.append(self._family_row(common, sign, vals[k], grads[k], mismatch[k], residual, extra,
                                             counts, norms[k]))
        return rows

    def _finish(self, common, extra, counts, error, residual, fnorm, **obs):
        problems = self.settings.problems(error, residual)
        return PointResult(**common, **obs, status=Status.NOT_CONVERGED if problems else Status.OK,
                           message="; ".join(problems) or
                           f"converged on the atlas: |F| = {fnorm:.2e}; a direct shot agrees to {extra['atlas_mismatch']:.1e}",
                           residual=residual, error_estimate=error, extra=extra, **counts)

    def _sourced_row(self, common, sign, v, G, P1, P2, mismatch, residual, extra, counts, fnorm):
        from .thermo import cs2_from_hessian, hessian_from_jacobians, local_stability

        d, L = D_BOUNDARY, getattr(self.model, "energy_scale", 1.0)
        T, x = common["T"], abs(common["mu"]) / common["T"]
        P_TT, P_Tmu, P_mumu, maxwell = hessian_from_jacobians(G[:2], G[2:])
        s, rho, P = v[2] * L ** (d - 1), v[3] * L ** (d - 1), P1 * L**d
        f2 = L ** (d - 2)
        P_TT, P_Tmu, P_mumu = P_TT * f2, P_Tmu * f2, P_mumu * f2
        eps = T * s + x * T * rho - P
        P_mismatch = abs(P1 - P2) / max(abs(P1), 1e-300)
        extra.update(P_route2=P2 * L**d, P_mismatch=P_mismatch, trace_anomaly=(eps - 3 * P) / T**4,
                     maxwell_mismatch=maxwell, P_reference_power=self._P0().k_ref)
        return self._finish(common, extra, counts, max(mismatch, P_mismatch), residual, fnorm,
                            s=s, rho=sign * rho, epsilon=eps, P=P, chi2=P_mumu,
                            cs2=cs2_from_hessian(T, x * T, s, rho, P_TT, P_Tmu, P_mumu), P_check=P2 * L**d,
                            trace_anomaly=(eps - 3 * P) / T**4, stability=local_stability(P_TT, P_Tmu, P_mumu))

    def _family_row(self, common, sign, v, G, mismatch, residual, extra, counts, fnorm):
        from .thermo import cs2_from_hessian, hessian_from_jacobians, local_stability

        d = D_BOUNDARY
        T, x = common["T"], abs(common["mu"]) / common["T"]
        xs, _, sh_, rh = v
        t = np.array([G[1, 1], -G[1, 0]])
        t /= np.linalg.norm(t)
        dx, ds, dr = G[0] @ t, G[2] @ t, G[3] @ t
        Jt = np.array([[0.0, 1.0], [dx, xs]])
        Jd = np.array([[ds, (d - 1) * sh_], [dr, (d - 1) * rh]])
        P_TT, P_Tmu, P_mumu, maxwell = hessian_from_jacobians(Jt, Jd)
        f2 = T ** (d - 2)
        P_TT, P_Tmu, P_mumu = P_TT * f2, P_Tmu * f2, P_mumu * f2
        s, rho = sh_ * T ** (d - 1), rh * T ** (d - 1)
        P = (T * s + x * T * rho) / d
        extra.update(maxwell_mismatch=maxwell, trace_anomaly=0.0)
        return self._finish(common, extra, counts, mismatch, residual, fnorm,
                            s=s, rho=sign * rho, epsilon=(d - 1) * P, P=P, chi2=P_mumu,
                            cs2=cs2_from_hessian(T, x * T, s, rho, P_TT, P_Tmu, P_mumu), P_check=P,
                            trace_anomaly=0.0, stability=local_stability(P_TT, P_Tmu, P_mumu))

    # -- pressure on the atlas ----------------------------------------------------------------------
    def _P0(self):
        from .models.emd import _pressure_reference

        P0 = _pressure_reference(self.sh, self.ss)
        if isinstance(P0, Exception):
            raise ArithmeticError(str(P0))
        return P0

    def _segment(self, a, b, axis):
        """Integral of s dT + rho dmu along straight segments from a to b (M, 2) in (c0, c1) that
        move along one coordinate ``axis``: 24-point Gauss-Legendre, vectorised."""
        M = len(a)
        z = 0.5 * (_GL_X + 1.0)
        pts = a[:, None, :] + z[None, :, None] * (b - a)[:, None, :]
        P = pts.reshape(-1, 2)
        g, dg, _ = self.map.evaluate(P[:, 0], P[:, 1])
        v, G = self.map.physical(P[:, 1], g, dg)
        integrand = v[:, 2] * G[:, 0, axis] + v[:, 3] * G[:, 1, axis]
        length = (b - a)[:, axis]
        return 0.5 * length * (integrand.reshape(M, -1) @ _GL_W)

    def _pressure(self, C):
        """First-law pressure (source units) by two routes: up in u at the root's phi0; and up in u
        at phi0 shifted by 0.4 in log phi0, then across in log phi0 at the root's u."""
        P0 = self._P0()
        c0, c1 = C[:, 0], C[:, 1]
        P1 = np.array([P0(math.exp(c)) for c in c0]) + self._segment(
            np.column_stack([c0, 0 * c1]), C, 1)
        hi = self.map.atlas.domain[1]
        shift = np.where(c0 + 0.4 < hi, 0.4, -0.4)
        cs = c0 + shift
        Pref = np.array([P0(math.exp(c)) for c in cs])
        up = self._segment(np.column_stack([cs, 0 * c1]), np.column_stack([cs, c1]), 1)
        across = self._segment(np.column_stack([cs, c1]), C, 0)
        return P1, Pref + up + across


def _with(r: PointResult, **kw) -> PointResult:
    from dataclasses import replace

    return replace(r, **kw)


_SOLVERS: dict = {}


def batch_solver(model, sh, settings) -> BatchSolver:
    """One batch solver (and so one atlas) per model, solver settings and process."""
    key = (tuple(sorted(model.spec().items())), settings)
    if key not in _SOLVERS:
        _SOLVERS[key] = BatchSolver(model, sh, settings)
    return _SOLVERS[key]


__all__ = ["BatchSolver", "batch_solver", "lobatto"]
