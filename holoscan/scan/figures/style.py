"""Matplotlib set-up shared by the figures: Agg backend, fonts, the Okabe-Ito palette, saving.

The palette is Okabe & Ito's colour-blind-safe set of eight colours (common practice, no source).
Files are written so that the same tables give the same bytes: no creation date in the PDF, none
in the PNG (matplotlib writes only its version there), fixed DPI, no random state.
"""
from __future__ import annotations

from pathlib import Path

import matplotlib

from ..store import atomic_path

matplotlib.use("Agg")  # files only, never a display

import matplotlib.pyplot as plt

OKABE_ITO = {
    "black": "#000000",
    "orange": "#E69F00",
    "sky": "#56B4E9",
    "green": "#009E73",
    "yellow": "#F0E442",
    "blue": "#0072B2",
    "vermillion": "#D55E00",
    "purple": "#CC79A7",
}
#: colours for curves at several mu, in order
SERIES = [OKABE_ITO[k] for k in ("blue", "orange", "green", "vermillion", "purple", "sky", "black", "yellow")]

#: shading of each dominant phase in the phase diagrams (light tints of the palette)
PHASE_COLOURS = {
    "unique": "#D9D9D9",  # one branch only: neutral grey
    "normal": "#A6D5F2",  # sky, light
    "condensed": "#F5CC7F",  # orange, light
    "high-entropy": "#F2A27F",  # vermillion, light
    "intermediate": "#E5BCD3",  # purple, light
    "low-entropy": "#7FCEB9",  # green, light
    "none": "#FFFFFF",  # no locally stable branch
}

#: line styles of the transition types: (colour, linestyle, linewidth, legend text)
LINE_STYLES = {
    "first-order": (OKABE_ITO["black"], "-", 2.2, "first-order line (equal grand potential)"),
    "second-order": (OKABE_ITO["blue"], "--", 2.0, "second-order line (condensation onset)"),
    "crossover": (OKABE_ITO["vermillion"], ":", 2.2, "crossover (maximum of ds/dT at fixed mu)"),
    "instability": (OKABE_ITO["purple"], "-", 0.9, "instability locus (spinodal / fold)"),
}

#: markers of grid points whose solve is not clean: status -> (marker, face, edge, legend text)
BAD_MARKERS = {
    "failed": ("X", OKABE_ITO["black"], OKABE_ITO["black"], "failed / no solution / out of range"),
    "unconverged": ("D", "none", OKABE_ITO["vermillion"], "not converged (some branch)"),
}
FAILED_STATUSES = ("failed", "no solution", "out of range")
UNCONVERGED_STATUSES = ("not converged", "incomplete")

RC = {
    "font.size": 10,
    "axes.titlesize": 10,
    "axes.labelsize": 10,
    "legend.fontsize": 8,
    "xtick.labelsize": 9,
    "ytick.labelsize": 9,
    "figure.dpi": 100,
    "savefig.dpi": 150,
    "axes.grid": False,
    "svg.hashsalt": "holoscan",
    "path.simplify": True,
}

PNG_METADATA = {"Software": None}
PDF_METADATA = {"CreationDate": None, "ModDate": None, "Creator": "holoscan", "Producer": None}


matplotlib.rcParams.update(RC)  # this module runs only in the figures process


def new_figure(figsize, left=0.8, right=0.2, bottom=0.6, top=0.8, wspace=None, hspace=None):
    """A figure of ``figsize`` inches whose subplot area leaves these margins (inches).

    A fixed layout, not matplotlib's automatic one: the automatic layouts measure every tick label
    and took a third of the drawing time."""
    w, h = figsize
    fig = plt.figure(figsize=figsize)
    fig.subplots_adjust(left=left / w, right=1 - right / w, bottom=bottom / h, top=1 - top / h,
                        wspace=wspace, hspace=hspace)
    return fig


def title(fig, text: str) -> None:
    """The figure's title, centred at the top."""
    fig.suptitle(text, y=1 - 0.08 / fig.get_figheight(), va="top")


def save(fig, stem: Path) -> list[Path]:
    """Write ``stem.png`` and ``stem.pdf`` (reproducible metadata), each atomically
    (:func:`holoscan.scan.store.atomic_path`), and close the figure. A failure leaves no temporary
    file behind (the figure is closed and the error raised)."""
    out = []
    try:
        for ext, meta in (("png", PNG_METADATA), ("pdf", PDF_METADATA)):
            path = stem.with_name(stem.name + f".{ext}")
            with atomic_path(path, durable=False) as tmp:
                fig.savefig(tmp, format=ext, metadata=meta)
            out.append(path)
    finally:
        plt.close(fig)
    return out


def placeholder(heading: str, reason: str):
    """A figure that says it stands in for ``heading``, which could not be drawn, and why."""
    import textwrap

    fig = new_figure((8.0, 4.5), left=0.2, right=0.2, bottom=0.2, top=0.2)
    ax = fig.add_subplot()
    ax.axis("off")
    body = "\n".join(textwrap.wrap(reason, 90)[:12]) or "(no reason given)"
    ax.text(0.5, 0.62, f"{heading}\ncould not be drawn from the tables", ha="center", va="center",
            transform=ax.transAxes, fontsize=12, parse_math=False)
    ax.text(0.5, 0.3, body, ha="center", va="center", transform=ax.transAxes, fontsize=8,
            color=OKABE_ITO["vermillion"], family="monospace", parse_math=False)
    return fig


def no_data(ax, text: str) -> None:
    """Say in the panel that there is nothing to draw (the file is still written)."""
    ax.text(0.5, 0.5, text, ha="center", va="center", transform=ax.transAxes, wrap=True,
            color=OKABE_ITO["vermillion"])


def plain_log_ticks(axis, lo: float, hi: float) -> None:
    """Label a logarithmic axis over ``[lo, hi]`` with plain numbers (0.05, 0.1, 0.2, 0.5, 1, 2) instead
    of powers of 10; over more than 4 decades matplotlib's own ticks are kept."""
    from matplotlib.ticker import FuncFormatter, LogLocator, NullFormatter

    if not (lo > 0 and hi / lo <= 1e4):
        return
    axis.set_major_locator(LogLocator(base=10, subs=(1.0, 2.0, 5.0)))
    axis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:g}"))
    axis.set_minor_formatter(NullFormatter())


def not_drawn_figure(heading: str, reason: str):
    """A small figure under ``heading`` that says the figure does not apply to its model and why
    (a model whose rows lack the columns it shows); returns ``(fig, ax)``."""
    import textwrap

    fig = new_figure((8.0, 3.6), left=0.3, right=0.3, bottom=0.3, top=0.75)
    ax = fig.add_subplot()
    ax.set_xticks([])
    ax.set_yticks([])
    ax.set_facecolor("#EBEBEB")
    title(fig, heading)
    ax.text(0.5, 0.5, "not drawn:\n" + "\n".join(textwrap.wrap(reason, 70)), ha="center", va="center",
            transform=ax.transAxes, color=OKABE_ITO["vermillion"], parse_math=False)
    return fig, ax
