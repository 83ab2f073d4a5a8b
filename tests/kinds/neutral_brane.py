r"""A model kind of its own, in one file: the neutral planar AdS_{d+1} black brane.

Registered with ``HOLOSCAN_KIND_FILES=path/to/neutral_brane.py``; nothing else in holoscan is edited.
It shows the smallest complete kind: a config block, a canonical spec, one solve per target with an
error estimate from a second solve that changes every numerical choice.

Physics (L = 1, Einstein gravity with Lambda = -d(d-1)/2, no gauge field). Areal gauge
``ds^2 = -F dt^2 + dr^2/F + r^2 dx_{d-1}^2``; the tt Einstein equation is first order,

    r F'(r) + (d - 2) F(r) = d r^2,        F(r_h) = 0,

solved numerically here (scipy's DOP853) from the horizon outwards; the read-out is the mass
parameter ``m = r^(d-2) (r^2 - F(r))``, constant along the exact solution (so it is read a few
horizon radii out, where ``r^2 - F`` has not yet cancelled to a few digits), and the
temperature ``T = F'(r_h)/(4 pi)``, time normalised by ``F/r^2 -> 1``. Then, per unit boundary
volume with ``kappa^2 = 8 pi G``: ``s = 2 pi r_h^(d-1)/kappa^2`` (horizon area),
``epsilon = (d-1) m/(2 kappa^2)``, ``P = m/(2 kappa^2)`` (boundary stress tensor of the planar
AdS-Schwarzschild brane). No gauge field couples to ``mu``: ``rho = chi2 = 0`` at every ``mu``.
"""
from __future__ import annotations

import math
import time
from dataclasses import dataclass

from scipy.integrate import solve_ivp

from holoscan import validate as v
from holoscan.kinds import register
from holoscan.kinds.base import ModelKind
from holoscan.result import PointResult, Status
from holoscan.settings import SolverSettings


def _read_out(d: int, rtol: float, r_end: float) -> tuple[float, float, int]:
    """(F'(1), m, nfev) of the brane with r_h = 1, integrating to ``r_end``."""
    def rhs(r, y):
        return [(d * r * r - (d - 2) * y[0]) / r]

    sol = solve_ivp(rhs, (1.0, r_end), [0.0], method="DOP853", rtol=rtol, atol=rtol)
    if not sol.success:
        raise ArithmeticError(sol.message)
    F_end = float(sol.y[0, -1])
    m = r_end ** (d - 2) * (r_end * r_end - F_end)
    dF_h = float(rhs(1.0, [0.0])[0])
    return dF_h, m, int(sol.nfev)


@register
@dataclass(frozen=True)
class NeutralBrane(ModelKind):
    """Neutral planar AdS_{d+1} black brane; see the module docstring."""

    id: str
    d: int
    kappa_sq: float

    kind = "neutral-brane"
    methods = ("shooting",)
    default_method = "shooting"
    KEYS = ("id", "kind", "d", "kappa_sq")

    @classmethod
    def from_block(cls, block: dict, key: str = "model") -> NeutralBrane:
        v.only_keys(block, set(cls.KEYS), key)
        return cls(id=v.name(v.required(block, "id", key), f"{key}.id"),
                   d=v.integer(v.required(block, "d", key), f"{key}.d", minimum=3, maximum=8),
                   kappa_sq=v.number(v.required(block, "kappa_sq", key), f"{key}.kappa_sq", positive=True))

    def spec(self) -> dict:
        return {"d": self.d, "id": self.id, "kappa_sq": self.kappa_sq, "kind": self.kind}

    def solve(self, T: float, mu: float, settings: SolverSettings = SolverSettings()) -> list[PointResult]:
        t0 = time.perf_counter()
        d, k2 = self.d, self.kappa_sq
        try:
            dF, m, nfev = _read_out(d, settings.rtol, 3.0)
            dF2, m2, nfev2 = _read_out(d, settings.rtol / 100.0, 4.0)   # every choice changed
        except ArithmeticError as exc:
            return [PointResult(self.id, self.kind, d, "shooting", T, mu, status=Status.FAILED,
                                message=str(exc), wall_time=time.perf_counter() - t0)]
        rh = 4.0 * math.pi * T / dF            # T = F'(r_h)/(4 pi) scales as r_h
        s = 2.0 * math.pi * rh ** (d - 1) / k2
        P = m * rh ** d / (2.0 * k2)
        # the difference of the two solves, twice (the tighter solve has an error of its own)
        err = 2.0 * (abs(m - m2) / abs(m2) + abs(dF - dF2) / abs(dF2)) + 1e-14
        status = Status.OK if err <= settings.accept_error else Status.NOT_CONVERGED
        return [PointResult(self.id, self.kind, d, "shooting", T, mu, s=s, rho=0.0, epsilon=(d - 1) * P, P=P,
                            chi2=0.0, cs2=1.0 / (d - 1), P_check=T * s / d, trace_anomaly=0.0,
                            stability="stable", status=status, message="neutral brane, one ODE",
                            rtol=settings.rtol, atol=0.0, nfev=nfev + nfev2, error_estimate=err,
                            wall_time=time.perf_counter() - t0, extra={"r_h": rh, "mass": m})]
