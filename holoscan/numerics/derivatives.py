"""Symmetric finite differences up to fourth order with Richardson elimination, derivatives of one
function of a curve's parameter with respect to another, derivatives along the level set of a
function of two variables, and first-order error propagation.

No knowledge of branes or kinds. Conventions: ``values`` maps a signed integer multiple ``k`` of a
base step ``h`` to the function's value at ``k h`` (``0`` the centre); values may be floats or
numpy arrays (several functions sampled at the same points). A derivative of order ``n`` comes
from the symmetric differences at the step multiples ``steps`` (``a`` in ``steps``)::

    odd  n:  O(a) = (f(a h) - f(-a h)) / 2      = sum_j f^(2j+1) (a h)^(2j+1) / (2j+1)!
    even n:  E(a) = (f(a h) + f(-a h)) / 2 - f(0) = sum_j f^(2j)   (a h)^(2j)   / (2j)!,  j >= 1

and the ``len(steps)`` leading terms are solved for exactly (a Vandermonde system), so the result
carries a truncation error of order ``h^(2 len(steps))`` beyond the lowest one: two steps are one
Richardson extrapolation, three steps two (common practice, no source). With ``centre=False`` an
even derivative is taken from ``(f(a h) + f(-a h))/2`` alone, ``f(0)`` being one of the unknowns.
Noise (an error ``e`` of each value) enters as about ``e / (a_min h)^n`` times a modest factor.
"""
from __future__ import annotations

import functools
import math
from collections.abc import Callable, Mapping, Sequence

import numpy as np


def weights(steps: Sequence[float], order: int, centre: bool = True) -> np.ndarray:
    """Weights ``w`` with ``sum_k w_k D(steps[k]) = h^order f^(order)(0) + O(h^(order + 2 len(steps)))``,
    ``D`` the odd or even symmetric differences of the module docstring (``centre=False``: the even
    sums ``(f(a h) + f(-a h))/2``). A read-only array, computed once per arguments."""
    return _weights(tuple(float(a) for a in steps), int(order), bool(centre))


@functools.lru_cache(maxsize=256)
def _weights(steps: tuple, order: int, centre: bool) -> np.ndarray:
    if order < 0 or len(set(steps)) != len(steps) or not all(a > 0 for a in steps):
        raise ValueError(f"need order >= 0 and distinct positive steps, not {order}, {list(steps)}")
    first = 1 if order % 2 else (2 if centre else 0)
    orders = [first + 2 * j for j in range(len(steps))]
    if order not in orders:
        raise ValueError(f"order {order} is not among the orders {orders} that steps {list(steps)} resolve")
    M = np.array([[a**o / math.factorial(o) for o in orders] for a in steps])
    w = np.linalg.inv(M)[orders.index(order)]
    w.setflags(write=False)
    return w


def symmetric(values: Mapping[int, object], steps: Sequence[int], order: int, h: float, centre: bool = True):
    """Derivative of order ``order`` at 0 from ``values`` (module docstring) at the step multiples
    ``steps`` and their negatives (and 0 for an even order, unless ``centre=False``)."""
    w = weights(steps, order, centre)
    if order % 2:
        diffs = [0.5 * (np.asarray(values[a]) - np.asarray(values[-a])) for a in steps]
    elif centre:
        diffs = [0.5 * (np.asarray(values[a]) + np.asarray(values[-a])) - np.asarray(values[0]) for a in steps]
    else:
        diffs = [0.5 * (np.asarray(values[a]) + np.asarray(values[-a])) for a in steps]
    return sum(wk * dk for wk, dk in zip(w, diffs, strict=True)) / h**order


def curve_derivatives(dx: Sequence[float], dy: Sequence[float]) -> tuple[list[float], list[float]]:
    """``d^n y/dx^n`` (n = 1 .. len(dx), at most 4) along a curve ``(x(u), y(u))`` from the
    ``u``-derivatives ``dx = [x', x'', ...]``, ``dy = [y', y'', ...]`` (the inverse chain rule)::

        Y1 = y1/x1,  Y2 = (y2 - Y1 x2)/x1^2,  Y3 = (y3 - 3 Y2 x1 x2 - Y1 x3)/x1^3,
        Y4 = (y4 - 6 Y3 x1^2 x2 - Y2 (3 x2^2 + 4 x1 x3) - Y1 x4)/x1^4

    (from ``y = Y(x(u))`` by Faa di Bruno's formula; common practice, no source). Returns
    ``(Y, scale)``: ``scale[n]`` is the sum of the magnitudes of the terms of ``Y[n]``, the size on
    which its rounding error is made."""
    n = len(dx)
    if not 1 <= n <= 4 or len(dy) != n:
        raise ValueError("need 1 to 4 derivatives of x and of y")
    x = [float(v) for v in dx] + [0.0] * (4 - n)
    y = [float(v) for v in dy] + [0.0] * (4 - n)
    x1 = x[0]
    Y, S = [], []
    terms = [lambda: [y[0]],
             lambda: [y[1], -Y[0] * x[1]],
             lambda: [y[2], -3.0 * Y[1] * x1 * x[1], -Y[0] * x[2]],
             lambda: [y[3], -6.0 * Y[2] * x1 * x1 * x[1], -Y[1] * (3.0 * x[1] ** 2 + 4.0 * x1 * x[2]), -Y[0] * x[3]]]
    for k in range(n):
        t = terms[k]()
        p = x1 ** (k + 1)
        Y.append(sum(t) / p)
        S.append(sum(abs(v) for v in t) / abs(p))
    return Y, S


def direction_matrix(directions: Sequence[Sequence[float]], order: int) -> np.ndarray:
    """``A`` with ``(A @ T)[j]`` the ``order``-th derivative along ``directions[j] = (c, s)`` (not
    normalised: the derivative with respect to ``t`` of ``g(sigma0 + c t, tau0 + s t)``) of a function
    whose partial derivatives of that order are ``T[k] = d^order g / dsigma^(order-k) dtau^k``; with
    ``order + 1`` or more distinct directions, ``pinv(A)`` takes directional derivatives (one-dimensional
    stencils along each direction, :func:`symmetric`) to the partials by least squares."""
    return np.array([[math.comb(order, k) * c ** (order - k) * s**k for k in range(order + 1)]
                     for c, s in directions], float)


def contract(T: Sequence[float], vectors: Sequence[Sequence[float]]) -> float:
    """The symmetric multilinear form of the partials ``T`` (order ``len(vectors)``) on ``vectors``:
    ``sum over i_1..i_n in {sigma, tau} of T[number of tau] * prod_m vectors[m][i_m]``."""
    total = 0.0
    for idx in np.ndindex(*(2,) * len(vectors)):
        term = T[sum(idx)]
        for v, i in zip(vectors, idx, strict=True):
            term = term * v[i]
        total += term
    return float(total)


def along_level_set(c: Mapping[int, Sequence[float]], gs: Sequence[Mapping[int, Sequence[float]]],
                    order: int) -> list[list[float]]:
    """Derivatives ``d^n g/da^n`` (n = 1 .. order, at most 4) of each function ``g`` of ``gs`` along
    the curve ``c(sigma, tau) = 0`` through the point, ``a`` the coordinate along the unit tangent
    ``t = (c_tau, -c_sigma)/|grad c|``. ``c[n]``, ``g[n]`` hold the partials of order ``n``
    (as in :func:`direction_matrix`). With ``b`` the coordinate along ``n = grad c/|grad c|`` the
    curve is ``b = beta(a)``, ``beta'(0) = 0``, and (implicit differentiation of ``c = 0``; common
    practice, no source)::

        beta2 = -c_aa/c_b,  beta3 = -(c_aaa + 3 c_ab beta2)/c_b,
        beta4 = -(c_aaaa + 6 c_aab beta2 + 4 c_ab beta3 + 3 c_bb beta2^2)/c_b,
        g1 = g_a,  g2 = g_aa + g_b beta2,  g3 = g_aaa + 3 g_ab beta2 + g_b beta3,
        g4 = g_aaaa + 6 g_aab beta2 + 4 g_ab beta3 + 3 g_bb beta2^2 + g_b beta4."""
    if not 1 <= order <= 4:
        raise ValueError("order must be 1 to 4")
    grad = np.asarray(c[1], float)
    nrm = float(np.hypot(grad[0], grad[1]))
    t, n = (grad[1] / nrm, -grad[0] / nrm), (grad[0] / nrm, grad[1] / nrm)

    def parts(T):
        p = {"b": contract(T[1], [n]), "a": contract(T[1], [t])}
        if order >= 2:
            p.update(aa=contract(T[2], [t, t]), ab=contract(T[2], [t, n]), bb=contract(T[2], [n, n]))
        if order >= 3:
            p.update(aaa=contract(T[3], [t, t, t]), aab=contract(T[3], [t, t, n]))
        if order >= 4:
            p["aaaa"] = contract(T[4], [t, t, t, t])
        return p

    cp = parts(c)
    b2 = -cp["aa"] / cp["b"] if order >= 2 else 0.0
    b3 = -(cp["aaa"] + 3.0 * cp["ab"] * b2) / cp["b"] if order >= 3 else 0.0
    b4 = (-(cp["aaaa"] + 6.0 * cp["aab"] * b2 + 4.0 * cp["ab"] * b3 + 3.0 * cp["bb"] * b2**2) / cp["b"]
          if order >= 4 else 0.0)
    out = []
    for g in gs:
        p = parts(g)
        d = [p["a"]]
        if order >= 2:
            d.append(p["aa"] + p["b"] * b2)
        if order >= 3:
            d.append(p["aaa"] + 3.0 * p["ab"] * b2 + p["b"] * b3)
        if order >= 4:
            d.append(p["aaaa"] + 6.0 * p["aab"] * b2 + 4.0 * p["ab"] * b3 + 3.0 * p["bb"] * b2**2 + p["b"] * b4)
        out.append(d)
    return out


def propagate(fn: Callable[[np.ndarray], np.ndarray], args: np.ndarray, errors: np.ndarray) -> np.ndarray:
    """First-order propagation without assuming independence's cancellations: each argument of ``fn``
    shifted by its error in turn, the magnitudes of the changes of ``fn`` added (common practice,
    no source). ``args``, ``errors`` are 1-D arrays of the same length; ``fn`` returns an array."""
    args = np.asarray(args, float)
    base = np.asarray(fn(args), float)
    out = np.zeros_like(base)
    for k, e in enumerate(np.asarray(errors, float)):
        if e == 0.0:
            continue
        shifted = args.copy()
        shifted[k] += e
        out += np.abs(np.asarray(fn(shifted), float) - base)
    return out
