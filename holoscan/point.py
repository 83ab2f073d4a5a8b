"""Public entry point: solve one model at one requested (T, mu), every branch.

Every row leaving this module is within double precision or says it is not (status ``out of
range``, :mod:`holoscan.result`): a target whose powers ``T^(d-2)``, ``T^(d-1)``, ``T^d`` (by
which the reduced ratios divide) are not ordinary doubles is not solved; a floating-point overflow
or division by zero inside a solve becomes that target's row; an ``ok`` row holding a number that
is NaN, infinite or subnormal is demoted (:func:`holoscan.result.checked`). The same rule holds for
every model kind.
"""
from __future__ import annotations

import time

from . import validate as v
from .errors import InputError
from .phases.dominance import classify
from .result import PointResult, checked, is_ordinary, out_of_range
from .settings import SolverSettings

#: exceptions of floating-point range inside a solve (overflow, division by zero, a trapped
#: floating-point error); any other exception is a bug and propagates
RANGE_ERRORS = (OverflowError, ZeroDivisionError, FloatingPointError)


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


def dimension(model) -> int:
    """Boundary spacetime dimension d of a model (part of the kind contract)."""
    return int(model.d)


def range_reason(T: float, d: int) -> str:
    """Why the target temperature cannot be reported in double precision ('' when it can): the
    reduced ratios divide by ``T^(d-2)``, ``T^(d-1)`` and ``T^d``, which must be ordinary doubles."""
    for n in (d, d - 1, d - 2):
        try:
            p = T**n
        except OverflowError:
            p = float("inf")
        if not (is_ordinary(p) and p != 0.0):
            return (f"T = {T!r} is outside double precision for d = {d}: T^{n} = {p!r} "
                    f"{'overflows' if abs(p) > 1.0 else 'underflows'}, so s/T^(d-1), P/T^d "
                    "and chi2/T^(d-2) cannot be formed")
    return ""


def _guarded(model, T: float, mu: float, settings: SolverSettings) -> list[PointResult]:
    """``model.solve`` with the double-precision rules of the module docstring."""
    d = dimension(model)
    common = dict(model_id=model.id, kind=model.kind, d=d, method=settings.method, T=T, mu=mu)
    reason = range_reason(T, d)
    if reason:
        return [out_of_range(**common, reason=reason)]
    t0 = time.perf_counter()
    try:
        results = model.solve(T, mu, settings)
    except RANGE_ERRORS as exc:
        return [out_of_range(**common, wall_time=time.perf_counter() - t0,
                             reason=f"floating-point range exceeded at T = {T!r}, mu = {mu!r} "
                                    f"({type(exc).__name__}: {exc})")]
    return [checked(r) for r in results]


def solve_point(model, T, mu, settings: SolverSettings | None = None) -> list[PointResult]:
    """Solve ``model`` at temperature ``T`` and chemical potential ``mu``.

    Returns one :class:`~holoscan.result.PointResult` per branch found (a one-element list for a
    model with a unique brane), each with its phase label and flag (stable, metastable, unstable;
    :mod:`holoscan.phases.dominance`). Numerical trouble is reported in each result's ``status`` and
    ``message``; only invalid input raises :class:`~holoscan.errors.InputError`, before any work.
    A target beyond double precision gives rows of status ``out of range`` (module docstring).
    """
    T, mu = check_target(T, mu)
    settings = resolve_method(model, settings or SolverSettings())
    return classify(_guarded(model, T, mu, settings))


def solve_points(model, targets, settings: SolverSettings | None = None) -> list[list[PointResult]]:
    """:func:`solve_point` for many targets ``[(T, mu), ...]`` of one model: one list per target.

    A kind that solves targets together (``batched``, e.g. ``emd`` through its atlas) gets them in
    one ``solve_many`` call; others are solved one by one. Targets are validated before any work.
    """
    targets = [check_target(T, mu, key_T=f"targets[{k}].T", key_mu=f"targets[{k}].mu")
               for k, (T, mu) in enumerate(targets)]
    settings = resolve_method(model, settings or SolverSettings())
    many = model.solve_many if model.batched else None
    d = dimension(model)
    inside = [k for k, (T, _) in enumerate(targets) if not range_reason(T, d)]
    rows = {k: _guarded(model, *targets[k], settings) for k in range(len(targets)) if k not in inside}
    if many is None:
        rows.update({k: _guarded(model, *targets[k], settings) for k in inside})
    elif inside:
        try:
            batch = many([targets[k] for k in inside], settings)
        except RANGE_ERRORS:  # one target is responsible: find it, one by one
            batch = [_guarded(model, *targets[k], settings) for k in inside]
        rows.update({k: [checked(r) for r in rs] for k, rs in zip(inside, batch)})
    return [classify(rows[k]) for k in range(len(targets))]
