"""The horizon-data map of one Einstein-Maxwell-dilaton model as an atlas, and its inversion.

Coordinates ``(c0, c1)``: ``(log phi0, u)`` for a sourced scalar, ``(phi0, u)`` for an unsourced
one (``u = Phi1/Phi1_max(phi0)``, see :mod:`holoscan.kinds.emd.shooter`). Atlas functions, chosen smooth
and with relative accuracy where it matters::

    g1 = log T_hat = -log(j)/(d - Delta)   (sourced; T in units of the source)   or   g1 = j (unsourced)
    g2 = x/u,   g3 = log s_hat,   g4 = rho_hat/u       (x = mu/T, hats: divided by T^(d-1))

``x`` and ``rho_hat`` are odd in ``u``; dividing by ``u`` keeps them accurate near ``mu = 0`` (no
node sits on ``u = 0``). Nodes are shot at the production tolerance divided by 100; a patch is
resolved when its Chebyshev tail is below ``TOL`` (3e-11). The atlas stops at ``u = U_MAX`` (0.9):
nearer the extremal limit ``u -> 1`` the map steepens and costs far more samples than it saves;
targets with a brane there go to the point-by-point solver.
"""
from __future__ import annotations

import math

import numpy as np

from ...numerics import jets
from ...numerics.lazy import LazyAtlas

U_MAX = 0.9
ORDER = 16
TOL = 3e-11
PHI0_MIN_SOURCED = 1e-2


class BraneMap:
    """Atlas of one shooter's map (see module docstring); ``ss`` sets the node tolerance."""

    def __init__(self, sh, ss):
        self.sh, self.sourced = sh, sh.sourced
        self.d, self.delta = sh.brane.d, sh.brane.delta
        self.node_settings = ss.tighter()
        if self.sourced:
            domain = (math.log(PHI0_MIN_SOURCED), math.log(sh.phi0_max), 0.0, U_MAX)
            absolute = (True, False, True, False)
        else:
            domain = (-sh.phi0_max, sh.phi0_max, 0.0, U_MAX)
            absolute = (False, False, True, False)
        self.atlas = LazyAtlas(self._sample, domain, n=ORDER, tol=TOL, absolute=absolute)

    def phi0(self, c0):
        return np.exp(c0) if self.sourced else np.asarray(c0)

    def _sample(self, c0, c1):
        o = self.sh.observe_many(np.column_stack([self.phi0(c0), c1]), self.node_settings)
        return self.functions(o, c1)

    def functions(self, o, u):
        """Atlas functions from shot observables ``(x, j, s_hat, rho_hat)`` at ``u``."""
        with np.errstate(all="ignore"):
            g1 = -np.log(o[:, 1]) / (self.d - self.delta) if self.sourced else o[:, 1]
            return np.column_stack([g1, o[:, 0] / u, np.log(o[:, 2]), o[:, 3] / u])

    def evaluate(self, c0, c1, truncate: int = 0):
        """Values and gradients of the atlas functions, and the leaf of each point."""
        return self.atlas.evaluate(np.atleast_1d(np.asarray(c0, float)), np.atleast_1d(np.asarray(c1, float)),
                                   truncate)

    def rho_derivatives(self, c0, c1, truncations=(0,)) -> np.ndarray:
        """The first three derivatives of the charge density along the target's fixed variable,
        exact derivatives of the atlas (orders up to 3 of its patches' polynomials, composed by
        :mod:`holoscan.numerics.jets`), shape (len(truncations), M, 3): one set per entry of
        ``truncations`` (the atlas less that many last orders; 0 the atlas itself). Sourced:
        ``d^n rho/d mu^n`` at fixed ``T`` (source units: ``rho``, ``mu`` in units of the source),
        n = 1, 2, 3. Unsourced: the derivatives ``R^(n)(x)`` of ``rho_hat = R(x)`` along the ``j = 0``
        family (``x = mu/T``), so that ``d^n rho/d mu^n = T^(d-1-n) R^(n)(x)``."""
        c0 = np.atleast_1d(np.asarray(c0, float))
        c1 = np.atleast_1d(np.asarray(c1, float))
        N = 3
        U = jets.variable(c1, 1, N)
        out = []
        for tay in self.atlas.taylor(c0, c1, N, truncations):
            g1, g2, g4 = (tay[:, k] for k in (0, 1, 3))
            if self.sourced:
                F2 = jets.mul(jets.mul(U, g2), jets.exp(g1))                      # mu = u (x/u) T
                G = jets.mul(jets.mul(U, g4), jets.exp((self.d - 1) * g1))        # rho = u (rho_hat/u) T^(d-1)
            else:
                F2, G = jets.mul(U, g2), jets.mul(U, g4)                           # x, rho_hat
            out.append(jets.curve_derivatives(g1, F2, G))
        return np.array(out)

    # -- physical quantities ------------------------------------------------------------------------
    def physical(self, c1, g, dg):
        """Sourced: ``(T, mu, s, rho)`` in source units and their gradients (M, 4, 2) in (c0, c1).
        Unsourced: ``(x, j, s_hat, rho_hat)`` and gradients."""
        d = self.d
        u = np.asarray(c1)[:, None]
        eu = np.zeros_like(dg[:, 0, :])
        eu[:, 1] = 1.0
        g1, g2, g3, g4 = g.T
        d1, d2, d3, d4 = (dg[:, k, :] for k in range(4))
        x = u[:, 0] * g2
        dx = u * d2 + g2[:, None] * eu
        if not self.sourced:
            sh_ = np.exp(g3)
            rh = u[:, 0] * g4
            vals = np.column_stack([x, g1, sh_, rh])
            grads = np.stack([dx, d1, sh_[:, None] * d3, u * d4 + g4[:, None] * eu], axis=1)
            return vals, grads
        T = np.exp(g1)
        T3 = T ** (d - 1)
        mu, s, rho = x * T, np.exp(g3) * T3, u[:, 0] * g4 * T3
        dT = T[:, None] * d1
        dmu = x[:, None] * dT + T[:, None] * dx
        ds = s[:, None] * (d3 + (d - 1) * d1)
        drho = T3[:, None] * (g4[:, None] * eu + u * d4) + (d - 1) * rho[:, None] * d1
        return np.column_stack([T, mu, s, rho]), np.stack([dT, dmu, ds, drho], axis=1)

    # -- inversion ------------------------------------------------------------------------------------
    def residual(self, c0, c1, a, x):
        """Target residual ``F`` (M, 2), its Jacobian (M, 2, 2) and a scale per component.
        ``a`` is ``log(T/Lambda)`` (sourced) or unused (unsourced: ``j = 0``); ``x = mu/T``."""
        g, dg, p = self.evaluate(c0, c1)
        u = np.asarray(c1)
        F = np.column_stack([g[:, 0] - a if self.sourced else g[:, 0], u * g[:, 1] - x])
        J = np.empty((len(u), 2, 2))
        J[:, 0, :] = dg[:, 0, :]
        J[:, 1, :] = u[:, None] * dg[:, 1, :]
        J[:, 1, 1] += g[:, 1]
        if self.sourced:
            scale = np.column_stack([np.ones(len(u)), np.maximum(1.0, np.abs(x))])
        else:
            scale = np.column_stack([np.hypot(dg[:, 0, 0], dg[:, 0, 1]), np.maximum(1.0, np.abs(x))])
        return F, J, scale, p

    def newton(self, q, a, x, maxiter: int = 40):
        """Damped Newton on the atlas for many (start, target) pairs at once.

        Returns the end points (M, 2), the scaled residual norm there (inf where the iteration
        failed), the iteration counts, and whether the iteration stopped within 0.02 of ``U_MAX``."""
        q = np.array(q, float)
        a, x = np.broadcast_to(a, len(q)).astype(float), np.broadcast_to(x, len(q)).astype(float)
        norm = np.full(len(q), np.inf)
        iters = np.zeros(len(q), np.int64)
        active = np.ones(len(q), bool)
        edge = np.zeros(len(q), bool)
        b1 = self.atlas.domain[3]
        F, J, sc, _ = self.residual(q[:, 0], q[:, 1], a, x)
        norm = np.max(np.abs(F) / sc, axis=1)
        norm[~np.isfinite(norm)] = np.inf
        active &= np.isfinite(norm)
        for _ in range(maxiter):
            idx = np.flatnonzero(active & (norm > 1e-14))
            if not len(idx):
                break
            with np.errstate(all="ignore"):
                det = J[idx, 0, 0] * J[idx, 1, 1] - J[idx, 0, 1] * J[idx, 1, 0]
                step = np.column_stack([-(J[idx, 1, 1] * F[idx, 0] - J[idx, 0, 1] * F[idx, 1]) / det,
                                        -(-J[idx, 1, 0] * F[idx, 0] + J[idx, 0, 0] * F[idx, 1]) / det])
            iters[idx] += 1
            lam = np.ones(len(idx))
            pending = np.ones(len(idx), bool)
            for _ in range(12):
                k = np.flatnonzero(pending)
                if not len(k):
                    break
                cand = q[idx[k]] + lam[k, None] * step[k]
                cand[:, 1] = np.abs(cand[:, 1])        # the map is symmetric in u
                Fn, Jn, scn, _ = self.residual(cand[:, 0], cand[:, 1], a[idx[k]], x[idx[k]])
                nn = np.max(np.abs(Fn) / scn, axis=1)
                better = np.isfinite(nn) & (nn < norm[idx[k]] * (1 - 1e-4 * lam[k]))
                at_floor = np.isfinite(nn) & (norm[idx[k]] < 1e-11) & (nn <= 2 * norm[idx[k]])
                take = better | at_floor
                t = idx[k[take]]
                converged_floor = at_floor & ~better
                q[t], F[t], J[t], sc[t], norm[t] = cand[take], Fn[take], Jn[take], scn[take], nn[take]
                active[idx[k[converged_floor]]] = False    # no more progress to make at the noise floor
                pending[k[take]] = False
                lam[k[~take]] *= 0.5
            active[idx[pending]] = False                    # no decrease found
            tiny = np.max(np.abs(step), axis=1) < 1e-15 * (1 + np.max(np.abs(q[idx]), axis=1))
            active[idx[tiny]] = False
        edge = q[:, 1] > b1 - 0.02        # stopped at the atlas's edge in u (the point solver goes further)
        return q, norm, iters, edge


class AtlasShooter:
    """A shooter's interface (:class:`holoscan.kinds.emd.shooter.EMDShooter`) answered from the atlas.

    ``observe_many`` returns the observables ``(x, j, s_hat, rho_hat)`` interpolated by the atlas
    (whatever tolerance is asked: the atlas was built at the production tolerance over 100); rows
    outside the atlas (``u > U_MAX``) are real shots. Everything else (the coarse scan, the brane,
    the model-level cache) is the wrapped shooter's. Counters count the real shots only.
    """

    def __init__(self, bmap: BraneMap):
        self.map = bmap
        self._sh = bmap.sh

    def __getattr__(self, name):
        return getattr(self._sh, name)

    def observe_many(self, Q, ss, cnt=None, record: bool = False, brane=None, detail=None) -> np.ndarray:
        Q = np.atleast_2d(np.asarray(Q, dtype=float))
        m = self.map
        u = np.abs(Q[:, 1])
        ok_phi0 = Q[:, 0] > 0 if m.sourced else np.isfinite(Q[:, 0])
        inside = ok_phi0 & (u <= U_MAX)
        out = np.full((len(Q), 4), np.nan)
        if np.any(inside):
            with np.errstate(all="ignore"):
                c0 = np.log(Q[inside, 0]) if m.sourced else Q[inside, 0]
            g, _, _ = m.evaluate(c0, u[inside])
            x, g1 = u[inside] * g[:, 1], g[:, 0]
            j = np.exp(-(m.d - m.delta) * g1) if m.sourced else g1
            sgn = np.sign(Q[inside, 1])
            out[inside] = np.column_stack([sgn * x, j, np.exp(g[:, 2]), sgn * u[inside] * g[:, 3]])
        if np.any(~inside):
            out[~inside] = self._sh.observe_many(Q[~inside], ss, cnt, record, brane)
        return out

    def observe(self, q, ss, cnt=None, record: bool = False, brane=None):
        o = self.observe_many([q], ss, cnt, record, brane)[0]
        return o if np.all(np.isfinite(o)) else None
