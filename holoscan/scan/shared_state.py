"""Shared states of a scan: what all new chunks of one model share and is costly to build (for
``emd`` with method ``atlas``: the atlas of its horizon-data map), built once by its own job and
adopted by every chunk job of the model.

File: ``results/<scan>/shared/<key>.npz`` (numpy's ``.npz``: the kind's arrays) with its seal
``<key>.npz.seal`` (the key and the sha256 of the bytes). The key hashes the model context (spec,
solver settings, physics code) and the new points, so a state file never changes once written.
Adopting a state never changes a number (the kind's contract; tested bit for bit): a job that
finds the file missing, damaged or made for other settings logs it and builds what it needs itself.
"""
from __future__ import annotations

import io
from pathlib import Path

import numpy as np

from ..kinds import model_from_block
from ..settings import SolverSettings
from .identity import model_context
from .manifests import check_code, read_manifest
from .seals import seal_problem, write_seal
from .sizing import cost_key
from .store import atomic_write_bytes


def context_of(manifest: dict) -> str:
    """The cost key of a manifest's model context (spec, solver, code): what a state is valid for."""
    return cost_key(model_context(manifest["spec"], manifest["solver"], manifest["code_hash"]))


def adopt_earlier(model, settings, folder, context: str, log=print) -> int:
    """Adopt every intact state in ``folder`` made for the same model context (earlier plans'
    atlases: their cells are the same cells); returns how many were adopted."""
    n = 0
    for p in sorted(Path(folder).glob("*.npz")) if Path(folder).is_dir() else []:
        state = read_state(p, p.stem)
        if not state or str(state.get("context", "")) != context:
            continue
        try:
            model.adopt_shared_state(state, settings)
            n += 1
        except ValueError as exc:
            log(f"{p.name} not adopted: {exc}")
    return n


def build_state(manifest_path, out, log=print) -> int:
    """Build the shared state of a state manifest and write it (then its seal); returns its size in
    bytes (0 when the kind has nothing to share for these settings: an empty file is written)."""
    man = read_manifest(manifest_path)
    check_code(man)
    model = model_from_block(man["spec"], f"manifest.{man['model_id']}")
    settings = SolverSettings(**man["solver"])
    context = context_of(man)
    earlier = adopt_earlier(model, settings, Path(out).parent, context, log)
    state = model.shared_state([tuple(p) for p in man["points"]], settings) or {}
    if state:
        state["context"] = np.array(context)
    buf = io.BytesIO()
    np.savez(buf, **state)
    data = buf.getvalue()
    atomic_write_bytes(Path(out), data)
    write_seal(out, man["key"])
    log(f"{man['model_id']}: shared state of {len(man['points'])} points ({earlier} earlier state(s) adopted), "
        f"{len(data)} bytes, arrays {sorted(state)}")
    return len(data)


def read_state(path, key: str) -> dict | None:
    """The arrays of a state file whose seal holds for ``key``, else None."""
    path = Path(path)
    if not path.is_file() or seal_problem(path, key) is not None:
        return None
    try:
        with np.load(path, allow_pickle=False) as z:
            return {k: z[k] for k in z.files}
    except (OSError, ValueError):
        return None


def adopt_states(manifest: dict, models: dict, root: Path, log=print) -> None:
    """Let each model of a chunk manifest adopt its shared state (``manifest["shared"]``: model id ->
    key; the file under ``root/shared``), if intact; otherwise say so and go on without."""
    for mid, key in (manifest.get("shared") or {}).items():
        if mid not in models:
            continue
        model, settings = models[mid]
        state = read_state(Path(root) / "shared" / f"{key}.npz", key)
        if state is None:
            log(f"{mid}: shared state {key} missing or damaged; building what this chunk needs")
            continue
        try:
            model.adopt_shared_state(state, settings)
            log(f"{mid}: adopted shared state {key}")
        except ValueError as exc:
            log(f"{mid}: shared state {key} not adopted ({exc}); building what this chunk needs")
