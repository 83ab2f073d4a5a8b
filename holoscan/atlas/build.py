"""Adaptive construction of a patch atlas: split a rectangle until every function is resolved.

Generic: knows nothing of branes. ``sample(X0, X1)`` returns the functions at many points (an array
(M, m), non-finite where a sample failed); each patch is sampled on its ``n x n`` first-kind
Chebyshev nodes in one call per refinement level (so a batched sampler runs once per level).

A patch is *resolved* when, for every function, the largest coefficient among the last two orders
in a direction is at most ``tol`` times the function's scale on the patch (``scale = 1`` for
functions marked absolute, such as logarithms, else the largest node value); the tail of a
converging Chebyshev series estimates its truncation error (common practice, no source). An
unresolved patch is split in half along each unresolved direction, down to a minimum width; a
patch still unresolved there is kept and flagged *rough*, one with failed samples is a *hole*.
``inert(coeffs)`` may declare a patch irrelevant (kept unrefined, flagged *inert*).
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .cheb import fit, nodes

RESOLVED, ROUGH, HOLE, INERT = 0, 1, 2, 3
FLAG_NAMES = {RESOLVED: "resolved", ROUGH: "rough", HOLE: "hole", INERT: "inert"}


@dataclass
class BuildResult:
    bounds: np.ndarray       # (P, 4): a0, b0, a1, b1
    coeffs: np.ndarray       # (P, m, n, n); NaN for holes
    flags: np.ndarray        # (P,) RESOLVED | ROUGH | HOLE | INERT
    tails: np.ndarray        # (P,) worst relative tail over functions and directions
    samples: int = 0         # number of sampled points (shots)
    levels: int = 0
    log: list = field(default_factory=list)


def _tails(c: np.ndarray, vals: np.ndarray, absolute: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Relative tails (m,) along each direction."""
    scale = np.where(absolute, 1.0, np.max(np.abs(vals), axis=(1, 2)))
    scale = np.where(scale > 0, scale, 1.0)
    t0 = np.max(np.abs(c[:, -2:, :]), axis=(1, 2)) / scale
    t1 = np.max(np.abs(c[:, :, -2:]), axis=(1, 2)) / scale
    return t0, t1


def noise_plateau(c: np.ndarray, vals: np.ndarray, absolute: np.ndarray, ceiling: float = 1e-8) -> bool:
    """True when every unresolved tail is small (below ``ceiling``) and flat: the last two orders are
    no smaller than a third of orders n-6 to n-3. Coefficients then measure the noise of the samples,
    not truncation, and splitting cannot help (common practice, no source)."""
    scale = np.where(absolute, 1.0, np.max(np.abs(vals), axis=(1, 2)))
    scale = np.where(scale > 0, scale, 1.0)[:, None]
    flat = []
    for axis in (1, 2):
        a = np.abs(np.moveaxis(c, axis, -1))          # (m, n, n) with the direction last
        last = np.max(a[..., -2:], axis=(1, 2)) / scale[:, 0]
        before = np.max(a[..., -6:-2], axis=(1, 2)) / scale[:, 0]
        flat.append(np.all((last < ceiling) & (last > before / 3.0)))
    return bool(all(flat))


def build(sample, domain, *, n: int, tol: float, absolute, initial=(4, 2), min_width=(1e-3, 1e-3),
          inert=None, max_samples: int = 400_000) -> BuildResult:
    """Adaptive atlas of ``domain = (a0, b0, a1, b1)``; see the module docstring."""
    a0, b0, a1, b1 = domain
    absolute = np.asarray(absolute, dtype=bool)
    e0, e1 = np.linspace(a0, b0, initial[0] + 1), np.linspace(a1, b1, initial[1] + 1)
    queue = [(e0[i], e0[i + 1], e1[k], e1[k + 1]) for i in range(initial[0]) for k in range(initial[1])]
    z = nodes(n)
    out_b, out_c, out_f, out_t = [], [], [], []
    total, level = 0, 0
    log = []
    while queue:
        level += 1
        B = np.array(queue)
        X0 = (0.5 * (B[:, 1] - B[:, 0])[:, None] * (z[None, :] + 1.0) + B[:, 0][:, None])  # (P, n)
        X1 = (0.5 * (B[:, 3] - B[:, 2])[:, None] * (z[None, :] + 1.0) + B[:, 2][:, None])
        G0 = np.repeat(X0[:, :, None], n, axis=2).reshape(len(B), -1)
        G1 = np.repeat(X1[:, None, :], n, axis=1).reshape(len(B), -1)
        if total + G0.size > max_samples:
            raise ArithmeticError(f"atlas needs more than {max_samples} samples: the functions are not resolvable")
        vals = sample(G0.ravel(), G1.ravel())
        total += G0.size
        vals = vals.reshape(len(B), n, n, -1).transpose(0, 3, 1, 2)  # (P, m, n, n)
        nxt = []
        for p, (lo0, hi0, lo1, hi1) in enumerate(queue):
            v = vals[p]
            can0 = (hi0 - lo0) / 2 >= min_width[0]
            can1 = (hi1 - lo1) / 2 >= min_width[1]
            if not np.all(np.isfinite(v)):
                split = (can0, can1)
                if not (can0 or can1):
                    out_b.append((lo0, hi0, lo1, hi1)); out_c.append(np.full_like(v, np.nan))
                    out_f.append(HOLE); out_t.append(np.inf)
                    continue
            else:
                c = fit(v)
                if inert is not None and inert(c):
                    out_b.append((lo0, hi0, lo1, hi1)); out_c.append(c); out_f.append(INERT); out_t.append(0.0)
                    continue
                t0, t1 = _tails(c, v, absolute)
                need0, need1 = bool(np.max(t0) > tol), bool(np.max(t1) > tol)
                if not (need0 or need1) or not ((need0 and can0) or (need1 and can1)):
                    out_b.append((lo0, hi0, lo1, hi1)); out_c.append(c)
                    out_f.append(RESOLVED if not (need0 or need1) else ROUGH)
                    out_t.append(float(max(np.max(t0), np.max(t1))))
                    continue
                split = (need0 and can0, need1 and can1)
            m0 = [(lo0, 0.5 * (lo0 + hi0)), (0.5 * (lo0 + hi0), hi0)] if split[0] else [(lo0, hi0)]
            m1 = [(lo1, 0.5 * (lo1 + hi1)), (0.5 * (lo1 + hi1), hi1)] if split[1] else [(lo1, hi1)]
            nxt += [(x[0], x[1], y[0], y[1]) for x in m0 for y in m1]
        log.append((level, len(queue), G0.size))
        queue = nxt
    return BuildResult(np.array(out_b), np.array(out_c), np.array(out_f, dtype=np.int8), np.array(out_t),
                       total, level, log)
