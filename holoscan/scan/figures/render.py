"""Write every figure of one scan and the manifest ``figures/figures.json``."""
from __future__ import annotations

import json
from pathlib import Path

from . import MANIFEST, model_figure_stems
from .data import load_scan
from .style import save


def write_all(results_dir, models=None) -> list[str]:
    """Draw and save all figures of the scan in ``results_dir``; returns the files written."""
    from .condensate import plot_condensate
    from .convergence import plot_convergence
    from .eos import plot_eos
    from .phase_diagram import plot_phase_diagram

    root = Path(results_dir)
    tables = load_scan(root)
    models = list(models) if models is not None else tables.models()
    written: list[Path] = []
    for mid, kind in models:
        stems = model_figure_stems(mid, kind)
        written += save(plot_phase_diagram(tables, mid, kind).fig, root / stems[0])
        written += save(plot_eos(tables, mid, kind).fig, root / stems[1])
        if kind == "charged-scalar":
            written += save(plot_condensate(tables, mid, kind).fig, root / stems[2])
    written += save(plot_convergence(tables, models).fig, root / "figures" / "convergence")
    names = [p.relative_to(root).as_posix() for p in written]
    manifest = {"scan": tables.scan, "code_hash": tables.code_hash, "package_version": tables.package_version,
                "config_hash": tables.meta.get("config_hash"), "files": names}
    path = root / MANIFEST
    tmp = path.with_name(path.name + ".tmp")
    tmp.write_text(json.dumps(manifest, indent=2, sort_keys=True) + "\n")
    tmp.replace(path)
    return [*[str(p) for p in written], str(path)]
