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
and ``shooting`` (the numerical engine, an independent check; see :mod:`holoscan.bulk.conformal`).
"""
from __future__ import annotations

import math
import time
from dataclasses import dataclass

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

    def closed_form(self, T: float, mu: float) -> PointResult:
        t0 = time.perf_counter()
        d, k2, e2, g2 = self.d, self.kappa_sq, self.e_sq, self.gamma_sq
        rh = self.horizon_radius(T, mu)
        M = rh**d + mu**2 * rh ** (d - 2) / g2
        s = 2 * math.pi * rh ** (d - 1) / k2
        rho = (d - 2) * mu * rh ** (d - 2) / e2
        P_TT, P_Tmu, P_mumu = self.pressure_hessian(T, mu, rh)
        eps, P = (d - 1) * M / (2 * k2), M / (2 * k2)
        return PointResult(
            model_id=self.id, kind=self.kind, d=d, method="closed-form", T=T, mu=mu,
            s=s, rho=rho, epsilon=eps, P=P, chi2=P_mumu, P_check=(T * s + mu * rho) / d,
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
        return [solve_unsourced(self.brane(), self.kappa_sq, T, mu, settings, model_id=self.id, kind=self.kind)]
