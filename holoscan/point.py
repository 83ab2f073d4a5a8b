"""Public entry point: solve one model at one requested (T, mu), every branch."""
from __future__ import annotations

from . import validate as v
from .errors import InputError
from .phases.dominance import classify
from .result import PointResult
from .settings import SolverSettings


def check_target(T, mu, *, key_T: str = "T", key_mu: str = "mu") -> tuple[float, float]:
    """Validate a target: ``T`` finite and > 0, ``mu`` finite (any sign)."""
    return v.number(T, key_T, positive=True), v.number(mu, key_mu)


def resolve_method(model, settings: SolverSettings, key: str = "solver.method") -> SolverSettings:
    """Replace ``auto`` by the model kind's default and check the kind offers the method."""
    method = model.default_method if settings.method == "auto" else settings.method
    if method not in model.methods:
        raise InputError(key, settings.method,
                         f"model kind '{model.kind}' offers methods: {', '.join(model.methods)}")
    return settings.with_method(method)


def solve_point(model, T, mu, settings: SolverSettings | None = None) -> list[PointResult]:
    """Solve ``model`` at temperature ``T`` and chemical potential ``mu``.

    Returns one :class:`~holoscan.result.PointResult` per branch found (a one-element list for a
    model with a unique brane), each with its phase label and flag (stable, metastable, unstable;
    :mod:`holoscan.phases.dominance`). Numerical trouble is reported in each result's ``status`` and
    ``message``; only invalid input raises :class:`~holoscan.errors.InputError`, before any work.
    """
    T, mu = check_target(T, mu)
    settings = resolve_method(model, settings or SolverSettings())
    return classify(model.solve(T, mu, settings))


def solve_points(model, targets, settings: SolverSettings | None = None) -> list[list[PointResult]]:
    """:func:`solve_point` for many targets ``[(T, mu), ...]`` of one model: one list per target.

    A kind that can solve targets together (``model.solve_many``, e.g. ``emd`` through its atlas)
    does so in one batch; others are solved one by one. Targets are validated before any work.
    """
    targets = [check_target(T, mu, key_T=f"targets[{k}].T", key_mu=f"targets[{k}].mu")
               for k, (T, mu) in enumerate(targets)]
    settings = resolve_method(model, settings or SolverSettings())
    many = getattr(model, "solve_many", None)
    if many is None:
        return [classify(model.solve(T, mu, settings)) for T, mu in targets]
    return [classify(rs) for rs in many(targets, settings)]
