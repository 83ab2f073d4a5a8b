"""Write every figure of one scan and the manifest ``figures/figures.json``.

The figures are independent: with ``jobs > 1`` they are drawn by that many forked worker processes
(each inherits the tables already read); the files and their bytes do not depend on ``jobs``.
"""
from __future__ import annotations

import json
import multiprocessing
import os
from pathlib import Path

from . import MANIFEST, model_figure_stems
from .data import ScanTables, load_scan

_TABLES: ScanTables | None = None  # the scan being drawn, shared with forked workers


def _draw(task) -> list[str]:
    """Draw and save one figure: ``task = (what, stem, model_id, kind, models)``."""
    from .condensate import plot_condensate
    from .convergence import plot_convergence
    from .eos import plot_eos
    from .phase_diagram import plot_phase_diagram
    from .style import save

    what, stem, mid, kind, models = task
    if what == "convergence":
        fig = plot_convergence(_TABLES, models).fig
    else:
        plot = {"phase-diagram": plot_phase_diagram, "eos": plot_eos, "condensate": plot_condensate}[what]
        fig = plot(_TABLES, mid, kind).fig
    return [str(p) for p in save(fig, _TABLES.root / stem)]


def default_jobs() -> int:
    return max(1, min(4, len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count() or 1))


def write_all(results_dir, models=None, jobs: int = 1) -> list[str]:
    """Draw and save all figures of the scan in ``results_dir``; returns the files written."""
    global _TABLES
    from . import style  # noqa: F401  (matplotlib set up before any fork)

    root = Path(results_dir)
    _TABLES = load_scan(root)
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
    written = [p for paths in done for p in paths]
    names = [Path(p).relative_to(root).as_posix() for p in written]
    manifest = {"scan": _TABLES.scan, "code_hash": _TABLES.code_hash, "package_version": _TABLES.package_version,
                "config_hash": _TABLES.meta.get("config_hash"), "files": names}
    path = root / MANIFEST
    tmp = path.with_name(path.name + ".tmp")
    tmp.write_text(json.dumps(manifest, indent=2, sort_keys=True) + "\n")
    tmp.replace(path)
    return [*written, str(path)]
