"""Figures of a model family (``vary:`` in the config), from ``families.parquet`` and the lines.

``family-<id>-landmarks``: each landmark the members have (``holoscan.scan.landmarks``) against
each varied key (a panel per landmark and key), one series per combination of the other varied
keys, with the finder's
uncertainty as error bars (usually far smaller than the markers); landmarks whose status is not
``ok`` are left out and counted in the caption. With a matched scale the energies are drawn in its
unit, except the matched landmark itself (equal for every member there), drawn in the model's E.

``family-<id>-lines``: the members' transition lines on one (mu, T) plane, in the model's energy
unit: first-order lines solid, crossovers dotted, second-order lines dashed, critical endpoints as
dots, one colour per member.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .data import ScanTables, count_text, provenance_text
from .style import LINE_STYLES, new_figure, no_data, title

LANDMARK_LABELS = {
    "crossover_T_mu0": r"crossover $T$ at $\mu = 0$",
    "cep_T": r"critical endpoint $T_{cep}$",
    "cep_mu": r"critical endpoint $\mu_{cep}$",
    "instability_mu_over_T": r"instability $|\mu|/T$",
    "onset_mu_over_T": r"onset $\mu/T_c$",
}
ENERGY = ("crossover_T_mu0", "cep_T", "cep_mu")


@dataclass
class FamilyFigure:
    """The figure, its caption and what was drawn (``drawn[(landmark, key)] = [(x, y, err)]`` or, for the
    lines figure, ``drawn[(member, type)] = [(mu, T)]``)."""

    fig: object
    caption: str = ""
    drawn: dict = field(default_factory=dict)


def members(tables: ScanTables, fid: str) -> pd.DataFrame:
    f = tables.families
    if not len(f) or "family" not in f.columns:
        return f.iloc[0:0]
    return f[f["family"] == fid]


def varied_keys(rows: pd.DataFrame) -> list[str]:
    """The family's varied keys, in the table's column order, that have values."""
    return [c[len("vary_"):] for c in rows.columns if c.startswith("vary_") and rows[c].notna().any()]


def plot_family_landmarks(tables: ScanTables, fid: str) -> FamilyFigure:
    """One panel per landmark (rows) and varied key (columns): the landmark against that key, one
    series per combination of the other varied keys."""
    rows = members(tables, fid)
    keys = varied_keys(rows) or ["(none)"]
    present = [n for n in LANDMARK_LABELS if f"{n}_status" in rows.columns and (rows[f"{n}_status"] == "ok").any()]
    n, m = max(1, len(present)), len(keys)
    fig = new_figure((5.5 * m + 1.0, 2.6 * n + 1.2), left=1.0, right=0.3, bottom=0.7, top=0.9, hspace=0.5,
                     wspace=0.35 if m > 1 else None)
    axes = fig.subplots(n, m, squeeze=False)
    out = FamilyFigure(fig)
    title(fig, f"family {fid}: landmarks against {', '.join(keys)}")
    skipped = 0
    matched = rows["match_unit"].dropna().iloc[0] if "match_unit" in rows and rows["match_unit"].notna().any() else None
    if not present or keys == ["(none)"]:
        no_data(axes[0, 0], "no landmark located for any member")
        present = []
    for c, key in enumerate(keys):
        others = [k for k in keys if k != key]
        groups = rows.groupby([f"vary_{k}" for k in others], sort=True) if others else [((), rows)]
        for r, name in enumerate(present):
            ax = axes[r, c]
            anchor = matched and name == rows["match_landmark"].dropna().iloc[0]   # equal for all: drawn in E
            in_unit = matched and not anchor and name in ENERGY and f"{name}_in_unit" in rows
            ax.set_ylabel(LANDMARK_LABELS[name] + (f" [{matched}]" if in_unit else (" [E]" if name in ENERGY else "")))
            ax.set_xlabel(key)
            for label, g in groups:
                ok = g[g[f"{name}_status"] == "ok"].sort_values(f"vary_{key}")
                if c == 0:
                    skipped += int((g[f"{name}_status"] != "ok").sum())
                x = ok[f"vary_{key}"].to_numpy(float)
                y = ok[f"{name}_in_unit" if in_unit else name].to_numpy(float)
                err = ok[f"{name}_err"].to_numpy(float) * (ok["scale"].to_numpy(float) if in_unit else 1.0)
                lab = ", ".join(f"{k} = {v:g}" for k, v in zip(others, np.atleast_1d(label))) if others else None
                ax.errorbar(x, y, yerr=np.nan_to_num(err), marker="o", ms=5, capsize=3, label=lab)
                out.drawn.setdefault((name, key), []).extend(zip(x, y, err))
            if others:
                ax.legend(fontsize=8, frameon=False)
    notes = [f"{count_text(skipped, 'member landmark')} without status ok left out"] if skipped else []
    if matched:
        notes.append(f"energies in {matched}: each member's scale set by its "
                     f"{rows['match_landmark'].dropna().iloc[0]} = {rows['match_value'].dropna().iloc[0]:g} {matched}"
                     " (that landmark drawn in E)")
    out.caption = "; ".join([f"Landmarks of the {len(rows)} members of family {fid} against {', '.join(keys)}, "
                             "error bars the line finders' uncertainties", provenance_text(tables), *notes]) + "."
    return out


def plot_family_lines(tables: ScanTables, fid: str) -> FamilyFigure:
    rows = members(tables, fid)
    fig = new_figure((7.0, 5.0), left=0.9, right=0.3, bottom=0.7, top=0.7)
    ax = fig.add_subplot()
    out = FamilyFigure(fig)
    title(fig, f"family {fid}: transition lines of the members")
    ax.set_xlabel(r"$\mu$ [E]")
    ax.set_ylabel("T [E]")
    tr, cp = tables.transitions, tables.critical
    colours = [f"C{i % 10}" for i in range(len(rows))]
    drew = False
    for colour, mid in zip(colours, rows["model_id"]):
        mine = tr[(tr["model_id"] == mid) & (tr["status"] == "ok")] if len(tr) else tr
        for kind in ("first-order", "crossover", "second-order"):
            sel = mine[mine["type"] == kind].sort_values("mu") if len(mine) else mine
            if len(sel):
                ls = LINE_STYLES[kind][1]
                ax.plot(sel["mu"], sel["T"], color=colour, ls=ls, lw=1.6,
                        label=f"{mid}" if kind == "first-order" or not drew else None)
                out.drawn[(mid, kind)] = list(zip(sel["mu"], sel["T"]))
                drew = True
        c = cp[(cp["model_id"] == mid) & (cp["status"] == "ok")] if len(cp) else cp
        if len(c):
            ax.plot(c["mu"], c["T"], "o", color=colour, ms=6)
            out.drawn[(mid, "critical")] = list(zip(c["mu"], c["T"]))
    if drew:
        ax.legend(fontsize=8, frameon=False)
    else:
        no_data(ax, "no transition line located for any member")
    out.caption = (f"Transition lines of the members of family {fid} on one (mu, T) plane in the model's energy "
                   f"unit: first-order solid, crossover dotted, second-order dashed, critical endpoints as dots; "
                   f"{provenance_text(tables)}.")
    return out
