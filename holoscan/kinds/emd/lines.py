"""Transition lines of an ``emd`` model (config units; energy unit ``energy_scale``).

- sourced (:mod:`.fixed_mu`): at every grid ``|mu|`` the fixed-``mu`` solution curve is sampled in
  horizon data; with two folds it gives a ``first-order`` point (equal ``Omega`` of the hot and
  cold branches, ``T*`` refined continuously between the grid temperatures, with the latent heat
  ``T* (s_high - s_low)`` and the jump of ``rho``) and two ``instability`` points (spinodals, where
  the high- and the low-entropy branch stop being locally stable); without folds, a ``crossover``
  point (maximum of ``ds/dT`` at fixed ``mu``). The critical endpoint is the root in ``mu`` of the
  fold measure between the last grid ``|mu|`` without folds and the first with.
- unsourced (:mod:`.family`): each fold ``x*`` of ``mu/T`` along the conformal family is an
  ``instability`` line ``mu = x* T``, written at every grid temperature.
"""
from __future__ import annotations

import math
import time
from itertools import pairwise

from ...numerics import Counters
from ...phases.lines import CriticalPoint, LinePoint, failed_point
from . import fixed_mu as fm
from .batch import batch_solver
from .brane_map import AtlasShooter
from .family import folds
from .pointwise import shooter_for

#: Chebyshev-Lobatto nodes per fixed-mu curve (the (n+1)/2 subset gives the uncertainty)
CURVE_NODES = 41
#: the curves span the grid's temperatures widened by this factor on each side
T_MARGIN = 1.3


def locate_emd_lines(model, settings, Ts, mus):
    """``(line points, critical points)`` of a scalar-carrying emd model (sorted ``Ts``, ``mus >= 0``)."""
    if model.source:
        return _emd_sourced(model, settings, Ts, mus)
    return _emd_family(model, settings, Ts, mus), []


def _curve_shooter(model, settings):
    """What the fixed-mu curves are sampled with: the model's atlas (method ``atlas``, the default)
    or direct shots (method ``shooting``)."""
    V, f = model.couplings()
    sh = shooter_for(model, V, f)
    if settings.method in ("atlas", "auto"):

        return AtlasShooter(batch_solver(model, sh, settings.with_method("atlas")).map)
    return sh


def _emd_sourced(model, settings, Ts, mus):

    sh = _curve_shooter(model, settings)
    ss = settings.shoot_settings()
    L = model.energy_scale
    T_lo, T_hi = Ts[0] / L / T_MARGIN, Ts[-1] / L * T_MARGIN
    n = CURVE_NODES
    on = " (interpolated by the atlas)" if hasattr(sh, "map") else ""
    curve_method = f"fixed-mu curve in horizon data{on}, {n} Chebyshev nodes"
    rows, measures = [], []
    for mu in mus:
        t0, cnt = time.perf_counter(), Counters()
        mh = mu / L
        try:
            w = fm.window(sh, mh, T_lo, T_hi)
            if w is None:
                raise ArithmeticError(f"no brane of this model at mu = {mu:.6g} in the grid's temperature range")
            fine, half = fm.sample(sh, mh, *w, n, ss, cnt)
        except (ArithmeticError, ValueError, RuntimeError) as exc:
            rows.append(failed_point(model.id, "first-order", curve_method, math.nan, mu, exc, t0, cnt))
            continue
        measures.append((mh, fine.fold_measure()[0], w))
        common = dict(shots=cnt.shots, wall_time=time.perf_counter() - t0)
        co, co_h = fine.coexistence(), half.coexistence()
        nf = len(fine.folds())
        if co is not None:
            dT = abs(co["T"] - co_h["T"]) if co_h else math.nan
            rows.append(LinePoint(
                model.id, "first-order", "equal Omega (integral of s dT between the branches) on a " + curve_method,
                co["T"] * L, mu, T_err=dT * L, latent_heat=co["latent_heat"] * L**4,
                rho_jump=(co["rho_hot"] - co["rho_cold"]) * L**3, s_high=co["s_hot"] * L**3,
                s_low=co["s_cold"] * L**3,
                message="located" if co_h else "located; the half-resolution curve misses it (uncertainty unknown)",
                status="ok" if co_h else "not converged",
                extra={k: co[k] for k in ("phi0_hot", "phi0_cold")}, **common))
            for which, key in (("high-entropy", "T_spinodal_low"), ("low-entropy", "T_spinodal_high")):
                err = abs(co[key] - co_h[key]) if co_h else math.nan
                rows.append(LinePoint(model.id, "instability", "fold of T along the " + curve_method, co[key] * L, mu,
                                      T_err=err * L, message=f"the {which} branch stops being locally stable",
                                      status="ok" if co_h else "not converged", extra={"branch": which}, **common))
        elif nf == 0:
            cr, cr_h = fine.crossover(), half.crossover()
            if cr is not None:
                dT = abs(cr["T"] - cr_h["T"]) if cr_h else math.nan
                rows.append(LinePoint(model.id, "crossover", "maximum of ds/dT at fixed mu on a " + curve_method,
                                      cr["T"] * L, mu, T_err=dT * L, message="located",
                                      status="ok" if cr_h else "not converged",
                                      extra={"ds_dT": cr["ds_dT"] * L**2, "phi0": cr["phi0"]}, **common))
        else:
            rows.append(LinePoint(model.id, "first-order", curve_method, math.nan, mu, status="not converged",
                                  message=f"{nf} fold(s) without a resolvable coexistence region in the "
                                          "grid's temperature range", **common))
    cps = []
    for (a, ga, _), (b, gb, wb) in pairwise(measures):
        if ga < 0.0 < gb:
            cps.append(_critical_point(model, sh, ss, a, b, wb, n, L))
            break
    return rows, cps


def _critical_point(model, sh, ss, a, b, window, n, L) -> CriticalPoint:
    """Root in mu of the fold measure on [a, b] (source units), at full and half resolution."""
    from scipy.optimize import brentq

    t0, cnt = time.perf_counter(), Counters()
    cache = {}

    def peak_T(c):
        return float(c.T(c.fold_measure()[1]))

    def curves(mh):
        if mh not in cache:
            cache[mh] = fm.sample(sh, mh, *window, n, ss, cnt)
        return cache[mh]

    method = f"zero of the fold measure max(dT/dlog phi0)/T along fixed-mu curves ({n} Chebyshev nodes), Brent in mu"
    try:
        mu_f = brentq(lambda m: curves(m)[0].fold_measure()[0], a, b, xtol=1e-9, rtol=1e-12)
        fine, half = curves(mu_f)
        T_f = peak_T(fine)
        # the half-resolution root by one secant step from mu_f through the nearest other evaluated
        # mu (no new curves); its distance from mu_f is the interpolation uncertainty of mu_c, and
        # the uncertainty of T_c adds the slope of T_c(mu) times that distance
        far = min((m for m in cache if m != mu_f), key=lambda m: abs(m - mu_f))
        gh = [curves(m)[1].fold_measure()[0] for m in (mu_f, far)]
        mu_h = mu_f - gh[0] * (far - mu_f) / (gh[1] - gh[0])
        slope = (T_f - peak_T(curves(far)[0])) / (mu_f - far)
        T_err = abs(peak_T(half) - T_f) + abs(slope * (mu_h - mu_f))
    except (ArithmeticError, ValueError, RuntimeError, ZeroDivisionError) as exc:
        return CriticalPoint(model.id, method, math.nan, math.nan, math.nan, math.nan, status="failed",
                             message=f"{type(exc).__name__}: {exc}", shots=cnt.shots,
                             wall_time=time.perf_counter() - t0)
    return CriticalPoint(model.id, method, T_f * L, mu_f * L, T_err=(T_err + 1e-9) * L,
                         mu_err=(abs(mu_f - mu_h) + 1e-9) * L, message="located", shots=cnt.shots,
                         wall_time=time.perf_counter() - t0,
                         extra={"bracket_mu": [a * L, b * L],
                                "phi0": float(math.exp(fine.log_phi0(fine.fold_measure()[1])))})


def _emd_family(model, settings, Ts, mus):
    V, f = model.couplings()
    sh = shooter_for(model, V, f)
    t0, cnt = time.perf_counter(), Counters()
    method = "fold of mu/T along the unsourced family (batched Chebyshev refinement in phi0)"
    try:
        found = folds(sh, settings.shoot_settings(), cnt)
    except (ArithmeticError, ValueError, RuntimeError) as exc:
        return [failed_point(model.id, "instability", method, math.nan, math.nan, exc, t0, cnt)]
    rows = []
    for fo in found:
        for T in Ts:
            rows.append(LinePoint(model.id, "instability", method, T, fo["x"] * T, T_err=0.0,
                                  mu_err=fo["error_estimate"] * T,
                                  message=f"mu/T = {fo['x']:.12g} is the {fo['kind']}imum of mu/T along the family; "
                                          "beyond it a branch is locally unstable",
                                  shots=cnt.shots, wall_time=time.perf_counter() - t0,
                                  extra={"mu_over_T": fo["x"], "phi0": fo["phi0"], "fold": fo["kind"]}))
    return rows
