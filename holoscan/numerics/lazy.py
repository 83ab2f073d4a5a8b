"""A patch atlas built on demand, with a canonical subdivision.

The domain is cut into a fixed grid of root cells; a cell is sampled on its Chebyshev nodes the
first time a point inside it is needed, and split in half along every unresolved direction (see
:mod:`holoscan.numerics.resolution` for the resolution test), recursively. Whether a cell is split depends
only on its own samples, so every cell, and so every value the atlas returns at a point, is the same
whichever points were asked for first, in whichever process: results stay a function of the model
and the solver settings alone.
"""
from __future__ import annotations

import numpy as np

from .cheb import PatchSet, fit, nodes
from .resolution import HOLE, RESOLVED, ROUGH, _tails, noise_plateau


class LazyAtlas:
    """Atlas of ``sample`` on ``domain``, built on demand.

    ``sample(X0, X1)`` returns the functions at many points (an array (M, m), non-finite where a
    sample failed); all cells new at one step are sampled on their ``n x n`` first-kind Chebyshev
    nodes in one call (so a batched sampler runs once per step)."""

    def __init__(self, sample, domain, *, n: int, tol: float, absolute, initial=(8, 4),
                 min_width=(1e-2, 2e-3)):
        self.sample, self.n, self.tol = sample, n, tol
        self.domain = tuple(float(x) for x in domain)
        self.absolute = np.asarray(absolute, dtype=bool)
        self.initial, self.min_width = initial, min_width
        self.cells: dict = {}      # key -> (bounds, split or None, leaf index or -1)
        self.leaf_bounds, self.leaf_coeffs, self.leaf_flags, self.leaf_tails = [], [], [], []
        self.samples = 0
        self._ps = None

    # -- cells ----------------------------------------------------------------------------------------
    def _root_keys(self, x0, x1):
        a0, b0, a1, b1 = self.domain
        i = np.clip(((x0 - a0) / (b0 - a0) * self.initial[0]).astype(np.int64), 0, self.initial[0] - 1)
        k = np.clip(((x1 - a1) / (b1 - a1) * self.initial[1]).astype(np.int64), 0, self.initial[1] - 1)
        return [("r", int(a), int(b)) for a, b in zip(i, k)]

    def _root_bounds(self, key):
        a0, b0, a1, b1 = self.domain
        _, i, k = key
        w0, w1 = (b0 - a0) / self.initial[0], (b1 - a1) / self.initial[1]
        return (a0 + i * w0, a0 + (i + 1) * w0, a1 + k * w1, a1 + (k + 1) * w1)

    def _build(self, keys_bounds):
        """Sample and classify new cells (one batched call)."""
        n, z = self.n, nodes(self.n)
        B = np.array([b for _, b in keys_bounds])
        X0 = 0.5 * (B[:, 1] - B[:, 0])[:, None] * (z[None, :] + 1.0) + B[:, 0][:, None]
        X1 = 0.5 * (B[:, 3] - B[:, 2])[:, None] * (z[None, :] + 1.0) + B[:, 2][:, None]
        G0 = np.repeat(X0[:, :, None], n, axis=2).reshape(len(B), -1)
        G1 = np.repeat(X1[:, None, :], n, axis=1).reshape(len(B), -1)
        vals = self.sample(G0.ravel(), G1.ravel())
        self.samples += G0.size
        vals = vals.reshape(len(B), n, n, -1).transpose(0, 3, 1, 2)
        for (key, (lo0, hi0, lo1, hi1)), v in zip(keys_bounds, vals):
            can0 = (hi0 - lo0) / 2 >= self.min_width[0]
            can1 = (hi1 - lo1) / 2 >= self.min_width[1]
            if not np.all(np.isfinite(v)):
                split, c, tail, flag = (can0, can1), np.full_like(v, np.nan), np.inf, HOLE
            else:
                c = fit(v)
                t0, t1 = _tails(c, v, self.absolute)
                need0, need1 = bool(np.max(t0) > self.tol), bool(np.max(t1) > self.tol)
                split = (need0 and can0, need1 and can1)
                if (need0 or need1) and noise_plateau(c, v, self.absolute):
                    split = (False, False)
                tail = float(max(np.max(t0), np.max(t1)))
                flag = RESOLVED if not (need0 or need1) else ROUGH
            if split[0] or split[1]:
                self.cells[key] = ((lo0, hi0, lo1, hi1), split, -1)
            else:
                self.cells[key] = ((lo0, hi0, lo1, hi1), None, len(self.leaf_bounds))
                self.leaf_bounds.append((lo0, hi0, lo1, hi1))
                self.leaf_coeffs.append(c)
                self.leaf_flags.append(flag)
                self.leaf_tails.append(tail)
                self._ps = None

    @staticmethod
    def _child(key, bounds, split, x0, x1):
        lo0, hi0, lo1, hi1 = bounds
        m0, m1 = 0.5 * (lo0 + hi0), 0.5 * (lo1 + hi1)
        c0 = int(x0 >= m0) if split[0] else 0
        c1 = int(x1 >= m1) if split[1] else 0
        nb = ((m0, hi0) if c0 else (lo0, m0)) if split[0] else (lo0, hi0)
        nb1 = ((m1, hi1) if c1 else (lo1, m1)) if split[1] else (lo1, hi1)
        return key + (c0, c1), (nb[0], nb[1], nb1[0], nb1[1])

    def locate(self, x0, x1) -> np.ndarray:
        """Leaf index for each point (building cells as needed); -1 outside the domain or in a hole."""
        x0, x1 = np.atleast_1d(np.asarray(x0, float)), np.atleast_1d(np.asarray(x1, float))
        a0, b0, a1, b1 = self.domain
        out = np.full(len(x0), -1, dtype=np.int64)
        inside = (x0 >= a0) & (x0 <= b0) & (x1 >= a1) & (x1 <= b1) & np.isfinite(x0) & np.isfinite(x1)
        # points strictly inside a built leaf need no descent (leaves do not overlap, so the match is
        # the leaf the descent would reach); points on or near a leaf's edge descend, which decides
        # edges the same way whatever has been built
        if self.leaf_bounds and np.any(inside):
            hit = self._strictly_inside(x0, x1, inside)
            found = hit >= 0
            out[found] = np.where(self.flags(hit[found]) != HOLE, hit[found], -1)
            inside &= ~found
        idx = np.flatnonzero(inside)
        keys = self._root_keys(x0[idx], x1[idx])
        bounds = {k: self._root_bounds(k) for k in set(keys)}
        while len(idx):
            new = [(k, bounds[k]) for k in dict.fromkeys(keys) if k not in self.cells]
            if new:
                self._build(new)
            nk, ni = [], []
            for j, k in zip(idx, keys):
                b, split, leaf = self.cells[k]
                if split is None:
                    out[j] = leaf if self.leaf_flags[leaf] != HOLE else -1
                    continue
                ck, cb = self._child(k, b, split, x0[j], x1[j])
                bounds[ck] = cb
                nk.append(ck)
                ni.append(j)
            idx, keys = np.array(ni, dtype=np.int64), nk
        return out

    def _strictly_inside(self, x0, x1, mask, block: int = 4096) -> np.ndarray:
        """Index of the built leaf each masked point lies strictly inside (by a margin of 1e-12 of
        the leaf's width), -1 for the others."""
        b = np.array(self.leaf_bounds)
        m0, m1 = 1e-12 * (b[:, 1] - b[:, 0]), 1e-12 * (b[:, 3] - b[:, 2])
        out = np.full(len(x0), -1, dtype=np.int64)
        idx = np.flatnonzero(mask)
        for s in range(0, len(idx), block):
            j = idx[s:s + block]
            a, c = x0[j, None], x1[j, None]
            hit = (a > b[:, 0] + m0) & (a < b[:, 1] - m0) & (c > b[:, 2] + m1) & (c < b[:, 3] - m1)
            out[j] = np.where(hit.any(axis=1), hit.argmax(axis=1), -1)
        return out

    # -- state (to share an atlas between processes) ---------------------------------------------------
    def _settings(self) -> np.ndarray:
        return np.array([*self.domain, self.n, self.tol, *self.initial, *self.min_width, *self.absolute], dtype=float)

    def state(self) -> dict:
        """Every built cell and leaf as plain arrays (for ``numpy.savez``); :meth:`adopt` takes them back.

        Cells are canonical (a cell's content depends only on its own samples), so an atlas that
        adopts another process's cells returns at every point exactly what it would have built."""
        keys = list(self.cells)
        return {
            "settings": self._settings(),
            "cell_keys": np.array([",".join(str(x) for x in k) for k in keys]),
            "cell_bounds": np.array([self.cells[k][0] for k in keys], dtype=float).reshape(-1, 4),
            "cell_split": np.array([(-1, -1) if self.cells[k][1] is None else tuple(int(b) for b in self.cells[k][1])
                                    for k in keys], dtype=np.int8).reshape(-1, 2),
            "cell_leaf": np.array([self.cells[k][2] for k in keys], dtype=np.int64),
            "leaf_coeffs": (np.array(self.leaf_coeffs, dtype=float) if self.leaf_coeffs
                            else np.zeros((0, 1, self.n, self.n))),
            "leaf_flags": np.array(self.leaf_flags, dtype=np.int8),
            "leaf_tails": np.array(self.leaf_tails, dtype=float),
        }

    def adopt(self, state) -> int:
        """Take the cells of another atlas of the same function and settings (a :meth:`state`) that
        this one has not built; returns the number of cells taken. Refuses (ValueError) a state made
        with other settings. Samples are not counted (none were taken here)."""
        if not np.array_equal(np.asarray(state["settings"], float), self._settings()):
            raise ValueError("atlas state made with other settings")
        taken = 0
        coeffs, flags, tails = state["leaf_coeffs"], state["leaf_flags"], state["leaf_tails"]
        for name, b, sp, leaf in zip(state["cell_keys"], state["cell_bounds"], state["cell_split"], state["cell_leaf"]):
            parts = str(name).split(",")
            key = (parts[0], *(int(x) for x in parts[1:]))
            if key in self.cells:
                continue
            bounds = tuple(float(x) for x in b)
            if sp[0] >= 0:
                self.cells[key] = (bounds, (bool(sp[0]), bool(sp[1])), -1)
            else:
                self.cells[key] = (bounds, None, len(self.leaf_bounds))
                self.leaf_bounds.append(bounds)
                self.leaf_coeffs.append(np.array(coeffs[leaf], dtype=float))
                self.leaf_flags.append(int(flags[leaf]))
                self.leaf_tails.append(float(tails[leaf]))
            taken += 1
        self._ps = None
        return taken

    # -- evaluation -------------------------------------------------------------------------------------
    @property
    def patches(self) -> PatchSet:
        if self._ps is None:
            self._ps = PatchSet(np.array(self.leaf_bounds).reshape(-1, 4),
                                np.array(self.leaf_coeffs) if self.leaf_coeffs else np.zeros((0, 1, self.n, self.n)))
        return self._ps

    def evaluate(self, x0, x1, truncate: int = 0):
        """Values (M, m), gradients (M, m, 2) and leaf indices; NaN where there is no leaf."""
        p = self.locate(x0, x1)
        ps = self.patches
        coeffs = ps.truncated(truncate) if truncate else None
        val, grad = ps.evaluate(x0, x1, patch=p, coeffs=coeffs)
        return val, grad, p

    def taylor(self, x0, x1, order: int, truncations=(0,)) -> list:
        """Taylor coefficients up to ``order`` at the points (see :meth:`.cheb.PatchSet.taylor`), one
        array per entry of ``truncations`` (the last orders dropped; 0 keeps all); the points are
        located once (which may build cells, so before the patches are taken)."""
        p = self.locate(x0, x1)
        ps = self.patches
        return [ps.taylor(x0, x1, order, patch=p, coeffs=ps.truncated(k) if k else None) for k in truncations]

    def flags(self, p: np.ndarray) -> np.ndarray:
        f = np.array(self.leaf_flags + [HOLE], dtype=np.int8)
        return f[np.where(p >= 0, p, len(self.leaf_flags))]

    def tails(self, p: np.ndarray) -> np.ndarray:
        t = np.array(self.leaf_tails + [np.inf])
        return t[np.where(p >= 0, p, len(self.leaf_tails))]

    def stats(self) -> dict:
        fl = np.array(self.leaf_flags, dtype=np.int8)
        return {"cells": len(self.cells), "leaves": len(self.leaf_flags), "samples": self.samples,
                "rough": int(np.sum(fl == ROUGH)), "holes": int(np.sum(fl == HOLE))}
