"""Write every figure of one scan and the manifest ``figures/figures.json``.

Each figure is drawn in isolation: a figure that cannot be drawn from the tables (any exception
while drawing or saving it) is replaced by a placeholder figure under the same file names that
says why, and the manifest lists it under ``placeholders`` with the reason. So the command always
writes every declared file and succeeds; only a missing or unreadable points table stops it.

The manifest (JSON, sorted keys): ``scan``, ``code_hash``, ``package_version``, ``config_hash`` of
the tables; ``files``, every file written (relative to ``results/<scan>/``); ``captions``, per
figure stem the caption (model, grid, units, where the tables come from, and what the figure
leaves out); ``placeholders``, per stem that is a placeholder the reason; ``not_drawn``, per stem
of a figure that does not apply to its model (the kurtosis figure of a model whose rows carry no
``chi4``, the transport figure of one whose rows carry no ``sigma``) the reason: its files are
written all the same, saying so, because the workflow declares them before any table exists;
``removed``, files of an earlier manifest that this one no longer lists and that were deleted.

Files left from an earlier config: the figures of models no longer in the scan are removed when
the previous manifest in the same folder lists them and they are not written now. Nothing else in
the folder is touched (only files under ``figures/`` that the earlier manifest names).

The figures are independent: with ``jobs > 1`` they are drawn by that many forked worker processes
(each inherits the tables already read); the files and their bytes do not depend on ``jobs``.

Figures of untouched models are not drawn again. Each model's figure has a *stamp*: the sha256 of
the figure's name and kind, the model's config block and its rows in the four tables, the scan's
name, code hash and version, the notes on unreadable tables and the sources of this package. A
drawn figure is copied, with its caption, into ``figures/.cache/`` under its stamp; when a later
run finds the same stamp there, it copies the files back instead of drawing (the bytes are the
same: the drawing is a function of what the stamp covers). The convergence map and the family
figures show several models and are always drawn. Only the newest entry per figure is kept, and
none for a model no longer in the scan.
"""
from __future__ import annotations

import hashlib
import json
import multiprocessing
import shutil
import sys
from pathlib import Path

from ..store import atomic_path, atomic_write_text
from . import FORMATS, MANIFEST, family_figure_stems, model_figure_stems
from .data import ScanTables, load_scan

_TABLES: ScanTables | None = None  # the scan being drawn, shared with forked workers

#: heading of each kind of figure, for placeholders
HEADINGS = {"phase-diagram": "phase diagram", "eos": "equation of state", "condensate": "condensate",
            "kurtosis": "kurtosis ratio", "transport": "transport",
            "convergence": "convergence map", "family-landmarks": "landmarks", "family-lines": "lines"}


def _plot(what: str, mid, kind, models):
    from .condensate import plot_condensate
    from .convergence import plot_convergence
    from .cumulants import plot_kurtosis
    from .eos import plot_eos
    from .phase_diagram import plot_phase_diagram
    from .transport import plot_transport

    if what == "convergence":
        return plot_convergence(_TABLES, models)
    if what in ("family-landmarks", "family-lines"):
        from .family import plot_family_landmarks, plot_family_lines

        return (plot_family_landmarks if what == "family-landmarks" else plot_family_lines)(_TABLES, mid)
    plot = {"phase-diagram": plot_phase_diagram, "eos": plot_eos, "condensate": plot_condensate,
            "kurtosis": plot_kurtosis, "transport": plot_transport}[what]
    return plot(_TABLES, mid, kind)


def _draw(task) -> dict:
    """Draw and save one figure: ``task = (what, stem, model_id, kind, models)``. Returns
    ``{"stem", "files", "caption", "placeholder", "not_drawn"}`` (``placeholder``: the reason, or None;
    ``not_drawn``: why the figure does not apply to its model, or None)."""
    import matplotlib.pyplot as plt

    from .style import placeholder, save

    what, stem, mid, kind, models = task
    heading = HEADINGS[what] + (f" of model {mid}" if mid else f" of scan '{_TABLES.scan}'")
    try:
        drawn = _plot(what, mid, kind, models)
        caption = getattr(drawn, "caption", "")
        absent = getattr(drawn, "not_drawn", None)
        paths = save(drawn.fig, _TABLES.root / stem)
        return {"stem": stem, "files": [str(p) for p in paths], "caption": caption, "placeholder": None,
                "not_drawn": absent}
    except Exception as exc:  # noqa: BLE001 - a figure never fails the command: it becomes a placeholder
        plt.close("all")
        reason = f"{type(exc).__name__}: {exc}"
        paths = save(placeholder(heading, reason), _TABLES.root / stem)
        return {"stem": stem, "files": [str(p) for p in paths], "placeholder": reason, "not_drawn": None,
                "caption": f"Placeholder: the {heading} could not be drawn from the tables ({reason})."}


CACHE = "figures/.cache"


def _sources_hash() -> str:
    h = hashlib.sha256()
    for p in sorted(Path(__file__).parent.glob("*.py")):
        h.update(p.name.encode() + b"\0" + p.read_bytes())
    return h.hexdigest()


def stamp(tables: ScanTables, what: str, mid: str, kind: str, sources: str) -> str:
    """What one model's figure is drawn from, hashed (see the module docstring)."""
    import pandas as pd

    h = hashlib.sha256()
    head = [sources, what, mid, kind, tables.scan, tables.code_hash, tables.package_version,
            tables.notes, tables.block(mid)]
    h.update(json.dumps(head, sort_keys=True, default=str).encode())
    for name in ("points", "phases", "transitions", "critical", "isentropes"):
        rows = tables.rows(name, mid)
        h.update(f"\0{name}\0{list(rows.columns)}\0{len(rows)}\0".encode())
        if len(rows):
            h.update(pd.util.hash_pandas_object(rows.astype(str), index=False).to_numpy().tobytes())
    return h.hexdigest()[:24]


def _from_cache(task, key: str) -> dict | None:
    """The cached result of ``task`` under ``key``, copied into place; None when not cached."""
    stem = task[1]
    base = _TABLES.root / CACHE / f"{Path(stem).name}.{key}"
    try:
        record = json.loads(base.with_name(base.name + ".json").read_text())
        files = []
        for ext in FORMATS:
            path = _TABLES.root / f"{stem}.{ext}"
            with atomic_path(path, durable=False) as tmp:
                shutil.copyfile(base.with_name(base.name + f".{ext}"), tmp)
            files.append(str(path))
    except (OSError, ValueError):
        return None
    return {"stem": stem, "files": files, "caption": record.get("caption", ""),
            "placeholder": record.get("placeholder"), "not_drawn": record.get("not_drawn"), "cached": True}


def _to_cache(done: dict, key: str) -> None:
    """Keep a drawn figure under ``key`` (replacing older entries of the same figure)."""
    folder = _TABLES.root / CACHE
    name = Path(done["stem"]).name
    try:
        folder.mkdir(parents=True, exist_ok=True)
        for old in folder.glob(f"{name}.*"):
            if old.name.split(".")[len(name.split("."))] != key:
                old.unlink(missing_ok=True)
        for f in done["files"]:
            ext = Path(f).suffix
            with atomic_path(folder / f"{name}.{key}{ext}", durable=False) as tmp:
                shutil.copyfile(f, tmp)
        record = {"caption": done["caption"], "placeholder": done["placeholder"], "not_drawn": done.get("not_drawn")}
        atomic_write_text(folder / f"{name}.{key}.json", json.dumps(record, sort_keys=True), durable=False)
    except OSError:
        pass  # the cache only saves time


def _prune_cache(root: Path, names: set) -> None:
    """Remove cache entries of figures the scan no longer has (a model dropped from the config)."""
    folder = root / CACHE
    if not folder.is_dir():
        return
    for p in folder.iterdir():
        if p.is_file() and p.name.rsplit(".", 2)[0] not in names:
            p.unlink(missing_ok=True)


def _draw_and_keep(task) -> dict:
    """Draw ``task`` and, for a model's figure (with a stamp), keep it in the cache."""
    done = _draw(task[:5])
    if len(task) > 5:
        _to_cache(done, task[5])
    return done


def previous_files(root: Path) -> list[str]:
    """Files listed by the manifest already in ``root/figures`` (relative to ``root``), keeping only
    names of files under ``figures/`` (never the manifest itself, never a path that leaves it)."""
    try:
        doc = json.loads((root / MANIFEST).read_text())
    except (OSError, ValueError):
        return []
    files = doc.get("files") if isinstance(doc, dict) else None
    if not isinstance(files, list):
        return []
    folder = (root / "figures").resolve()
    out = []
    for name in files:
        if not isinstance(name, str) or name == MANIFEST or not name.startswith("figures/"):
            continue
        p = (root / name).resolve()
        if p.parent == folder and p.suffix.lstrip(".") in FORMATS:
            out.append(name)
    return out


def write_all(results_dir, models=None, jobs: int = 1) -> list[str]:
    """Draw and save all figures of the scan in ``results_dir``; returns the files written."""
    global _TABLES
    from . import style  # noqa: F401  (matplotlib set up before any fork)

    root = Path(results_dir)
    _TABLES = load_scan(root)
    earlier = previous_files(root)
    models = list(models) if models is not None else _TABLES.models()
    tasks, sources = [], _sources_hash()
    for mid, kind in models:
        for stem in model_figure_stems(mid, kind):
            what = stem.rsplit(f"{mid}-", 1)[1]
            tasks.append((what, stem, mid, kind, None, stamp(_TABLES, what, mid, kind, sources)))
    for fid in _TABLES.family_ids():
        for stem in family_figure_stems(fid):
            tasks.append(("family-" + stem.rsplit("-", 1)[1], stem, fid, None, None))
    tasks.append(("convergence", "figures/convergence", None, None, models))
    done = [_from_cache(t, t[5]) if len(t) > 5 else None for t in tasks]
    todo = [t for t, d in zip(tasks, done) if d is None]
    if jobs > 1 and len(todo) > 1:
        with multiprocessing.get_context("fork").Pool(min(jobs, len(todo))) as pool:
            drawn = iter(pool.map(_draw_and_keep, todo, chunksize=1))
    else:
        drawn = iter([_draw_and_keep(t) for t in todo])
    done = [d if d is not None else next(drawn) for d in done]
    cached = sum(1 for d in done if d.get("cached"))
    _prune_cache(root, {Path(t[1]).name for t in tasks if len(t) > 5})
    written = [p for d in done for p in d["files"]]
    names = [Path(p).relative_to(root).as_posix() for p in written]
    removed = []
    for name in earlier:
        if name not in names and (root / name).is_file():
            (root / name).unlink()
            removed.append(name)
            print(f"holoscan: removed {name} (a figure of an earlier config, listed in the previous "
                  f"{MANIFEST})", file=sys.stderr)
    manifest = {"scan": _TABLES.scan, "code_hash": _TABLES.code_hash, "package_version": _TABLES.package_version,
                "config_hash": _TABLES.meta.get("config_hash"), "files": names,
                "captions": {d["stem"]: d["caption"] for d in done},
                "placeholders": {d["stem"]: d["placeholder"] for d in done if d["placeholder"]},
                "not_drawn": {d["stem"]: d["not_drawn"] for d in done if d.get("not_drawn")},
                "removed": removed}
    path = root / MANIFEST
    atomic_write_text(path, json.dumps(manifest, indent=2, sort_keys=True) + "\n", durable=False)
    print(f"holoscan: {len(done) - cached} figure(s) drawn, {cached} of untouched models copied from "
          f"{CACHE}", file=sys.stderr)
    for d in done:
        if d["placeholder"]:
            print(f"holoscan: {d['stem']} is a placeholder: {d['placeholder']}", file=sys.stderr)
    return [*written, str(path)]
