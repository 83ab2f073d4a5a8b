"""Targeted numerical solve of a scale-invariant charged brane with no scalar profile.

Such a brane (Einstein-Maxwell in AdS_{d+1}: kind ``rn`` with ``method: shooting`` and scalar-free
``emd``) has one horizon datum, the horizon electric field ``Phi1`` (in the gauge of
:mod:`holoscan.bulk.charged_brane`), and a scaling symmetry: every observable of dimension ``n``
scales as ``T^n`` at fixed ``x = mu/T``. Units: any energy unit E; ``s``, ``rho`` in E^(d-1),
``epsilon``, ``P`` in E^d, ``chi2 = d rho/d mu |_T`` in E^(d-2), ``cs2`` dimensionless. Internally
everything is computed at ``T = 1`` ("hatted" values, ``x`` standing for ``mu``) and rescaled.

A solve at ``(T, mu)``:

1. root-finds ``u = Phi1/Phi1_max`` in ``[0, 1)`` so that the shot's ``mu/T`` equals ``|mu|/T``
   (bracketed Brent iteration; ``Phi1_max`` is where the horizon slope ``A'(0)`` vanishes, the
   extremal limit); the densities are then moved to the exact target to first order in the small
   remaining mismatch (``d s/d mu = P_Tmu``, ``d rho/d mu = chi2``, ``d P/d mu = rho``) and rescaled;
2. gets the Hessian of ``P`` from the ``u``-derivatives of ``(x, s, rho)`` plus the exact scaling
   direction. The ``u``-derivatives are central differences with steps ``h, 2h, 4h``
   (``h = fd_step (1 - u)``: relative to the distance from the extremal
   limit, where x(u) is singular) of shots at tolerance ``rtol/10^4`` (floored at 2.3e-14),
   Richardson-extrapolated once: ``R(h) = (4 D(h) - D(2h))/3`` is used and ``|R(h) - R(2h)|``
   (about 15 times its O(h^4) truncation error, and a sample of its noise) is its error;
3. varies every other numerical choice once (one extra shot each at the root, the densities
   carried to the target as in step 1; two extra shots each for the derivatives);
4. uses the sign symmetry ``mu -> -mu`` (``rho`` odd, all else even).

``error_estimate`` (relative, the largest over the six observables s, rho, epsilon, P, chi2, cs2)::

    e_O = SAFETY * (sum of the components below) / scale_O + ROUNDING

* ``rtol``: change under a re-shot with 100x tighter integration tolerances (derivatives: under
  10x looser ones, divided by 9, the DOP853 error being proportional to its tolerance);
* ``horizon offset``: change under a re-shot with the offset x OFFSET_FACTOR, divided by
  ``OFFSET_FACTOR^2 - 1``: the second-order horizon series leaves an error ~ offset^2 (measured:
  the densities change by a factor 100.0 per decade of offset from 1e-6 to 1e-4, d = 3 and 5);
* ``read-out radius``: change when the integration ends A_END_EXTRA units of ``A`` later (the
  boundary read-out is exact for this brane, so this measures the integration out to the end);
* ``root``: the first-order move from the shot's ``mu/T`` to the target's (counted in full);
* ``fd step`` (chi2, cs2): the Richardson spread of step 2, propagated with every other
  derivative error through the Hessian to chi2 and cs2 (each derivative shifted by its error, the
  changes added), and half the Maxwell-relation gap ``|ds/dmu - drho/dT|`` taken as an error of
  ``P_Tmu`` and propagated to cs2.

Scales: ``s``, ``epsilon``, ``P``, ``chi2``, ``cs2`` relative to their own magnitude (none
vanishes); ``rho`` relative to ``max(|rho|, RHO_FLOOR * s)`` (``rho`` vanishes at ``mu = 0``; below a
thousandth of the entropy density its absolute error is compared with ``s/1000``). ``mu`` is held
to the target: ``target_mismatch = |mu_shot - |mu||/max(|mu|, T)`` must be <= accept_error / 100.
A row is ``ok`` only when ``error_estimate`` and the field-equation residual are <= accept_error.
The Maxwell-relation gap of the Hessian (extra ``maxwell_mismatch``, ``|ds/dmu - drho/dT|`` over
``sqrt(|P_TT P_mumu|)``) is not a separate gate: it enters the cs2 estimate. At large mu/T it is
dominated by the cancellation in ``drho/dT = (d-1) rho - x chi2`` (e.g. 2e-7 at mu/T = 10^4 in
d = 5, where chi2 and cs2 are right to 2e-10 against the closed form). ``extra`` carries each component's largest
relative size (``error_rtol``, ``error_offset``, ``error_readout``, ``error_root``, ``error_fd``),
``deriv_error`` (the larger estimate of chi2 and cs2) and the per-observable estimates
``error_by_observable``.
Higher cumulants. With ``rho = T^(d-1) R(x)``, ``chi3 = d^2 rho/dmu^2 = T^(d-3) R2(x)`` (odd in mu)
and ``chi4 = d^3 rho/dmu^3 = T^(d-4) R3(x)`` (even), in E^(d-3) and E^(d-4), ``Rn`` the n-th
derivative of ``R``. They follow from the u-derivatives of ``(x, rho_hat)`` up to third order along
the family by the inverse chain rule (:func:`holoscan.numerics.derivatives.curve_derivatives`).
The u-derivatives are symmetric differences of the derivative shots of step 2 (``+-h, +-2h, +-4h``
and the centre, reused) and of new shots at ``+-8h, +-16h`` (same tolerance), with two Richardson
levels from the steps ``(2h, 4h, 8h)``. The new shots (and the variants' below) are integrated
together in one batched DOP853 call (:func:`holoscan.numerics.batch.dop853_batch`, the same error
control), except the 10x looser ones; none of them enters the row's residual. ``chi3_err``,
``chi4_err`` are absolute bounds, not part of ``error_estimate``, and never change ``status``::

    err_n = SAFETY * (sum of the components below) + ROUNDING * (sum of the magnitudes of the chain rule's terms)

* ``fd``: each u-derivative moved by its change to the steps ``(4h, 8h, 16h)`` (truncation) plus
  its change to ``(h, 2h, 4h)`` (the shots' noise, which the finer steps amplify 2^n times; a 10x
  looser shot changes by no more than that noise, so the rtol variant alone does not see it),
  propagated: each u-derivative shifted in turn, the changes of R2, R3 added;
* ``rtol``, ``offset``, ``readout``: each variant's change of the first three u-derivatives from
  its shots at ``+-h`` (those of step 3) and ``+-8h`` (the even part without the centre, its
  constant solved for), weighted as for chi2 (1/9, 1/(OFFSET_FACTOR^2 - 1), 1), propagated;
* ``root``: the stencil sits at the shot's x, not the target's: ``|R3 dx|`` and ``|R4 dx|`` (R4
  from the fourth u-derivatives), counted in full.

At ``mu = 0`` the stencil is exactly symmetric: chi3 and its bound come out exactly 0.
``error_by_observable`` adds ``chi3``, ``chi4``: their bounds relative to
``max(|chi_n|, CUMULANT_FLOOR chi2/max(|mu|, T)^(n-2))`` (chi3 vanishes at mu = 0, chi4 changes
sign), added after ``error_estimate`` is taken. If a cumulant shot fails, chi3 and chi4 are NaN and
``extra.cumulant_failure`` says why; nothing else of the row changes. Measured against mpmath
derivatives of the Reissner-Nordstrom closed form (2026-12-05; 276 rows, d = 3 to 6, T = 0.05, 1,
3, mu/T from 0 to 300): worst actual/estimate 0.37 for chi3 and 0.19 for chi4; typical relative
bounds 1e-9 to 2e-8 (chi3) and 2e-7 to 2e-5 (chi4; larger where chi4 itself is small: in d = 3 it
falls as (mu/T)^-4). Cost: 10 shots more per row, 8 of them in one batched call (about +20% of a
row's time).
"""
from __future__ import annotations

import math
import time

import numpy as np

from ..numerics import Counters, ShootSettings, shoot
from ..numerics import derivatives as fd
from ..numerics.batch import dop853_batch
from ..result import PointResult, Status
from ..settings import SolverSettings
from ..thermo import RHO_FLOOR, cs2_from_hessian, hessian_from_jacobians, local_stability
from .charged_brane import ChargedBrane, HorizonData

_DENSITIES = ("s", "rho", "epsilon", "P")
OBSERVABLES = ("s", "rho", "epsilon", "P", "chi2", "cs2")
#: the horizon-offset variant multiplies the offset by this factor
OFFSET_FACTOR = 10.0
#: measured order of the horizon-offset error (module docstring)
OFFSET_ORDER = 2
#: the read-out variant integrates this much further in the warp factor A
A_END_EXTRA = 2.0
#: safety factor on the summed components (common practice, no source)
SAFETY = 2.0
#: relative rounding floor of the read-out and rescaling in double precision
ROUNDING = 1e-14
#: derivative shots are this much tighter than the production tolerance
DERIV_TIGHTER = 1e4
#: chi3, chi4: step multiples of the u-derivatives (two Richardson levels) and of their checks
CUM_STEPS = (2, 4, 8)
CUM_COARSE = (4, 8, 16)
CUM_FINE = (1, 2, 4)
#: chi3, chi4 are measured in error_by_observable against max(|chi_n|, CUMULANT_FLOOR chi2 / m^(n-2)),
#: m = max(|mu|, T): chi3 vanishes at mu = 0, chi4 changes sign
CUMULANT_FLOOR = 1e-3


class _ShotFailed(RuntimeError):
    pass


def _observe(brane: ChargedBrane, kappa_sq: float, Phi1: float, ss: ShootSettings, cnt: Counters,
             residual: bool = True) -> dict:
    """One shot's boundary observables, counted as work; with ``residual=False`` the shot does not
    enter the row's residual (a shot that only serves chi3, chi4 leaves the equation of state's
    record unchanged)."""
    shot = shoot(brane, HorizonData(0.0, Phi1), ss, want_residual=residual)
    cnt.nfev += shot.nfev
    cnt.nsteps += shot.nsteps
    cnt.shots += 1
    if not shot.ok:
        raise _ShotFailed(shot.message)
    obs = brane.boundary_unsourced(shot.y_end, kappa_sq)
    if residual:
        cnt.residual = max(cnt.residual, shot.residual, obs["frame_mismatch"])
    return obs


def _unit(obs: dict, d: int) -> dict:
    """Observables at T = 1: x = mu/T and the densities over T^(d-1) or T^d."""
    lam = 1.0 / obs["T"]
    return {"x": obs["mu"] * lam, "s": obs["s"] * lam ** (d - 1), "rho": obs["rho"] * lam ** (d - 1),
            "epsilon": obs["epsilon"] * lam**d, "P": obs["P"] * lam**d}


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


def _central(brane, kappa_sq, Phi_max, u, h, ss, cnt, d, keep: dict | None = None, mult: int = 1) -> dict:
    """Central differences d/du of (x, s, rho) at T = 1 with step h; the two shots' values are
    kept in ``keep[mult]`` and ``keep[-mult]`` when given (``mult``: the step in base steps)."""
    p = _unit(_observe(brane, kappa_sq, (u + h) * Phi_max, ss, cnt), d)
    m = _unit(_observe(brane, kappa_sq, (u - h) * Phi_max, ss, cnt), d)
    if keep is not None:
        keep[mult], keep[-mult] = p, m
    return {k: (p[k] - m[k]) / (2.0 * h) for k in ("x", "s", "rho")}


def _second(vals: dict, D: dict, d: int):
    """(P_TT, P_Tmu, P_mumu, maxwell, cs2) at T = 1 from the values and u-derivatives.

    ``maxwell`` is ``|ds/dmu - drho/dT|`` on the scale ``sqrt(|P_TT P_mumu|)`` (which bounds
    ``|P_Tmu|`` where the Hessian is definite): relative to ``P_Tmu`` itself it would be inflated
    near extremality, where ``drho/dT = (d-1) rho - x chi2`` is a small difference of large terms."""
    Jt = np.array([[0.0, 1.0], [D["x"], vals["x"]]])
    Jd = np.array([[D["s"], (d - 1) * vals["s"]], [D["rho"], (d - 1) * vals["rho"]]])
    P_TT, P_Tmu, P_mumu, _ = hessian_from_jacobians(Jt, Jd)
    H = Jd @ np.linalg.inv(Jt)
    maxwell = abs(H[0, 1] - H[1, 0]) / math.sqrt(abs(P_TT * P_mumu))
    cs2 = cs2_from_hessian(1.0, vals["x"], vals["s"], vals["rho"], P_TT, P_Tmu, P_mumu)
    return float(P_TT), float(P_Tmu), float(P_mumu), float(maxwell), float(cs2)


def _at_target(vals: dict, x: float, P_Tmu: float, chi2: float, d: int) -> dict:
    """Densities (T = 1) carried from the shot's x to the target x, to first order."""
    dx = x - vals["x"]
    slope = {"s": P_Tmu, "rho": chi2, "P": vals["rho"], "epsilon": (d - 1) * vals["rho"]}
    return {"x": x, **{k: vals[k] + slope[k] * dx for k in _DENSITIES}}


def _scale(vals: dict) -> dict:
    return {"s": abs(vals["s"]), "rho": max(abs(vals["rho"]), RHO_FLOOR * abs(vals["s"])),
            "epsilon": abs(vals["epsilon"]), "P": abs(vals["P"])}


def _scalar_free_rhs(brane: ChargedBrane):
    """The right-hand side of :class:`ChargedBrane` for a batch of states with no scalar profile:
    with ``phi = 0`` and ``V'(0) = f'(0) = 0`` the equations reduce to ``A'' = 0``,
    ``h'' = -d A' h' + e^{-2A} f Phi'^2``, ``Phi'' = -(d-2) A' Phi'`` and the scalar rows stay zero
    (the same values as ``brane.rhs``, at half the cost); ``brane.rhs`` itself otherwise."""
    V1, f1 = float(brane.V.derivs(0.0)[1]), float(brane.f.derivs(0.0)[1])
    if V1 != 0.0 or f1 != 0.0:
        return lambda y: brane.rhs(None, y)
    d, f0 = brane.d, float(brane.f.derivs(0.0)[0])

    def rhs(y):
        A, dA, _, dh, _, dPh, _, _ = y
        z = np.zeros_like(A)
        return np.array([dA, z, dh, -d * dA * dh + np.exp(-2.0 * A) * f0 * dPh * dPh, dPh, -(d - 2) * dA * dPh, z, z])

    return rhs


def _observe_batch(brane, kappa_sq, columns, rtol, cnt, d) -> list[dict]:
    """Values at T = 1 of several shots integrated together (:func:`holoscan.numerics.batch.dop853_batch`,
    the same DOP853 error control as :func:`holoscan.numerics.shoot`): ``columns`` holds
    ``(Phi1, horizon_offset, A_end)`` per shot, each started and ended as :func:`shoot` would."""
    P1 = np.array([c[0] for c in columns])
    eps = np.array([c[1] for c in columns])
    y0 = np.hstack([brane.start_states(np.zeros(1), P1[j:j + 1], eps[j]) for j in range(P1.size)])
    slope = np.array([brane.horizon_slope(HorizonData(0.0, float(p))) for p in P1])
    x1 = np.array([c[2] for c in columns]) / slope
    if not (np.all(np.isfinite(y0)) and np.all(slope > 0.0) and np.all(x1 > eps)):
        raise _ShotFailed("horizon data of a cumulant shot give no regular start")
    res = dop853_batch(_scalar_free_rhs(brane), eps, y0, x1, rtol)
    cnt.nfev += int(res.nfev.sum())
    cnt.nsteps += int(res.nsteps.sum())
    cnt.shots += P1.size
    if not np.all(res.ok):
        raise _ShotFailed("a cumulant shot did not reach the boundary")
    return [_unit(brane.boundary_unsourced(res.y[:, j], kappa_sq), d) for j in range(P1.size)]


def _cumulants(brane, kappa_sq, Phi_max, u, h, x, stencil, var_stencil, sd, sd_loose, sd_offset, cnt, d) -> dict:
    """``R2 = d^2 rho_hat/dx^2``, ``R3 = d^3 rho_hat/dx^3`` at T = 1 (chi3 and chi4 over T^(d-3),
    T^(d-4)) from the derivative shots of the row (``stencil``: multiples of ``h`` -> values) and
    new ones at 8h and 16h; each with its error by source (module docstring, "Higher cumulants")."""
    A_end, far_end = brane.A_end, brane.A_end + A_END_EXTRA
    new = [(m, (u + m * h) * Phi_max) for m in (8, -8, 16, -16)]
    cols = ([(P1, sd.horizon_offset, A_end) for _, P1 in new]
            + [(P1, sd_offset.horizon_offset, A_end) for _, P1 in new[:2]]
            + [(P1, sd.horizon_offset, far_end) for _, P1 in new[:2]])
    got = _observe_batch(brane, kappa_sq, cols, sd.rtol, cnt, d)
    for (m, _), v in zip(new, got[:4], strict=True):
        stencil[m] = v
    var_stencil["offset"].update({8: got[4], -8: got[5]})
    var_stencil["readout"].update({8: got[6], -8: got[7]})
    for m in (8, -8):
        var_stencil["rtol"][m] = _unit(_observe(brane, kappa_sq, (u + m * h) * Phi_max, sd_loose, cnt, False), d)

    def derivs(vals, steps, orders):
        return [fd.symmetric(vals, steps, n, h) for n in orders]

    xs = {m: v["x"] for m, v in stencil.items()}
    rs = {m: v["rho"] for m, v in stencil.items()}
    dx, dr = derivs(xs, CUM_STEPS, (1, 2, 3, 4)), derivs(rs, CUM_STEPS, (1, 2, 3, 4))
    R, scale = fd.curve_derivatives(dx, dr)
    args = np.array(dx[:3] + dr[:3])

    def pipeline(a):
        return np.array(fd.curve_derivatives(a[:3], a[3:])[0][1:3])

    # Richardson spread both ways: against coarser steps (truncation) and finer ones (the shots'
    # noise, amplified 2^n times there), each u-derivative shifted by both, propagated
    spread = (np.abs(args - np.array(derivs(xs, CUM_COARSE, (1, 2, 3)) + derivs(rs, CUM_COARSE, (1, 2, 3))))
              + np.abs(args - np.array(derivs(xs, CUM_FINE, (1, 2, 3)) + derivs(rs, CUM_FINE, (1, 2, 3)))))
    comps = {"fd": fd.propagate(pipeline, args, spread)}
    # each variant's change of the first three u-derivatives from its shots at +-h and +-8h (no
    # centre: the even part's constant is solved for), weighted as for chi2, propagated
    weight = {"rtol": 1.0 / 9.0, "offset": 1.0 / (OFFSET_FACTOR**OFFSET_ORDER - 1.0), "readout": 1.0}
    for name, var in var_stencil.items():
        errs = []
        for key in ("x", "rho"):
            dv = {m: var[m][key] - stencil[m][key] for m in (1, -1, 8, -8)}
            errs += [fd.symmetric(dv, (1, 8), 1, h), fd.symmetric(dv, (1, 8), 2, h, centre=False),
                     fd.symmetric(dv, (1, 8), 3, h)]
        comps[name] = fd.propagate(pipeline, args, weight[name] * np.abs(np.array(errs)))
    # the stencil sits at the shot's x, not the target's: the move, counted in full
    move = abs(x - stencil[0]["x"])
    comps["root"] = np.array([abs(R[2]) * move, abs(R[3]) * move])
    err = SAFETY * sum(comps.values()) + ROUNDING * np.array(scale[1:3])
    return {"R1": R[0], "R2": R[1], "R3": R[2], "err": err,
            "components": {k: [float(c) for c in v] for k, v in comps.items()}}


def solve_unsourced(brane: ChargedBrane, kappa_sq: float, T: float, mu: float, settings: SolverSettings,
                    *, model_id: str, kind: str) -> PointResult:
    """Solve at the requested ``(T, mu)`` by shooting; never raises for numerical trouble. See the
    module docstring for the method and for what ``error_estimate`` covers."""
    t0 = time.perf_counter()
    d = brane.d
    sign = -1.0 if mu < 0 else 1.0
    x = abs(mu) / T
    f = float(brane.f.derivs(0.0)[0])
    Phi_max = math.sqrt(-2.0 * float(brane.V.derivs(0.0)[0]) / f)
    ss = settings.shoot_settings()
    tight = ss.tighter()
    sd = ss.tighter(DERIV_TIGHTER)
    sd_loose = sd.varied(rtol_factor=10.0)
    far = ChargedBrane(d, brane.V, brane.f, A_end=brane.A_end + A_END_EXTRA)

    def offset(s: ShootSettings) -> ShootSettings:
        return s.varied(offset_factor=OFFSET_FACTOR)

    cnt = Counters()
    common = dict(model_id=model_id, kind=kind, d=d, method="shooting", T=T, mu=mu,
                  rtol=ss.rtol, atol=ss.atol)
    try:
        u, base_obs, niter = _target(brane, kappa_sq, Phi_max, x, ss, cnt)
        base = _unit(base_obs, d)
        root_shots = cnt.shots
        # -- derivatives along u: three steps, Richardson, and the variants -------------------------
        h = settings.fd_step * (1.0 - u)
        stencil = {}  # multiple of h -> values (T = 1) of the derivative shots, kept for chi3, chi4
        var_stencil = {"rtol": {}, "offset": {}, "readout": {}}
        Ds = [_central(brane, kappa_sq, Phi_max, u, m * h, sd, cnt, d, stencil, m) for m in (1, 2, 4)]
        R1 = {k: (4.0 * Ds[0][k] - Ds[1][k]) / 3.0 for k in Ds[0]}
        R2 = {k: (4.0 * Ds[1][k] - Ds[2][k]) / 3.0 for k in Ds[0]}
        D_var = {
            "rtol": (_central(brane, kappa_sq, Phi_max, u, h, sd_loose, cnt, d, var_stencil["rtol"]), 1.0 / 9.0),
            "offset": (_central(brane, kappa_sq, Phi_max, u, h, offset(sd), cnt, d, var_stencil["offset"]),
                       1.0 / (OFFSET_FACTOR**OFFSET_ORDER - 1.0)),
            "readout": (_central(far, kappa_sq, Phi_max, u, h, sd, cnt, d, var_stencil["readout"]), 1.0),
        }
        centre = _unit(_observe(brane, kappa_sq, u * Phi_max, sd, cnt), d)
        stencil[0] = centre
        D_err = {name: {k: w * abs(Dv[k] - Ds[0][k]) for k in R1} for name, (Dv, w) in D_var.items()}
        D_err["fd"] = {k: abs(R1[k] - R2[k]) for k in R1}
        # -- value variants at the root ----------------------------------------------------------------
        V_var = {
            "rtol": _unit(_observe(brane, kappa_sq, u * Phi_max, tight, cnt), d),
            "offset": _unit(_observe(brane, kappa_sq, u * Phi_max, offset(tight), cnt), d),
            "readout": _unit(_observe(far, kappa_sq, u * Phi_max, tight, cnt), d),
        }
    except _ShotFailed as exc:
        return PointResult(**common, status=Status.FAILED, message=str(exc), nfev=cnt.nfev,
                           nsteps=cnt.nsteps, niter=cnt.shots, wall_time=time.perf_counter() - t0)

    try:  # chi3, chi4: a failure here leaves them NaN and changes nothing else of the row
        cum = _cumulants(brane, kappa_sq, Phi_max, u, h, x, stencil, var_stencil, sd, sd_loose, offset(sd), cnt, d)
    except (_ShotFailed, ValueError, ArithmeticError, np.linalg.LinAlgError) as exc:
        cum = {"failure": f"chi3, chi4 not computed: {exc}"}
    # the Hessian's scaling column uses the values of the (tighter) derivative shots: near
    # extremality drho/dT = (d-1) rho - x chi2 cancels, and the production values would limit it
    P_TT, P_Tmu, P_mumu, maxwell, cs2 = _second(centre, R1, d)
    vals = _at_target(base, x, P_Tmu, P_mumu, d)
    scale = _scale(vals)
    scale2 = {"chi2": abs(P_mumu), "cs2": abs(cs2)}
    comps = {}  # component -> observable -> relative size (before SAFETY)
    # root: the first-order move to the target, counted in full
    comps["root"] = {k: abs(vals[k] - base[k]) / scale[k] for k in _DENSITIES}
    comps["root"].update(chi2=0.0, cs2=0.0)
    # rtol, offset, read-out: value variants carried to the target (same Hessian slopes)
    for name, w in (("rtol", 1.0), ("offset", 1.0 / (OFFSET_FACTOR**OFFSET_ORDER - 1.0)), ("readout", 1.0)):
        ref = vals if name == "rtol" else _at_target(V_var["rtol"], x, P_Tmu, P_mumu, d)
        var = _at_target(V_var[name], x, P_Tmu, P_mumu, d)
        comps[name] = {k: w * abs(var[k] - ref[k]) / scale[k] for k in _DENSITIES}
        comps[name].update(chi2=0.0, cs2=0.0)
    # the Hessian also uses the values (scaling column): their change from rtol/10^4 to rtol/100
    # (an upper bound of their own error), propagated
    _, _, c2t, _, cs2t = _second(V_var["rtol"], R1, d)
    comps["rtol"]["chi2"] = abs(c2t - P_mumu) / scale2["chi2"]
    comps["rtol"]["cs2"] = abs(cs2t - cs2) / scale2["cs2"]
    comps["fd"] = {k: 0.0 for k in OBSERVABLES}
    # every derivative error (Richardson spread; rtol, offset and read-out variants of the
    # derivative shots): each u-derivative shifted by its error, the changes of chi2, cs2 added
    # to that source's component
    for name, errs in D_err.items():
        for k in R1:
            _, _, c2k, _, cs2k = _second(centre, {**R1, k: R1[k] + errs[k]}, d)
            comps[name]["chi2"] += abs(c2k - P_mumu) / scale2["chi2"]
            comps[name]["cs2"] += abs(cs2k - cs2) / scale2["cs2"]
    # the Maxwell relation: half the gap between ds/dmu and drho/dT as an error of P_Tmu (fd)
    dP = 0.5 * maxwell * math.sqrt(abs(P_TT * P_mumu))
    cs2_m = cs2_from_hessian(1.0, centre["x"], centre["s"], centre["rho"], P_TT, P_Tmu + dP, P_mumu)
    comps["fd"]["cs2"] += abs(cs2_m - cs2) / scale2["cs2"]
    per_obs = {k: SAFETY * sum(c[k] for c in comps.values()) + ROUNDING for k in OBSERVABLES}
    err = max(per_obs.values())
    deriv_err = max(per_obs["chi2"], per_obs["cs2"])
    target_mismatch = abs(base["x"] - x) / max(x, 1.0)
    residual = cnt.residual
    problems = settings.problems(err, residual)
    if not target_mismatch <= 1e-2 * settings.accept_error:
        problems.append(f"target mismatch {target_mismatch:.3g} > accept_error / 100")
    if problems:
        worst = max(per_obs, key=per_obs.get)
        problems[0] += f" (largest in {worst})"
    status = Status.NOT_CONVERGED if problems else Status.OK
    message = "; ".join(problems) if problems else f"converged: {niter} root iterations, {cnt.shots} shots"
    # chi3, chi4 and their absolute bounds (not part of error_estimate); their relative sizes join
    # error_by_observable after error_estimate is taken
    by_obs = dict(per_obs)
    chi3 = chi4 = chi3_err = chi4_err = math.nan
    if "err" in cum:
        floor = CUMULANT_FLOOR * abs(P_mumu) / max(x, 1.0)
        by_obs["chi3"] = float(cum["err"][0] / max(abs(cum["R2"]), floor))
        by_obs["chi4"] = float(cum["err"][1] / max(abs(cum["R3"]), floor / max(x, 1.0)))
        chi3, chi3_err = sign * cum["R2"] * T ** (d - 3), float(cum["err"][0]) * T ** (d - 3)
        chi4, chi4_err = cum["R3"] * T ** (d - 4), float(cum["err"][1]) * T ** (d - 4)
    # rescale from T = 1
    s, rho = vals["s"] * T ** (d - 1), vals["rho"] * T ** (d - 1)
    eps, P = vals["epsilon"] * T**d, vals["P"] * T**d
    fH = T ** (d - 2)
    P_TT, P_Tmu, P_mumu = P_TT * fH, P_Tmu * fH, P_mumu * fH
    return PointResult(
        **common,
        s=s, rho=sign * rho, epsilon=eps, P=P, chi2=P_mumu, cs2=cs2,
        chi3=chi3, chi4=chi4, chi3_err=chi3_err, chi4_err=chi4_err,
        P_check=(T * s + x * T * rho) / d, trace_anomaly=(eps - (d - 1) * P) / T**d,
        stability=local_stability(P_TT, P_Tmu, P_mumu),
        status=status, message=message, nfev=cnt.nfev, nsteps=cnt.nsteps,
        niter=niter, residual=residual, error_estimate=err, wall_time=time.perf_counter() - t0,
        extra={"horizon_Phi1": sign * u * Phi_max, "deriv_error": deriv_err, "maxwell_mismatch": maxwell,
               "target_mismatch": target_mismatch, "shots": cnt.shots, "root_shots": root_shots,
               **{f"error_{name}": SAFETY * max(c.values()) for name, c in comps.items()},
               "error_by_observable": by_obs, **({"cumulant_failure": cum["failure"]} if "failure" in cum else {})},
    )
