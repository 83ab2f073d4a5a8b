"""Truncated Taylor polynomials ("jets") in two variables, and derivatives along an implicit curve.

A bivariate jet of order ``N`` at a point is an array ``(M, N+1, N+1)`` (``M`` points at once) of
Taylor coefficients ``c[:, i, j]`` of ``a^i b^j`` (``a``, ``b`` the displacements of the two
coordinates), ``c[i, j] = d^(i+j) f / da^i db^j / (i! j!)``, zero for ``i + j > N``. A univariate
jet is ``(M, N+1)``. Products, the exponential and the composition with a curve are truncated at
order ``N``: the arithmetic is exact for polynomials of that degree, so derivatives up to order
``N`` come out with no truncation of their own (only round-off).

:func:`curve_derivatives` is the use: given jets of two constraint functions ``F1``, ``F2`` and of an
observable ``G`` at a point where the Jacobian of ``(F1, F2)`` is regular, it returns the
derivatives ``d^n G / dt^n`` (``n = 1..N``) along the curve ``F1 = const``, ``F2 = F2(point) + t``:
for instance ``chi_(n+1) = d^n rho / d mu^n`` at fixed ``T`` from jets of ``T``, ``mu`` and ``rho``
in any coordinates of the horizon data. The curve's Taylor coefficients are found order by order:
at order ``k`` the constraints are linear in the new coefficient, with the Jacobian as matrix.
"""
from __future__ import annotations

import math

import numpy as np


def _pairs(N: int):
    return [(i, j) for i in range(N + 1) for j in range(N + 1 - i)]


def constant(value, N: int) -> np.ndarray:
    """The jet of a constant (an array of M values)."""
    v = np.atleast_1d(np.asarray(value, float))
    out = np.zeros((len(v), N + 1, N + 1))
    out[:, 0, 0] = v
    return out


def variable(value, axis: int, N: int) -> np.ndarray:
    """The jet of the coordinate ``axis`` (0 or 1) at the values ``value``."""
    out = constant(value, N)
    out[:, 1 - axis, axis] = 1.0
    return out


def mul(p: np.ndarray, q: np.ndarray) -> np.ndarray:
    """Truncated product of two bivariate jets."""
    N = p.shape[-1] - 1
    out = np.zeros(np.broadcast_shapes(p.shape, q.shape))
    for i, j in _pairs(N):
        acc = 0.0
        for k in range(i + 1):
            for m in range(j + 1):
                acc = acc + p[:, k, m] * q[:, i - k, j - m]
        out[:, i, j] = acc
    return out


def exp(p: np.ndarray) -> np.ndarray:
    """Truncated exponential of a bivariate jet: ``e^(p0) (1 + q + q^2/2 + ...)``, ``q = p - p0``."""
    N = p.shape[-1] - 1
    q = p.copy()
    q[:, 0, 0] = 0.0
    term = constant(np.ones(len(p)), N)
    total = term.copy()
    for k in range(1, N + 1):          # q is nilpotent: q^(N+1) = 0 at order N
        term = mul(term, q) / k
        total = total + term
    return total * np.exp(p[:, 0, 0])[:, None, None]


def _umul(p: np.ndarray, q: np.ndarray) -> np.ndarray:
    """Truncated product of two univariate jets."""
    N = p.shape[-1] - 1
    out = np.zeros(np.broadcast_shapes(p.shape, q.shape))
    for n in range(N + 1):
        for k in range(n + 1):
            out[:, n] += p[:, k] * q[:, n - k]
    return out


def compose(f: np.ndarray, a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """The univariate jet of ``f(a(t), b(t))``; ``a``, ``b`` are univariate jets with zero constant
    term (displacements from the point where ``f``'s jet is taken)."""
    N = f.shape[-1] - 1
    M = len(f)
    one = np.zeros((M, N + 1))
    one[:, 0] = 1.0
    pa, pb = [one], [one]
    for _ in range(N):
        pa.append(_umul(pa[-1], a))
        pb.append(_umul(pb[-1], b))
    out = np.zeros((M, N + 1))
    for i, j in _pairs(N):
        out += f[:, i, j][:, None] * _umul(pa[i], pb[j])
    return out


def curve_derivatives(F1: np.ndarray, F2: np.ndarray, G: np.ndarray) -> np.ndarray:
    """``d^n G/dt^n`` for ``n = 1..N`` (array (M, N)) along ``F1 = const``, ``F2 = F2_0 + t``.

    NaN where the Jacobian ``d(F1, F2)/d(a, b)`` is singular (the curve is not a graph over t)."""
    N = F1.shape[-1] - 1
    M = len(F1)
    J = np.array([[F1[:, 1, 0], F1[:, 0, 1]], [F2[:, 1, 0], F2[:, 0, 1]]]).transpose(2, 0, 1)
    det = J[:, 0, 0] * J[:, 1, 1] - J[:, 0, 1] * J[:, 1, 0]
    a, b = np.zeros((M, N + 1)), np.zeros((M, N + 1))
    with np.errstate(all="ignore"):
        for k in range(1, N + 1):
            r1 = compose(F1, a, b)[:, k]
            r2 = compose(F2, a, b)[:, k]
            t1, t2 = -r1, (1.0 if k == 1 else 0.0) - r2
            a[:, k] = (J[:, 1, 1] * t1 - J[:, 0, 1] * t2) / det
            b[:, k] = (-J[:, 1, 0] * t1 + J[:, 0, 0] * t2) / det
        g = compose(G, a, b)
    return np.column_stack([math.factorial(n) * g[:, n] for n in range(1, N + 1)])


__all__ = ["compose", "constant", "curve_derivatives", "exp", "mul", "variable"]
