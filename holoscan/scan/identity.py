"""Identity of a grid point: a hash of everything that determines its numbers.

``point_key = sha256(model spec, solver settings, physics-code hash, T, mu)`` (first 20 hex digits).
The physics-code hash covers every Python source of the holoscan package except the scan layer and
the command-line/config readers, so any edit to a model, the equations, the engine or the
thermodynamics makes every point it produced stale.
"""
from __future__ import annotations

import hashlib
import json
from functools import lru_cache
from pathlib import Path

_PKG = Path(__file__).resolve().parents[1]
#: parts of the package that do not change any number (I/O, orchestration, command line)
_NOT_PHYSICS = ("scan", "cli.py", "config.py", "__main__.py")


def physics_files(root: Path = _PKG) -> list[Path]:
    out = []
    for p in sorted(root.rglob("*.py")):
        rel = p.relative_to(root)
        if rel.parts[0] in _NOT_PHYSICS or "__pycache__" in rel.parts:
            continue
        out.append(p)
    return out


@lru_cache(maxsize=None)
def code_hash(root: Path = _PKG) -> str:
    """sha256 over the physics sources (relative path + content), first 16 hex digits."""
    h = hashlib.sha256()
    for p in physics_files(root):
        h.update(p.relative_to(root).as_posix().encode())
        h.update(b"\0")
        h.update(p.read_bytes())
        h.update(b"\0")
    return h.hexdigest()[:16]


def canonical_json(obj) -> str:
    return json.dumps(obj, sort_keys=True, separators=(",", ":"), allow_nan=False)


def model_context(spec: dict, solver: dict, code: str) -> str:
    """The part of a point key shared by all points of one model (computed once per model)."""
    return canonical_json({"code": code, "model": spec, "solver": solver})


def point_key(context: str, T: float, mu: float) -> str:
    h = hashlib.sha256(context.encode())
    h.update(f"|{float(T)!r}|{float(mu)!r}".encode())
    return h.hexdigest()[:20]


def config_hash(canonical: str) -> str:
    return hashlib.sha256(canonical.encode()).hexdigest()[:16]
