"""Result records returned by every solve.

A solve never raises for a physics or convergence problem: it returns a :class:`PointResult` whose
:attr:`status` says what happened and whose :attr:`message` says why, so that a scan can go on.
"""
from __future__ import annotations

import enum
import math
from dataclasses import asdict, dataclass, field


class Status(str, enum.Enum):
    """Outcome of one solve. The value is the word written into tables."""

    OK = "ok"
    NOT_CONVERGED = "not converged"
    FAILED = "failed"
    NO_SOLUTION = "no solution"


#: Observable fields of a :class:`PointResult`, in the order tables use. Units (L = 1, boundary
#: dimension d): T, mu [E]; s, rho [E^(d-1)]; epsilon, P [E^d]; chi2 [E^(d-2)]; cs2 dimensionless.
OBSERVABLES = ("T", "mu", "s", "rho", "epsilon", "P", "chi2", "cs2")


@dataclass(frozen=True)
class PointResult:
    """Everything known about one solved (T, mu) point on one branch.

    Conventions: ``P`` is the pressure, the grand potential density is ``Omega = -P``; ``rho`` is the
    charge density conjugate to ``mu`` (``rho = dP/dmu`` at fixed T); ``chi2 = d rho / d mu`` at fixed T;
    ``cs2 = (dP/d epsilon)`` at fixed s/rho. The reduced ratios use the boundary dimension ``d``:
    ``s_hat = s/T^(d-1)``, ``rho_hat = rho/T^(d-1)``, ``P_hat = P/T^d``, ``chi2_hat = chi2/T^(d-2)``.
    ``P_check`` is the pressure by a second, independent route (see each model kind), and
    ``trace_anomaly = (epsilon - (d-1) P) / T^d``. ``stability`` is ``stable`` when the Hessian of P
    in (T, mu) is positive definite (positive specific heat and chi2 > 0), else ``unstable``.
    ``phase``, ``phase_flag`` (stable | metastable | unstable | unknown) and ``dominant`` compare the
    branches found at the same (T, mu); see :mod:`holoscan.phases.dominance`.
    Observables of a failed solve are NaN and ``status`` says why.
    """

    model_id: str
    kind: str
    d: int
    method: str
    T: float
    mu: float
    s: float = math.nan
    rho: float = math.nan
    epsilon: float = math.nan
    P: float = math.nan
    chi2: float = math.nan
    cs2: float = math.nan
    P_check: float = math.nan
    trace_anomaly: float = math.nan
    branch: int = 0
    stability: str = ""
    phase: str = ""
    phase_flag: str = ""
    dominant: bool = False
    status: Status = Status.OK
    message: str = ""
    rtol: float = math.nan
    atol: float = math.nan
    nfev: int = 0
    nsteps: int = 0
    niter: int = 0
    residual: float = math.nan
    error_estimate: float = math.nan
    wall_time: float = 0.0
    extra: dict = field(default_factory=dict)

    @property
    def success(self) -> bool:
        return self.status is Status.OK

    @property
    def Omega(self) -> float:
        return -self.P

    def ratios(self) -> dict:
        """Dimensionless ratios s/T^(d-1), rho/T^(d-1), P/T^d, chi2/T^(d-2)."""
        d, T = self.d, self.T
        return {
            "s_hat": self.s / T ** (d - 1),
            "rho_hat": self.rho / T ** (d - 1),
            "P_hat": self.P / T**d,
            "chi2_hat": self.chi2 / T ** (d - 2),
        }

    def to_dict(self) -> dict:
        """Plain JSON-ready dict: observables, Omega, ratios, status and solver metadata."""
        out = asdict(self)
        out["status"] = self.status.value
        out["Omega"] = self.Omega
        out["P_mismatch"] = abs(self.P - self.P_check) / abs(self.P) if self.P else (0.0 if self.P == self.P_check else math.nan)
        out.update(self.ratios())
        return out
