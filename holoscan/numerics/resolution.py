"""When a Chebyshev patch resolves its functions, and the flags a patch can carry.

A patch is *resolved* when, for every function, the largest coefficient among the last two orders
in a direction is at most ``tol`` times the function's scale on the patch (``scale = 1`` for
functions marked absolute, such as logarithms, else the largest node value); the tail of a
converging Chebyshev series estimates its truncation error (common practice, no source). An
unresolved patch is split (:mod:`holoscan.numerics.lazy`) unless its tail is a noise plateau or it
reached its minimum width; it is then kept and flagged *rough*; one with failed samples is a *hole*.
"""
from __future__ import annotations

import numpy as np

RESOLVED, ROUGH, HOLE = 0, 1, 2
FLAG_NAMES = {RESOLVED: "resolved", ROUGH: "rough", HOLE: "hole"}


def _scale(vals: np.ndarray, absolute: np.ndarray) -> np.ndarray:
    """Scale (m,) of each function on a patch: 1 if absolute, else its largest node value."""
    scale = np.where(absolute, 1.0, np.max(np.abs(vals), axis=(1, 2)))
    return np.where(scale > 0, scale, 1.0)


def _tails(c: np.ndarray, vals: np.ndarray, absolute: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Relative tails (m,) along each direction."""
    scale = _scale(vals, absolute)
    t0 = np.max(np.abs(c[:, -2:, :]), axis=(1, 2)) / scale
    t1 = np.max(np.abs(c[:, :, -2:]), axis=(1, 2)) / scale
    return t0, t1


def noise_plateau(c: np.ndarray, vals: np.ndarray, absolute: np.ndarray, ceiling: float = 1e-8) -> bool:
    """True when every unresolved tail is small (below ``ceiling``) and flat: the last two orders are
    no smaller than a third of orders n-6 to n-3. Coefficients then measure the noise of the samples,
    not truncation, and splitting cannot help (common practice, no source)."""
    scale = _scale(vals, absolute)[:, None]
    flat = []
    for axis in (1, 2):
        a = np.abs(np.moveaxis(c, axis, -1))          # (m, n, n) with the direction last
        last = np.max(a[..., -2:], axis=(1, 2)) / scale[:, 0]
        before = np.max(a[..., -6:-2], axis=(1, 2)) / scale[:, 0]
        flat.append(np.all((last < ceiling) & (last > before / 3.0)))
    return bool(all(flat))
