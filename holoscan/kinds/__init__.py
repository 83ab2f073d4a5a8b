"""Model kinds and their registry.

One package per kind (:mod:`.rn`, :mod:`.emd`, :mod:`.charged_scalar`), each holding all of that
kind's code; :mod:`.base` is the contract every kind meets. :data:`KINDS` maps a kind's name to its
class; the allowed kinds and methods (:func:`all_methods`) are derived from it, never listed
elsewhere.

A kind of one's own lives in one Python file anywhere: list it in the environment variable
``HOLOSCAN_KIND_FILES`` (paths separated by the platform's path separator, ``:`` on Linux). Each
file defines one or more :class:`~.base.ModelKind` subclasses and registers them with
:func:`register` at import. The files' contents enter the physics-code hash
(:func:`holoscan.scan.identity.code_hash`), so editing one makes the points it produced stale.
Snakemake and the cluster jobs inherit the variable from the shell that launches the scan.
"""
from __future__ import annotations

import hashlib
import importlib.util
import os
import sys
from pathlib import Path

from .. import validate as v
from ..errors import InputError
from .base import ModelKind, check_kind_class
from .charged_scalar.model import ChargedScalarModel
from .emd.model import EMDModel
from .rn.model import RNModel

#: environment variable naming extra kind files (os.pathsep-separated)
KIND_FILES_ENV = "HOLOSCAN_KIND_FILES"

#: kind name -> model class
KINDS: dict[str, type[ModelKind]] = {}


def register(cls: type[ModelKind]) -> type[ModelKind]:
    """Add a kind class to :data:`KINDS` (usable as a class decorator). A name can be taken once."""
    check_kind_class(cls)
    if cls.kind in KINDS and KINDS[cls.kind] is not cls:
        raise TypeError(f"kind {cls.kind!r} is already registered by {KINDS[cls.kind].__name__}")
    KINDS[cls.kind] = cls
    return cls


for _cls in (RNModel, EMDModel, ChargedScalarModel):
    register(_cls)


def kind_files() -> list[Path]:
    """The extra kind files named by ``HOLOSCAN_KIND_FILES`` (resolved, in the given order)."""
    raw = os.environ.get(KIND_FILES_ENV, "")
    return [Path(p).expanduser().resolve() for p in raw.split(os.pathsep) if p.strip()]


def load_kind_file(path) -> None:
    """Import one kind file (which registers its kinds with :func:`register`); once per path."""
    path = Path(path).expanduser().resolve()
    if not path.is_file():
        raise InputError(KIND_FILES_ENV, str(path), "no such kind file")
    name = "holoscan_user_kind_" + hashlib.sha256(str(path).encode()).hexdigest()[:12]
    if name in sys.modules:
        return
    spec = importlib.util.spec_from_file_location(name, path)
    module = importlib.util.module_from_spec(spec)
    sys.modules[name] = module
    try:
        spec.loader.exec_module(module)
    except Exception:
        del sys.modules[name]
        raise


def _load_kind_files() -> None:
    for path in kind_files():
        load_kind_file(path)


_load_kind_files()


def all_methods() -> tuple[str, ...]:
    """``auto`` and every method some registered kind offers (sorted after ``auto``)."""
    return ("auto",) + tuple(sorted({m for cls in KINDS.values() for m in cls.methods}))


def model_from_block(block, key: str = "model") -> ModelKind:
    """Build a validated model from one config block (a dict). Raises InputError naming the key."""
    v.mapping(block, key)
    kind = v.required(block, "kind", key)
    if not isinstance(kind, str) or kind not in KINDS:
        raise InputError(f"{key}.kind", kind, f"unknown model kind; known kinds: {', '.join(sorted(KINDS))}")
    return KINDS[kind].from_block(block, key)


def kind_class(name: str) -> type[ModelKind] | None:
    """The registered class of kind ``name`` (``None`` if unknown)."""
    return KINDS.get(name)


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


__all__ = ["KINDS", "KIND_FILES_ENV", "ChargedScalarModel", "EMDModel", "ModelKind", "RNModel", "all_methods",
           "kind_class", "kind_files", "load_kind_file", "model_from_block", "models_from_list", "register"]
