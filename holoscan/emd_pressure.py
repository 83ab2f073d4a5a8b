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
    """``P(phi0)`` along ``mu = 0``, anchored at large ``phi0`` (low T).

    ``samples(phi0_array)`` must return an array (n, 2) of ``(T, s)`` in source units at ``u = 0``.
    Along ``mu = 0`` the first law in the scale-free form ``p = P/T^4``, ``sigma = s/T^3``,
    ``L = log T`` reads ``dp/dL = sigma - 4 p``; it is integrated from the low-T reference towards
    high T, where it is stable (``p`` relaxes towards ``sigma/4``), on Chebyshev interpolants of
    ``L`` and ``sigma`` in ``log phi0`` (``n`` Lobatto nodes).
    """

    def __init__(self, samples, phi0_lo: float, phi0_hi: float, n: int = 64):
        from scipy.integrate import solve_ivp

        self.lo, self.hi, self.n = math.log(phi0_lo), math.log(phi0_hi), n
        tau = self._tau(lobatto(n))
        Ts = samples(np.exp(tau))
        if not np.all(np.isfinite(Ts)) or np.any(Ts <= 0):
            raise ArithmeticError("a zero-density shot failed while building the pressure reference")
        L, sigma = np.log(Ts[:, 0]), Ts[:, 1] / Ts[:, 0] ** 3
        self._cL, self._cs = _fit(L, n), _fit(sigma, n)
        cdL = C.chebder(self._cL)
        if not C.chebval(1.0, cdL) < 0:
            raise ArithmeticError("T does not fall towards 0 along mu = 0 at large phi0: no pressure reference")
        # reference: s ~ T^k at the low-T end, so P = s T / (k + 1), p = sigma / (k + 1)
        dlog_sigma = C.chebval(1.0, C.chebder(_fit(np.log(sigma), n)))
        k = 3.0 + dlog_sigma / C.chebval(1.0, cdL)
        self.k_ref = float(k)
        p_ref = sigma[-1] / (k + 1.0)

        def rhs(z, p):
            return (C.chebval(z, self._cs) - 4.0 * p) * C.chebval(z, cdL)

        sol = solve_ivp(rhs, (1.0, -1.0), [p_ref], method="DOP853", rtol=1e-12, atol=1e-14, dense_output=True)
        if sol.status != 0:
            raise ArithmeticError("the zero-density pressure integration failed")
        self._p = sol.sol
        self.tail = float(np.max(np.abs(self._cs[-4:])) / max(np.max(np.abs(self._cs)), 1e-300))

    def _tau(self, z):
        return 0.5 * (self.hi - self.lo) * (z + 1.0) + self.lo

    def _z(self, phi0):
        return 2.0 * (math.log(phi0) - self.lo) / (self.hi - self.lo) - 1.0

    def __call__(self, phi0: float) -> float:
        """P at (phi0, u = 0), in source units."""
        z = self._z(phi0)
        if not -1.0 - 1e-12 <= z <= 1.0 + 1e-12:
            raise ArithmeticError(f"phi0 = {phi0:.6g} outside the pressure reference range")
        z = min(max(z, -1.0), 1.0)
        return float(self._p(z)[0] * math.exp(4.0 * C.chebval(z, self._cL)))
