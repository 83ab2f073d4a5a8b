"""The contract of a model kind.

A model kind is a family of bulk theories that holoscan can solve (``rn``, ``emd``,
``charged-scalar``, ...). Each kind is one class derived from :class:`ModelKind`, and one instance
is one model of a scan (one block of the config's ``models:`` list). Everything outside
``holoscan/kinds/`` talks to a model only through this contract: nothing there switches on a
kind's name.

What a kind must provide
------------------------
``kind`` : str (class attribute)
    The name used in config blocks (``kind: emd``). Lower case, digits and ``-``.
``methods`` : tuple of str (class attribute)
    The solution methods the kind offers (``settings.method``); the first is not special.
``default_method`` : str (class attribute)
    The method used when the settings say ``auto``; one of ``methods``.
``from_block(block, key)`` : classmethod
    Build a validated model from one config block (a dict). Every bad key or value raises
    :class:`holoscan.errors.InputError` naming ``key`` + the block's key, before any solve.
``spec()``
    The canonical parameter dict (JSON-able, sorted keys, includes ``id`` and ``kind``) that
    identifies the physics of the model; it enters the point keys (:mod:`holoscan.scan.identity`),
    so two blocks with the same physics must give the same spec.
``d`` : int
    The boundary spacetime dimension (bulk AdS_{d+1}). ``T``, ``mu`` are in the model's energy unit,
    ``s``, ``rho`` in its (d-1)-th power, ``epsilon``, ``P`` in its d-th power.
``solve(T, mu, settings)``
    Every branch at one target ``(T, mu)`` as a list of :class:`holoscan.result.PointResult`
    (empty: no brane there). Numerical trouble is a result with a status and a message, never an
    exception; only bad input raises (and only ``InputError``).

What a kind may override (the defaults are stated)
---------------------------------------------------
``solve_many(targets, settings)``
    A list of result lists, one per target. Default: :meth:`solve` one target at a time. A kind
    that solves targets together (a shared atlas) overrides it and sets ``batched = True``; the
    numbers of a target must then not depend on which other targets share the call.
``batched`` : bool
    ``True`` when :meth:`solve_many` is faster than one :meth:`solve` per target (callers then
    hand it a whole chunk). Default ``False``.
``energy_scale`` : float
    The value of the model's energy unit in the config's units of T and mu. Default 1.
``has_lines()`` / ``locate_lines(settings, Ts, mus)`` / ``finds_critical_points()``
    The transition lines the kind can locate over a grid region (sorted temperatures ``Ts`` and
    non-negative ``mus``, config units): ``(line points, critical points)`` as
    :class:`holoscan.phases.lines.LinePoint` and :class:`~holoscan.phases.lines.CriticalPoint`
    records, failures as records with a status. Default: no lines.
``has_onset`` / ``onset(mu, settings)``
    A scalar condensation onset ``T_c(mu)`` (for ``holoscan point --onset``). Default: none.
``figures`` : tuple of str (class attribute)
    The per-model figures a scan draws for this kind, from ``phase-diagram``, ``eos`` and
    ``condensate`` (see :mod:`holoscan.scan.figures`). Default: the first two.
``KEYS``, ``formulas`` : tuple of str (class attributes)
    The keys a block of this kind may have, and those holding formulas in ``phi`` (parsed by
    :func:`holoscan.expr.parse`). A family (``vary:`` in a scan config) varies numeric keys among
    ``KEYS`` and substitutes ``params`` into ``formulas``. Defaults: none.
``shares_state(settings)`` / ``shared_state(targets, settings)`` / ``adopt_shared_state(state, settings)``
    What the solves of many targets share and is costly to build (e.g. an atlas of the horizon-
    data map), as a dict of numpy arrays, built once for all of a scan's targets of the model and
    adopted by every job that solves some of them. Adopting it must not change any number (only
    the time), and a state made for other settings is refused (ValueError). Default: ``None`` and
    nothing to adopt.
``unit_facts(block, d)`` : classmethod
    What the figures need to label units, from a config block alone (no solve): a dict with
    ``conformal`` (bool: T and mu in any unit E) and ``delta`` (the condensate's dimension or
    ``None``). Default: conformal, no condensate.

Registering
-----------
Built-in kinds are listed in :mod:`holoscan.kinds`; a kind of one's own, in a file outside the
package, is registered with ``HOLOSCAN_KIND_FILES`` (see :mod:`holoscan.kinds`). The registry
derives the allowed kinds and methods from the classes, so nothing else needs editing.
"""
from __future__ import annotations

from typing import ClassVar

from ..settings import SolverSettings


class ModelKind:
    """Base class of every model kind; its module docstring is the contract."""

    kind: ClassVar[str] = ""
    methods: ClassVar[tuple[str, ...]] = ()
    default_method: ClassVar[str] = ""
    batched: ClassVar[bool] = False
    has_onset: ClassVar[bool] = False
    figures: ClassVar[tuple[str, ...]] = ("phase-diagram", "eos")
    KEYS: ClassVar[tuple[str, ...]] = ()
    formulas: ClassVar[tuple[str, ...]] = ()

    # -- required ------------------------------------------------------------------------------
    @classmethod
    def from_block(cls, block: dict, key: str = "model") -> ModelKind:
        raise NotImplementedError(f"kind {cls.kind!r} must define from_block")

    def spec(self) -> dict:
        raise NotImplementedError(f"kind {self.kind!r} must define spec")

    def solve(self, T: float, mu: float, settings: SolverSettings = SolverSettings()) -> list:
        raise NotImplementedError(f"kind {self.kind!r} must define solve")

    # -- optional, with defaults -----------------------------------------------------------------
    @property
    def energy_scale(self) -> float:
        return 1.0

    def solve_many(self, targets, settings: SolverSettings = SolverSettings()) -> list[list]:
        """One list of results per target ``(T, mu)``; by default :meth:`solve` one by one."""
        return [self.solve(T, mu, settings) for T, mu in targets]

    def has_lines(self) -> bool:
        return False

    def finds_critical_points(self) -> bool:
        return False

    def locate_lines(self, settings: SolverSettings, Ts: list[float], mus: list[float]) -> tuple[list, list]:
        return [], []

    def onset(self, mu: float, settings: SolverSettings = SolverSettings()) -> dict:
        raise NotImplementedError(f"kind {self.kind!r} has no condensation onset")

    def shares_state(self, settings: SolverSettings = SolverSettings()) -> bool:
        """True when :meth:`shared_state` has something to share with these settings."""
        return False

    def shared_state(self, targets, settings: SolverSettings = SolverSettings()) -> dict | None:
        return None

    def adopt_shared_state(self, state: dict, settings: SolverSettings = SolverSettings()) -> None:
        return None

    @classmethod
    def unit_facts(cls, block: dict, d: int) -> dict:
        return {"conformal": True, "delta": None}


REQUIRED = ("from_block", "spec", "solve")


def check_kind_class(cls) -> None:
    """Raise TypeError when ``cls`` does not meet the contract (checked when it is registered)."""
    if not (isinstance(cls, type) and issubclass(cls, ModelKind)):
        raise TypeError(f"{cls!r} is not a ModelKind subclass")
    name = cls.kind
    if not isinstance(name, str) or not name or not all(c.islower() or c.isdigit() or c == "-" for c in name):
        raise TypeError(f"{cls.__name__}.kind = {name!r}: must be a non-empty name of lower-case letters, digits, '-'")
    for attr in REQUIRED:
        if getattr(cls, attr) is getattr(ModelKind, attr):
            raise TypeError(f"kind {name!r} ({cls.__name__}) does not define {attr}")
    if not cls.methods or cls.default_method not in cls.methods:
        raise TypeError(f"kind {name!r}: default_method {cls.default_method!r} is not one of methods {cls.methods!r}")
    unknown = set(cls.figures) - {"phase-diagram", "eos", "condensate"}
    if unknown:
        raise TypeError(f"kind {name!r}: unknown figures {sorted(unknown)}")


__all__ = ["ModelKind", "check_kind_class"]
