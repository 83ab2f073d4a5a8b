"""Integrate one ODE initial-value problem from a regular singular point (a horizon) outward.

Contract of a :class:`ShootingProblem`
-------------------------------------
``rhs(r, y)``
    Right-hand side ``dy/dr``; must accept ``y`` of shape ``(n,)`` and ``(n, k)`` (vectorised).
``start_state(params, eps)``
    The state at ``r = eps`` from a series expansion about the singular point ``r = 0``.
``end_point(params)``
    Where to stop integrating (the boundary region).
``residual(r, y)``
    A dimensionless residual of an equation that the integration does not impose (a constraint);
    zero for an exact solution. Evaluated along the solution to report a field-equation residual.

The engine returns a :class:`Shot` and never raises for integration trouble: the shot's ``ok`` flag
and ``message`` say what went wrong.
"""
from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Protocol

import numpy as np

#: scipy's step-size heuristics divide by ``atol + rtol |y|``; a component that is exactly zero at
#: the start (an unsourced scalar) would give 0/0 with ``atol = 0``. This floor is far below any
#: field value we resolve, so it acts as "effectively zero" absolute tolerance.
_ATOL_FLOOR = 1e-300


class ShootingProblem(Protocol):
    def rhs(self, r, y): ...

    def start_state(self, params, eps: float) -> np.ndarray: ...

    def end_point(self, params) -> float: ...

    def residual(self, r, y) -> np.ndarray: ...


@dataclass(frozen=True)
class ShootSettings:
    """Integration settings.

    Parameters
    ----------
    rtol, atol : float
        Tolerances of the adaptive stepper. ``atol`` should be 0 (or tiny) when fields decay to
        very small values near the boundary.
    method : str
        A :func:`scipy.integrate.solve_ivp` method name (explicit high order: ``"DOP853"``).
    horizon_offset : float
        Distance from the singular point at which the series hands over to the integrator.
    residual_samples : int
        Number of points along the solution where ``residual`` is evaluated.
    """

    rtol: float = 1e-10
    atol: float = 0.0
    method: str = "DOP853"
    horizon_offset: float = 1e-10
    residual_samples: int = 64

    def tighter(self, factor: float = 100.0) -> ShootSettings:
        """Same settings with tolerances divided by ``factor`` (for an error estimate, or for shots
        that are differenced, since differencing divides their error by the step)."""
        return replace(self, rtol=max(self.rtol / factor, 2.3e-14), atol=self.atol / factor)

    def varied(self, rtol_factor: float = 1.0, offset_factor: float = 1.0) -> ShootSettings:
        """Same settings with the tolerances times ``rtol_factor`` (``rtol`` floored at 2.3e-14,
        the double-precision limit of the stepper) and the horizon offset times ``offset_factor``:
        the variants an error estimate compares with."""
        return replace(self, rtol=max(self.rtol * rtol_factor, 2.3e-14), atol=self.atol * rtol_factor,
                       horizon_offset=self.horizon_offset * offset_factor)


@dataclass
class Counters:
    """Work done for one result: right-hand-side evaluations, steps, shots, and the largest
    field-equation residual among the shots the result is made of."""

    nfev: int = 0
    nsteps: int = 0
    shots: int = 0
    residual: float = 0.0


@dataclass(frozen=True)
class Shot:
    """One integration: final state, counters and residual."""

    ok: bool
    message: str
    r_end: float
    y_end: np.ndarray
    nfev: int
    nsteps: int
    residual: float


def shoot(problem: ShootingProblem, params, settings: ShootSettings, *, want_residual: bool = True) -> Shot:
    """Integrate ``problem`` for horizon data ``params`` from the horizon series to its end point."""
    from scipy.integrate import solve_ivp  # imported on first use: keeps job start-up short

    eps = settings.horizon_offset
    try:
        y0 = np.asarray(problem.start_state(params, eps), dtype=float)
        r_end = float(problem.end_point(params))
    except (ValueError, ZeroDivisionError, FloatingPointError) as exc:
        return Shot(False, f"bad horizon data: {exc}", np.nan, np.full(0, np.nan), 0, 0, np.nan)
    if not np.all(np.isfinite(y0)) or not np.isfinite(r_end) or r_end <= eps:
        return Shot(False, "horizon data give no regular start", r_end, y0, 0, 0, np.nan)
    with np.errstate(all="ignore"):
        sol = solve_ivp(
            problem.rhs,
            (eps, r_end),
            y0,
            method=settings.method,
            rtol=settings.rtol,
            atol=max(settings.atol, _ATOL_FLOOR),
            dense_output=want_residual,
        )
    nsteps = max(len(sol.t) - 1, 0)
    y_end = sol.y[:, -1]
    if sol.status != 0 or not np.all(np.isfinite(y_end)):
        return Shot(False, f"integration stopped: {sol.message}", r_end, y_end, sol.nfev, nsteps, np.nan)
    res = np.nan
    if want_residual:
        rs = np.linspace(eps, r_end, settings.residual_samples)
        with np.errstate(all="ignore"):
            res = float(np.nanmax(np.abs(problem.residual(rs, sol.sol(rs)))))
    return Shot(True, "integrated", r_end, y_end, sol.nfev, nsteps, res)
