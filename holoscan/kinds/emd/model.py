"""Model kind ``emd``: Einstein-Maxwell-dilaton black branes in five bulk dimensions (d = 4).

Lagrangian density (L = 1)::

    1/(2 kappa^2) [ R - (1/2)(d phi)^2 - V(phi) - f(phi) F^2 / 4 ]

``V`` and ``f`` are user-given expressions in ``phi`` (parsed by :mod:`holoscan.expr`, never
evaluated as code; their derivatives are exact). Requirements, checked before any solve:
``V(0) = -12`` (AdS with L = 1), ``V'(0) = 0``, ``f(0) > 0``, and the scalar mass
``m^2 = V''(0) = Delta (Delta - 4)`` in the window ``-4 <= m^2 < 0`` (``2 <= Delta < 4``), unless
the model has no scalar dynamics at all (``V`` and ``f`` constant), which is Einstein-Maxwell:
``V = -12``, ``f = 1`` is the ``rn`` model with ``d = 4`` and ``e^2 = 2 kappa^2 / f``.

``source: true`` (default): the scalar's source ``J`` breaks conformal symmetry and sets the unit of
energy, ``J^(1/(4-Delta)) = 1``; ``energy_scale`` (default 1) is the value of that unit in the
units of the config's T and mu, and all outputs are in the config's units. The pressure comes from
the first law (two integration routes, :mod:`holoscan.kinds.emd.pressure`).

``source: false`` keeps the dual operator unsourced: the theory stays conformal, ``mu/T`` is its
only parameter and the branes form a family with ``epsilon = 3 P`` and ``P = (T s + mu rho)/4``.
Units: any energy unit E, as for ``rn``.
"""
from __future__ import annotations

import json
import math
from dataclasses import dataclass, replace

import numpy as np

from ... import validate as v
from ...bulk.charged_brane import ChargedBrane
from ...bulk.conformal import solve_unsourced
from ...errors import InputError
from ...expr import ParsedCoupling
from ...numerics.memo import Memo
from ...result import PointResult, Status
from ...settings import SolverSettings
from ..base import ModelKind
from .batch import batch_solver
from .lines import locate_emd_lines
from .pointwise import shooter_for, solve_family, solve_sourced
from .shooter import D_BOUNDARY

#: parsed couplings by (text, config key); see :mod:`holoscan.numerics.memo`
_COUPLINGS = Memo("emd parsed couplings", maxsize=256)


def _parsed(text: str, key: str) -> ParsedCoupling:
    """Parse (and differentiate) a coupling once per process, not once per point."""
    return _COUPLINGS.get((text, key), lambda: ParsedCoupling(text, key))


@dataclass(frozen=True)
class EMDModel(ModelKind):
    """Einstein-Maxwell-dilaton model; see the module docstring."""

    id: str
    kappa_sq: float
    V: str
    f: str
    source: bool = False
    energy_scale: float = 1.0

    kind = "emd"
    methods = ("atlas", "shooting")
    default_method = "atlas"
    batched = True
    d = D_BOUNDARY
    KEYS = ("id", "kind", "kappa_sq", "V", "f", "source", "energy_scale")
    formulas = ("V", "f")

    @classmethod
    def from_block(cls, block: dict, key: str = "model") -> EMDModel:
        v.only_keys(block, set(cls.KEYS), key)
        m = cls(
            id=v.name(v.required(block, "id", key), f"{key}.id"),
            kappa_sq=v.number(v.required(block, "kappa_sq", key), f"{key}.kappa_sq", positive=True),
            V=v.text(v.required(block, "V", key), f"{key}.V"),
            f=v.text(v.required(block, "f", key), f"{key}.f"),
            source=block.get("source", True),
            energy_scale=v.number(block.get("energy_scale", 1.0), f"{key}.energy_scale", positive=True),
        )
        if not isinstance(m.source, bool):
            raise InputError(f"{key}.source", m.source, "must be true or false")
        m.check(key)
        return m

    # -- parsed couplings and checks ------------------------------------------------------------------
    def couplings(self, key: str = "model"):
        return _parsed(self.V, f"{key}.V"), _parsed(self.f, f"{key}.f")

    def check(self, key: str = "model") -> None:
        V, f = self.couplings(key)
        V0, V1, V2 = (float(x) for x in V.derivs(0.0))
        f0 = float(f.derivs(0.0)[0])
        if not abs(V0 + 12.0) <= 1e-9:
            raise InputError(f"{key}.V", self.V, f"V(0) = {V0:.12g}, must be -12 (AdS radius L = 1)")
        if not abs(V1) <= 1e-9:
            raise InputError(f"{key}.V", self.V, f"V'(0) = {V1:.6g}, must be 0 (phi = 0 must be an extremum)")
        if not (f0 > 0 and math.isfinite(f0)):
            raise InputError(f"{key}.f", self.f, f"f(0) = {f0:.6g}, must be > 0")
        if self.scalar_free():
            return
        if not (-4.0 - 1e-12 <= V2 < 0.0):
            raise InputError(f"{key}.V", self.V, f"V''(0) = m^2 = {V2:.6g} gives no operator dimension "
                             "Delta = 2 + sqrt(4 + m^2) in [2, 4): need -4 <= m^2 < 0")
        if self.source and V2 <= -4.0 + 1e-9:
            raise InputError(f"{key}.source", True, "a sourced scalar needs Delta > 2 (m^2 > -4); "
                             "at the Breitenlohner-Freedman bound use source: false")

    def scalar_free(self) -> bool:
        """True when V and f are constants (the scalar decouples: Einstein-Maxwell)."""
        V, f = self.couplings()
        probe = np.array([-2.0, -0.5, 0.3, 1.7])
        return bool(np.all(V.derivs(probe)[1] == 0.0) and np.all(f.derivs(probe)[1] == 0.0))

    @property
    def delta(self) -> float:
        V2 = float(self.couplings()[0].derivs(0.0)[2])
        return 2.0 + math.sqrt(max(4.0 + V2, 0.0))

    def spec(self) -> dict:
        return {"V": self.V, "energy_scale": self.energy_scale, "f": self.f, "id": self.id,
                "kappa_sq": self.kappa_sq, "kind": self.kind, "source": self.source}

    # -- solving -------------------------------------------------------------------------------------
    def solve(self, T: float, mu: float, settings: SolverSettings = SolverSettings()) -> list[PointResult]:
        V, f = self.couplings()
        if self.scalar_free():
            brane = ChargedBrane(D_BOUNDARY, V, f)
            rows = [solve_unsourced(brane, self.kappa_sq, T, mu, settings, model_id=self.id, kind=self.kind)]
        elif settings.method in ("atlas", "auto"):
            return self.solve_many([(T, mu)], settings)[0]
        elif self.source:
            rows = solve_sourced(self, shooter_for(self, V, f), T, mu, settings)
        else:
            rows = solve_family(self, shooter_for(self, V, f), T, mu, settings)
        return [self.with_transport(r) for r in rows]

    def with_transport(self, r: PointResult) -> PointResult:
        """``r`` with ``eta_over_s = 1/(4 pi)`` (Kovtun, Son & Starinets 2005: any two-derivative
        Einstein action) and ``sigma``, the conductivity that stays finite at nonzero density: the
        horizon value ``f(phi_h) e^((d-3) A_h)/(2 kappa^2)``, with ``e^((d-1) A_h) = s kappa^2/(2 pi)``
        (the Maxwell term is ``f F^2/4`` inside the ``1/(2 kappa^2)`` of the action), times
        ``(s T/(epsilon + P))^2`` (Hartnoll 2009, Class. Quant. Grav. 26, 224002; DeWolfe, Gubser &
        Rosen 2011, Phys. Rev. D 84, 126014). Units E^(d-3) = E. NaN where the row has no horizon
        scalar or no observables."""
        if r.status is not Status.OK:
            return r
        d, k2 = D_BOUNDARY, self.kappa_sq
        phi_h = 0.0 if self.scalar_free() else r.extra.get("horizon_phi0", math.nan)
        _, f = self.couplings()
        w = r.T * r.s + r.mu * r.rho
        with np.errstate(all="ignore"):
            f_h = float(f.derivs(float(phi_h))[0]) if math.isfinite(phi_h) else math.nan
            horizon = f_h / (2 * k2) * (r.s * k2 / (2 * math.pi)) ** ((d - 3) / (d - 1))
            sigma = horizon * (r.T * r.s / w) ** 2 if w else math.nan
        return replace(r, sigma=sigma, eta_over_s=1 / (4 * math.pi))

    def solve_many(self, targets, settings: SolverSettings = SolverSettings()) -> list[list[PointResult]]:
        """Every brane at each target ``(T, mu)``: one list of results per target. Method ``atlas``
        solves them together (:mod:`holoscan.kinds.emd.batch`); others one by one."""
        if settings.method == "auto":
            settings = settings.with_method(self.default_method)
        if settings.method != "atlas" or self.scalar_free():
            return [self.solve(T, mu, settings) for T, mu in targets]
        V, f = self.couplings()
        sh = shooter_for(self, V, f)
        T, mu = (np.array([t[k] for t in targets], dtype=float) for k in (0, 1))
        return [[self.with_transport(r) for r in rows] for rows in batch_solver(self, sh, settings).solve(T, mu)]

    # -- the kind contract's optional parts ------------------------------------------------------------
    def has_lines(self) -> bool:
        """Lines exist when the scalar is dynamical (first-order, crossover, spinodals or folds)."""
        return not self.scalar_free()

    def finds_critical_points(self) -> bool:
        return bool(self.source) and not self.scalar_free()

    def locate_lines(self, settings: SolverSettings, Ts, mus):
        """See :mod:`.lines`."""
        if self.scalar_free():
            return [], []
        return locate_emd_lines(self, settings, Ts, mus)

    def _atlas_solver(self, settings: SolverSettings):
        """The batch solver (and so the atlas) ``solve_many`` uses with these settings, or None."""
        if settings.method == "auto":
            settings = settings.with_method(self.default_method)
        if settings.method != "atlas" or self.scalar_free():
            return None
        V, f = self.couplings()
        return batch_solver(self, shooter_for(self, V, f), settings)

    def shares_state(self, settings: SolverSettings = SolverSettings()) -> bool:
        """Method ``atlas`` with a dynamical scalar: the atlas is shared."""
        method = self.default_method if settings.method == "auto" else settings.method
        return method == "atlas" and not self.scalar_free()

    def shared_state(self, targets, settings: SolverSettings = SolverSettings()) -> dict | None:
        """The atlas cells that the roots of all ``targets`` need (built here, once), as arrays."""
        solver = self._atlas_solver(settings)
        if solver is None or not len(targets):
            return None
        T, mu = (np.array([t[k] for t in targets], dtype=float) for k in (0, 1))
        solver.roots(T, mu)
        return {**solver.map.atlas.state(), "made_for": np.array(self._fingerprint(solver.settings))}

    def _fingerprint(self, settings: SolverSettings) -> str:
        """What an atlas depends on: the model's physics (not its id) and the solver settings."""
        spec = {k: v for k, v in self.spec().items() if k != "id"}
        return json.dumps({"model": spec, "solver": settings.canonical()}, sort_keys=True)

    def adopt_shared_state(self, state: dict, settings: SolverSettings = SolverSettings()) -> None:
        """Adopt atlas cells built elsewhere (same model and settings; numbers unchanged)."""
        solver = self._atlas_solver(settings)
        if solver is None:
            return
        if str(state.get("made_for", "")) != self._fingerprint(solver.settings):
            raise ValueError("atlas state made with other settings or for another model")
        solver.map.atlas.adopt(state)

    @classmethod
    def unit_facts(cls, block: dict, d: int) -> dict:
        """Sourced models are in units of the source scale; unsourced ones are conformal."""
        return {"conformal": not bool(block.get("source", True)), "delta": None}
