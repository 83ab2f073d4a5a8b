# Figures of a finished scan (matplotlib, PNG and PDF) under results/<scan>/figures/: per model a phase
# diagram, the reduced equation of state, (charged-scalar) the condensate, and T^2 chi4/chi2 and the
# transport coefficients along lines of fixed mu/T (every model has these two files; where its rows
# carry no chi4 or sigma the file says the figure is not drawn, and figures.json lists it under
# not_drawn); per scan the convergence map; figures/figures.json lists them with the code hash of the
# tables. The PNGs go into the Snakemake report with a caption per kind of figure
# (workflow/report/figures/).
import hashlib
from pathlib import Path

from holoscan import __version__ as HOLOSCAN_VERSION
import holoscan.scan.figures as _figures_pkg
from holoscan.scan.figures import MANIFEST, figure_files
from holoscan.scan.identity import code_hash

FIGURE_KINDS = ("phase-diagram", "eos", "condensate", "kurtosis", "transport")  # per model; "convergence" is per scan


def figure_models():
    """(model id, kind) of every model of the current config, in config order."""
    return [(m.model.id, m.model.kind) for m in CFG.models]


def figure_families():
    """Ids of the model families of the current config, in config order."""
    return list(dict.fromkeys(m.family["id"] for m in CFG.models if m.family))


def _figures_code_hash():
    """Hash of the figure sources: a change to them remakes the figures (a params change)."""
    h = hashlib.sha256()
    for p in sorted(Path(_figures_pkg.__file__).parent.glob("*.py")):
        h.update(p.name.encode() + b"\0" + p.read_bytes())
    return h.hexdigest()[:16]


def _figure_output(name):
    """One output file; the PNGs are marked for the report, with the caption of their kind."""
    path = f"results/{{scan}}/{name}"
    stem, ext = Path(name).stem, Path(name).suffix[1:]
    if ext != "png":
        return path
    fig = next((k for k in FIGURE_KINDS if stem.endswith("-" + k)), "convergence")
    model = stem[: -len(fig) - 1] if fig != "convergence" else "all models"
    if stem.startswith("family-"):
        fig, model = "family", stem[len("family-"):].rsplit("-", 1)[0]
    return report(path, caption=f"../report/figures/{fig}.rst", category="Figures", subcategory=model,
                  labels={"model": model, "figure": fig})


def figure_targets():
    """Every figure file the current plan produces (listed in rule all), and the figures manifest."""
    root = f"results/{PLAN.scan}"
    return [f"{root}/{n}" for n in figure_files(figure_models(), figure_families())] + [f"{root}/{MANIFEST}"]


rule figures:
    input:
        points="results/{scan}/points.parquet",
        phases="results/{scan}/phases.parquet",
        transitions="results/{scan}/transitions.parquet",
        critical="results/{scan}/critical_points.parquet",
    output:
        [_figure_output(n) for n in figure_files(figure_models(), figure_families())],
        manifest=f"results/{{scan}}/{MANIFEST}",
    params:
        code_hash=code_hash(),
        version=HOLOSCAN_VERSION,
        figures_code=_figures_code_hash(),
    log:
        "logs/figures/{scan}.log",
    localrule: True
    threads: 2
    shell:
        "{PY} -m holoscan figures results/{wildcards.scan} --jobs {threads} > {log} 2>&1"
