"""Pressure of a sourced (non-conformal) brane by integrating the first law ``dP = s dT + rho dmu``.

All quantities in units of the source (``J = 1``). Two independent routes per point:

1. Along ``mu = 0`` (horizon datum ``u = 0``) from the reference at large ``phi0``, where the model
   must reach ``T -> 0``: there ``P_ref = s T / (k + 1)`` with ``k = d log s / d log T`` (the low-T
   power law ``s ~ T^k``, whose integral from ``T = 0`` is exactly that); then at fixed ``phi0`` from
   ``u = 0`` to the target's ``u``.
2. Along ``mu = 0`` to a different point ``phi0 * e^{shift}``, then on a straight line in
   ``(log phi0, u)`` to the target.

Each path is sampled at Chebyshev-Lobatto nodes; ``T``, ``mu``, ``s``, ``rho`` are interpolated by
Chebyshev series, differentiated and integrated spectrally. The relative difference of the two
routes is the ``P_mismatch`` of the point: both must agree if the solutions obey the first law.
"""
from __future__ import annotations

import math

import numpy as np
from numpy.polynomial import chebyshev as C


def lobatto(n: int) -> np.ndarray:
    """Chebyshev-Lobatto nodes on [-1, 1] (ascending)."""
    return -np.cos(np.pi * np.arange(n) / (n - 1))


def _fit(values: np.ndarray, n: int) -> np.ndarray:
    return C.chebfit(lobatto(n), values, n - 1)


def path_integral(T, mu, s, rho, n: int) -> float:
    """Integral of ``s dT + rho dmu`` along a path sampled at ``n`` Lobatto nodes (end - start)."""
    cT, cmu = _fit(np.asarray(T), n), _fit(np.asarray(mu), n)
    dT, dmu = C.chebval(lobatto(n), C.chebder(cT)), C.chebval(lobatto(n), C.chebder(cmu))
    g = _fit(np.asarray(s) * dT + np.asarray(rho) * dmu, n)
    G = C.chebint(g)
    return float(C.chebval(1.0, G) - C.chebval(-1.0, G))


class ZeroDensityPressure:
    """``P(phi0)`` along ``mu = 0`` as a Chebyshev series in ``log phi0``, anchored at large ``phi0``.

    ``samples(phi0_array)`` must return an array (n, 2) of ``(T, s)`` in source units at ``u = 0``.
    """

    def __init__(self, samples, phi0_lo: float, phi0_hi: float, n: int = 64):
        self.lo, self.hi, self.n = math.log(phi0_lo), math.log(phi0_hi), n
        tau = self._tau(lobatto(n))
        Ts = samples(np.exp(tau))
        if not np.all(np.isfinite(Ts)) or np.any(Ts <= 0):
            raise ArithmeticError("a zero-density shot failed while building the pressure reference")
        lT, ls = np.log(Ts[:, 0]), np.log(Ts[:, 1])
        clT, cls_ = _fit(lT, n), _fit(ls, n)
        dlT = C.chebval(lobatto(n), C.chebder(clT))  # d log T / dz, z in [-1, 1]
        slope = dlT[-1]
        if not slope < 0:
            raise ArithmeticError("T does not fall towards 0 along mu = 0 at large phi0: no pressure reference")
        k = C.chebval(1.0, C.chebder(cls_)) / slope
        T_b, s_b = Ts[-1]
        self.P_ref = s_b * T_b / (k + 1.0)
        self.k_ref = k
        g = _fit(Ts[:, 1] * Ts[:, 0] * dlT, n)  # s dT/dz
        self._G = C.chebint(g)
        self._G_end = C.chebval(1.0, self._G)
        self.tail = float(np.max(np.abs(g[-4:])) / max(np.max(np.abs(g)), 1e-300))  # spectral convergence

    def _tau(self, z):
        return 0.5 * (self.hi - self.lo) * (z + 1.0) + self.lo

    def _z(self, phi0):
        return 2.0 * (math.log(phi0) - self.lo) / (self.hi - self.lo) - 1.0

    def __call__(self, phi0: float) -> float:
        z = self._z(phi0)
        if not -1.0 - 1e-12 <= z <= 1.0 + 1e-12:
            raise ArithmeticError(f"phi0 = {phi0:.6g} outside the pressure reference range")
        return float(self.P_ref + C.chebval(z, self._G) - self._G_end)
