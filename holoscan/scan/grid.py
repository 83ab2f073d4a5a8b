"""Grid axes of a scan and their expansion into (T, mu) points.

An axis is either ``{min, max, num, spacing: linear|log}`` or a plain list of values. Every grid
value is rounded to 12 significant digits, so that the same physical value always gets the same
point key: a refined axis (``num`` 11 -> 21 on the same range) reproduces the old values exactly
and only the new points are solved. ``mu`` may instead be given as ``mu_over_T`` ratios, then
``mu = ratio * T`` at each T (also rounded).
"""
from __future__ import annotations

import math

import numpy as np

from .. import validate as v
from ..errors import InputError


def canon(x: float) -> float:
    """Round to 12 significant digits (the identity of a grid value)."""
    return float(f"{float(x):.12g}") + 0.0  # + 0.0 turns -0.0 into 0.0


def axis_values(spec, key: str, *, positive: bool = False) -> list[float]:
    """Expand one axis spec into sorted unique canonical values. Raises InputError naming ``key``."""
    if isinstance(spec, list):
        vals = [v.number(x, f"{key}[{i}]", positive=positive) for i, x in enumerate(spec)]
    else:
        lo = v.number(spec["min"], f"{key}.min", positive=positive)
        hi = v.number(spec["max"], f"{key}.max", positive=positive)
        num = v.integer(spec["num"], f"{key}.num", minimum=1)
        spacing = spec.get("spacing", "linear")
        if hi < lo:
            raise InputError(f"{key}.max", spec["max"], f"must be >= {key}.min = {spec['min']!r}")
        if num == 1 and hi != lo:
            raise InputError(f"{key}.num", num, "must be >= 2 when min != max")
        if spacing == "log":
            if not lo > 0:
                raise InputError(f"{key}.min", spec["min"], "must be > 0 for spacing: log")
            vals = list(np.geomspace(lo, hi, num)) if num > 1 else [lo]
        else:
            vals = list(np.linspace(lo, hi, num)) if num > 1 else [lo]
    out = sorted({canon(x) for x in vals})
    if positive and not all(x > 0 for x in out):
        raise InputError(key, spec, "all values must be > 0")
    return out


def grid_points(grid: dict, key: str = "grid") -> list[tuple[float, float]]:
    """All ``(T, mu)`` points of one grid block, sorted by T then mu, without duplicates."""
    Ts = axis_values(grid["T"], f"{key}.T", positive=True)
    if "mu" in grid:
        mus = axis_values(grid["mu"], f"{key}.mu")
        pts = {(T, mu) for T in Ts for mu in mus}
    else:
        ratios = axis_values(grid["mu_over_T"], f"{key}.mu_over_T")
        pts = {(T, canon(r * T)) for T in Ts for r in ratios}
    if not all(math.isfinite(m) for _, m in pts):
        raise InputError(key, grid, "mu values must be finite")
    return sorted(pts)
