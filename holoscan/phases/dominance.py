"""The dominant phase at one (T, mu), decided from the branches found there (no solving).

Rules (grand canonical ensemble: at fixed T and mu the equilibrium state minimises the grand
potential density ``Omega = -P``):

- only branches whose solve is ``ok`` take part; the others get the flag ``unknown``;
- a branch is *locally stable* when the Hessian of ``P`` in ``(T, mu)`` is positive definite
  (positive specific heat and ``chi2 > 0``; the ``stability`` column);
- the *dominant* branch is the locally stable one with the lowest ``Omega``; it is flagged
  ``stable``. Other locally stable branches are ``metastable``; the rest ``unstable``.
  If no branch is locally stable there is no dominant branch.

Phase labels: a model kind may name its branches (``extra["phase"]``, e.g. ``normal`` and
``condensed``); otherwise a lone branch is ``unique`` and coexisting ones are named by entropy
density, ``high-entropy``, ``intermediate`` and ``low-entropy`` (every branch with a finite
entropy is named, whatever its status).
"""
from __future__ import annotations

from dataclasses import replace

from ..result import PointResult, Status

#: the labels given to branches by entropy order where the kind names no phase: one branch, the
#: highest, those between and the lowest entropy density (names of branches, not of phases)
UNIQUE, HIGH_ENTROPY, INTERMEDIATE, LOW_ENTROPY = ENTROPY_ORDER_LABELS = (
    "unique", "high-entropy", "intermediate", "low-entropy")


def _labels(results: list[PointResult]) -> dict[int, str]:
    """Labels of the branches with a finite entropy (any status: a branch that is only short of
    the error bar keeps its name, although it takes no part in the dominance)."""
    have = [r for r in results if r.s == r.s]
    named = {id(r): r.extra.get("phase") for r in have if r.extra.get("phase")}
    if len(named) == len(have):
        return named
    if len(have) == 1:
        return {id(have[0]): UNIQUE}
    order = sorted(have, key=lambda r: -r.s)
    out = {id(r): INTERMEDIATE for r in order}
    out[id(order[0])] = HIGH_ENTROPY
    out[id(order[-1])] = LOW_ENTROPY
    return out


def dominant(results: list[PointResult]) -> PointResult | None:
    """The locally stable ``ok`` branch with the lowest Omega (ties: the lower branch index)."""
    cands = [r for r in results if r.status is Status.OK and r.stability == "stable"]
    return min(cands, key=lambda r: (r.Omega, r.branch)) if cands else None


def classify(results: list[PointResult]) -> list[PointResult]:
    """The same results with ``phase``, ``phase_flag`` and ``dominant`` filled in."""
    labels = _labels(results)
    win = dominant(results)
    out = []
    for r in results:
        if r.status is not Status.OK:
            flag = "unknown"
        elif r.stability != "stable":
            flag = "unstable"
        else:
            flag = "stable" if r is win else "metastable"
        out.append(replace(r, phase=labels.get(id(r), r.extra.get("phase", "")), phase_flag=flag, dominant=r is win))
    return out
