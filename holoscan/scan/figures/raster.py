"""Fill the (mu, T) plane from scattered grid points: each pixel takes its nearest grid point.

Distances are measured on axes scaled to [0, 1] (T on a log scale when the figure's T axis is
logarithmic), so on a product grid every point owns exactly its own cell, bounded halfway to its
neighbours. The filled region is the convex hull of the grid widened by half a grid step on each
axis; pixels outside it are masked. Nothing is interpolated: the map shows the grid's resolution.
"""
from __future__ import annotations

import math

import numpy as np
from scipy.spatial import ConvexHull, QhullError, cKDTree


def _axis(v, log: bool, positive: bool = False):
    """Values on the scaled axis and the axis' ends: half a grid step beyond the outermost values
    (at most a factor 3 on a log axis; never below half the smallest value of a positive quantity)."""
    v = np.log(v) if log else np.asarray(v, float)
    lo, hi = float(np.min(v)), float(np.max(v))
    n = len(np.unique(np.round(v, 12)))
    span = hi - lo
    pad = 0.5 * span / (n - 1) if n > 1 else (0.05 * abs(lo) if lo else 0.05)
    if log:
        pad = min(pad, math.log(3.0))
    low = lo - pad
    if positive and not log:
        low = max(low, 0.5 * lo)
    return v, low, hi + pad


def nearest_raster(mu, T, log_T: bool, n: int = 240):
    """Nearest-grid-point index of every pixel of an ``n x n`` raster over the grid.

    Returns ``(mu_edges, T_edges, index)``: pixel edges in data units (length ``n + 1``; ``T``
    edges geometric when ``log_T``) and an ``(n, n)`` int array, rows along T, of indices into the
    input arrays, ``-1`` outside the grid's region.
    """
    mu, T = np.asarray(mu, float), np.asarray(T, float)
    x, x0, x1 = _axis(mu, False)
    y, y0, y1 = _axis(T, log_T, positive=True)
    u, v = (x - x0) / (x1 - x0), (y - y0) / (y1 - y0)
    # widening of the grid's hull: the padding on each side of each axis
    du_lo, du_hi = (u.min(), 1 - u.max()) if len(u) else (0.0, 0.0)
    dv_lo, dv_hi = (v.min(), 1 - v.max()) if len(v) else (0.0, 0.0)
    pts = np.column_stack([u, v])
    c = (np.arange(n) + 0.5) / n
    U, V = np.meshgrid(c, c)
    pix = np.column_stack([U.ravel(), V.ravel()])
    _, idx = cKDTree(pts).query(pix)
    wide = np.concatenate([pts + [du, dv] for du in (-du_lo, 0, du_hi) for dv in (-dv_lo, 0, dv_hi)])
    try:
        eq = ConvexHull(wide).equations  # rows (a, b, c): a u + b v + c <= 0 inside
        inside = np.all(pix @ eq[:, :2].T + eq[:, 2] <= 1e-12, axis=1)
    except QhullError:  # one point or a line of points: keep everything near them
        d, _ = cKDTree(pts).query(pix)
        inside = d <= max(du_lo, du_hi, dv_lo, dv_hi, 0.5 / n) * 1.01
    idx = np.where(inside, idx, -1).reshape(n, n)
    e = np.linspace(0.0, 1.0, n + 1)
    mu_edges = x0 + e * (x1 - x0)
    T_edges = y0 + e * (y1 - y0)
    if log_T:
        T_edges = np.exp(T_edges)
    return mu_edges, T_edges, idx
