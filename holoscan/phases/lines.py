"""Transition lines and critical points of one model over the (T, mu) region of its grid.

The records (:class:`LinePoint`, :class:`CriticalPoint`) and the driver :func:`locate`; what is
located is the kind's business (``locate_lines`` of :mod:`holoscan.kinds.base`):

- ``emd`` with a source (:mod:`holoscan.kinds.emd.lines`): first-order points (equal ``Omega``),
  spinodal ``instability`` points and ``crossover`` points at every grid ``|mu|``, and the critical
  endpoint;
- ``emd`` without a source: each fold ``x*`` of ``mu/T`` is an ``instability`` line ``mu = x* T``;
- ``charged-scalar`` (:mod:`holoscan.kinds.charged_scalar.lines`): the ``second-order`` line
  ``T_c(mu)`` from the onset of a normalisable static scalar zero mode;
- ``rn`` and scalar-free ``emd``: a unique, stable brane; no lines.

Units: the config's T and mu; each row has an uncertainty. Rows for negative grid ``mu`` mirror
those at ``|mu|`` (``mu -> -mu`` symmetry). A failure becomes a row with status ``failed`` and the
reason; it never stops the other rows.
"""
from __future__ import annotations

import math
import time
from dataclasses import asdict, dataclass, field

from ..settings import SolverSettings


@dataclass(frozen=True, kw_only=True)
class _Outcome:
    """What every located record carries besides its coordinates: status, reason, cost, extras."""

    status: str = "ok"
    message: str = ""
    shots: int = 0
    wall_time: float = 0.0
    extra: dict = field(default_factory=dict)


@dataclass(frozen=True)
class LinePoint(_Outcome):
    """One located point on a transition line. ``T_err``/``mu_err``: absolute uncertainties;
    ``latent_heat = T (s_high - s_low)`` [E^d], ``rho_jump = rho_high - rho_low`` [E^(d-1)], where
    high/low refer to the high- and low-entropy sides of a first-order point."""

    model_id: str
    type: str  # first-order | instability | crossover | second-order
    method: str
    T: float
    mu: float
    T_err: float = math.nan
    mu_err: float = 0.0
    latent_heat: float = math.nan
    rho_jump: float = math.nan
    s_high: float = math.nan
    s_low: float = math.nan

    def to_dict(self) -> dict:
        out = asdict(self)
        out["mu_over_T"] = self.mu / self.T if self.T > 0 else math.nan
        return out


@dataclass(frozen=True)
class CriticalPoint(_Outcome):
    """Where a first-order line ends (latent heat and Omega gap -> 0, chi2 -> infinity)."""

    model_id: str
    method: str
    T: float
    mu: float
    T_err: float
    mu_err: float

    def to_dict(self) -> dict:
        return asdict(self)


def mirror(rows: list[LinePoint], negative: bool) -> list[LinePoint]:
    if not negative:
        return rows
    from dataclasses import replace

    return rows + [replace(r, mu=-r.mu, rho_jump=-r.rho_jump) for r in rows if r.mu != 0.0]


def has_lines(model) -> bool:
    """True for a model with lines to locate (its kind says)."""
    return model.has_lines()


def locate(model, settings: SolverSettings, points) -> tuple[list[LinePoint], list[CriticalPoint]]:
    """Every line point and critical point of ``model`` over the region of its grid ``points``
    (a sequence of ``(T, mu)``)."""
    if not model.has_lines():
        return [], []
    Ts = sorted({T for T, _ in points})
    mus = sorted({abs(mu) for _, mu in points})
    negative = any(mu < 0 for _, mu in points)
    rows, cps = model.locate_lines(settings, Ts, mus)
    return mirror(rows, negative), cps


def failed_point(model_id, type_, method, T, mu, exc, t0, cnt=None) -> LinePoint:
    return LinePoint(model_id, type_, method, T, mu, status="failed", message=f"{type(exc).__name__}: {exc}",
                     shots=cnt.shots if cnt else 0, wall_time=time.perf_counter() - t0)
