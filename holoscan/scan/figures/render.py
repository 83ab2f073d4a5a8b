"""Write every figure of one scan and the manifest ``figures/figures.json``.

Each figure is drawn in isolation: a figure that cannot be drawn from the tables (any exception
while drawing or saving it) is replaced by a placeholder figure under the same file names that
says why, and the manifest lists it under ``placeholders`` with the reason. So the command always
writes every declared file and succeeds; only a missing or unreadable points table stops it.

The manifest (JSON, sorted keys): ``scan``, ``code_hash``, ``package_version``, ``config_hash`` of
the tables; ``files``, every file written (relative to ``results/<scan>/``); ``captions``, per
figure stem the caption (model, grid, units, where the tables come from, and what the figure
leaves out); ``placeholders``, per stem that is a placeholder the reason; ``removed``, files of
an earlier manifest that this one no longer lists and that were deleted.

Files left from an earlier config: the figures of models no longer in the scan are removed when
the previous manifest in the same folder lists them and they are not written now. Nothing else in
the folder is touched (only files under ``figures/`` that the earlier manifest names).

The figures are independent: with ``jobs > 1`` they are drawn by that many forked worker processes
(each inherits the tables already read); the files and their bytes do not depend on ``jobs``.
"""
from __future__ import annotations

import json
import multiprocessing
import sys
from pathlib import Path

from ..store import atomic_write_text
from . import FORMATS, MANIFEST, model_figure_stems
from .data import ScanTables, load_scan

_TABLES: ScanTables | None = None  # the scan being drawn, shared with forked workers

#: heading of each kind of figure, for placeholders
HEADINGS = {"phase-diagram": "phase diagram", "eos": "equation of state", "condensate": "condensate",
            "convergence": "convergence map"}


def _plot(what: str, mid, kind, models):
    from .condensate import plot_condensate
    from .convergence import plot_convergence
    from .eos import plot_eos
    from .phase_diagram import plot_phase_diagram

    if what == "convergence":
        return plot_convergence(_TABLES, models)
    plot = {"phase-diagram": plot_phase_diagram, "eos": plot_eos, "condensate": plot_condensate}[what]
    return plot(_TABLES, mid, kind)


def _draw(task) -> dict:
    """Draw and save one figure: ``task = (what, stem, model_id, kind, models)``. Returns
    ``{"stem", "files", "caption", "placeholder"}`` (``placeholder``: the reason, or None)."""
    import matplotlib.pyplot as plt

    from .style import placeholder, save

    what, stem, mid, kind, models = task
    heading = HEADINGS[what] + (f" of model {mid}" if mid else f" of scan '{_TABLES.scan}'")
    try:
        drawn = _plot(what, mid, kind, models)
        caption = getattr(drawn, "caption", "")
        paths = save(drawn.fig, _TABLES.root / stem)
        return {"stem": stem, "files": [str(p) for p in paths], "caption": caption, "placeholder": None}
    except Exception as exc:  # noqa: BLE001 - a figure never fails the command: it becomes a placeholder
        plt.close("all")
        reason = f"{type(exc).__name__}: {exc}"
        paths = save(placeholder(heading, reason), _TABLES.root / stem)
        return {"stem": stem, "files": [str(p) for p in paths], "placeholder": reason,
                "caption": f"Placeholder: the {heading} could not be drawn from the tables ({reason})."}


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
    tasks = []
    for mid, kind in models:
        for stem in model_figure_stems(mid, kind):
            what = stem.rsplit(f"{mid}-", 1)[1]
            tasks.append((what, stem, mid, kind, None))
    tasks.append(("convergence", "figures/convergence", None, None, models))
    if jobs > 1 and len(tasks) > 1:
        with multiprocessing.get_context("fork").Pool(min(jobs, len(tasks))) as pool:
            done = pool.map(_draw, tasks, chunksize=1)
    else:
        done = [_draw(t) for t in tasks]
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
                "removed": removed}
    path = root / MANIFEST
    atomic_write_text(path, json.dumps(manifest, indent=2, sort_keys=True) + "\n", durable=False)
    for d in done:
        if d["placeholder"]:
            print(f"holoscan: {d['stem']} is a placeholder: {d['placeholder']}", file=sys.stderr)
    return [*written, str(path)]
