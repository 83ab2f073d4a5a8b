"""Identity of a grid point: a hash of everything that determines its numbers.

``point_key = sha256(model spec, solver settings, physics-code hash, T, mu)`` (first 20 hex digits).

The physics-code hash covers the named physics parts of the package, :data:`PHYSICS`: the model
kinds (``kinds/``), the generic numerics (``numerics/``), the bulk field equations (``bulk/``), the
phase structure (``phases/``), the coupling parser (``expr.py``), the thermodynamic identities
(``thermo.py``), the solver settings and their defaults (``settings.py``), the result record and its
status rules (``result.py``) and the solve driver (``point.py``); plus every extra kind file named
by ``HOLOSCAN_KIND_FILES``. Any edit there makes every point it produced stale. Nothing else
changes a number (the scan layer, the command line, the config reader, the validators), so a new
module is not physics until it lives in one of these places.
"""
from __future__ import annotations

import hashlib
import json
from functools import cache
from pathlib import Path

_PKG = Path(__file__).resolve().parents[1]
#: the parts of the package whose content determines the numbers (folders and single files)
PHYSICS = ("bulk", "kinds", "numerics", "phases", "expr.py", "point.py", "result.py", "settings.py", "thermo.py")


def physics_files(root: Path = _PKG) -> list[Path]:
    """The package's physics sources, sorted (every ``*.py`` of the :data:`PHYSICS` parts)."""
    out = []
    for part in PHYSICS:
        p = root / part
        if p.is_dir():
            out += [q for q in p.rglob("*.py") if "__pycache__" not in q.parts]
        elif p.is_file():
            out.append(p)
    return sorted(out)


def _kind_files() -> list[Path]:
    from ..kinds import kind_files

    return kind_files()


@cache
def code_hash(root: Path = _PKG) -> str:
    """sha256 over the physics sources (relative path + content) and the extra kind files (name +
    content), first 16 hex digits."""
    h = hashlib.sha256()
    for p in physics_files(root):
        h.update(p.relative_to(root).as_posix().encode())
        h.update(b"\0")
        h.update(p.read_bytes())
        h.update(b"\0")
    for p in _kind_files():
        h.update(b"kind file:" + p.name.encode())
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


def point_keys(context: str, points) -> list[str]:
    """:func:`point_key` of every ``(T, mu)`` in ``points``, hashing the shared context once."""
    base = hashlib.sha256(context.encode())
    shown: dict = {}                     # repr of each nonzero grid value, formatted once

    def text(x) -> str:
        t = shown.get(x)
        if t is None:
            t = repr(float(x))
            if x:                        # 0.0 == -0.0 as dict keys, but their reprs differ
                shown[x] = t
        return t

    out = []
    for T, mu in points:
        t, m = text(T), text(mu)
        h = base.copy()
        h.update(f"|{t}|{m}".encode())
        out.append(h.hexdigest()[:20])
    return out


def config_hash(canonical: str) -> str:
    return hashlib.sha256(canonical.encode()).hexdigest()[:16]
