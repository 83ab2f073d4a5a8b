"""Many initial-value problems integrated at once: an 8th-order Dormand-Prince method (DOP853, the
coefficients in :mod:`.dop853_coefficients`) stepping a batch of columns, each with its own step size.

For an autonomous system ``dy/dx = fun(y)`` with ``y`` of shape ``(n, B)``, every column runs from
its own ``x0`` to its own ``x1`` under the same error control as :func:`scipy.integrate.solve_ivp`
(mixed absolute/relative tolerance, root-mean-square norm over components, the 5th/3rd-order error
estimate of DOP853). One call costs about as many Python operations as one integration, whatever
the batch size, which is what makes coarse scans, finite differences and integration paths cheap.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from . import dop853_coefficients as _c

_A = _c.A[: _c.N_STAGES, : _c.N_STAGES]
_B = _c.B
_E3 = _c.E3
_E5 = _c.E5
_S = _c.N_STAGES  # 12


@dataclass
class BatchResult:
    y: np.ndarray  # (n, B) final states
    ok: np.ndarray  # (B,) reached x1 with finite values
    nfev: np.ndarray  # (B,) right-hand-side evaluations per column
    nsteps: np.ndarray  # (B,) accepted steps per column
    residual: np.ndarray  # (B,) max of ``monitor`` over accepted steps (0 if none given)


def dop853_batch(fun, x0, y0, x1, rtol: float, atol: float = 1e-300, *, monitor=None,
                 max_steps: int = 20000) -> BatchResult:
    """Integrate ``dy/dx = fun(y)`` column-wise from ``x0`` to ``x1`` (arrays of shape (B,), x1 > x0)."""
    y = np.array(y0, dtype=float)
    n, nb = y.shape
    x = np.array(x0, dtype=float).reshape(nb).copy()
    x1 = np.broadcast_to(np.asarray(x1, dtype=float), (nb,)).copy()
    with np.errstate(all="ignore"):
        f = fun(y)
    nfev = np.ones(nb, dtype=np.int64)
    nsteps = np.zeros(nb, dtype=np.int64)
    ok = np.all(np.isfinite(f), axis=0) & (x1 > x)
    active = ok.copy()
    res = np.zeros(nb)
    # initial step (Hairer's heuristic, simplified): 1% of |y|/|f| in the scaled norm
    scale = atol + rtol * np.abs(y)
    d0 = np.sqrt(np.mean((y / scale) ** 2, axis=0))
    d1 = np.sqrt(np.mean((f / scale) ** 2, axis=0))
    h = np.where((d0 > 1e-5) & (d1 > 1e-5), 0.01 * d0 / np.maximum(d1, 1e-300), 1e-6)
    h = np.minimum(h, x1 - x)
    it = 0
    while np.any(active) and it < max_steps:
        it += 1
        idx = np.flatnonzero(active)
        m = len(idx)
        yi, fi, hi = y[:, idx], f[:, idx], np.minimum(h[idx], x1[idx] - x[idx])
        # stages as rows of one contiguous (stages, n*m) array: each combination of stages is one
        # matrix-vector product with no copy (a strided view would be copied at every stage)
        Ki = np.empty((_S + 1, n * m))
        Ki[0] = fi.ravel()
        with np.errstate(all="ignore"):
            for s in range(1, _S):
                dy = (_A[s, :s] @ Ki[:s]).reshape(n, m) * hi
                Ki[s] = np.asarray(fun(yi + dy)).ravel()
            y_new = yi + hi * (_B @ Ki[:_S]).reshape(n, m)
            f_new = np.asarray(fun(y_new))
            Ki[_S] = f_new.ravel()
            sc = atol + rtol * np.maximum(np.abs(yi), np.abs(y_new))
            e5 = (_E5 @ Ki).reshape(n, m) / sc
            e3 = (_E3 @ Ki).reshape(n, m) / sc
            n5, n3 = np.sum(e5**2, axis=0), np.sum(e3**2, axis=0)
            den = n5 + 0.01 * n3
            err = np.where(den > 0, np.abs(hi) * n5 / np.sqrt(np.where(den > 0, den, 1.0) * n), 0.0)
        nfev[idx] += _S
        finite = np.all(np.isfinite(y_new), axis=0) & np.isfinite(err)
        acc = finite & (err <= 1.0)
        with np.errstate(divide="ignore"):
            fac = np.where(err == 0, 10.0, np.clip(0.9 * err ** (-1.0 / 8.0), 0.2, 10.0))
        fac = np.where(acc, fac, np.minimum(fac, 1.0))
        fac = np.where(finite, fac, 0.2)
        a = idx[acc]
        y[:, a], f[:, a] = y_new[:, acc], f_new[:, acc]
        x[a] = x[a] + hi[acc]
        nsteps[a] += 1
        if monitor is not None and len(a):
            with np.errstate(all="ignore"):
                res[a] = np.maximum(res[a], monitor(y[:, a]))
        h[idx] = hi * fac
        done = a[x[a] >= x1[a] * (1 - 1e-15) - 1e-300]
        active[done] = False
        tiny = idx[h[idx] < 1e-14 * np.maximum(np.abs(x[idx]), 1.0)]
        active[tiny] = False
        ok[tiny] = False
    ok &= ~active
    ok &= np.all(np.isfinite(y), axis=0)
    return BatchResult(y, ok, nfev, nsteps, res)
