"""Solver settings: one validated, hashable record for every solve (the ``solver:`` config block)."""
from __future__ import annotations

from dataclasses import asdict, dataclass

from . import validate as v
from .errors import InputError
from .numerics import ShootSettings


def methods() -> tuple[str, ...]:
    """``auto`` and every method of a registered model kind (:func:`holoscan.kinds.all_methods`)."""
    from .kinds import all_methods

    return all_methods()


#: largest accepted value of each tolerance-like setting (the scan schema states the same maxima)
UPPER_LIMITS = {"rtol": 1e-2, "horizon_offset": 1e-2, "accept_error": 0.1, "fd_step": 0.1}


@dataclass(frozen=True)
class SolverSettings:
    """How a point is solved.

    Parameters
    ----------
    method : str
        ``auto`` (each model kind's default, documented on the kind) or a method of a registered
        kind (:func:`methods`; whether the model's kind offers it is checked per model).
    rtol : float
        Relative tolerance of the ODE integration (absolute tolerance is effectively zero).
    horizon_offset : float
        Radial distance from the horizon where the series hands over to the integrator.
    accept_error : float
        A point is ``ok`` only if its estimated relative error (from a second solve with
        tolerances 100 times tighter) and its field-equation residual are below this.
    fd_step : float
        Relative step of the central differences that give chi2 and cs2 on the shooting path.
    """

    method: str = "auto"
    rtol: float = 1e-10
    horizon_offset: float = 1e-10
    accept_error: float = 1e-8
    fd_step: float = 1e-3

    @classmethod
    def from_block(cls, block, key: str = "solver") -> SolverSettings:
        """Settings from a ``solver:`` block; the same limits (UPPER_LIMITS, rtol >= 1e-13) hold for
        ``holoscan point`` and for scans (the scan schema states the same maxima)."""
        if block is None:
            return cls()
        v.mapping(block, key)
        v.only_keys(block, {"method", "rtol", "horizon_offset", "accept_error", "fd_step"}, key)
        method = block.get("method", "auto")
        known = methods()
        if method not in known:
            raise InputError(f"{key}.method", method, f"unknown method; known: {', '.join(known)}")
        out = cls(method=method)
        vals = {}
        for name, cap in UPPER_LIMITS.items():
            if name in block:
                x = v.number(block[name], f"{key}.{name}", positive=True)
                if x > cap:
                    raise InputError(f"{key}.{name}", block[name], f"must be <= {cap:g}")
                vals[name] = x
        if "rtol" in vals and vals["rtol"] < 1e-13:
            raise InputError(f"{key}.rtol", block["rtol"], "must be >= 1e-13 (double precision limit)")
        return cls(**{**asdict(out), **vals})

    def problems(self, error: float, residual: float) -> list[str]:
        """Why a solve is not ``ok`` (empty when it is): the error estimate and the field-equation
        residual must both be at most ``accept_error``."""
        out = []
        if not error <= self.accept_error:
            out.append(f"estimated error {error:.3g} > accept_error {self.accept_error:g}")
        if not residual <= self.accept_error:
            out.append(f"field-equation residual {residual:.3g} > {self.accept_error:g}")
        return out

    def with_method(self, method: str) -> SolverSettings:
        return SolverSettings(**{**asdict(self), "method": method})

    def shoot_settings(self) -> ShootSettings:
        return ShootSettings(rtol=self.rtol, atol=0.0, horizon_offset=self.horizon_offset)

    def canonical(self) -> dict:
        """Plain dict with sorted keys, for hashing and provenance."""
        return dict(sorted(asdict(self).items()))
