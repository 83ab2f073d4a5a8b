"""Figures drawn from whatever the tables hold: absurd, infinite, NaN or missing values, an empty
table, a model without ok rows, huge error estimates; a figure that cannot be drawn becomes a
placeholder listed in figures.json and the command still succeeds; files of an earlier config are
removed; titles carry no grid or hash; the phase diagram is shaded by s/T^(d-1); the equation of
state reaches a second-order line; the condensate's mean-field guide needs enough points.

The tables are written here, by hand, in the layout of the points and phase tables (no solve, no
workflow). Physics reference where one is used: the planar RN-AdS_5 brane (Chamblin, Emparan,
Johnson & Myers 1999, Phys. Rev. D 60, 064018, in the normalisation of Hartnoll 2009, Class. Quant.
Grav. 26, 224002): r_h = (4 pi T + sqrt(16 pi^2 T^2 + 8 mu^2 / gamma^2)) / 8 for d = 4,
gamma^2 = 3 e^2 / (2 kappa^2), s = 2 pi r_h^3 / kappa^2.
"""
from __future__ import annotations

import json
import math
import re
import subprocess
import sys

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

pytest.importorskip("matplotlib")

from holoscan.scan.figures import MANIFEST, figure_files

CODE = "c0ffee00c0ffee00"


def _row(model_id, kind, d, T, mu, **kw):
    base = {"model_id": model_id, "kind": kind, "d": d, "branch": 0, "T": T, "mu": mu, "s_hat": 1.0, "P_hat": 1.0,
            "trace_anomaly": 0.0, "chi2_hat": 1.0, "cs2": 1 / (d - 1), "status": "ok", "dominant": True,
            "phase": "unique", "error_estimate": 1e-12, "P_mismatch": 1e-13, "accept_error": 1e-8, "extra": "{}"}
    base.update(kw)
    return base


def write_scan(root, rows, models, phases=None, transitions=None, critical=None, scan="robust"):
    """A scan folder with a points table (with the holoscan metadata naming ``models``) and optional
    phase tables, all as written by hand."""
    root.mkdir(parents=True, exist_ok=True)
    df = pd.DataFrame(rows, columns=list(_row("m", "rn", 4, 1.0, 0.0)) if not rows else None)
    t = pa.Table.from_pandas(df, preserve_index=False)
    meta = {"scan": scan, "code_hash": CODE, "package_version": "9.9.9", "config_hash": "feedfeed",
            "config": {"scan": scan, "models": [{"id": m, "kind": k, **b} for m, k, b in models]}}
    t = t.replace_schema_metadata({b"holoscan": json.dumps(meta).encode()})
    pq.write_table(t, root / "points.parquet")
    for name, frame in (("phases", phases), ("transitions", transitions), ("critical_points", critical)):
        if frame is not None:
            pq.write_table(pa.Table.from_pandas(pd.DataFrame(frame), preserve_index=False), root / f"{name}.parquet")
    return root


def figures_cli(root):
    return subprocess.run([sys.executable, "-m", "holoscan", "figures", str(root)], capture_output=True, text=True,
                          timeout=300)


def manifest(root):
    return json.loads((root / MANIFEST).read_text())


def _valid_png(path):
    import matplotlib.image as mpimg

    assert path.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n", path
    img = mpimg.imread(path)
    assert img.shape[0] >= 300 and float(img[..., :3].std()) > 0.02, path


@pytest.mark.workflow
def test_absurd_infinite_nan_and_missing_values_are_drawn_around(tmp_path):
    rows = [_row("rn", "rn", 4, T, mu) for T in (0.5, 1.0, 2.0) for mu in (0.0, 1.0)]
    rows[0].update(s_hat=1e308, P_hat=math.inf, chi2_hat=math.nan, cs2=None, error_estimate=math.inf)
    rows[1].update(T=math.nan, error_estimate=1e300)
    rows[2].update(mu=-math.inf, P_mismatch=-1e308)
    rows[3].update(s_hat="not a number")  # a value that is not a number reads as NaN
    rows = [{k: (str(v) if k == "s_hat" else v) for k, v in r.items()} for r in rows]  # a text column
    root = write_scan(tmp_path / "robust", rows, [("rn", "rn", {"d": 4})])
    p = figures_cli(root)
    assert p.returncode == 0, p.stderr
    assert "Traceback" not in p.stderr
    man = manifest(root)
    assert man["placeholders"] == {}, man["placeholders"]
    for n in figure_files([("rn", "rn")]):
        assert (root / n).is_file(), n
        if n.endswith(".png"):
            _valid_png(root / n)
    # what was left out is said in the captions
    assert "not drawable" in man["captions"]["figures/rn-phase-diagram"]
    assert "not drawable" in man["captions"]["figures/rn-eos"]
    assert "not drawn" in man["captions"]["figures/convergence"]


@pytest.mark.workflow
def test_an_empty_table_and_a_model_without_ok_rows(tmp_path):
    root = write_scan(tmp_path / "empty", [], [("a", "rn", {"d": 4}), ("b", "charged-scalar", {"d": 3})])
    p = figures_cli(root)
    assert p.returncode == 0, p.stderr
    assert manifest(root)["placeholders"] == {}
    assert all((root / n).is_file() for n in figure_files([("a", "rn"), ("b", "charged-scalar")]))

    rows = [_row("f", "rn", 4, T, 1.0, status="failed", dominant=False, s_hat=math.nan, P_hat=math.nan,
                 error_estimate=math.nan, P_mismatch=math.nan) for T in (0.5, 1.0)]
    root = write_scan(tmp_path / "failed", rows, [("f", "rn", {"d": 4})])
    p = figures_cli(root)
    assert p.returncode == 0, p.stderr
    man = manifest(root)
    assert man["placeholders"] == {} and "no ok dominant rows" in man["captions"]["figures/f-eos"]


@pytest.mark.workflow
def test_huge_error_estimates_of_a_one_charge_scan(tmp_path):
    from holoscan.scan.figures.convergence import plot_convergence
    from holoscan.scan.figures.data import DRAW_MAX, load_scan

    ests = [1e-12, 3e-3, 4e5, 1e200, 1e305, math.inf]
    rows = [_row("one", "emd", 4, 0.2 + 0.01 * k, 0.1, error_estimate=e, status="ok" if e < 1e-8 else "not converged")
            for k, e in enumerate(ests)]
    root = write_scan(tmp_path / "one", rows, [("one", "emd", {"source": False})])
    conv = plot_convergence(load_scan(root), [("one", "emd")])
    # the colour scale ends at the largest drawable value (1e200), above the accept_error line
    assert conv.norm.vmax == pytest.approx(1.5e200) and conv.norm.vmax <= 1.5 * DRAW_MAX
    assert "2 values infinite or beyond" in conv.caption
    p = figures_cli(root)
    assert p.returncode == 0, p.stderr
    assert manifest(root)["placeholders"] == {}


def test_a_figure_that_cannot_be_drawn_becomes_a_listed_placeholder(tmp_path, monkeypatch):
    import holoscan.scan.figures.eos as eos
    from holoscan.scan.figures import write_figures

    rows = [_row("rn", "rn", 4, T, mu) for T in (0.5, 1.0) for mu in (0.0, 1.0)]
    root = write_scan(tmp_path / "ph", rows, [("rn", "rn", {"d": 4})])

    def broken(*a, **k):
        raise RuntimeError("the equation of state cannot be drawn today")

    monkeypatch.setattr(eos, "plot_eos", broken)
    written = write_figures(root)
    assert sorted(written) == sorted(str(root / n) for n in [*figure_files([("rn", "rn")]), MANIFEST])
    man = manifest(root)
    assert list(man["placeholders"]) == ["figures/rn-eos"]
    assert "RuntimeError: the equation of state cannot be drawn today" in man["placeholders"]["figures/rn-eos"]
    assert "could not be drawn" in man["captions"]["figures/rn-eos"]
    _valid_png(root / "figures/rn-eos.png")
    assert (root / "figures/rn-eos.pdf").read_bytes()[:5] == b"%PDF-"
    assert not list((root / "figures").glob(".*.tmp-*"))  # no temporary file (store.temporary_name) left
    # the other figures are drawn as usual
    assert "figures/rn-phase-diagram" in man["captions"] and "could not" not in man["captions"]["figures/rn-phase-diagram"]


@pytest.mark.workflow
def test_unreadable_tables(tmp_path):
    rows = [_row("rn", "rn", 4, T, mu) for T in (0.5, 1.0) for mu in (0.0, 1.0)]
    root = write_scan(tmp_path / "bad", rows, [("rn", "rn", {"d": 4})])
    (root / "phases.parquet").write_bytes(b"this is not parquet")
    p = figures_cli(root)
    assert p.returncode == 0, p.stderr
    assert "phases.parquet could not be read" in manifest(root)["captions"]["figures/rn-phase-diagram"]
    (root / "points.parquet").write_bytes(b"PAR1 but not really")
    p = figures_cli(root)
    assert p.returncode == 2 and "Traceback" not in p.stderr
    assert p.stderr.count("\n") == 1 and "RESULTS_DIR" in p.stderr and "points.parquet" in p.stderr


@pytest.mark.workflow
def test_figures_of_an_earlier_config_are_removed_and_nothing_else(tmp_path):
    rows = [_row(m, "rn", 4, T, mu) for m in ("a", "b") for T in (0.5, 1.0) for mu in (0.0, 1.0)]
    root = write_scan(tmp_path / "s", rows, [("a", "rn", {"d": 4}), ("b", "rn", {"d": 4})])
    assert figures_cli(root).returncode == 0
    mine = root / "figures" / "my-notes.png"
    mine.write_bytes(b"not made by holoscan")
    outside = root / "points-copy.parquet"
    outside.write_bytes((root / "points.parquet").read_bytes())
    # the next config has model a only; a previous manifest naming a file outside figures/ is ignored
    man = manifest(root)
    man["files"].append("points-copy.parquet")
    man["files"].append("figures/../points-copy.parquet")
    (root / MANIFEST).write_text(json.dumps(man))
    write_scan(root, [r for r in rows if r["model_id"] == "a"], [("a", "rn", {"d": 4})])
    p = figures_cli(root)
    assert p.returncode == 0, p.stderr
    on_disk = {f.relative_to(root).as_posix() for f in (root / "figures").iterdir()}
    assert on_disk == set(figure_files([("a", "rn")])) | {MANIFEST, "figures/my-notes.png", "figures/.cache"}
    assert outside.exists() and mine.read_bytes() == b"not made by holoscan"
    # the cache of drawn figures keeps model a's entries only
    assert {f.name.split(".")[0] for f in (root / "figures" / ".cache").iterdir()} == {
        "a-eos", "a-phase-diagram", "a-kurtosis", "a-transport"}
    assert sorted(manifest(root)["removed"]) == sorted(n for n in figure_files([("b", "rn")]) if "/b-" in n)


# -- what the figures show -------------------------------------------------------------------------

def _rn_s_hat(T, mu, kappa_sq, e_sq):
    """s/T^3 of the RN-AdS_5 brane (module docstring)."""
    g2 = 3 * e_sq / (2 * kappa_sq)
    rh = (4 * math.pi * T + math.sqrt(16 * math.pi**2 * T**2 + 8 * mu**2 / g2)) / 8
    return 2 * math.pi * rh**3 / kappa_sq / T**3


def _pixel(pd_, mu, T):
    j = int(np.searchsorted(pd_.mu_edges, mu) - 1)
    i = int(np.searchsorted(pd_.T_edges, T) - 1)
    return i, j


def test_a_one_phase_diagram_is_shaded_by_the_reduced_entropy(tmp_path):
    from holoscan.scan.figures.data import load_scan
    from holoscan.scan.figures.phase_diagram import plot_phase_diagram

    k2, e2 = 0.5, 2.0
    grid = [(T, mu) for T in (0.1, 0.2, 0.5, 1.0) for mu in (-2.0, 0.0, 1.0, 3.0)]
    rows = [_row("rn4", "rn", 4, T, mu, s_hat=_rn_s_hat(T, mu, k2, e2)) for T, mu in grid]
    root = write_scan(tmp_path / "rn", rows, [("rn4", "rn", {"d": 4, "kappa_sq": k2, "e_sq": e2})])
    d = plot_phase_diagram(load_scan(root), "rn4", "rn")
    for T, mu in grid:  # each grid point's cell carries its own s/T^3
        i, j = _pixel(d, mu, T)
        assert d.values[i, j] == pytest.approx(_rn_s_hat(T, mu, k2, e2), rel=1e-12)
    shown = d.values[np.isfinite(d.values)]
    # not one flat colour: as many shades as distinct values on the grid (equal mu/T share one)
    assert len(np.unique(shown)) == len({_rn_s_hat(T, mu, k2, e2) for T, mu in grid}) > 1
    title = d.fig._suptitle.get_text()
    assert "s/T^{3}" in title and CODE not in title and not re.search(r"\d+ T x \d+|\.\.", title)
    assert "grid 4 T x 4 mu" in d.caption and CODE in d.caption


def test_the_two_sides_of_a_first_order_line_are_shaded_apart(tmp_path):
    from holoscan.scan.figures.data import load_scan
    from holoscan.scan.figures.phase_diagram import plot_phase_diagram

    # a first-order line at T* = 0.2 for every mu: the dominant branch jumps from s/T^3 = 10 to 40
    Ts, mus = (0.16, 0.18, 0.22, 0.24), (0.0, 0.5, 1.0)
    rows, phases = [], []
    for T in Ts:
        for mu in mus:
            hi = T > 0.2
            rows.append(_row("emd1", "emd", 4, T, mu, branch=0, s_hat=40.0, phase="high-entropy", dominant=hi))
            rows.append(_row("emd1", "emd", 4, T, mu, branch=1, s_hat=10.0, phase="low-entropy", dominant=not hi))
            phases.append({"model_id": "emd1", "kind": "emd", "T": T, "mu": mu, "dominant_branch": 0 if hi else 1,
                           "dominant_phase": "high-entropy" if hi else "low-entropy", "status": "ok"})
    trans = [{"model_id": "emd1", "kind": "emd", "type": "first-order", "T": 0.2, "mu": mu, "mu_over_T": mu / 0.2,
              "T_err": 1e-9, "mu_err": 0.0, "status": "ok", "extra": "{}"} for mu in mus]
    root = write_scan(tmp_path / "fo", rows, [("emd1", "emd", {})], phases=phases, transitions=trans)
    d = plot_phase_diagram(load_scan(root), "emd1", "emd")
    for mu in mus:
        assert d.values[_pixel(d, mu, 0.18)] == 10.0 and d.values[_pixel(d, mu, 0.22)] == 40.0
    (line,) = d.lines["first-order"]
    assert line.get_zorder() > 1  # the line lies on top of the shading
    assert sorted(d.phase_names) == ["high-entropy", "low-entropy"]


def _sc_tables(xs, x_c):
    """A conformal charged-scalar model at T = 1 and mu = x: a normal branch everywhere and a
    condensed one beyond x_c, meeting at x_c in s_hat and P_hat, jumping there in chi2_hat."""
    def normal(x):
        return {"s_hat": 100 + 5 * x, "P_hat": 10 + x, "chi2_hat": 1 + 0.5 * x}

    def condensed(x):
        n = normal(x_c)
        return {"s_hat": n["s_hat"] + 2 * (x - x_c), "P_hat": n["P_hat"] + 3 * (x - x_c),
                "chi2_hat": 10 + (x - x_c)}

    rows = []
    for x in xs:
        rows.append(_row("sc", "charged-scalar", 3, 1.0, x, branch=0, phase="normal", dominant=x < x_c, **normal(x)))
        if x > x_c:
            rows.append(_row("sc", "charged-scalar", 3, 1.0, x, branch=1, phase="condensed", dominant=True,
                             **condensed(x)))
    trans = [{"model_id": "sc", "kind": "charged-scalar", "type": "second-order", "T": 1.0, "mu": x_c,
              "mu_over_T": x_c, "T_err": 0.0, "mu_err": 0.0, "status": "ok", "extra": "{}"}]
    return rows, trans, normal, condensed


def test_the_equation_of_state_reaches_a_second_order_line(tmp_path):
    from holoscan.scan.figures.data import load_scan
    from holoscan.scan.figures.eos import plot_eos

    x_c = 10.0
    rows, trans, normal, condensed = _sc_tables([0.0, 2.0, 4.0, 6.0, 8.0, 12.0, 14.0, 16.0], x_c)
    root = write_scan(tmp_path / "sc", rows, [("sc", "charged-scalar", {"d": 3, "delta": 2.0})], transitions=trans)
    e = plot_eos(load_scan(root), "sc", "charged-scalar")
    # s/T^2 and P/T^3 are continuous at a second-order line: one unbroken curve through x_c at the
    # normal branch's value there (exact here: the normal branch is linear)
    for q in ("s_hat", "P_hat"):
        x, y = e.drawn[q]
        assert not np.isnan(y).any(), q
        k = int(np.flatnonzero(x == x_c)[0])
        assert y[k] == pytest.approx(normal(x_c)[q], rel=1e-12)
        assert x[k - 1] == 8.0 and x[k + 1] == 12.0
    # chi2/T jumps: each side ends at the line, the normal side at its value, the condensed side at
    # its straight-line extrapolation from x = 12, 14 (exact here), broken in between
    x, y = e.drawn["chi2_hat"]
    k = int(np.flatnonzero(np.isnan(x))[0])
    assert (x[k - 1], x[k + 1]) == (x_c, x_c)
    assert y[k - 1] == pytest.approx(normal(x_c)["chi2_hat"]) and y[k + 1] == pytest.approx(condensed(x_c)["chi2_hat"])
    assert "second-order line" in e.caption


def test_the_mean_field_guide_needs_enough_points_near_T_c(tmp_path):
    from holoscan.scan.figures.condensate import MIN_FIT_POINTS, plot_condensate
    from holoscan.scan.figures.data import load_scan

    C0, delta, T_c = 3.7, 2.0, 1.0

    def rows_at(ts):
        out = []
        for t in ts:
            O = C0 * math.sqrt(1 - t) * T_c**delta if t < 1 else 0.0
            out.append(_row("sc", "charged-scalar", 3, t * T_c, 10.0 * T_c, phase="condensed" if t < 1 else "normal",
                            extra=json.dumps({"T_c": T_c, "condensate": O})))
        return out

    block = [("sc", "charged-scalar", {"d": 3, "delta": delta})]
    # two points near T_c (and others far from it): no guide, and the caption says why
    root = write_scan(tmp_path / "few", rows_at([0.3, 0.5, 0.7, 0.92, 0.97, 1.1]), block)
    c = plot_condensate(load_scan(root), "sc", "charged-scalar")
    assert c.amplitude is None and c.fit_points == 2
    assert "no mean-field guide" in c.caption and f"at least {MIN_FIT_POINTS}" in c.caption
    # enough points on the mean-field shape: the fitted amplitude is C0 (least squares on exact data)
    root = write_scan(tmp_path / "many", rows_at([0.3, 0.5, 0.9, 0.92, 0.95, 0.97, 0.99, 1.1]), block)
    c = plot_condensate(load_scan(root), "sc", "charged-scalar")
    assert c.fit_points == 5 and c.amplitude == pytest.approx(C0, rel=1e-12)
    assert "fitted on the 5 condensed points" in c.caption


def test_titles_carry_no_grid_or_hash(tmp_path):
    from holoscan.scan.figures import write_figures

    rows, trans, _, _ = _sc_tables([0.0, 4.0, 8.0, 12.0, 16.0], 10.0)
    rows += [_row("rn", "rn", 4, T, mu) for T in (0.5, 1.0) for mu in (0.0, 1.0)]
    root = write_scan(tmp_path / "t", rows, [("sc", "charged-scalar", {"d": 3, "delta": 2.0}), ("rn", "rn", {"d": 4})],
                      transitions=trans)
    import matplotlib.pyplot as plt

    titles = []
    real = plt.Figure.suptitle

    def spy(self, t, **kw):
        titles.append(t)
        return real(self, t, **kw)

    try:
        plt.Figure.suptitle = spy
        write_figures(root)
    finally:
        plt.Figure.suptitle = real
    assert len(titles) == len(figure_files([("sc", "charged-scalar"), ("rn", "rn")])) // 2
    for t in titles:  # no hash, no version, no grid size ("4 T x 2 mu") or range ("T 0.5..1")
        assert CODE not in t and "9.9.9" not in t and not re.search(r"\d+ T x \d+|\.\.", t), t
    caps = manifest(root)["captions"]
    assert all(CODE in c for c in caps.values())
    assert all("grid" in c for s, c in caps.items() if s != "figures/convergence")
