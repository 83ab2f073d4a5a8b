"""Targeted numerical solve of a scale-invariant charged brane with no scalar profile.

Such a brane (Einstein-Maxwell in AdS_{d+1}) has one horizon datum, the horizon electric field
``Phi1`` (in the gauge of :mod:`holoscan.bulk.charged_brane`), and a scaling symmetry: every
observable of dimension ``n`` scales as ``T^n`` at fixed ``x = mu/T``. A solve at ``(T, mu)``:

1. root-finds ``u = Phi1/Phi1_max`` in ``[0, 1)`` so that the shot's ``mu/T`` equals ``|mu|/T``
   (bracketed Brent iteration; ``Phi1_max`` is where the horizon slope ``A'(0)`` vanishes, the
   extremal limit), then rescales the shot to the requested ``T``;
2. gets the Hessian of ``P`` from central differences in ``u`` (two steps, Richardson-extrapolated)
   plus the exact scaling direction;
3. repeats step 1 with tolerances 100 times tighter to estimate the error;
4. uses the sign symmetry ``mu -> -mu`` (``rho`` odd, all else even).
"""
from __future__ import annotations

import math
import time

import numpy as np

from .bulk.charged_brane import ChargedBrane, HorizonData
from .engine import Counters, ShootSettings, shoot
from .result import PointResult, Status
from .settings import SolverSettings
from .thermo import cs2_from_hessian, hessian_from_jacobians, local_stability

_DENSITIES = ("s", "rho", "epsilon", "P")


class _ShotFailed(RuntimeError):
    pass


def _observe(brane: ChargedBrane, kappa_sq: float, Phi1: float, ss: ShootSettings, cnt: Counters) -> dict:
    shot = shoot(brane, HorizonData(0.0, Phi1), ss)
    cnt.nfev += shot.nfev
    cnt.nsteps += shot.nsteps
    cnt.shots += 1
    if not shot.ok:
        raise _ShotFailed(shot.message)
    obs = brane.boundary_unsourced(shot.y_end, kappa_sq)
    cnt.residual = max(cnt.residual, shot.residual, obs["frame_mismatch"])
    return obs


def _target(brane, kappa_sq, Phi_max, x, ss, cnt):
    """Horizon fraction u with mu/T(u) = x >= 0, and the observables there."""
    from scipy.optimize import brentq  # imported here: scans by closed form never pay for it

    if x == 0.0:
        return 0.0, _observe(brane, kappa_sq, 0.0, ss, cnt), 0

    def g(u):
        o = _observe(brane, kappa_sq, u * Phi_max, ss, cnt)
        return o["mu"] / o["T"] - x

    lo, hi, k = 0.0, 0.5, 1
    while g(hi) < 0.0:
        lo, k = hi, k + 1
        if k > 52:
            raise _ShotFailed(f"mu/T = {x:.6g} not bracketed before the extremal limit")
        hi = 1.0 - 2.0**-k
    u, info = brentq(g, lo, hi, xtol=1e-16, rtol=1e-15, full_output=True, disp=False)
    if not info.converged:
        raise _ShotFailed(f"root finder did not converge: {info.flag}")
    return u, _observe(brane, kappa_sq, u * Phi_max, ss, cnt), info.iterations + k


def _scaled(obs: dict, T: float, d: int) -> dict:
    lam = T / obs["T"]
    out = {"T": T, "mu": obs["mu"] * lam}
    for k in ("s", "rho"):
        out[k] = obs[k] * lam ** (d - 1)
    for k in ("epsilon", "P"):
        out[k] = obs[k] * lam**d
    return out


def _hessian(brane, kappa_sq, Phi_max, u, base, T, du, ss, cnt):
    d = brane.d
    du = min(du, 0.25 * (1.0 - u))
    plus = _scaled(_observe(brane, kappa_sq, (u + du) * Phi_max, ss, cnt), 1.0, d)
    minus = _scaled(_observe(brane, kappa_sq, (u - du) * Phi_max, ss, cnt), 1.0, d)
    b = _scaled(base, 1.0, d)
    # Column 1: d/du; column 2: the scaling direction d/dlog(lambda) (dimension n -> n * value).
    Jt = np.array([[(plus["T"] - minus["T"]) / (2 * du), b["T"]],
                   [(plus["mu"] - minus["mu"]) / (2 * du), b["mu"]]])
    Jd = np.array([[(plus["s"] - minus["s"]) / (2 * du), (d - 1) * b["s"]],
                   [(plus["rho"] - minus["rho"]) / (2 * du), (d - 1) * b["rho"]]])
    P_TT, P_Tmu, P_mumu, maxwell = hessian_from_jacobians(Jt, Jd)
    # Hessian entries have dimension d-2: rescale from T = 1 to the requested T.
    f = T ** (d - 2)
    return P_TT * f, P_Tmu * f, P_mumu * f, maxwell


def solve_unsourced(brane: ChargedBrane, kappa_sq: float, T: float, mu: float, settings: SolverSettings,
                    *, model_id: str, kind: str) -> PointResult:
    """Solve at the requested ``(T, mu)`` by shooting; never raises for numerical trouble."""
    t0 = time.perf_counter()
    d = brane.d
    sign = -1.0 if mu < 0 else 1.0
    x = abs(mu) / T
    f = float(brane.f.derivs(0.0)[0])
    Phi_max = math.sqrt(-2.0 * float(brane.V.derivs(0.0)[0]) / f)
    ss = settings.shoot_settings()
    cnt = Counters()
    common = dict(model_id=model_id, kind=kind, d=d, method="shooting", T=T, mu=mu,
                  rtol=ss.rtol, atol=ss.atol)
    try:
        u, base, niter = _target(brane, kappa_sq, Phi_max, x, ss, cnt)
        tight_cnt = Counters()
        _, tight, _ = _target(brane, kappa_sq, Phi_max, x, ss.tighter(), tight_cnt)
        vals = _scaled(base, T, d)
        vals_tight = _scaled(tight, T, d)
        H = _hessian(brane, kappa_sq, Phi_max, u, base, T, settings.fd_step, ss, cnt)
        H2 = _hessian(brane, kappa_sq, Phi_max, u, base, T, 2 * settings.fd_step, ss, cnt)
    except _ShotFailed as exc:
        return PointResult(**common, status=Status.FAILED, message=str(exc), nfev=cnt.nfev,
                           nsteps=cnt.nsteps, niter=cnt.shots, wall_time=time.perf_counter() - t0)
    # Richardson extrapolation of the two central-difference steps (error O(du^4)); the size of
    # the correction is the derivative error estimate.
    P_TT, P_Tmu, P_mumu = ((4.0 * a - b) / 3.0 for a, b in zip(H[:3], H2[:3]))
    maxwell = H[3]
    err = max(abs(vals[k] - vals_tight[k]) / max(abs(vals_tight[k]), 1e-300) for k in _DENSITIES)
    deriv_err = max((abs(a - r) / abs(r) for a, r in zip(H[:3], (P_TT, P_Tmu, P_mumu)) if r != 0.0), default=0.0)
    target_mismatch = abs(vals["mu"] - x * T) / max(x * T, T)
    residual = cnt.residual
    s, rho = vals["s"], vals["rho"]
    cs2 = cs2_from_hessian(T, x * T, s, rho, P_TT, P_Tmu, P_mumu)
    problems = settings.problems(err, residual)
    if not target_mismatch <= 1e-2 * settings.accept_error:
        problems.append(f"target mismatch {target_mismatch:.3g} > accept_error / 100")
    status = Status.NOT_CONVERGED if problems else Status.OK
    message = "; ".join(problems) if problems else f"converged: {niter} root iterations, {cnt.shots} shots"
    return PointResult(
        **common,
        s=s, rho=sign * rho, epsilon=vals["epsilon"], P=vals["P"], chi2=P_mumu, cs2=cs2,
        P_check=(T * s + x * T * rho) / d, trace_anomaly=(vals["epsilon"] - (d - 1) * vals["P"]) / T**d,
        stability=local_stability(P_TT, P_Tmu, P_mumu),
        status=status, message=message, nfev=cnt.nfev + tight_cnt.nfev, nsteps=cnt.nsteps + tight_cnt.nsteps,
        niter=niter, residual=residual, error_estimate=err, wall_time=time.perf_counter() - t0,
        extra={"horizon_Phi1": sign * u * Phi_max, "deriv_error": deriv_err, "maxwell_mismatch": maxwell,
               "target_mismatch": target_mismatch, "shots": cnt.shots + tight_cnt.shots},
    )
