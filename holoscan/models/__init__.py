"""Model kinds. Each kind is a class with ``from_block`` (validated construction from a config
block), ``methods`` and ``solve(T, mu, settings)``; :func:`model_from_block` dispatches on ``kind``.
"""
from __future__ import annotations

from ..errors import InputError
from .. import validate as v
from .charged_scalar import ChargedScalarModel
from .emd import EMDModel
from .rn import RNModel

#: kind name -> model class
KINDS = {"rn": RNModel, "emd": EMDModel, "charged-scalar": ChargedScalarModel}


def model_from_block(block, key: str = "model"):
    """Build a validated model from one config block (a dict). Raises InputError naming the key."""
    v.mapping(block, key)
    kind = v.required(block, "kind", key)
    if kind not in KINDS:
        raise InputError(f"{key}.kind", kind, f"unknown model kind; known kinds: {', '.join(sorted(KINDS))}")
    return KINDS[kind].from_block(block, key)


def models_from_list(blocks, key: str = "models") -> dict:
    """Validate a list of model blocks; returns ``{id: model}`` in the given order. Ids must be unique."""
    if not isinstance(blocks, list) or not blocks:
        raise InputError(key, blocks, "must be a non-empty list of model blocks")
    out = {}
    for i, block in enumerate(blocks):
        m = model_from_block(block, f"{key}[{i}]")
        if m.id in out:
            raise InputError(f"{key}[{i}].id", m.id, "duplicate model id")
        out[m.id] = m
    return out


__all__ = ["KINDS", "ChargedScalarModel", "EMDModel", "RNModel", "model_from_block", "models_from_list"]
