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
   error estimate, and the shot gives the field-equation residual. At ``Delta = d/2`` (a logarithmic
   falloff, whose read-out drifts with where the shot stops) the shot is also read off on its way,
   ``READOUT_CHECK`` before its end; the change (``readout_drift``, times a safety
   factor; for an unsourced model the shot's source mapped to a shift along the family) enters the
   estimate too. Reported values are the atlas's
   (built from shots 100 times tighter).
4. *Thermodynamics* from the atlas's exact derivatives: the Hessian of P (chi2, cs2, stability);
   the pressure by the first law along two routes on the atlas (sourced), or ``P = (T s + mu rho)/d``
   (unsourced). ``deriv_error`` compares the derivatives with those of the atlas less its last two
   Chebyshev orders.

A target with a seed outside the atlas (``u > U_MAX``), or a seed whose Newton iteration on the
atlas does not converge after trying to step out of it, is solved point by point
instead (``method`` then says ``shooting``). Every root is a row with its own
status, error estimate and evidence; ``wall_time`` is the batch's time shared equally by its targets.
"""
from __future__ import annotations

import math
import time

import numpy as np

from .atlas.brane_map import U_MAX, BraneMap
from .atlas.resolution import FLAG_NAMES
from .emd_solver import family_curve
from .result import PointResult, Status

D_BOUNDARY = 4
#: at Delta = d/2 the verification shot is read off twice, at the brane's ``A_end`` and this much
#: earlier on the way; the change, times READOUT_SAFETY, enters the error estimate. Measured on the
#: one-charge black hole (Delta = 2, large |phi0|), where the read-out drifts with A_end: the change
#: over 2 units underestimated the error against the closed form by up to a factor 11 (300 random
#: targets, both branches), so the factor is 20.
READOUT_CHECK = 2.0
READOUT_SAFETY = 20.0
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
            end, norm, iters, edge = self.map.newton(np.column_stack([c0, c1]), a[ti], x[ti])
            for t, e, nm, it, out_ in zip(ti, end, norm, iters, edge):
                if fallback[t]:
                    continue
                if not np.isfinite(nm) or nm > 1e-9:
                    # a seed that leads nowhere is dropped (as in the point solver), unless its
                    # iteration tried to leave the atlas: the root may lie beyond, the point solver decides
                    fallback[t] |= bool(out_)
                    continue
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
        fields: list[list[dict]] = [[] for _ in T]
        if flat:
            ti = np.array([t for t, _ in flat])
            C = np.array([[r[0], r[1]] for _, r in flat])
            for t, row in zip(ti, self._rows(T[ti], mu[ti], C, [r[2] for _, r in flat], [r[3] for _, r in flat])):
                fields[t].append(row)
        share = (time.perf_counter() - t0) / max(len(T), 1)
        from .models.emd import solve_family, solve_sourced  # point-by-point fallback

        results: list[list[PointResult]] = []
        for t, rs in enumerate(roots):
            if rs is None:
                fn = solve_sourced if self.sourced else solve_family
                results.append(fn(self.model, self.sh, float(T[t]), float(mu[t]), self.settings))
            elif not rs:
                results.append([self._no_solution(T[t], mu[t], share)])
            else:
                results.append([PointResult(**f, branch=b, wall_time=share) for b, f in enumerate(fields[t])])
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
    def _rows(self, T, mu, C, norms, iters) -> list[dict]:
        """PointResult fields (all but branch and wall_time) for every root, vectorised."""
        from .thermo import cs2_from_hessian

        m, d = self.map, D_BOUNDARY
        L = getattr(self.model, "energy_scale", 1.0)
        M = len(C)
        g, dg, leaf = m.evaluate(C[:, 0], C[:, 1])
        gt, dgt, _ = m.evaluate(C[:, 0], C[:, 1], truncate=2)
        vals, grads = m.physical(C[:, 1], g, dg)
        _, grads_t = m.physical(C[:, 1], gt, dgt)
        # verification: one direct shot per root, all in one batched integration
        Q = np.column_stack([m.phi0(C[:, 0]), C[:, 1]])
        det = {}
        # at Delta = d/2 the scalar falls off as (a A + b) e^{-dA/2} and the read-out drifts with where
        # the shot stops (measured): check it; otherwise its corrections decay exponentially in A
        check = abs(m.delta - m.d / 2) < 1e-12
        o = self.sh.observe_many(Q, self.ss, record=True, detail=det, readout_check=READOUT_CHECK if check else 0.0)
        o2 = det["early"] if check else o
        ok_shot = np.all(np.isfinite(o), axis=1) & np.all(np.isfinite(o2), axis=1)
        if self.sourced:
            direct_vals, _ = m.physical(C[:, 1], m.functions(o, np.where(C[:, 1] > 0, C[:, 1], 1.0)),
                                        np.zeros((M, 4, 2)))
            compared = [0, 1, 2, 3]
        else:
            # compare x, s_hat, rho_hat; the source j = 0 is the target condition (its direct value is
            # kept as evidence: ``direct_source``)
            direct_vals, compared = o, [0, 2, 3]
        with np.errstate(all="ignore"):
            diff = np.abs(direct_vals - vals)[:, compared]
            mismatch = np.max(np.where(diff == 0, 0.0, diff / np.maximum(np.abs(vals[:, compared]), 1e-300)), axis=1)
            # the boundary read-out's own truncation: the same shot read off READOUT_CHECK earlier
            drift = np.abs(o2 - o)
            if self.sourced:
                v2, _ = m.physical(C[:, 1], m.functions(o2, np.where(C[:, 1] > 0, C[:, 1], 1.0)), np.zeros((M, 4, 2)))
                d2 = np.abs(v2 - direct_vals)
                readout = READOUT_SAFETY * np.max(np.where(d2 == 0, 0.0, d2 / np.maximum(np.abs(direct_vals), 1e-300)),
                                                  axis=1)
            else:
                # x, s_hat, rho_hat directly; the source j (0 on the family) through the distance it
                # puts between the shot's family and the root: dq = dj/|grad j|, then grad(.) dq
                dj = np.abs(o[:, 1]) + drift[:, 1]
                dq = dj / np.maximum(np.hypot(grads[:, 1, 0], grads[:, 1, 1]), 1e-300)
                moved = np.linalg.norm(grads[:, [0, 2, 3], :], axis=2) * dq[:, None] + drift[:, [0, 2, 3]]
                readout = READOUT_SAFETY * np.max(
                    np.where(moved == 0, 0.0, moved / np.maximum(np.abs(vals[:, [0, 2, 3]]), 1e-300)), axis=1)
            scale = np.max(np.maximum(np.abs(grads), 1e-300), axis=2, keepdims=True)
            deriv_err = np.max(np.abs(grads - grads_t) / scale, axis=(1, 2))
        x = np.abs(mu) / T
        sign = np.where(mu < 0, -1.0, 1.0)
        # Jacobians of (T, mu) and (s, rho) along two directions, in the units where the atlas lives
        if self.sourced:
            Jt, Jd = grads[:, :2, :], grads[:, 2:, :]
            s, rho = vals[:, 2] * L ** (d - 1), vals[:, 3] * L ** (d - 1)
            f2 = L ** (d - 2)
        else:
            xs, sh_, rh = vals[:, 0], vals[:, 2], vals[:, 3]
            tv = np.stack([grads[:, 1, 1], -grads[:, 1, 0]], axis=1)     # along the j = 0 family
            tv /= np.linalg.norm(tv, axis=1, keepdims=True)
            dx, ds, dr = (np.einsum("mk,mk->m", grads[:, k, :], tv) for k in (0, 2, 3))
            Jt = np.stack([np.stack([np.zeros(M), np.ones(M)], 1), np.stack([dx, xs], 1)], 1)
            Jd = np.stack([np.stack([ds, (d - 1) * sh_], 1), np.stack([dr, (d - 1) * rh], 1)], 1)
            s, rho = sh_ * T ** (d - 1), rh * T ** (d - 1)
            f2 = T ** (d - 2)
        with np.errstate(all="ignore"):
            H = Jd @ np.linalg.inv(Jt)
        s_mu, rho_T = H[:, 0, 1], H[:, 1, 0]
        maxwell = np.where((s_mu == 0) & (rho_T == 0), 0.0,
                           np.abs(s_mu - rho_T) / np.maximum(np.maximum(np.abs(s_mu), np.abs(rho_T)), 1e-300))
        P_TT, P_Tmu, P_mumu = H[:, 0, 0] * f2, 0.5 * (s_mu + rho_T) * f2, H[:, 1, 1] * f2
        stable = (P_TT > 0) & (P_TT * P_mumu - P_Tmu**2 > 0)
        if self.sourced:
            P1, P2 = self._pressure(C)
            P, P_check = P1 * L**d, P2 * L**d
            eps = T * s + x * T * rho - P
            trace = (eps - 3 * P) / T**4
            P_mismatch = np.abs(P1 - P2) / np.maximum(np.abs(P1), 1e-300)
            error = np.maximum(np.maximum(mismatch, readout), P_mismatch)
            k_ref = self._P0().k_ref
        else:
            P = (T * s + x * T * rho) / d
            P_check, eps, trace, error = P, (d - 1) * P, np.zeros(M), np.maximum(mismatch, readout)
        cs2 = cs2_from_hessian(T, x * T, s, rho, P_TT, P_Tmu, P_mumu)
        flags = m.atlas.flags(leaf)
        tails = m.atlas.tails(leaf)
        rows = []
        for k in range(M):
            common = self._common(T[k], mu[k])
            extra = {"horizon_phi0": float(Q[k, 0]), "horizon_u": float(Q[k, 1] * sign[k]),
                     "target_mismatch": float(norms[k]), "atlas_mismatch": float(mismatch[k]),
                     "deriv_error": float(deriv_err[k]), "atlas_leaf": FLAG_NAMES[int(flags[k])],
                     "atlas_tail": float(tails[k]), "shots": 1, "maxwell_mismatch": float(maxwell[k]),
                     "readout_drift": float(readout[k]) if check else math.nan,
                     "trace_anomaly": float(trace[k])}
            if self.sourced:
                extra.update(P_route2=float(P_check[k]), P_mismatch=float(P_mismatch[k]), P_reference_power=k_ref)
            else:
                extra["direct_source"] = float(o[k, 1])
            counts = dict(nfev=int(det["nfev"][k]), nsteps=int(det["nsteps"][k]), niter=int(iters[k]))
            if not ok_shot[k]:
                rows.append(dict(**common, status=Status.FAILED, extra=extra, **counts,
                                 message="the verification shot at the atlas root failed"))
                continue
            residual = float(det["residual"][k])
            problems = self.settings.problems(float(error[k]), residual)
            rows.append(dict(
                **common, s=float(s[k]), rho=float(sign[k] * rho[k]), epsilon=float(eps[k]), P=float(P[k]),
                chi2=float(P_mumu[k]), cs2=float(cs2[k]), P_check=float(P_check[k]), trace_anomaly=float(trace[k]),
                stability="stable" if stable[k] else "unstable",
                status=Status.NOT_CONVERGED if problems else Status.OK,
                message="; ".join(problems) or (f"converged on the atlas: |F| = {norms[k]:.2e}; a direct shot "
                                                f"agrees to {mismatch[k]:.1e}"),
                residual=residual, error_estimate=float(error[k]), extra=extra, **counts))
        return rows

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


_SOLVERS: dict = {}


def batch_solver(model, sh, settings) -> BatchSolver:
    """One batch solver (and so one atlas) per model, solver settings and process."""
    key = (tuple(sorted(model.spec().items())), settings)
    if key not in _SOLVERS:
        _SOLVERS[key] = BatchSolver(model, sh, settings)
    return _SOLVERS[key]


__all__ = ["BatchSolver", "batch_solver"]
