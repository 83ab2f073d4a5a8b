"""Thermodynamic identities shared by every model (pure functions, no solving).

Conventions: the pressure ``P(T, mu)`` is the thermodynamic potential (``Omega = -P``), so
``s = dP/dT``, ``rho = dP/dmu``, and the Hessian of ``P`` holds the susceptibilities::

    P_TT = ds/dT|_mu,   P_Tmu = ds/dmu|_T = drho/dT|_mu,   P_mumu = chi2 = drho/dmu|_T.
"""
from __future__ import annotations

import math
import sys

import numpy as np

#: floors of relative error measures, shared by every solve path (README "Error evidence"): rho
#: vanishes at mu = 0 and is measured against max(|rho|, RHO_FLOOR s); cs2 dips towards 0 at a
#: critical point and is measured against max(|cs2|, CS2_FLOOR)
RHO_FLOOR = 1e-3
CS2_FLOOR = 0.1


def cs2_from_hessian(T, mu, s, rho, P_TT, P_Tmu, P_mumu):
    """Speed of sound squared ``(dP/d epsilon)`` at fixed ``s/rho``.

    From ``dP = s dT + rho dmu`` and ``d epsilon = T ds + mu drho`` restricted to ``d(s/rho) = 0``::

        cs2 = (s^2 P_mumu - 2 s rho P_Tmu + rho^2 P_TT) / ((T s + mu rho) (P_TT P_mumu - P_Tmu^2))

    At ``mu = 0`` this is ``s / (T ds/dT)``.

    cs2 is a pure number, but the formula's numerator and denominator scale as T^(3d-4) and
    T^(3d-3): for scalars at very small or large T their terms underflow or overflow although cs2
    does not. Only then (a term's magnitude is not a normal double, see :func:`_out_of_scale`) the
    same formula is evaluated on densities divided by ``c = max(|s|, |rho|)`` and a Hessian divided
    by ``h = max(|P_TT|, |P_Tmu|, |P_mumu|)``, times ``c / h``; ordinary inputs take the plain formula.
    """
    if _out_of_scale(T, mu, s, rho, P_TT, P_Tmu, P_mumu):
        return _cs2_rescaled(T, mu, s, rho, P_TT, P_Tmu, P_mumu)
    det = P_TT * P_mumu - P_Tmu**2
    num = s * s * P_mumu - 2.0 * s * rho * P_Tmu + rho * rho * P_TT
    return num / ((T * s + mu * rho) * det)


def _out_of_scale(T, mu, s, rho, P_TT, P_Tmu, P_mumu) -> bool:
    """True when a magnitude of the cs2 formula's terms (the Hessian's determinant terms, the
    numerator's terms, ``T s + mu rho``) overflows or underflows below the smallest normal double.
    Scalars only: arrays (many points at once) are always False."""
    if any(np.ndim(x) for x in (T, mu, s, rho, P_TT, P_Tmu, P_mumu)):
        return False
    try:
        with np.errstate(all="ignore"):
            sizes = (abs(P_TT * P_mumu) + P_Tmu * P_Tmu,
                     s * s * abs(P_mumu) + 2.0 * abs(s * rho * P_Tmu) + rho * rho * abs(P_TT),
                     abs(T * s) + abs(mu * rho))
    except OverflowError:
        return True
    return any(not (math.isfinite(x) and x >= sys.float_info.min) for x in sizes)


def _cs2_rescaled(T, mu, s, rho, P_TT, P_Tmu, P_mumu) -> float:
    """:func:`cs2_from_hessian` with densities and Hessian scaled to order one (its docstring)."""
    c = max(abs(s), abs(rho))
    h = max(abs(P_TT), abs(P_Tmu), abs(P_mumu))
    if not (c > 0 and h > 0 and math.isfinite(c) and math.isfinite(h)):
        return math.nan
    s_, r_, a, b, e = s / c, rho / c, P_TT / h, P_Tmu / h, P_mumu / h
    num = s_ * s_ * e - 2.0 * s_ * r_ * b + r_ * r_ * a
    den = (T * s_ + mu * r_) * (a * e - b * b)
    try:
        return float((c / h) * num / den)
    except (ZeroDivisionError, OverflowError):
        return math.nan


def local_stability(P_TT, P_Tmu, P_mumu) -> str:
    """``stable`` if the Hessian of P in (T, mu) is positive definite, else ``unstable``.

    When the determinant's terms overflow or underflow (very small or large T), its sign is taken
    from the Hessian divided by its largest element (the sign does not change under that scaling)."""
    if _out_of_scale(1.0, 0.0, 1.0, 0.0, P_TT, P_Tmu, P_mumu):
        h = max(abs(P_TT), abs(P_Tmu), abs(P_mumu))
        if h > 0 and math.isfinite(h):
            P_TT, P_Tmu, P_mumu = P_TT / h, P_Tmu / h, P_mumu / h
    return "stable" if P_TT > 0 and P_TT * P_mumu - P_Tmu**2 > 0 else "unstable"


def hessian_from_jacobians(J_targets: np.ndarray, J_densities: np.ndarray):
    """Hessian of ``P`` from derivatives of ``(T, mu)`` and ``(s, rho)`` along two directions.

    Parameters
    ----------
    J_targets : array (2, 2), or (..., 2, 2) for many points at once
        ``[[dT/dq1, dT/dq2], [dmu/dq1, dmu/dq2]]`` for any two independent parameters ``q``
        (horizon data, or one datum and the scaling of a conformal model).
    J_densities : array (2, 2), or (..., 2, 2)
        ``[[ds/dq1, ds/dq2], [drho/dq1, drho/dq2]]`` along the same directions.

    Returns
    -------
    P_TT, P_Tmu, P_mumu, maxwell_mismatch
        ``P_Tmu`` is the mean of ``ds/dmu`` and ``drho/dT``; ``maxwell_mismatch`` is their relative
        difference (zero for exact thermodynamics, a consistency check of the solution).
    """
    Jt, Jd = np.asarray(J_targets, float), np.asarray(J_densities, float)
    with np.errstate(all="ignore"):
        H = Jd @ np.linalg.inv(Jt)
    s_mu, rho_T = H[..., 0, 1], H[..., 1, 0]
    with np.errstate(all="ignore"):
        mismatch = np.where((s_mu == 0) & (rho_T == 0), 0.0,
                            np.abs(s_mu - rho_T) / np.maximum(np.maximum(np.abs(s_mu), np.abs(rho_T)), 1e-300))
    if Jt.ndim == 2:
        return H[0, 0], 0.5 * (s_mu + rho_T), H[1, 1], float(mismatch)
    return H[..., 0, 0], 0.5 * (s_mu + rho_T), H[..., 1, 1], mismatch
