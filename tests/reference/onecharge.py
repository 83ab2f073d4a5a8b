"""Closed form of the one-charge black brane of the STU truncation in AdS5 (unsourced, Delta = 2).

Model (L = 1): V = -4 (2 e^{phi/sqrt6} + e^{-2 phi/sqrt6}), f = e^{-4 phi/sqrt6} (one charge of the STU
model: Behrndt, Cvetic & Sabra 1999, Nucl. Phys. B 553, 317; Gubser 1999; as used by DeWolfe, Gubser &
Rosen 2011, Phys. Rev. D 83, 086005 -- recalled from memory, then derived below). V(0) = -12,
V''(0) = -4.

Solution (H = 1 + k/r^2, b(r) = r^2 H - m/r^2, r the radial coordinate of the STU form):
  ds^2 = -H^{-2/3} b dt^2 + H^{1/3} (dr^2/b + r^2 dx^2),  phi = -sqrt(2/3) log H,  f = H^{4/3}.
Derived here (see emd_zgauge for the equations):
  horizon b(r_h) = 0: m = r_h^2 (r_h^2 + k);
  s = (2 pi/kappa^2) r_h^2 sqrt(r_h^2 + k);   T = (2 r_h^2 + k) / (2 pi sqrt(r_h^2 + k));
  Gauss law: sqrt(-g) f F^{rt} = -H^2 r^3 A_t' is constant, so A_t = mu (1 - (r_h^2+k)/(r^2+k));
  the Einstein tt-equation at the horizon, written in the z gauge (z = H^{-1/6}/r), fixes the flux
  Q = 2 r_h sqrt(k (r_h^2 + k)), so mu = r_h sqrt(k/(r_h^2 + k)), rho = Q/(2 kappa^2).
With y = k/r_h^2: mu/T = 2 pi sqrt(y)/(2 + y), largest (pi/sqrt 2) at y = 2; y < 2 is the stable branch,
y > 2 the unstable one. Conformal: P = (T s + mu rho)/4, epsilon = 3P, cs2 = 1/3.
"""
from __future__ import annotations

import math

import mpmath as mp
import numpy as np

SQ6 = math.sqrt(6.0)


def V(p):
    return -4.0 * (2.0 * np.exp(p / SQ6) + np.exp(-2.0 * p / SQ6))


def dV(p):
    # -8/sqrt6 (e^{a} - e^{-2a}) with a = p/sqrt6, written without cancellation
    a = p / SQ6
    return -8.0 / SQ6 * np.exp(-0.5 * a) * 2.0 * np.sinh(1.5 * a)


def d2V(p):
    return -4.0 / 6.0 * (2.0 * np.exp(p / SQ6) + 4.0 * np.exp(-2.0 * p / SQ6))


def f(p):
    return np.exp(-4.0 * p / SQ6)


def df(p):
    return -4.0 / SQ6 * np.exp(-4.0 * p / SQ6)


def d2f(p):
    return 16.0 / 6.0 * np.exp(-4.0 * p / SQ6)


def model(kappa_sq=1.0):
    from .emd_zgauge import Model
    return Model(V, dV, d2V, f, df, d2f, kappa_sq, sourced=False)


def _by_rk(rh, k, kappa_sq):
    rh, k = mp.mpf(rh), mp.mpf(k)
    T = (2 * rh ** 2 + k) / (2 * mp.pi * mp.sqrt(rh ** 2 + k))
    mu = rh * mp.sqrt(k / (rh ** 2 + k))
    s = 2 * mp.pi / kappa_sq * rh ** 2 * mp.sqrt(rh ** 2 + k)
    rho = rh * mp.sqrt(k * (rh ** 2 + k)) / kappa_sq
    return T, mu, s, rho


def horizon_scalar(y):
    """phi at the horizon for y = k/r_h^2."""
    return -math.sqrt(2.0 / 3.0) * math.log1p(y)


def y_of_ratio(x, branch):
    """y = k/r_h^2 at mu/T = x; branch 0 stable (y < 2), 1 unstable (y > 2). None past pi/sqrt 2."""
    w = mp.mpf(x) / (2 * mp.pi)
    if w == 0:
        return mp.mpf(0) if branch == 0 else None
    disc = 1 - 8 * w ** 2
    if disc < 0:
        return None
    sq = (1 - mp.sqrt(disc)) / (2 * w) if branch == 0 else (1 + mp.sqrt(disc)) / (2 * w)
    return sq ** 2


def point(T, mu, branch=0, kappa_sq=1.0):
    """All quantities at (T, mu) on the given branch, or None where that branch does not exist."""
    mp.mp.dps = 30
    sign = 1 if mu >= 0 else -1
    T, mu = mp.mpf(T), abs(mp.mpf(mu))
    y = y_of_ratio(mu / T, branch)
    if y is None:
        return None
    rh = 2 * mp.pi * T * mp.sqrt(1 + y) / (2 + y)
    k = y * rh ** 2
    _, _, s, rho = _by_rk(rh, k, kappa_sq)
    P = (T * s + mu * rho) / 4

    # chi2 = d rho/d mu at fixed T from the Jacobian of (r_h, k) -> (T, mu)
    def Tm(a, b):
        t, m_, _, _ = _by_rk(a, b, kappa_sq)
        return t, m_

    if y == 0:     # neutral brane: rho = mu r_h^2/kappa^2 + O(mu^3), so chi2 = r_h^2/kappa^2
        chi2 = rh ** 2 / kappa_sq
    else:
        dT_dr = mp.diff(lambda a: Tm(a, k)[0], rh)
        dT_dk = mp.diff(lambda b: Tm(rh, b)[0], k)
        dm_dr = mp.diff(lambda a: Tm(a, k)[1], rh)
        dm_dk = mp.diff(lambda b: Tm(rh, b)[1], k)
        dr_dr = mp.diff(lambda a: _by_rk(a, k, kappa_sq)[3], rh)
        dr_dk = mp.diff(lambda b: _by_rk(rh, b, kappa_sq)[3], k)
        A = mp.matrix([[dT_dr, dT_dk], [dm_dr, dm_dk]])
        g = mp.matrix([[dr_dr, dr_dk]]) * A ** -1
        chi2 = g[0, 1]
    return dict(T=float(T), mu=float(sign * mu), s=float(s), rho=float(sign * rho), P=float(P),
                epsilon=float(3 * P), chi2=float(chi2), cs2=1.0 / 3.0, phi_h=horizon_scalar(float(y)),
                branch=branch, y=float(y))


def points(T, mu, kappa_sq=1.0):
    """Every branch at (T, mu)."""
    out = []
    for b in (0, 1):
        p = point(T, mu, b, kappa_sq)
        if p is not None:
            out.append(p)
    return out
