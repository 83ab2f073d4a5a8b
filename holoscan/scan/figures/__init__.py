"""Figures of a finished scan: PNG and PDF files under ``results/<scan>/figures/``.

Made from the scan's tables only (``points``, ``phases``, ``transitions``, ``critical_points``), never
by solving anything. Every figure shows model computations in classical gravity, not measurements.

Files (relative to ``results/<scan>/``), for every model of the scan:

- ``figures/<model>-phase-diagram.{png,pdf}``: dominant phase over the (mu, T) grid and the located lines;
- ``figures/<model>-eos.{png,pdf}``: reduced equation of state of the dominant branch;
- ``figures/<model>-condensate.{png,pdf}``: the condensate against T/T_c (kinds that list it in
  their ``figures``, e.g. ``charged-scalar``);
- ``figures/<model>-kurtosis.{png,pdf}``: ``T^2 chi4/chi2`` against T along lines of fixed mu/T
  (see :mod:`.cumulants`), and ``figures/<model>-transport.{png,pdf}``: ``sigma/T^(d-3)``,
  ``D_charge T`` and ``eta/s`` along the same lines (see :mod:`.transport`). Every model has these
  two files (:data:`DATA_FIGURES`): whether its rows carry ``chi4`` or ``sigma`` is known only once
  the tables exist, so where they carry none the file says that the figure is not drawn and
  ``figures.json`` lists it under ``not_drawn``;

for every model family ``figures/family-<id>-landmarks`` and ``figures/family-<id>-lines`` (see
:mod:`.family`);

and once per scan ``figures/convergence.{png,pdf}`` (error estimate and first-law mismatch) and
``figures/figures.json`` (the list of files with the code hash and version of the tables, each
figure's caption with its grid and units, the figures that are placeholders and why, those that
do not apply to their model and why, and the files of an earlier config that were removed; see
:mod:`.render`). Titles name the model and what is drawn; grid sizes and hashes are in the
captions. A figure that cannot be drawn is a placeholder
figure, so the command writes every file above and succeeds whatever the tables hold.

This module does not import matplotlib: :func:`figure_files` is called when the workflow is parsed.
The plotting modules import it (Agg backend, no display) when :func:`write_figures` runs.
"""
from __future__ import annotations

FORMATS = ("png", "pdf")
MANIFEST = "figures/figures.json"
#: per-model figures of every kind, drawn from the columns a model's rows carry (module docstring)
DATA_FIGURES = ("kurtosis", "transport")


def model_figure_stems(model_id: str, kind: str) -> list[str]:
    """Stems (no extension) of the figures of one model, relative to ``results/<scan>/``."""
    from ...kinds import kind_class

    cls = kind_class(kind)
    names = (*(cls.figures if cls is not None else ("phase-diagram", "eos")), *DATA_FIGURES)
    return [f"figures/{model_id}-{name}" for name in names]


def family_figure_stems(family_id: str) -> list[str]:
    """Stems of the figures of one model family (see :mod:`.family`)."""
    return [f"figures/family-{family_id}-{name}" for name in ("landmarks", "lines")]


def figure_files(models: list[tuple[str, str]], families: list[str] = ()) -> list[str]:
    """Every figure file of a scan with these ``(model_id, kind)`` pairs and family ids, relative to
    ``results/<scan>/``.

    Known before any table exists, so the workflow can list them as targets. The manifest
    ``figures/figures.json`` is not included (see :data:`MANIFEST`).
    """
    stems = [s for mid, kind in models for s in model_figure_stems(mid, kind)]
    stems += [s for fid in families for s in family_figure_stems(fid)]
    stems.append("figures/convergence")
    return [f"{s}.{ext}" for s in stems for ext in FORMATS]


def write_figures(results_dir, models: list[tuple[str, str]] | None = None, jobs: int = 1) -> list[str]:
    """Write every figure of the scan in ``results_dir``; returns the paths written (with the manifest).

    ``models`` defaults to the models of the scan's config (stored in the points table's metadata);
    ``jobs`` worker processes draw the figures (the output does not depend on it).
    """
    from .render import write_all

    return write_all(results_dir, models, jobs)


__all__ = ["DATA_FIGURES", "FORMATS", "MANIFEST", "family_figure_stems", "figure_files", "model_figure_stems",
           "write_figures"]
