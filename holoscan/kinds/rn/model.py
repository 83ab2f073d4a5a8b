r"""Model kind ``rn``: the planar Reissner-Nordstrom-AdS_{d+1} black brane (Einstein-Maxwell).

Action (L = 1, mostly-plus signature)::

    S = 1/(2 kappa^2) \int d^{d+1}x sqrt(-g) (R + d(d-1)) - 1/(4 e^2) \int d^{d+1}x sqrt(-g) F^2

Units and conventions. Lengths in units of the AdS radius L = 1; ``kappa_sq`` (= kappa^2) and
``e_sq`` (= e^2) are then pure numbers. Boundary quantities are per unit boundary volume in any
energy unit E (the model is conformal): ``T``, ``mu`` in E; ``s``, ``rho`` in E^(d-1); ``epsilon``,
``P`` in E^d. ``mu = A_t(boundary) - A_t(horizon)``; ``rho`` is the charge density conjugate to
``mu``, ``rho = dP/dmu``, with the sign of ``mu``. ``P`` is the pressure and ``Omega = -P`` the grand
potential density.

Closed form (Chamblin, Emparan, Johnson & Myers 1999, Phys. Rev. D 60, 064018; in the normalisation
of Hartnoll 2009, Class. Quant. Grav. 26, 224002)::

    gamma^2 = (d-1) e^2 / ((d-2) kappa^2)
    r_h     = (4 pi T + sqrt(16 pi^2 T^2 + 4 d (d-2) mu^2 / gamma^2)) / (2 d)
    s       = 2 pi r_h^(d-1) / kappa^2
    rho     = (d-2) mu r_h^(d-2) / e^2
    epsilon = (d-1) M / (2 kappa^2),  P = M / (2 kappa^2),  M = r_h^d + mu^2 r_h^(d-2) / gamma^2

Methods: ``closed-form`` (the default under ``auto``: exact to rounding and microseconds per point)
and ``shooting`` (the numerical engine, an independent check; see :mod:`holoscan.bulk.conformal`,
which also gives ``chi3``, ``chi4`` with their bounds ``chi3_err``, ``chi4_err`` from derivatives
along the brane family).

Transport (both methods): ``sigma`` is the horizon value ``r_h^(d-3)/e^2`` times
``(s T/(epsilon + P))^2`` (Hartnoll 2009, as above), ``eta_over_s = 1/(4 pi)``; a shooting row
takes ``r_h`` from its own entropy density (``s = 2 pi r_h^(d-1)/kappa^2``), so its ``sigma``
carries the row's own error (relative, at most about ``(4 + (d-3)/(d-1))`` times
``error_estimate``, from the first-order propagation of the errors of s and rho).
"""
from __future__ import annotations

import math
import time
from dataclasses import dataclass, replace

from ... import validate as v
from ...bulk.charged_brane import ChargedBrane, Constant
from ...bulk.conformal import solve_unsourced
from ...result import PointResult, Status
from ...settings import SolverSettings
from ...thermo import cs2_from_hessian, local_stability
from ..base import ModelKind


@dataclass(frozen=True)
class RNModel(ModelKind):
    """Reissner-Nordstrom-AdS_{d+1} brane. See the module docstring for conventions."""

    id: str
    d: int
    kappa_sq: float
    e_sq: float

    kind = "rn"
    methods = ("closed-form", "shooting")
    default_method = "closed-form"
    KEYS = ("id", "kind", "d", "kappa_sq", "e_sq")

    @classmethod
    def from_block(cls, block: dict, key: str = "model") -> RNModel:
        v.only_keys(block, set(cls.KEYS), key)
        return cls(
            id=v.name(v.required(block, "id", key), f"{key}.id"),
            d=v.integer(v.required(block, "d", key), f"{key}.d", minimum=3, maximum=12),
            kappa_sq=v.number(v.required(block, "kappa_sq", key), f"{key}.kappa_sq", positive=True),
            e_sq=v.number(v.required(block, "e_sq", key), f"{key}.e_sq", positive=True),
        )

    def spec(self) -> dict:
        """Canonical parameter dict (sorted keys) identifying the physics of this model."""
        return {"d": self.d, "e_sq": self.e_sq, "id": self.id, "kappa_sq": self.kappa_sq, "kind": self.kind}

    @property
    def gamma_sq(self) -> float:
        return (self.d - 1) * self.e_sq / ((self.d - 2) * self.kappa_sq)

    def brane(self) -> ChargedBrane:
        """The bulk ODE system: V = -d(d-1), f = 2 kappa^2 / e^2, no scalar."""
        d = self.d
        return ChargedBrane(d, Constant(-float(d * (d - 1))), Constant(2.0 * self.kappa_sq / self.e_sq))

    # -- closed form ------------------------------------------------------------------------------
    def horizon_radius(self, T: float, mu: float) -> float:
        d = self.d
        return (4 * math.pi * T + math.sqrt(16 * math.pi**2 * T**2 + 4 * d * (d - 2) * mu**2 / self.gamma_sq)) / (2 * d)

    def pressure_hessian(self, T: float, mu: float, rh: float) -> tuple[float, float, float]:
        """Second derivatives ``(P_TT, P_Tmu, P_mumu)`` of the pressure at ``(T, mu)`` with horizon
        radius ``rh`` (:meth:`horizon_radius`); units E^(d-2) like chi2."""
        d, k2, e2, g2 = self.d, self.kappa_sq, self.e_sq, self.gamma_sq
        # derivatives of r_h(T, mu) from d r^2 - 4 pi T r - (d-2) mu^2 / gamma^2 = 0
        den = 2 * d * rh - 4 * math.pi * T
        r_T = 4 * math.pi * rh / den
        r_mu = 2 * (d - 2) * mu / (g2 * den)
        P_TT = 2 * math.pi * (d - 1) * rh ** (d - 2) * r_T / k2
        P_Tmu = 2 * math.pi * (d - 1) * rh ** (d - 2) * r_mu / k2
        P_mumu = (d - 2) / e2 * (rh ** (d - 2) + mu * (d - 2) * rh ** (d - 3) * r_mu)
        return P_TT, P_Tmu, P_mumu

    def rho_mu_derivatives(self, T: float, mu: float, rh: float) -> tuple[float, float, float]:
        """``(chi2, chi3, chi4)``: the first three mu-derivatives of ``rho = (d-2) mu r_h^(d-2)/e^2``
        at fixed T, exact, with those of ``r_h(mu)`` from ``d r^2 - 4 pi T r - (d-2) mu^2/gamma^2 = 0``
        (implicit differentiation); units E^(d-2), E^(d-3), E^(d-4)."""
        d, e2, g2 = self.d, self.e_sq, self.gamma_sq
        n, K, c = d - 2, (d - 2) / e2, (d - 2) / g2
        den = 2 * d * rh - 4 * math.pi * T
        r1 = 2 * c * mu / den
        r2 = (2 * c - 2 * d * r1**2) / den
        r3 = -6 * d * r1 * r2 / den

        def pw(k):  # rh**(n - k); where n - k < 0 the coefficient that multiplies it is zero
            return rh ** (n - k) if n - k >= 0 else 0.0
        chi2 = K * (pw(0) + n * mu * pw(1) * r1)
        chi3 = K * (2 * n * pw(1) * r1 + n * (n - 1) * mu * pw(2) * r1**2 + n * mu * pw(1) * r2)
        chi4 = K * (3 * n * (n - 1) * pw(2) * r1**2 + 3 * n * pw(1) * r2
                    + n * (n - 1) * (n - 2) * mu * pw(3) * r1**3 + 3 * n * (n - 1) * mu * pw(2) * r1 * r2
                    + n * mu * pw(1) * r3)
        return chi2, chi3, chi4

    def conductivity(self, T: float, mu: float, rh: float, s: float, rho: float) -> float:
        """The charge conductivity that stays finite at nonzero density: the horizon (membrane)
        value ``r_h^(d-3)/e^2`` times ``(s T/(epsilon + P))^2`` with ``epsilon + P = T s + mu rho``
        (Hartnoll 2009, Class. Quant. Grav. 26, 224002); units E^(d-3)."""
        w = T * s + mu * rho
        return rh ** (self.d - 3) / self.e_sq * (T * s / w) ** 2

    def closed_form(self, T: float, mu: float) -> PointResult:
        t0 = time.perf_counter()
        d, k2, e2, g2 = self.d, self.kappa_sq, self.e_sq, self.gamma_sq
        rh = self.horizon_radius(T, mu)
        M = rh**d + mu**2 * rh ** (d - 2) / g2
        s = 2 * math.pi * rh ** (d - 1) / k2
        rho = (d - 2) * mu * rh ** (d - 2) / e2
        P_TT, P_Tmu, P_mumu = self.pressure_hessian(T, mu, rh)
        _, chi3, chi4 = self.rho_mu_derivatives(T, mu, rh)
        eps, P = (d - 1) * M / (2 * k2), M / (2 * k2)
        return PointResult(
            model_id=self.id, kind=self.kind, d=d, method="closed-form", T=T, mu=mu,
            s=s, rho=rho, epsilon=eps, P=P, chi2=P_mumu, P_check=(T * s + mu * rho) / d,
            chi3=chi3, chi4=chi4, chi3_err=0.0, chi4_err=0.0,
            sigma=self.conductivity(T, mu, rh, s, rho), eta_over_s=1 / (4 * math.pi),
            trace_anomaly=(eps - (d - 1) * P) / T**d, stability=local_stability(P_TT, P_Tmu, P_mumu),
            cs2=cs2_from_hessian(T, mu, s, rho, P_TT, P_Tmu, P_mumu),
            status=Status.OK, message="closed form", rtol=0.0, atol=0.0, residual=0.0, error_estimate=0.0,
            wall_time=time.perf_counter() - t0, extra={"r_h": rh},
        )

    # -- dispatch ---------------------------------------------------------------------------------
    def solve(self, T: float, mu: float, settings: SolverSettings = SolverSettings()) -> list[PointResult]:
        """All branches at (T, mu): the RN brane is unique, so a one-element list."""
        method = self.default_method if settings.method == "auto" else settings.method
        if method == "closed-form":
            return [self.closed_form(T, mu)]
        r = solve_unsourced(self.brane(), self.kappa_sq, T, mu, settings, model_id=self.id, kind=self.kind)
        return [self.with_transport(r)]

    def with_transport(self, r: PointResult) -> PointResult:
        """A shooting row with ``sigma`` (:meth:`conductivity`, with the row's own horizon radius
        from its entropy density, ``s = 2 pi r_h^(d-1)/kappa^2``, and its own ``s``, ``rho``) and
        ``eta_over_s = 1/(4 pi)`` (Kovtun, Son & Starinets 2005, Phys. Rev. Lett. 94, 111601); a row
        that is not ``ok`` is returned unchanged (NaN transport), as on the ``emd`` paths."""
        if r.status is not Status.OK:
            return r
        rh = (r.s * self.kappa_sq / (2 * math.pi)) ** (1.0 / (self.d - 1))
        return replace(r, sigma=self.conductivity(r.T, r.mu, rh, r.s, r.rho), eta_over_s=1 / (4 * math.pi))
