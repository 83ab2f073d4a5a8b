"""Result records returned by every solve.

A solve never raises for a physics or convergence problem: it returns a :class:`PointResult` whose
:attr:`status` says what happened and whose :attr:`message` says why, so that a scan can go on.

Double-precision range. A row is ``ok`` only if every number it reports is an ordinary double:
:func:`range_problems` lists the observables, the second pressure, the trace anomaly and the reduced
ratios that are NaN, infinite or subnormal (non-zero below ``sys.float_info.min`` = 2.2e-308, where
a double keeps fewer than 53 bits), and :func:`checked` turns an ``ok`` row with any of them into
``out of range``. :func:`out_of_range` is the row of a target that cannot be solved or reported in
double precision at all.
"""
from __future__ import annotations

import enum
import math
import sys
from dataclasses import asdict, dataclass, field, replace


class Status(enum.StrEnum):
    """Outcome of one solve. The value is the word written into tables (and what ``str`` gives)."""

    OK = "ok"
    NOT_CONVERGED = "not converged"
    FAILED = "failed"
    NO_SOLUTION = "no solution"
    #: a number of the row (or the target's powers it is reduced by) is not an ordinary double:
    #: it overflowed, underflowed to zero or to a subnormal number, or is NaN
    OUT_OF_RANGE = "out of range"


#: Observable fields of a :class:`PointResult`, in the order tables use. Units (L = 1, boundary
#: dimension d): T, mu [E]; s, rho [E^(d-1)]; epsilon, P [E^d]; chi2 [E^(d-2)]; cs2 dimensionless.
OBSERVABLES = ("T", "mu", "s", "rho", "epsilon", "P", "chi2", "cs2")


@dataclass(frozen=True)
class PointResult:
    """Everything known about one solved (T, mu) point on one branch.

    Conventions: ``P`` is the pressure, the grand potential density is ``Omega = -P``; ``rho`` is the
    charge density conjugate to ``mu`` (``rho = dP/dmu`` at fixed T); ``chi2 = d rho / d mu`` at fixed T;
    ``cs2 = (dP/d epsilon)`` at fixed s/rho. Higher cumulants ``chi3 = d^2 rho/d mu^2`` and ``chi4 =
    d^3 rho/d mu^3`` at fixed T (E^(d-3), E^(d-4)); transport from horizon data: ``sigma``, the
    charge conductivity that stays finite at nonzero density (E^(d-3)), and ``eta_over_s``. These
    four are NaN for a kind that does not compute them (see each kind). ``chi3_err`` and ``chi4_err``
    are absolute bounds on the errors of chi3 and chi4 (their units); they are kept apart from
    ``error_estimate`` (which covers s, rho, epsilon, P, chi2, cs2 and decides ``status``), so a
    fourth derivative that is harder to get never downgrades the equation of state. The reduced
    ratios use the boundary dimension ``d``:
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
    chi3: float = math.nan
    chi4: float = math.nan
    chi3_err: float = math.nan
    chi4_err: float = math.nan
    sigma: float = math.nan
    eta_over_s: float = math.nan
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
        """Dimensionless ratios s/T^(d-1), rho/T^(d-1), P/T^d, chi2/T^(d-2).

        NaN where the power of T is not an ordinary double (it overflows, or underflows to zero or
        to a subnormal number): the ratio cannot be formed in double precision there."""
        d, T = self.d, self.T
        return {
            "s_hat": _reduce(self.s, T, d - 1),
            "rho_hat": _reduce(self.rho, T, d - 1),
            "P_hat": _reduce(self.P, T, d),
            "chi2_hat": _reduce(self.chi2, T, d - 2),
        }

    def to_dict(self) -> dict:
        """Plain JSON-ready dict: observables, Omega, ratios, status and solver metadata."""
        out = asdict(self)
        out["status"] = self.status.value
        out["Omega"] = self.Omega
        out["P_mismatch"] = (abs(self.P - self.P_check) / abs(self.P) if self.P
                             else (0.0 if self.P_check == self.P else math.nan))
        out.update(self.ratios())
        out["kurtosis_ratio"] = self.chi4 / self.chi2 if self.chi2 and not math.isnan(self.chi4) else math.nan
        out["D_charge"] = self.sigma / self.chi2 if self.chi2 and not math.isnan(self.sigma) else math.nan
        return out


def _reduce(x: float, T: float, n: int) -> float:
    """``x / T**n``, or NaN when ``T**n`` is not an ordinary double (see :func:`is_ordinary`)."""
    try:
        p = T**n
    except OverflowError:
        return math.nan
    return x / p if is_ordinary(p) and p != 0.0 else math.nan


def is_ordinary(x) -> bool:
    """True for a finite double that is zero or at least ``sys.float_info.min`` (2.2e-308) in
    magnitude: not NaN, not infinite, not subnormal (a subnormal keeps fewer than 53 bits)."""
    try:
        x = float(x)
    except (TypeError, ValueError):
        return False
    return math.isfinite(x) and (x == 0.0 or abs(x) >= sys.float_info.min)


#: the numbers of a row that must be ordinary doubles for it to be ``ok``
CHECKED = (*OBSERVABLES, "P_check", "trace_anomaly")


def range_problems(r: PointResult) -> list[str]:
    """What in ``r`` is not an ordinary double (empty when nothing is): the fields of
    :data:`CHECKED` and the reduced ratios of :meth:`PointResult.ratios`, each named with its value."""
    values = {k: getattr(r, k) for k in CHECKED}
    values.update(r.ratios())
    out = []
    for k, x in values.items():
        if not is_ordinary(x):
            what = "subnormal (precision lost)" if isinstance(x, (int, float)) and math.isfinite(x) else "not finite"
            out.append(f"{k} = {x!r} is {what}")
    return out


def checked(r: PointResult) -> PointResult:
    """``r`` itself, unless it is ``ok`` while :func:`range_problems` finds something: then the
    same row with status ``out of range`` and a message naming each number outside the range of
    double precision (the values are kept, for inspection)."""
    if r.status is not Status.OK:
        return r
    problems = range_problems(r)
    if not problems:
        return r
    return replace(r, status=Status.OUT_OF_RANGE,
                   message="outside double precision at this target: " + "; ".join(problems)
                   + (f" (solver: {r.message})" if r.message else ""))


def out_of_range(*, model_id: str, kind: str, d: int, method: str, T: float, mu: float, reason: str,
                 wall_time: float = 0.0) -> PointResult:
    """The row of a target that cannot be solved in double precision: observables NaN, status
    ``out of range``, ``reason`` as the message."""
    return PointResult(model_id=model_id, kind=kind, d=d, method=method, T=T, mu=mu,
                       status=Status.OUT_OF_RANGE, message=reason, wall_time=wall_time)
