r"""Field equations of a planar charged black brane with an optional neutral scalar, in AdS_{d+1}.

Action (L = 1)::

    S = 1/(2 kappa^2) \int d^{d+1}x sqrt(-g) [ R - (1/2)(d phi)^2 - V(phi) - f(phi) F^2 / 4 ]

Einstein-Maxwell with ``1/(4 e^2) F^2`` is the case ``V = -d(d-1)``, ``f = 2 kappa^2 / e^2``.

Ansatz and gauge::

    ds^2 = e^{2A(r)} ( -h(r) dt^2 + dx_{d-1}^2 ) + dr^2 / h(r),   A = Phi(r) dt,   phi = phi(r)

with the horizon at ``r = 0`` where ``h(0) = 0``, and the residual scalings fixed by ``A(0) = 0``,
``h'(0) = 1``, ``Phi(0) = 0`` (A_t vanishes on the horizon). The horizon data are
``(phi0, Phi1) = (phi(0), Phi'(0))``. The boundary is ``r -> infinity``.

Equations (primes are d/dr), derived from the action above::

    A''   = -phi'^2 / (2(d-1))
    h''   = -d A' h' + e^{-2A} f Phi'^2
    Phi'' = -((d-2) A' + f_phi phi' / f) Phi'
    phi'' = -(d A' + h'/h) phi' + (V_phi - f_phi e^{-2A} Phi'^2 / 2) / h
    0     = V + f e^{-2A} Phi'^2 / 2 + d(d-1) h A'^2 - h phi'^2 / 2 + (d-1) A' h'      (constraint)

The constraint is not imposed by the integration; it is the field-equation residual we report.
The state vector is ``y = (A, A', h, h', Phi, Phi', phi, phi')``.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Protocol

import numpy as np


class Coupling(Protocol):
    """A function of the scalar with exact first and second derivatives (vectorised)."""

    def derivs(self, phi): ...  # -> (value, first, second)


def _derivs1(coupling, phi):
    """Value and first derivative (a coupling may offer a cheaper ``derivs1``)."""
    fast = getattr(coupling, "derivs1", None)
    if fast is not None:
        return fast(phi)
    v, d1, _ = coupling.derivs(phi)
    return v, d1


def _derivative1(coupling, phi):
    """First derivative only (a coupling may offer a cheaper ``derivative1``)."""
    fast = getattr(coupling, "derivative1", None)
    if fast is not None:
        return fast(phi)
    return _derivs1(coupling, phi)[1]


@dataclass(frozen=True)
class Constant:
    """A constant coupling ``c`` (derivatives zero)."""

    c: float

    def derivs(self, phi):
        if isinstance(phi, float):
            return self.c, 0.0, 0.0
        z = np.zeros_like(np.asarray(phi, dtype=float))
        return self.c + z, z, z


@dataclass(frozen=True)
class HorizonData:
    """Horizon data in the gauge above: scalar value and electric field at the horizon."""

    phi0: float
    Phi1: float


class ChargedBrane:
    """The ODE system above for boundary dimension ``d``, potential ``V`` and gauge coupling ``f``.

    Parameters
    ----------
    d : int
        Boundary spacetime dimension (bulk is d+1).
    V, f : Coupling
        Scalar potential and gauge kinetic function, each with exact derivatives.
    A_end : float
        Integrate until the warp factor reaches ``A = A_end`` (estimated from the horizon slope).
    """

    n_state = 8

    def __init__(self, d: int, V: Coupling, f: Coupling, A_end: float = 4.0):
        self.d = int(d)
        self.V = V
        self.f = f
        self.A_end = float(A_end)

    # -- equations ------------------------------------------------------------------------------
    def rhs(self, r, y):
        if y.ndim == 1:
            return self._rhs_scalar(y)
        d = self.d
        A, dA, h, dh, _, dPh, ph, dph = y
        Vp = _derivative1(self.V, ph)
        f, fp = _derivs1(self.f, ph)
        e2A = np.exp(-2.0 * A)
        ddA = -dph * dph / (2.0 * (d - 1))
        ddh = -d * dA * dh + e2A * f * dPh * dPh
        ddPh = -((d - 2) * dA + fp * dph / f) * dPh
        ddph = -(d * dA + dh / h) * dph + (Vp - 0.5 * fp * e2A * dPh * dPh) / h
        return np.array([dA, ddA, dh, ddh, dPh, ddPh, dph, ddph])

    def _rhs_scalar(self, y):
        """The same right-hand side for one state, in plain floats (several times faster)."""
        d = self.d
        A, dA, h, dh, _, dPh, ph, dph = y.tolist()
        Vp = _derivative1(self.V, ph)
        f, fp = _derivs1(self.f, ph)
        e2A = math.exp(-2.0 * A)
        E = e2A * dPh * dPh
        return np.array([
            dA, -dph * dph / (2.0 * (d - 1)),
            dh, -d * dA * dh + f * E,
            dPh, -((d - 2) * dA + fp * dph / f) * dPh,
            dph, -(d * dA + dh / h) * dph + (Vp - 0.5 * fp * E) / h,
        ])

    def residual(self, r, y):
        """Constraint divided by the sum of the magnitudes of its terms (dimensionless)."""
        d = self.d
        A, dA, h, dh, _, dPh, ph, dph = y
        V, _, _ = self.V.derivs(ph)
        f, _, _ = self.f.derivs(ph)
        terms = np.array([
            V,
            0.5 * f * np.exp(-2.0 * A) * dPh**2,
            d * (d - 1) * h * dA**2,
            -0.5 * h * dph**2,
            (d - 1) * dA * dh,
        ])
        return np.abs(terms.sum(axis=0)) / np.abs(terms).sum(axis=0)

    # -- horizon ----------------------------------------------------------------------------------
    def horizon_slope(self, hd: HorizonData) -> float:
        """A'(0) from the constraint at the horizon; must be > 0 for a brane that reaches the boundary."""
        V, _, _ = self.V.derivs(hd.phi0)
        f, _, _ = self.f.derivs(hd.phi0)
        return float(-(V + 0.5 * f * hd.Phi1**2) / (self.d - 1))

    def start_state(self, hd: HorizonData, eps: float) -> np.ndarray:
        """State at ``r = eps`` from the regular second-order horizon series (:meth:`start_states`
        for one datum); raises ValueError when ``A'(0) <= 0`` (no asymptotically AdS brane)."""
        y = self.start_states(np.array([hd.phi0]), np.array([hd.Phi1]), eps)[:, 0]
        if not np.all(np.isfinite(y)):
            raise ValueError(f"A'(horizon) = {self.horizon_slope(hd):.6g} <= 0: no asymptotically AdS brane")
        return y

    def start_states(self, phi0, Phi1, eps: float) -> np.ndarray:
        """States (8, B) at ``r = eps / max(1, A'(0))`` from the regular second-order horizon series,
        for arrays of horizon data at once; NaN columns where ``A'(0) <= 0`` (no asymptotically AdS
        brane). ``eps`` is the hand-over point in units of the horizon's radial scale ``1/A'(0)``::

            A'(0) = -(V + f Phi1^2/2)/(d-1),  phi'(0) = V_phi - f_phi Phi1^2/2,  A''(0) = -phi'(0)^2/(2(d-1)),
            h''(0) = -d A'(0) + f Phi1^2,  Phi''(0) = -((d-2) A'(0) + f_phi phi'(0)/f) Phi1,
            phi''(0) from the scalar equation at second order (see the code)."""
        d = self.d
        phi0, P1 = np.asarray(phi0, dtype=float), np.asarray(Phi1, dtype=float)
        with np.errstate(all="ignore"):
            V, Vp, Vpp = (np.asarray(x, dtype=float) for x in self.V.derivs(phi0))
            f, fp, fpp = (np.asarray(x, dtype=float) for x in self.f.derivs(phi0))
            a1 = -(V + 0.5 * f * P1**2) / (d - 1)
            p1 = Vp - 0.5 * fp * P1**2
            a2 = -p1**2 / (2 * (d - 1))
            h2 = -d * a1 + f * P1**2
            P2 = -((d - 2) * a1 + fp * p1 / f) * P1
            S1 = Vpp * p1 - 0.5 * fpp * p1 * P1**2 + fp * a1 * P1**2 - fp * P1 * P2
            p2 = (S1 - (d * a1 + h2) * p1) / 2.0
            # the hand-over radius in units of the horizon's own radial scale 1/A'(0): the series
            # leaves an error ~ (eps A'(0))^2 that the bulk then amplifies, and A'(0) grows fast
            # with the horizon scalar (measured: 1e2 at phi0 = 6, 1e5 at phi0 = 18 in a dilaton model)
            e = eps / np.maximum(1.0, np.where(a1 > 0.0, a1, 1.0))
            y = np.array([
                a1 * e + 0.5 * a2 * e * e, a1 + a2 * e, e + 0.5 * h2 * e * e + 0 * a1, 1.0 + h2 * e,
                P1 * e + 0.5 * P2 * e * e, P1 + P2 * e, phi0 + p1 * e + 0.5 * p2 * e * e, p1 + p2 * e,
            ])
        y[:, ~(a1 > 0.0)] = np.nan
        return y

    def end_point(self, hd: HorizonData) -> float:
        return self.A_end / self.horizon_slope(hd)

    # -- boundary (no scalar) ---------------------------------------------------------------------
    def boundary_unsourced(self, y_end, kappa_sq: float) -> dict:
        """Boundary data of a brane with no scalar profile (phi = 0): exact falloffs.

        With no scalar, ``A = a r`` and the Maxwell and ``h`` equations integrate in closed form::

            Phi = Phi_inf - G e^{-(d-2)A} / (f (d-2) a),   G = f e^{(d-2)A} Phi'  (Gauss law)
            h   = h_inf + c1 e^{-dA} + c2 e^{-2(d-1)A},    c2 = G^2 / (2 (d-1)(d-2) f a^2)

        so the coefficients follow exactly from the state at any radius. Returns the boundary
        frame factors and the thermodynamics in boundary units (time ``e^{A0} sqrt(h_inf) t``, space
        ``e^{A0} x``), plus the mismatch ``|a sqrt(h_inf) - 1|`` (zero for an exact solution).
        """
        d = self.d
        A, dA, h, dh, Ph, dPh, _, _ = (float(v) for v in y_end)
        f = float(self.f.derivs(0.0)[0])
        a = dA
        G = f * np.exp((d - 2) * A) * dPh
        Phi_inf = Ph + dPh / ((d - 2) * a)
        E_d = np.exp(-d * A)
        E_2 = np.exp(-2 * (d - 1) * A)
        c2 = G * G / (2.0 * (d - 1) * (d - 2) * f * a * a)
        c1 = -(dh + 2.0 * (d - 1) * a * c2 * E_2) / (d * a * E_d)
        h_inf = h - c2 * E_2 - c1 * E_d
        lam_x = 1.0  # A0 = lim (A - a r) = 0 exactly for a linear warp factor
        lam_t = lam_x * np.sqrt(h_inf)
        M = -c1 / h_inf / lam_x**d
        return {
            "T": 1.0 / (4.0 * np.pi * lam_t),
            "mu": Phi_inf / lam_t,
            "s": 2.0 * np.pi / kappa_sq / lam_x ** (d - 1),
            "rho": G / (2.0 * kappa_sq) / lam_x ** (d - 1),
            "epsilon": (d - 1) * M / (2.0 * kappa_sq),
            "P": M / (2.0 * kappa_sq),
            "frame_mismatch": abs(a * np.sqrt(h_inf) - 1.0),
        }
