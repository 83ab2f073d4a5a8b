"""Pressure of a sourced (non-conformal) brane by integrating the first law ``dP = s dT + rho dmu``.

All quantities in units of the source (``J = 1``). The zero of the pressure is the zero-temperature,
zero-density state: ``P -> 0`` as ``T -> 0`` at ``mu = 0`` (the vacuum pressure is set to 0).

Along ``mu = 0`` (horizon datum ``u = 0``) the branes run from high ``T`` (small horizon scalar
``phi0``) to ``T -> 0`` (large ``phi0``), and ``P(phi0) = P(phi0_end) - \\int_{phi0}^{phi0_end} s dT``.
:class:`ZeroDensityPressure` integrates that path far into the low-temperature region -- as deep as
the shots stay reliable (horizon scalars of 15 and more where the model allows it) -- until the
remaining tail ``P(phi0_end) = s T/(k + 1)`` (the integral of ``s ~ T^k`` from ``T = 0``) is a
negligible fraction of the integral: the tail is *measured* to be small, not assumed to follow a
power law. Its value is kept as part of the error. The pressure at a target follows on along a path
in horizon data from its ``phi0`` on ``mu = 0`` (see :mod:`holoscan.kinds.emd.batch`, and
:mod:`holoscan.kinds.emd.model` for the point-by-point solver).

Error evidence of the reference (absolute, source units), summed over the segments above a point:

- *resolution*: each segment of ``log phi0`` is sampled at 25 Chebyshev-Lobatto nodes; the same
  integral from the nested 13-node subset differs by ``|I25 - I13|`` (an overestimate of the 25-node
  error);
- *hand-over*: the 13-node subset is shot again with the horizon offset 10 times larger; the change
  of the integral (about 99 times the offset error, the series error scales as offset squared);
- *tail*: the remaining ``s T/(k + 1)`` at the deep end, counted in full.
"""
from __future__ import annotations

import math
from itertools import pairwise

import numpy as np
from numpy.polynomial import chebyshev as C

from ...numerics.cheb import lobatto, lobatto_fit


def path_integral(T, mu, s, rho, n: int) -> float:
    """Integral of ``s dT + rho dmu`` along a path sampled at ``n`` Lobatto nodes (end - start)."""
    cT, cmu = lobatto_fit(T), lobatto_fit(mu)
    dT, dmu = C.chebval(lobatto(n), C.chebder(cT)), C.chebval(lobatto(n), C.chebder(cmu))
    g = lobatto_fit(np.asarray(s) * dT + np.asarray(rho) * dmu)
    G = C.chebint(g)
    return float(C.chebval(1.0, G) - C.chebval(-1.0, G))


#: nodes per segment of log phi0 (odd, so the every-other-node subset is nested) and segment width
SEGMENT_NODES = 25
SEGMENT_WIDTH = 0.5
#: the deep end is reached when the tail is below this fraction of the integral above phi0_hi
TAIL_FRACTION = 1e-9
#: shots whose T or s move by more than this under the offset variation are not trusted for the tail
DEEP_TRUST = 1e-6


class _Segment:
    """``\\int s dT`` over one interval of ``log phi0``: antiderivatives on the 25- and 13-node sets."""

    def __init__(self, lo: float, hi: float, Ts: np.ndarray, Ts_var: np.ndarray):
        self.lo, self.hi = lo, hi
        n, m = SEGMENT_NODES, (SEGMENT_NODES + 1) // 2
        self.G = self._antiderivative(Ts, n)
        G9 = self._antiderivative(Ts[::2], m)
        G9v = self._antiderivative(Ts_var, m)
        self.integral = float(C.chebval(1.0, self.G))
        self.resolution = abs(self.integral - float(C.chebval(1.0, G9)))
        self.handover = abs(float(C.chebval(1.0, G9v)) - float(C.chebval(1.0, G9)))
        lT, ls = np.log(Ts[:, 0]), np.log(Ts[:, 1])
        cT, cs = lobatto_fit(lT), lobatto_fit(ls)
        dT_end = float(C.chebval(1.0, C.chebder(cT)))
        ds_end = float(C.chebval(1.0, C.chebder(cs)))
        self.T_end, self.s_end = float(Ts[-1, 0]), float(Ts[-1, 1])
        #: local exponent k = d log s / d log T at the segment's deep end (nan if T does not fall there)
        self.k_end = ds_end / dT_end if dT_end < 0 else math.nan
        self.trust = float(np.max(np.abs(Ts_var / Ts[::2] - 1.0)))

    @staticmethod
    def _antiderivative(Ts, n):
        """Chebyshev antiderivative (zero at z = -1) of s dT/dz, from log T and log s fits."""
        lT, ls = np.log(Ts[:, 0]), np.log(Ts[:, 1])
        cT = lobatto_fit(lT)
        dlT = C.chebval(lobatto(n), C.chebder(cT))
        g = lobatto_fit(np.exp(ls + lT) * dlT)
        return C.chebint(g, lbnd=-1.0)

    def partial(self, tau: float) -> float:
        """Integral from ``tau`` (inside the segment) to the segment's upper end."""
        z = 2.0 * (tau - self.lo) / (self.hi - self.lo) - 1.0
        return self.integral - float(C.chebval(z, self.G))


class ZeroDensityPressure:
    """``P(phi0)`` along ``mu = 0`` (source units), integrated from the deep low-temperature end.

    ``samples(phi0_array, offset_factor)`` returns an array (n, 2) of ``(T, s)`` in source units at
    ``u = 0``, shot with the horizon offset times ``offset_factor`` (NaN where a shot failed).
    ``phi0_lo``, ``phi0_hi``: the range where the pressure is asked for; the integration goes on
    beyond ``phi0_hi``, up to ``phi0_deep_max``, until the tail is negligible (module docstring).
    """

    def __init__(self, samples, phi0_lo: float, phi0_hi: float, phi0_deep_max: float = 40.0):
        self.lo, self.hi = math.log(phi0_lo), math.log(phi0_hi)
        nseg = max(1, math.ceil((self.hi - self.lo) / SEGMENT_WIDTH))
        edges = np.linspace(self.lo, self.hi, nseg + 1)
        self.segments = self._shoot(samples, edges)
        if self.segments is None:
            raise ArithmeticError("a zero-density shot failed while building the pressure reference")
        above = 0.0
        self.tail_measured = False
        self.stop_reason = ""
        top = self.hi
        limit = math.log(phi0_deep_max)
        while True:
            last = self.segments[-1]
            if not (math.isfinite(last.k_end) and last.k_end > -1.0):
                self.stop_reason = f"T does not fall towards 0 at phi0 = {math.exp(last.hi):.4g}"
                break
            tail = last.s_end * last.T_end / (last.k_end + 1.0)
            if top > self.hi and tail <= TAIL_FRACTION * abs(above):
                self.tail_measured = True
                break
            if top + SEGMENT_WIDTH > limit + 1e-12:
                self.stop_reason = f"the deep end phi0 = {phi0_deep_max:g} was reached"
                break
            nxt = self._shoot(samples, np.array([top, top + SEGMENT_WIDTH]))
            if nxt is None or nxt[0].trust > DEEP_TRUST:
                self.stop_reason = f"shots beyond phi0 = {math.exp(top):.4g} are not reliable"
                break
            self.segments.append(nxt[0])
            above -= nxt[0].integral
            top += SEGMENT_WIDTH
        last = self.segments[-1]
        if not (math.isfinite(last.k_end) and last.k_end > -1.0):
            raise ArithmeticError("T does not fall towards 0 along mu = 0 at large phi0: no pressure reference")
        #: local exponent of s ~ T^k at the deep end, and the tail it gives there (source units)
        self.k_ref = float(last.k_end)
        self.tail = last.s_end * last.T_end / (last.k_end + 1.0)
        self.phi0_deep = math.exp(last.hi)
        # P at each segment's upper end, from the top down
        self._P_top = np.zeros(len(self.segments))
        self._err_top = np.zeros(len(self.segments))
        P, err = self.tail, self.tail
        for i in range(len(self.segments) - 1, -1, -1):
            self._P_top[i], self._err_top[i] = P, err
            seg = self.segments[i]
            P -= seg.integral
            err += seg.resolution + seg.handover

    @staticmethod
    def _shoot(samples, edges):
        n = SEGMENT_NODES
        z = lobatto(n)
        taus = np.concatenate([0.5 * (b - a) * (z + 1.0) + a for a, b in pairwise(edges)])
        sub = np.concatenate([0.5 * (b - a) * (z[::2] + 1.0) + a for a, b in pairwise(edges)])
        Ts = np.asarray(samples(np.exp(taus), 1.0), dtype=float)
        Tv = np.asarray(samples(np.exp(sub), 10.0), dtype=float)
        if not (np.all(np.isfinite(Ts)) and np.all(Ts > 0) and np.all(np.isfinite(Tv)) and np.all(Tv > 0)):
            return None
        m = (n + 1) // 2
        return [_Segment(a, b, Ts[k * n:(k + 1) * n], Tv[k * m:(k + 1) * m])
                for k, (a, b) in enumerate(pairwise(edges))]

    def _locate(self, phi0: float) -> tuple[int, float]:
        tau = math.log(phi0)
        if not self.lo - 1e-12 <= tau <= self.hi + 1e-12:
            raise ArithmeticError(f"phi0 = {phi0:.6g} outside the pressure reference range")
        tau = min(max(tau, self.lo), self.hi)
        i = min(int(np.searchsorted([s.hi for s in self.segments], tau)), len(self.segments) - 1)
        return i, tau

    def __call__(self, phi0: float) -> float:
        """P at (phi0, u = 0), in source units."""
        i, tau = self._locate(phi0)
        return float(self._P_top[i] - self.segments[i].partial(tau))

    def error(self, phi0: float) -> float:
        """Absolute error estimate of :meth:`__call__` (module docstring)."""
        i, _ = self._locate(phi0)
        seg = self.segments[i]
        return float(self._err_top[i] + seg.resolution + seg.handover)
