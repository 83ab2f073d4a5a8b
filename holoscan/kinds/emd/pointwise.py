"""Point-by-point solves of an ``emd`` model (method ``shooting``, and the atlas path's fallback).

- :func:`shooter_for`: one :class:`~.shooter.EMDShooter` (with its coarse scan) per model and process;
- :func:`solve_sourced`: every brane of a sourced model at one ``(T, mu)``, the pressure by the
  first law from :func:`pressure_reference` along a path in horizon data;
- :func:`solve_family`: every brane of an unsourced (conformal) model at one ``mu/T``.

Units as in :mod:`.model`: config units, energy unit ``energy_scale`` for sourced models.
"""
from __future__ import annotations

import math
import time

import numpy as np

from ...bulk.scalar_brane import ScalarBrane
from ...numerics.cheb import lobatto
from ...numerics.memo import Memo
from ...result import PointResult, Status
from ...settings import SolverSettings
from ...thermo import CS2_FLOOR, RHO_FLOOR, cs2_from_hessian, hessian_from_jacobians, local_stability
from .pressure import ZeroDensityPressure, path_integral
from .shooter import D_BOUNDARY, Counters, EMDShooter, find_branches, physical

#: horizon-scalar range and nodes of an unsourced family's coarse scan (and atlas)
UNSOURCED_PHI0_MAX = 12.0
UNSOURCED_N_PHI0 = 49
#: round-off of chi2 and cs2 (relative): second derivatives of data rounded at the read-out's
#: round-off, with the differentiation gain of the atlas's orders (~100); measured against the
#: one-charge closed form, the actual chi2 error where the truncation proxy vanishes reached 2.7e-12
DERIV_ROUNDOFF = 1e-11


#: shooters by model spec (id included); see :mod:`holoscan.numerics.memo`
_SHOOTERS = Memo("emd shooters", maxsize=32)


def shooter_for(model, V, f) -> EMDShooter:
    """One shooter (with its coarse scan of horizon data) per model and process; ``V``, ``f`` are
    the model's parsed couplings."""

    def build() -> EMDShooter:
        brane = ScalarBrane(D_BOUNDARY, V, f, delta=model.delta)
        if model.source:
            return EMDShooter(brane, model.kappa_sq, sourced=True)
        # an unsourced family reaches mu/T -> 0 again only at large |phi0| (the one-charge black
        # hole's unstable branch has phi0 = -7.9 at mu/T = 0.05): scan further out
        return EMDShooter(brane, model.kappa_sq, sourced=False, phi0_max=UNSOURCED_PHI0_MAX, n_phi0=UNSOURCED_N_PHI0)

    return _SHOOTERS.get(tuple(sorted(model.spec().items())), build)


def _gradients(sh: EMDShooter, q, steps, ss, cnt, transform=None):
    """Gradients in ``(phi0, u)`` of the observables ``(x, j, s_hat, rho_hat)``, or of
    ``transform(observables)``: central differences with steps h, 2h and 4h (``steps`` gives h per
    direction), Richardson-extrapolated from h and 2h (error O(h^4)). The error estimate is the
    change of the extrapolant when it is made from 2h and 4h instead, divided by 16 / 1 = the
    ratio of their O(h^4) errors, times 3 (safety). Returns (G, elementwise error estimate)."""
    cols, errs = [], []
    for k in range(2):
        h = np.zeros(2)
        h[k] = steps[k]
        o = sh.observe_many([q + h, q - h, q + 2 * h, q - 2 * h, q + 4 * h, q - 4 * h], ss, cnt)
        if not np.all(np.isfinite(o)):
            raise ArithmeticError("a derivative shot failed")
        if transform is not None:
            o = [transform(r) for r in o]
        D1, D2, D4 = ((o[2 * i] - o[2 * i + 1]) / (2 * f * h[k]) for i, f in enumerate((1, 2, 4)))
        R1, R2 = (4 * D1 - D2) / 3, (4 * D2 - D4) / 3
        cols.append(R1)
        errs.append(3.0 * np.abs(R1 - R2) / 15.0)
    return np.column_stack(cols), np.column_stack(errs)


def _family_derivatives(sh: EMDShooter, q, step: float, ss, cnt):
    """d/dtau of (x, j, s_hat, rho_hat) along the j = 0 family at q (tangent (dj/du, -dj/dphi0)),
    exact given the gradients, with the absolute error estimate of each component."""
    G, E = _gradients(sh, q, (step * max(1.0, abs(q[0])), step), ss, cnt)
    t = np.array([G[1, 1], -G[1, 0]])
    t /= np.linalg.norm(t)
    return G @ t, E @ np.abs(t)


def _family_hessian(deriv, xs: float, sh_: float, rh: float, T: float, d: int):
    """(P_TT, P_Tmu, P_mumu, Maxwell mismatch) at T from the family tangent ``deriv`` and the
    reduced values (mu/T, s/T^(d-1), rho/T^(d-1)); Jacobian columns (family tangent, scaling)."""
    Jt = np.array([[0.0, 1.0], [deriv[0], xs]])
    Jd = np.array([[deriv[2], (d - 1) * sh_], [deriv[3], (d - 1) * rh]])
    P_TT, P_Tmu, P_mumu, maxwell = hessian_from_jacobians(Jt, Jd)
    f2 = T ** (d - 2)
    return P_TT * f2, P_Tmu * f2, P_mumu * f2, maxwell


def _propagated(fn, deriv, abs_err) -> np.ndarray:
    """Linear bound on the change of ``fn(deriv)`` (an array) when each used component of
    ``deriv`` moves by its error: the sum over components of the larger change of the two signs."""
    base = np.asarray(fn(deriv), dtype=float)
    total = np.zeros_like(base)
    for k in (0, 2, 3):
        worst = np.zeros_like(base)
        for sgn in (1.0, -1.0):
            dd = np.array(deriv, dtype=float)
            dd[k] += sgn * abs_err[k]
            worst = np.maximum(worst, np.abs(np.asarray(fn(dd), dtype=float) - base))
        total += worst
    return total


def solve_family(model, sh: EMDShooter, T: float, mu: float, settings: SolverSettings):
    """Every brane of the unsourced family at (T, mu)."""
    t0 = time.perf_counter()
    d = D_BOUNDARY
    x = abs(mu) / T
    sign = -1.0 if mu < 0 else 1.0
    ss = settings.shoot_settings()
    cnt = Counters()
    common = dict(model_id=model.id, kind=model.kind, d=d, method="shooting", T=T, mu=mu, rtol=ss.rtol, atol=ss.atol)
    roots = find_branches(sh, 1.0, x, ss, cnt)
    if not roots:
        return [PointResult(**common, status=Status.NO_SOLUTION,
                            message=f"no brane of this family has mu/T = {x:.6g}", nfev=cnt.nfev,
                            nsteps=cnt.nsteps, niter=cnt.shots, wall_time=time.perf_counter() - t0)]
    out = []
    tight = ss.tighter()
    for b, (q, fnorm, niter, o) in enumerate(roots):
        try:
            if sh.observe(q, ss, cnt, record=True) is None:
                raise ArithmeticError("the solution shot failed on repetition")
            deriv, deriv_abs_err = _family_derivatives(sh, q, settings.fd_step, ss.tighter(10), cnt)
            # the same derivatives with every choice changed (twice the step, ten times tighter
            # shots): their difference covers the shots' noise, which Richardson does not see
            deriv_b, _ = _family_derivatives(sh, q, 2.0 * settings.fd_step, ss.tighter(100), cnt)
        except ArithmeticError as exc:
            out.append(PointResult(**common, branch=b, status=Status.FAILED, message=str(exc)))
            continue
        ot = sh.observe(q, tight.varied(offset_factor=10.0), None)
        xs, sh_, rh = o[0], o[2], o[3]
        s, rho = sh_ * T ** (d - 1), rh * T ** (d - 1)
        P = (T * s + x * T * rho) / d

        def thermo2(dv, xs=xs, sh_=sh_, rh=rh, s=s, rho=rho):
            """(chi2, cs2) of this branch from family derivatives ``dv``."""
            P_TT, P_Tmu, P_mumu, _ = _family_hessian(dv, xs, sh_, rh, T, d)
            return [P_mumu, cs2_from_hessian(T, x * T, s, rho, P_TT, P_Tmu, P_mumu)]

        P_TT, P_Tmu, P_mumu, maxwell = _family_hessian(deriv, xs, sh_, rh, T, d)
        cs2 = cs2_from_hessian(T, x * T, s, rho, P_TT, P_Tmu, P_mumu)
        d_chi2, d_cs2 = _propagated(thermo2, deriv, deriv_abs_err) + np.abs(
            np.asarray(thermo2(deriv_b)) - np.asarray(thermo2(deriv)))
        deriv_err = float(np.max(deriv_abs_err[[0, 2, 3]] / np.maximum(np.abs(deriv[[0, 2, 3]]), 1e-300)))
        # values: the offset-varied shot; floors: mu/T against max(|mu/T|, 1), rho_hat against
        # max(|rho_hat|, RHO_FLOOR s_hat)
        if ot is None:
            e_vals = e_s = e_rho = math.nan
        else:
            rel = np.abs(ot[[0, 2, 3]] - o[[0, 2, 3]]) / np.maximum(np.abs(o[[0, 2, 3]]), [1.0, o[2], RHO_FLOOR * o[2]])
            e_vals, e_s, e_rho = float(np.max(rel)), float(rel[1]), float(max(rel[0], rel[2]))
        # P = (T s + mu rho)/d and epsilon = (d - 1) P: relative error at most that of s and rho
        # (rho measured with its floor, so against s as well)
        e_P = max(e_s, e_rho)
        e_chi2 = float(d_chi2) / max(abs(P_mumu), 1e-300) + e_vals + DERIV_ROUNDOFF
        e_cs2 = float(d_cs2) / max(abs(cs2), CS2_FLOOR) + e_vals + DERIV_ROUNDOFF
        per = {"s": e_s, "rho": e_rho, "P": e_P, "epsilon": e_P, "chi2": e_chi2, "cs2": e_cs2}
        per = {k: v + 1e-13 for k, v in per.items()}
        err = max(per.values()) if all(np.isfinite(v) for v in per.values()) else math.nan
        problems = settings.problems(err, cnt.residual)
        out.append(PointResult(
            **common, s=s, rho=sign * rho, epsilon=(d - 1) * P, P=P, chi2=P_mumu, cs2=cs2, branch=b,
            P_check=P, trace_anomaly=0.0, stability=local_stability(P_TT, P_Tmu, P_mumu),
            status=Status.NOT_CONVERGED if problems else Status.OK,
            message="; ".join(problems) or f"converged: |F| = {fnorm:.2e} after {niter} Newton steps",
            nfev=cnt.nfev, nsteps=cnt.nsteps, niter=niter, residual=cnt.residual, error_estimate=err,
            wall_time=time.perf_counter() - t0,
            extra={"horizon_phi0": float(q[0]),
                   "horizon_u": float(q[1]) * sign, "target_mismatch": fnorm, "deriv_error": deriv_err,
                   "maxwell_mismatch": maxwell, "trace_anomaly": 0.0, "shots": cnt.shots,
                   "error_by_observable": per},
        ))
    return out


def pressure_reference(sh: EMDShooter, ss) -> ZeroDensityPressure:
    """The model's zero-density pressure (:mod:`holoscan.kinds.emd.pressure`), once per shooter; its
    shots are 100 times tighter than ``ss`` (as the atlas's nodes)."""
    if "P0" not in sh.cache:
        d, D = sh.brane.d, sh.brane.delta
        tight = ss.tighter()

        def samples(phi0s, offset_factor):
            o = sh.observe_many(np.column_stack([phi0s, np.zeros_like(phi0s)]), tight.varied(offset_factor=offset_factor))
            return np.array([physical(r, d, D)[[0, 2]] for r in o])

        try:
            sh.cache["P0"] = ZeroDensityPressure(samples, 1e-2, sh.phi0_max)
        except ArithmeticError as exc:
            sh.cache["P0"] = exc
    return sh.cache["P0"]


def _route(sh, q_start, q_end, ss, cnt, n=20) -> float:
    """First-law integral along the straight line from q_start to q_end in (log phi0, u)."""
    d, D = sh.brane.d, sh.brane.delta
    z = (lobatto(n) + 1.0) / 2.0
    l0, l1 = math.log(q_start[0]), math.log(q_end[0])
    Q = np.column_stack([np.exp(l0 + z * (l1 - l0)), q_start[1] + z * (q_end[1] - q_start[1])])
    o = sh.observe_many(Q, ss, cnt)
    if not np.all(np.isfinite(o)):
        raise ArithmeticError("a shot on the pressure path failed")
    X = np.array([physical(r, d, D) for r in o])
    return path_integral(X[:, 0], X[:, 1], X[:, 2], X[:, 3], n)


def solve_sourced(model, sh: EMDShooter, T: float, mu: float, settings: SolverSettings):
    """Every brane of a sourced model at (T, mu) (config units; energy unit ``energy_scale``)."""
    t0 = time.perf_counter()
    d, D, L = D_BOUNDARY, sh.brane.delta, model.energy_scale
    x = abs(mu) / T
    sign = -1.0 if mu < 0 else 1.0
    ss = settings.shoot_settings()
    cnt = Counters()
    common = dict(model_id=model.id, kind=model.kind, d=d, method="shooting", T=T, mu=mu, rtol=ss.rtol, atol=ss.atol)
    roots = find_branches(sh, T / L, x, ss, cnt)
    if not roots:
        return [PointResult(**common, status=Status.NO_SOLUTION,
                            message=f"no brane of this model at T/Lambda = {T / L:.6g}, mu/T = {x:.6g} "
                                    f"(horizon data scanned up to phi0 = {sh.phi0_max:g})",
                            nfev=cnt.nfev, nsteps=cnt.nsteps, niter=cnt.shots, wall_time=time.perf_counter() - t0)]
    P0 = pressure_reference(sh, ss)
    tight = ss.tighter()
    out = []
    for b, (q, fnorm, niter, o) in enumerate(roots):
        try:
            o = sh.observe(q, ss, cnt, record=True)
            if o is None:
                raise ArithmeticError("the solution shot failed on repetition")
            X = physical(o, d, D)
            # relative step in phi0 (T ~ phi0^(-1/(4-Delta)) varies on the scale of phi0 itself)
            J, J_err = _gradients(sh, q, (settings.fd_step * abs(q[0]), settings.fd_step), ss.tighter(10), cnt,
                                  transform=lambda r: physical(r, d, D))
            P_TT, P_Tmu, P_mumu, maxwell = hessian_from_jacobians(J[:2], J[2:])
            if isinstance(P0, Exception):
                raise ArithmeticError(str(P0))
            qa = np.array([abs(q[0]), abs(q[1])])
            # the routes' shots at the reference's tolerance (100 times tighter): P is a difference
            # of integrals, and s, rho along them must be better than the row's promise
            P1 = P0(qa[0]) + _route(sh, (qa[0], 0.0), qa, tight, cnt)
            shift = 0.4 if qa[0] * math.exp(0.4) < sh.phi0_max else -0.4
            qs = (qa[0] * math.exp(shift), 0.0)
            P2 = P0(qs[0]) + _route(sh, qs, qa, tight, cnt)
            P0err = P0.error(qa[0]) + P0.error(qs[0])
        except ArithmeticError as exc:
            out.append(PointResult(**common, branch=b, status=Status.FAILED, message=str(exc),
                                   nfev=cnt.nfev, nsteps=cnt.nsteps, niter=niter, wall_time=time.perf_counter() - t0))
            continue
        _, _, shat, rhohat = X
        s, rho, P = shat * L ** (d - 1), rhohat * L ** (d - 1), P1 * L**d
        f2 = L ** (d - 2)
        P_TT, P_Tmu, P_mumu = P_TT * f2, P_Tmu * f2, P_mumu * f2
        eps = T * s + x * T * rho - P
        cs2 = cs2_from_hessian(T, x * T, s, rho, P_TT, P_Tmu, P_mumu)
        ot = sh.observe(q, tight.varied(offset_factor=10.0), None)
        # floors: mu against max(|mu|, T), rho against max(|rho|, RHO_FLOOR s) (both vanish at mu = 0)
        err = math.nan if ot is None else float(np.max(np.abs(physical(ot, d, D) - X) / np.maximum(
            np.abs(X), [X[0], X[0], X[2], RHO_FLOOR * X[2]])))
        P_mismatch = abs(P1 - P2) / max(abs(P1), 1e-300)
        # derivatives (chi2, cs2): the gradients' own error, relative to the gradients' scale
        deriv_rel = float(np.max(J_err / np.maximum(np.max(np.abs(J), axis=1, keepdims=True), 1e-300)))
        total = max(err, P_mismatch + P0err / max(abs(P1), 1e-300), deriv_rel) + 1e-13
        problems = settings.problems(total, cnt.residual)
        out.append(PointResult(
            **common, s=s, rho=sign * rho, epsilon=eps, P=P, chi2=P_mumu, cs2=cs2, branch=b,
            P_check=P2 * L**d, trace_anomaly=(eps - 3 * P) / T**4, stability=local_stability(P_TT, P_Tmu, P_mumu),
            status=Status.NOT_CONVERGED if problems else Status.OK,
            message="; ".join(problems) or f"converged: |F| = {fnorm:.2e} after {niter} Newton steps",
            nfev=cnt.nfev, nsteps=cnt.nsteps, niter=niter, residual=cnt.residual, error_estimate=total,
            wall_time=time.perf_counter() - t0,
            extra={"horizon_phi0": float(q[0]),
                   "horizon_u": float(q[1]) * sign, "target_mismatch": fnorm, "P_route2": P2 * L**d,
                   "P_mismatch": P_mismatch, "trace_anomaly": (eps - 3 * P) / T**4,
                   "deriv_error": deriv_rel, "maxwell_mismatch": maxwell,
                   "P_reference_power": P0.k_ref, "shots": cnt.shots},
        ))
    return out
