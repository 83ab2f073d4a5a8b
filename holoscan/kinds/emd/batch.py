"""Many targeted Einstein-Maxwell-dilaton points at once, through the atlas of the model's
horizon-data map (:mod:`holoscan.kinds.emd.brane_map`): the production path for kind ``emd``.

Per batch of targets ``(T, mu)`` (config units):

1. *Seeds* for every branch, vectorised: the triangles of the model's coarse scan whose image
   encloses the target (sourced), or the crossings of the target ``mu/T`` along the ``j = 0`` family
   (unsourced) -- the same seeds as the point-by-point solver (:mod:`holoscan.kinds.emd.shooter`).
2. *Newton on the atlas* for all (target, seed) pairs together; roots closer than ``1e-7`` in
   horizon data are one branch.
3. *Verification*: two direct shots per root, each batch of roots in one batched integration:
   one with the atlas nodes' settings (the difference is the atlas's interpolation error,
   ``atlas_mismatch``; this shot gives the field-equation residual), one with the tolerance, the
   horizon offset and the read-out point varied (``offset_change``, ``readout_drift``). Each
   change is mapped to ``s`` and ``rho`` at the target's ``(T, mu)`` and they add up. Reported
   values are the atlas's (built from shots 100 times tighter than production).
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
from dataclasses import replace

import numpy as np

from ...numerics.memo import Memo
from ...numerics.resolution import FLAG_NAMES
from ...result import PointResult, Status
from .brane_map import U_MAX, BraneMap
from .pointwise import DERIV_ROUNDOFF, pressure_reference, solve_family, solve_sourced
from .shooter import D_BOUNDARY, family_curve

#: the second verification shot varies the tolerance (times RTOL_VARIATION), the horizon hand-over
#: (offset times OFFSET_VARIATION) and is also read off READOUT_CHECK before the end of the
#: integration. At Delta = d/2 the source's logarithmic falloff leaves a read-out truncation that
#: falls by about e^4 per 2 units of A (measured on the one-charge black hole: source changes of
#: 2.0e-6, 3.7e-8 and 4e-10 between A = 11, 13, 15 and 20, independent of the horizon offset), so
#: the change over READOUT_CHECK bounds the remaining truncation about 50 times over.
OFFSET_VARIATION = 10.0
RTOL_VARIATION = 10.0
READOUT_CHECK = 2.0
#: observables covered by the error estimate, in the order of ``extra["error_by_observable"]``
ERROR_OBSERVABLES = ("s", "rho", "P", "epsilon", "chi2", "cs2")
#: double-precision round-off of the read-out and the Hessian: added to every per-observable
#: estimate, and to the absolute errors of s and rho times the larger of |s|, |rho|
ROUNDOFF = 1e-13
#: safety factor on the derivatives' truncation proxy (the atlas less its last two orders): against
#: the one-charge closed form on a 60 x 60 (T, mu/T) grid the proxy alone fell short of the actual
#: chi2 error by up to 3.6 times near mu/T = 1.93 (where the family turns), so it is taken 10 times
DERIV_SAFETY = 10.0
#: chi3, chi4: the atlas less its last k orders for each k here gives the truncation proxy (the largest change)
CUMULANT_TRUNCATIONS = (1, 2, 3)
#: an atlas row whose chi2 or cs2 estimate misses accept_error by at most this factor (all else
#: within it) has its derivatives checked by a second method (finite differences of direct shots)
NEAR_MISS = 10.0
_GL_X, _GL_W = np.polynomial.legendre.leggauss(24)


def _at_fixed_target(delta, grads, fi, oi):
    """Change of the observables ``oi`` at fixed values of the target functions ``fi``, from a
    change ``delta`` (M, 4) of all four at fixed horizon data: ``dO - grad O (grad F)^-1 dF``."""
    GF, GO = grads[:, fi, :], grads[:, oi, :]
    det = GF[:, 0, 0] * GF[:, 1, 1] - GF[:, 0, 1] * GF[:, 1, 0]
    dF = delta[:, fi]
    dq = np.column_stack([(GF[:, 1, 1] * dF[:, 0] - GF[:, 0, 1] * dF[:, 1]) / det,
                          (-GF[:, 1, 0] * dF[:, 0] + GF[:, 0, 0] * dF[:, 1]) / det])
    return delta[:, oi] - np.einsum("mij,mj->mi", GO, dq)


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


def _note_beyond(r: PointResult, note: str) -> PointResult:
    """The result with a note that a branch may lie beyond the solver's reach."""
    return replace(r, message=f"{r.message}; {note}", extra={**r.extra, "beyond_reach": note})


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
        L = self.model.energy_scale
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

        results: list[list[PointResult]] = []
        beyond = self._beyond_reach(np.abs(mu) / T)
        for t, rs in enumerate(roots):
            if rs is None:
                fn = solve_sourced if self.sourced else solve_family
                results.append(fn(self.model, self.sh, float(T[t]), float(mu[t]), self.settings))
            elif not rs:
                results.append([self._no_solution(T[t], mu[t], share)])
            else:
                results.append([PointResult(**f, branch=b, wall_time=share) for b, f in enumerate(fields[t])])
            if beyond[t]:
                results[-1] = [_note_beyond(r, beyond[t]) for r in results[-1]]
        return results

    def _beyond_reach(self, x):
        """Per target, a note when a branch may lie beyond the scanned horizon data (else ""): for an
        unsourced family, where ``mu/T`` is still falling as the ``j = 0`` family leaves the scan (its
        four outermost nodes below the next one in) and the target's ``mu/T`` is below theirs."""
        notes = [""] * len(x)
        if self.sourced:
            return notes
        fam = family_curve(self.sh)
        if len(fam) < 8:
            return notes
        # the outermost nodes of the (coarse) family, against the node 4 further in
        for outer, inner in ((fam[:4, 2], fam[4, 2]), (fam[-4:, 2], fam[-5, 2])):
            x_end = float(np.min(outer))
            if np.all(outer < inner):
                for t in np.flatnonzero(x < x_end):
                    notes[t] = (f"a further branch with |phi0| > {self.sh.phi0_max:g} may exist: the unsourced family "
                                f"leaves the scanned horizon data at mu/T = {x_end:.3g}, still falling")
        return notes

    def _common(self, T, mu):
        return dict(model_id=self.model.id, kind=self.model.kind, d=D_BOUNDARY, method="atlas", T=float(T),
                    mu=float(mu), rtol=self.ss.rtol, atol=self.ss.atol)

    def _no_solution(self, T, mu, share):
        L = self.model.energy_scale
        where = f"T/Lambda = {T / L:.6g}, mu/T = {abs(mu) / T:.6g}" if self.sourced else f"mu/T = {abs(mu) / T:.6g}"
        return PointResult(**self._common(T, mu), status=Status.NO_SOLUTION, wall_time=share,
                           message=f"no brane of this model at {where} (horizon data scanned up to "
                                   f"phi0 = {self.sh.phi0_max:g})")

    # -- rows -------------------------------------------------------------------------------------------
    def _values(self, o, u):
        """Shot observables ``(x, j, s_hat, rho_hat)`` -> the values the atlas compares:
        ``(T, mu, s, rho)`` in source units (sourced) or the observables themselves (unsourced)."""
        if not self.sourced:
            return o
        m = self.map
        return m.physical(u, m.functions(o, np.where(u > 0, u, 1.0)), np.zeros((len(u), 4, 2)))[0]

    def _rows(self, T, mu, C, norms, iters) -> list[dict]:
        """PointResult fields (all but branch and wall_time) for every root, vectorised."""
        from ...thermo import CS2_FLOOR, RHO_FLOOR, cs2_from_hessian, hessian_from_jacobians

        m, d = self.map, D_BOUNDARY
        L = self.model.energy_scale
        M = len(C)
        g, dg, leaf = m.evaluate(C[:, 0], C[:, 1])
        gt, dgt, _ = m.evaluate(C[:, 0], C[:, 1], truncate=2)
        vals, grads = m.physical(C[:, 1], g, dg)
        _, grads_t = m.physical(C[:, 1], gt, dgt)
        # verification: one direct shot per root with the atlas nodes' settings (so the difference
        # is the atlas's interpolation error), and one with every numerical choice of those shots
        # varied (tolerance x RTOL_VARIATION, horizon offset x OFFSET_VARIATION, boundary read-out
        # also READOUT_CHECK before the end), all roots in one batched integration each
        Q = np.column_stack([m.phi0(C[:, 0]), C[:, 1]])
        det, det_v = {}, {}
        nodes = m.node_settings
        o = self.sh.observe_many(Q, nodes, record=True, detail=det)
        varied = nodes.varied(rtol_factor=RTOL_VARIATION, offset_factor=OFFSET_VARIATION)
        ov = self.sh.observe_many(Q, varied, detail=det_v, readout_check=READOUT_CHECK)
        ov_early = det_v["early"]
        ok_shot = np.all(np.isfinite(o), axis=1) & np.all(np.isfinite(ov), axis=1) & np.all(np.isfinite(ov_early), axis=1)
        u = C[:, 1]
        direct_vals = self._values(o, u)
        fi, oi = ([0, 1], [2, 3]) if self.sourced else ([1, 0], [2, 3])
        x = np.abs(mu) / T
        sign = np.where(mu < 0, -1.0, 1.0)
        with np.errstate(all="ignore"):
            sources = {
                "atlas": direct_vals - vals,
                "offset": self._values(ov, u) - direct_vals,
                "readout": self._values(ov_early, u) - self._values(ov, u),
            }
            # each variation moves (T, mu) too; what matters is s and rho at the target's (T, mu)
            shifts = {k: np.abs(_at_fixed_target(dv, grads, fi, oi)) for k, dv in sources.items()}
            dO = sum(shifts.values())                                   # (M, 2): |d s|, |d rho| (or hats)
            dO = dO + 4.0 * np.asarray(norms)[:, None] * np.abs(vals[:, oi])   # the Newton residual
        Jt, Jd, s, rho, f2 = self._jacobians(T, vals, grads, L)
        Jt_t, Jd_t, _, _, _ = self._jacobians(T, vals, grads_t, L)
        P_TT, P_Tmu, P_mumu, maxwell = hessian_from_jacobians(Jt, Jd)
        P_TT, P_Tmu, P_mumu = P_TT * f2, P_Tmu * f2, P_mumu * f2
        P_TTt, P_Tmut, P_mumut, _ = hessian_from_jacobians(Jt_t, Jd_t)
        P_TTt, P_Tmut, P_mumut = P_TTt * f2, P_Tmut * f2, P_mumut * f2
        stable = (P_TT > 0) & (P_TT * P_mumu - P_Tmu**2 > 0)
        chi3, chi4, chi3_err, chi4_err = self._cumulants(C, T, sign, P_mumu)
        # |d s|, |d rho| in config units
        unit = L ** (d - 1) if self.sourced else T ** (d - 1)
        ds, drho = dO[:, 0] * unit, dO[:, 1] * unit
        # round-off of the read-out is relative to the larger density, also where rho is tiny
        ds, drho = ds + ROUNDOFF * np.abs(s), drho + ROUNDOFF * np.maximum(np.abs(s), np.abs(rho))
        with np.errstate(all="ignore"):
            e_s = ds / np.abs(s)
            e_rho = drho / np.maximum(np.abs(rho), RHO_FLOOR * np.abs(s))
            e_vals = np.maximum(e_s, e_rho)
            # the values' own error carried to chi3, chi4 relative to their magnitude, floored at
            # chi2/T and chi2/T^2 (chi3 vanishes at mu = 0 by symmetry)
            s3 = np.maximum(np.abs(chi3), np.abs(P_mumu) / T)
            s4 = np.maximum(np.abs(chi4), np.abs(P_mumu) / T**2)
            # the error of the integrand s dT + rho dmu of the pressure's path, rho's measured
            # against the larger of the two densities
            e_path = np.maximum(e_s, drho / np.maximum(np.abs(rho), np.abs(s)))
        if self.sourced:
            P1, P2, P0err, P_parts = self._pressure(C)
            P, P_check = P1 * L**d, P2 * L**d
            eps = T * s + x * T * rho - P
            trace = (eps - 3 * P) / T**4
            with np.errstate(all="ignore"):
                P_mismatch = np.abs(P1 - P2) / np.maximum(np.abs(P1), 1e-300)
                # route mismatch, the reference's own error, and the error of s and rho carried
                # along the path (the densities' relative error, against the larger one, times the
                # size of the path's parts)
                dP = (np.abs(P1 - P2) + P0err + e_path * P_parts) * L**d
            k_ref = self._P0().k_ref
        else:
            P = (T * s + x * T * rho) / d
            dP = (T * ds + x * T * drho) / d
            P_check, eps, trace = P, (d - 1) * P, np.zeros(M)
            P_mismatch = np.zeros(M)
        cs2 = cs2_from_hessian(T, x * T, s, rho, P_TT, P_Tmu, P_mumu)
        cs2_t = cs2_from_hessian(T, x * T, s, rho, P_TTt, P_Tmut, P_mumut)
        with np.errstate(all="ignore"):
            e_P = dP / np.abs(P)
            e_eps = (T * ds + x * T * drho + dP) / np.abs(eps)
            # derivatives: the atlas less its last two orders (times DERIV_SAFETY), plus the values'
            # own error
            e_chi2 = DERIV_SAFETY * np.abs(P_mumu - P_mumut) / np.abs(P_mumu) + e_vals + DERIV_ROUNDOFF
            e_cs2 = DERIV_SAFETY * np.abs(cs2 - cs2_t) / np.maximum(np.abs(cs2), CS2_FLOOR) + e_vals + DERIV_ROUNDOFF
            per = np.column_stack([e_s, e_rho, e_P, e_eps, e_chi2, e_cs2])
            per = np.where(np.isnan(per), np.inf, per + ROUNDOFF)
            # a near miss in chi2 or cs2 only: a second method (finite differences of direct shots)
            acc = self.settings.accept_error
            near = (np.max(per[:, :4], axis=1) <= acc) & (np.max(per[:, 4:], axis=1) > acc) & \
                (np.max(per[:, 4:], axis=1) <= NEAR_MISS * acc)
            fd_checked = np.zeros(M, bool)
            if np.any(near):
                K = np.flatnonzero(near)
                fd = self._fd_derivative_bound(T[K], mu[K], C[K], vals[K], L, P_mumu[K], cs2[K], s[K], rho[K])
                for j, k in enumerate(K):
                    if np.all(np.isfinite(fd[j])):
                        e_fd = fd[j] + e_vals[k] + DERIV_ROUNDOFF + ROUNDOFF
                        # two bounds of the same error: the tighter holds
                        per[k, 4:] = np.minimum(per[k, 4:], e_fd)
                        fd_checked[k] = True
            error = np.max(per, axis=1)
            scale = np.max(np.maximum(np.abs(grads), 1e-300), axis=2, keepdims=True)
            deriv_err = np.max(np.abs(grads - grads_t) / scale, axis=(1, 2))
            scale_O = np.column_stack([np.abs(vals[:, oi[0]]), np.maximum(np.abs(vals[:, oi[1]]),
                                                                          RHO_FLOOR * np.abs(vals[:, oi[0]]))])
            rel = {k: np.max(v / scale_O, axis=1) for k, v in shifts.items()}
        flags = m.atlas.flags(leaf)
        tails = m.atlas.tails(leaf)
        rows = []
        for k in range(M):
            common = self._common(T[k], mu[k])
            extra = {"horizon_phi0": float(Q[k, 0]), "horizon_u": float(Q[k, 1] * sign[k]),
                     "target_mismatch": float(norms[k]), "atlas_mismatch": float(rel["atlas"][k]),
                     "offset_change": float(rel["offset"][k]), "readout_drift": float(rel["readout"][k]),
                     "deriv_error": float(deriv_err[k]), "atlas_leaf": FLAG_NAMES[int(flags[k])],
                     "atlas_tail": float(tails[k]), "shots": 2, "maxwell_mismatch": float(maxwell[k]),
                     "trace_anomaly": float(trace[k]), "fd_derivative_check": bool(fd_checked[k]),
                     "error_by_observable": {n: float(per[k, i]) for i, n in enumerate(ERROR_OBSERVABLES)}}
            if self.sourced:
                extra.update(P_route2=float(P_check[k]), P_mismatch=float(P_mismatch[k]), P_reference_power=k_ref,
                             P_reference_error=float(P0err[k] * L**d))
            else:
                extra["direct_source"] = float(o[k, 1])
            counts = dict(nfev=int(det["nfev"][k] + det_v["nfev"][k]), nsteps=int(det["nsteps"][k] + det_v["nsteps"][k]),
                          niter=int(iters[k]))
            if not ok_shot[k]:
                rows.append(dict(**common, status=Status.FAILED, extra=extra, **counts,
                                 message="a verification shot at the atlas root failed"))
                continue
            residual = float(det["residual"][k])
            problems = self.settings.problems(float(error[k]), residual)
            if problems and not error[k] <= self.settings.accept_error:
                worst = ERROR_OBSERVABLES[int(np.argmax(per[k]))]
                problems[0] += f" (largest in {worst})"
            rows.append(dict(
                **common, s=float(s[k]), rho=float(sign[k] * rho[k]), epsilon=float(eps[k]), P=float(P[k]),
                chi2=float(P_mumu[k]), cs2=float(cs2[k]), chi3=float(chi3[k]), chi4=float(chi4[k]),
                chi3_err=float(chi3_err[k] + (e_vals[k] + DERIV_ROUNDOFF) * s3[k]),
                chi4_err=float(chi4_err[k] + (e_vals[k] + DERIV_ROUNDOFF) * s4[k]),
                P_check=float(P_check[k]), trace_anomaly=float(trace[k]),
                stability="stable" if stable[k] else "unstable",
                status=Status.NOT_CONVERGED if problems else Status.OK,
                message="; ".join(problems) or (f"converged on the atlas: |F| = {norms[k]:.2e}; direct shots "
                                                f"bound the error of every observable by {error[k]:.1e}"),
                residual=residual, error_estimate=float(error[k]), extra=extra, **counts))
        return rows

    def _cumulants(self, C, T, sign, P_mumu):
        """``chi3``, ``chi4`` (config units) from the atlas's exact derivatives up to third order
        (:meth:`.brane_map.BraneMap.rho_derivatives`), and the truncation part of their error
        bounds: DERIV_SAFETY times the change when the atlas drops its last two orders."""
        d, L = D_BOUNDARY, self.model.energy_scale
        D, *Dt = self.map.rho_derivatives(C[:, 0], C[:, 1], (0, *CUMULANT_TRUNCATIONS))
        # the change when the atlas drops its last one, two or three orders (the largest): one
        # truncation alone can change a derivative by a coincidentally small amount at a point
        with np.errstate(all="ignore"):
            dD = np.max([np.abs(D - t) for t in Dt], axis=0)
        # sourced: derivatives in source units; unsourced: of rho_hat(x), rescaled by T
        unit = (np.full(len(T), L) if self.sourced else T)
        f3, f4 = unit ** (d - 3), unit ** (d - 4)
        chi3, chi4 = sign * D[:, 1] * f3, D[:, 2] * f4
        with np.errstate(all="ignore"):
            e3 = DERIV_SAFETY * dD[:, 1] * f3
            e4 = DERIV_SAFETY * dD[:, 2] * f4
        return chi3, chi4, np.where(np.isnan(e3), np.inf, e3), np.where(np.isnan(e4), np.inf, e4)

    def _fd_derivative_bound(self, T, mu, C, vals, L, P_mumu, cs2, s, rho):
        """Bounds on the atlas's chi2 and cs2 (relative, as in the rows) from a second method: central
        differences of direct shots in the atlas coordinates (steps h, 2h, 4h with h = fd_step,
        shots ten times tighter than the nodes'), Richardson-extrapolated; the bound is the
        difference from the atlas's values plus three times the change of the extrapolant made from
        2h and 4h instead. Rows (K, 2) of (chi2, cs2); NaN where a shot failed."""
        from ...thermo import CS2_FLOOR, cs2_from_hessian, hessian_from_jacobians

        m, K = self.map, len(T)
        h = self.settings.fd_step
        ss = m.node_settings.tighter(10)
        grads = {}
        for f in (1, 2, 4):
            G = np.zeros((K, 4, 2))
            for axis in range(2):
                step = np.zeros(2)
                step[axis] = f * h
                Cp, Cm = C + step, C - step
                Q = np.vstack([np.column_stack([m.phi0(Cp[:, 0]), Cp[:, 1]]),
                               np.column_stack([m.phi0(Cm[:, 0]), Cm[:, 1]])])
                o = self.sh.observe_many(Q, ss)
                v = self._values(o, Q[:, 1])
                G[:, :, axis] = (v[:K] - v[K:]) / (2 * f * h)
            grads[f] = G
        R1 = (4 * grads[1] - grads[2]) / 3
        R2 = (4 * grads[2] - grads[4]) / 3
        x = np.abs(mu) / T
        out = []
        for R in (R1, R2):
            Jt, Jd, _, _, f2 = self._jacobians(T, vals, R, L)
            P_TT, P_Tmu, P_mm, _ = hessian_from_jacobians(Jt, Jd)
            P_TT, P_Tmu, P_mm = P_TT * f2, P_Tmu * f2, P_mm * f2
            out.append((P_mm, cs2_from_hessian(T, x * T, s, rho, P_TT, P_Tmu, P_mm)))
        (c1, k1), (c2, k2) = out
        with np.errstate(all="ignore"):
            e_chi2 = (np.abs(P_mumu - c1) + 3.0 * np.abs(c1 - c2)) / np.abs(P_mumu)
            e_cs2 = (np.abs(cs2 - k1) + 3.0 * np.abs(k1 - k2)) / np.maximum(np.abs(cs2), CS2_FLOOR)
        return np.column_stack([e_chi2, e_cs2])

    def _jacobians(self, T, vals, grads, L):
        """Jacobians of (T, mu) and (s, rho) along two directions in the units where the atlas
        lives, s and rho in config units, and the factor that takes the Hessian there."""
        d, M = D_BOUNDARY, len(T)
        if self.sourced:
            return grads[:, :2, :], grads[:, 2:, :], vals[:, 2] * L ** (d - 1), vals[:, 3] * L ** (d - 1), L ** (d - 2)
        xs, sh_, rh = vals[:, 0], vals[:, 2], vals[:, 3]
        tv = np.stack([grads[:, 1, 1], -grads[:, 1, 0]], axis=1)     # along the j = 0 family
        tv = tv / np.linalg.norm(tv, axis=1, keepdims=True)
        dx, ds, dr = (np.einsum("mk,mk->m", grads[:, k, :], tv) for k in (0, 2, 3))
        Jt = np.stack([np.stack([np.zeros(M), np.ones(M)], 1), np.stack([dx, xs], 1)], 1)
        Jd = np.stack([np.stack([ds, (d - 1) * sh_], 1), np.stack([dr, (d - 1) * rh], 1)], 1)
        return Jt, Jd, sh_ * T ** (d - 1), rh * T ** (d - 1), T ** (d - 2)

    # -- pressure on the atlas ----------------------------------------------------------------------
    def _P0(self):

        P0 = pressure_reference(self.sh, self.ss)
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
        at phi0 shifted by 0.4 in log phi0, then across in log phi0 at the root's u. Also the
        zero-density reference's error estimate at the two starting points (summed), and the size
        of the first route's parts (a relative error of s and rho carries over to P times it)."""
        P0 = self._P0()
        c0, c1 = C[:, 0], C[:, 1]
        P0err = np.array([P0.error(math.exp(c)) for c in c0])
        base = np.array([P0(math.exp(c)) for c in c0])
        up1 = self._segment(np.column_stack([c0, 0 * c1]), C, 1)
        P1 = base + up1
        hi = self.map.atlas.domain[1]
        shift = np.where(c0 + 0.4 < hi, 0.4, -0.4)
        cs = c0 + shift
        Pref = np.array([P0(math.exp(c)) for c in cs])
        P0err = P0err + np.array([P0.error(math.exp(c)) for c in cs])
        up = self._segment(np.column_stack([cs, 0 * c1]), np.column_stack([cs, c1]), 1)
        across = self._segment(np.column_stack([cs, c1]), C, 0)
        return P1, Pref + up + across, P0err, np.abs(base) + np.abs(up1)


#: batch solvers by model spec (id included) and solver settings; see :mod:`holoscan.numerics.memo`
_SOLVERS = Memo("emd batch solvers", maxsize=32)


def batch_solver(model, sh, settings) -> BatchSolver:
    """One batch solver (and so one atlas) per model, solver settings and process; ``sh`` is the
    model's shooter (:func:`.pointwise.shooter_for`)."""
    return _SOLVERS.get((tuple(sorted(model.spec().items())), settings), lambda: BatchSolver(model, sh, settings))


__all__ = ["BatchSolver", "batch_solver"]
