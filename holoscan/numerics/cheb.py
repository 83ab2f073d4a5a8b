"""Chebyshev nodes and interpolants: one-dimensional series on Lobatto nodes, and tensor-product
interpolation on rectangles ("patches"), vectorised over many points.

One dimension. :func:`lobatto` gives the Chebyshev-Lobatto points ``-cos(pi k / (n - 1))`` on
``[-1, 1]`` (both ends included, ascending); :func:`lobatto_fit` the coefficients of the series of
degree ``n - 1`` through values there; :func:`interpolant` the series through values at any ``n``
distinct points of ``[a, b]`` as a :class:`numpy.polynomial.Chebyshev` on that domain; :func:`tail`
the size of a series' last coefficients relative to its largest (its truncation error, once the
series converges). Coefficients are in the basis ``T_k`` of the interval mapped to ``[-1, 1]``.

Patches. A patch covers ``[a0, b0] x [a1, b1]`` in two coordinates and holds, for each of ``m`` functions, the
``n x n`` coefficients of ``sum_ij c_ij T_i(xi) T_j(eta)``, where ``xi, eta`` in ``[-1, 1]`` are the
patch-local coordinates. The interpolation nodes are the Chebyshev points of the first kind (the
roots of ``T_n``), so no node lies on a patch edge (a coordinate axis such as ``u = 0`` is never
sampled). Coefficients follow from node values by the discrete cosine transform.
"""
from __future__ import annotations

import math

import numpy as np
from numpy.polynomial import Chebyshev
from numpy.polynomial import chebyshev as C


def lobatto(n: int) -> np.ndarray:
    """Chebyshev-Lobatto points (extrema of ``T_(n-1)``, ends included) on [-1, 1], ascending; n >= 2."""
    return -np.cos(np.pi * np.arange(n) / (n - 1))


def lobatto_fit(values) -> np.ndarray:
    """Coefficients (n,) of the Chebyshev series of degree n - 1 through ``values`` (n,) at :func:`lobatto` (n)."""
    values = np.asarray(values)
    n = len(values)
    return C.chebfit(lobatto(n), values, n - 1)


def interpolant(x, values, a: float, b: float) -> Chebyshev:
    """The Chebyshev series of degree ``len(x) - 1`` through ``(x, values)``, on the domain [a, b]."""
    return Chebyshev.fit(x, values, deg=len(x) - 1, domain=[a, b])


def tail(coef, k: int = 3) -> float:
    """Largest of the last ``k`` coefficients of a series relative to its largest coefficient (in
    absolute value; the denominator is floored at 1e-300)."""
    c = np.abs(np.asarray(coef))
    return float(max(c[-1:-k - 1:-1]) / max(np.max(c), 1e-300))


def nodes(n: int) -> np.ndarray:
    """First-kind Chebyshev points on [-1, 1], ascending."""
    return -np.cos(np.pi * (np.arange(n) + 0.5) / n)


def _dct_matrix(n: int) -> np.ndarray:
    """M with ``c = M @ values`` for values at :func:`nodes` (ascending order)."""
    k = np.arange(n)
    theta = np.pi * (n - 1 - k + 0.5) / n  # ascending nodes are cos(theta) with theta descending
    M = (2.0 / n) * np.cos(np.outer(np.arange(n), theta))
    M[0] *= 0.5
    return M


def fit(values: np.ndarray) -> np.ndarray:
    """Coefficients (m, n, n) from node values (m, n, n) on the tensor grid of :func:`nodes`."""
    n = values.shape[-1]
    M = _dct_matrix(n)
    return np.einsum("ia,fab,jb->fij", M, values, M, optimize=True)


def basis(z: np.ndarray, n: int) -> np.ndarray:
    """``T_k(z)`` for k < n at points z (clipped to [-1, 1]); shape (len(z), n)."""
    z = np.clip(np.asarray(z, dtype=float), -1.0, 1.0)
    out = np.empty((len(z), n))
    out[:, 0] = 1.0
    if n > 1:
        out[:, 1] = z
    for k in range(2, n):
        out[:, k] = 2.0 * z * out[:, k - 1] - out[:, k - 2]
    return out


class PatchSet:
    """Many patches of the same order ``n`` and ``m`` functions; evaluation with first derivatives.

    Parameters
    ----------
    bounds : (P, 4) array of ``a0, b0, a1, b1`` per patch.
    coeffs : (P, m, n, n) array of coefficients.
    """

    def __init__(self, bounds: np.ndarray, coeffs: np.ndarray):
        self.bounds = np.asarray(bounds, dtype=float).reshape(-1, 4)
        self.coeffs = np.asarray(coeffs, dtype=float)
        P, m, n, _ = self.coeffs.shape if len(self.coeffs) else (0, 0, 1, 1)
        self.n, self.m = n, m
        # derivative coefficients in patch-local coordinates, padded back to n x n
        self.d0 = np.zeros_like(self.coeffs)
        self.d1 = np.zeros_like(self.coeffs)
        if P:
            self.d0[:, :, : n - 1, :] = C.chebder(self.coeffs, axis=2)
            self.d1[:, :, :, : n - 1] = C.chebder(self.coeffs, axis=3)

    def __len__(self) -> int:
        return len(self.bounds)

    def locate(self, x0: np.ndarray, x1: np.ndarray, block: int = 4096) -> np.ndarray:
        """Index of a patch containing each point, -1 where none does (edges belong to both)."""
        x0, x1 = np.atleast_1d(x0), np.atleast_1d(x1)
        out = np.full(len(x0), -1, dtype=np.int64)
        if not len(self):
            return out
        b = self.bounds
        for s in range(0, len(x0), block):
            a, c = x0[s:s + block, None], x1[s:s + block, None]
            inside = (a >= b[:, 0]) & (a <= b[:, 1]) & (c >= b[:, 2]) & (c <= b[:, 3])
            hit = inside.any(axis=1)
            out[s:s + block] = np.where(hit, inside.argmax(axis=1), -1)
        return out

    def local(self, p: np.ndarray, x0, x1):
        b = self.bounds[p]
        h0, h1 = 0.5 * (b[:, 1] - b[:, 0]), 0.5 * (b[:, 3] - b[:, 2])
        return (x0 - b[:, 0]) / h0 - 1.0, (x1 - b[:, 2]) / h1 - 1.0, h0, h1

    def evaluate(self, x0, x1, patch=None, coeffs=None):
        """Values (M, m) and gradients (M, m, 2) at the points; NaN outside every patch.

        ``coeffs`` (same shape as the stored ones) evaluates other coefficients on the same
        patches (for instance truncated ones, to estimate the truncation error)."""
        x0, x1 = np.atleast_1d(np.asarray(x0, float)), np.atleast_1d(np.asarray(x1, float))
        p = self.locate(x0, x1) if patch is None else np.asarray(patch)
        M = len(x0)
        val = np.full((M, self.m), np.nan)
        grad = np.full((M, self.m, 2), np.nan)
        c = self.coeffs if coeffs is None else coeffs
        if coeffs is None:
            d0, d1 = self.d0, self.d1
        else:
            d0, d1 = np.zeros_like(c), np.zeros_like(c)
            d0[:, :, : self.n - 1, :] = C.chebder(c, axis=2)
            d1[:, :, :, : self.n - 1] = C.chebder(c, axis=3)
        for q in np.unique(p[p >= 0]):
            sel = np.flatnonzero(p == q)
            z0, z1, h0, h1 = self.local(np.full(len(sel), q), x0[sel], x1[sel])
            B0, B1 = basis(z0, self.n), basis(z1, self.n)
            val[sel] = np.einsum("ki,fij,kj->kf", B0, c[q], B1, optimize=True)
            grad[sel, :, 0] = np.einsum("ki,fij,kj->kf", B0, d0[q], B1, optimize=True) / h0[:, None]
            grad[sel, :, 1] = np.einsum("ki,fij,kj->kf", B0, d1[q], B1, optimize=True) / h1[:, None]
        return val, grad

    def taylor(self, x0, x1, order: int, patch=None, coeffs=None) -> np.ndarray:
        """Taylor coefficients (M, m, order+1, order+1) of every function at the points:
        ``[i, j]`` is ``d^(i+j) f/dx0^i dx1^j / (i! j!)`` for ``i + j <= order`` (0 above), the
        input of :mod:`holoscan.numerics.jets`; NaN outside every patch. ``coeffs`` as in
        :meth:`evaluate`. Each derivative is the exact derivative of the patch's polynomial."""
        x0, x1 = np.atleast_1d(np.asarray(x0, float)), np.atleast_1d(np.asarray(x1, float))
        p = self.locate(x0, x1) if patch is None else np.asarray(patch)
        M, n = len(x0), self.n
        out = np.full((M, self.m, order + 1, order + 1), np.nan)
        out[p >= 0] = 0.0
        c = self.coeffs if coeffs is None else coeffs
        for q in np.unique(p[p >= 0]):
            sel = np.flatnonzero(p == q)
            z0, z1, h0, h1 = self.local(np.full(len(sel), q), x0[sel], x1[sel])
            B0, B1 = basis(z0, n), basis(z1, n)
            d0 = c[q]
            for i in range(order + 1):
                dij = d0
                for j in range(order + 1 - i):
                    k0, k1 = dij.shape[1], dij.shape[2]
                    v = np.einsum("ki,fij,kj->kf", B0[:, :k0], dij, B1[:, :k1], optimize=True)
                    out[sel, :, i, j] = v / (h0[:, None] ** i * h1[:, None] ** j * math.factorial(i) * math.factorial(j))
                    dij = C.chebder(dij, axis=2) if k1 > 1 else np.zeros((dij.shape[0], k0, 1))
                d0 = C.chebder(d0, axis=1) if d0.shape[1] > 1 else np.zeros((d0.shape[0], 1, d0.shape[2]))
        return out

    def truncated(self, drop: int = 2) -> np.ndarray:
        """The coefficients with the last ``drop`` orders in each direction removed."""
        c = self.coeffs.copy()
        c[:, :, self.n - drop:, :] = 0.0
        c[:, :, :, self.n - drop:] = 0.0
        return c
