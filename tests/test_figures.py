"""Figures of a finished scan (holoscan/scan/figures/, `holoscan figures`, rule figures).

One small scan through the workflow (an rn model and the probe superconductor of Hartnoll, Herzog &
Horowitz 2008, PRL 101, 031601, with <O_2>, on a grid crossing T_c), then checks of the files and of
what the figures draw against the tables and against closed forms and published numbers.
"""
from __future__ import annotations

import json
import math
import shutil
import subprocess
import sys

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from workflow_helpers import scanned_workspace

pytest.importorskip("matplotlib")

from holoscan.scan.figures import MANIFEST, figure_files

pytestmark = pytest.mark.workflow  # one Snakemake scan for the file; `holoscan figures` and python subprocesses

CFG = {
    "scan": "figs",
    "models": [
        {"id": "rn", "kind": "rn", "d": 4, "kappa_sq": 0.5, "e_sq": 2.0},
        # probe O_2 superconductor: T_c = mu / x_c with x_c near 17; the grid crosses T_c at every mu
        {"id": "hhh", "kind": "charged-scalar", "d": 3, "m_sq": -2.0, "q": 1.0, "delta": 2.0, "probe": True,
         "grid": {"T": {"min": 0.06, "max": 0.1, "num": 5}, "mu": [0.0, 1.2, 1.5]}},
    ],
    "grid": {"T": {"min": 0.1, "max": 1.0, "num": 4, "spacing": "log"}, "mu": [-1.0, 0.0, 1.0]},
    "points_per_job": 50,
}
MODELS = [("rn", "rn"), ("hhh", "charged-scalar")]


@pytest.fixture(scope="module")
def scan(tmp_path_factory):
    return scanned_workspace(tmp_path_factory, CFG)


@pytest.fixture(scope="module")
def tables(scan):
    from holoscan.scan.figures.data import load_scan

    return load_scan(scan[1])


def _check_png(path):
    import matplotlib.image as mpimg

    assert path.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n", path
    img = mpimg.imread(path)
    assert img.shape[0] >= 400 and img.shape[1] >= 600, (path, img.shape)
    rgb = img[..., :3]
    assert float(rgb.std()) > 0.05, f"{path}: nearly uniform image"


def test_every_declared_figure_is_written_and_valid(scan):
    ws, root = scan
    names = figure_files(MODELS)
    assert len(names) == 2 * (4 + 5 + 1)  # png+pdf of: 4 rn, 5 charged-scalar (with kurtosis, transport), 1 convergence
    on_disk = {p.relative_to(root).as_posix() for p in (root / "figures").iterdir()}
    assert on_disk == set(names) | {MANIFEST, "figures/.cache"}  # nothing missing, nothing left over
    # the cache of drawn model figures: per figure its png, pdf and caption record, no .tmp files
    cached = sorted(p.name.split(".")[0] + "." + p.name.split(".")[-1] for p in (root / "figures/.cache").iterdir())
    stems = [n[len("figures/"):-4] for n in names if n.endswith(".png") and "convergence" not in n]
    assert cached == sorted(f"{s}.{e}" for s in stems for e in ("json", "pdf", "png"))
    for n in names:
        p = root / n
        if n.endswith(".png"):
            _check_png(p)
        else:
            assert p.read_bytes()[:5] == b"%PDF-" and p.stat().st_size > 5000, n
            assert b"CreationDate" not in p.read_bytes(), n  # reproducible: no date
    meta = json.loads(pq.read_schema(root / "points.parquet").metadata[b"holoscan"])
    man = json.loads((root / MANIFEST).read_text())
    assert man["code_hash"] == meta["code_hash"] and man["files"] == names
    # the closed-form rn rows carry chi4 and sigma: its kurtosis and transport figures are drawn
    assert not {"figures/rn-kurtosis", "figures/rn-transport"} & set(man["not_drawn"])
    assert (ws / "logs" / "figures" / "figs.log").exists()


def test_matplotlib_is_not_imported_by_the_package_or_the_target_list():
    code = ("import sys, holoscan, holoscan.cli, holoscan.scan.figures as f; f.figure_files([('a', 'rn')]); "
            "print('matplotlib' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"


def test_second_order_line_sits_at_the_onset_and_matches_hhh(tables):
    from holoscan.scan.figures.phase_diagram import plot_phase_diagram

    pd_ = plot_phase_diagram(tables, "hhh", "charged-scalar")
    (line,) = pd_.lines["second-order"]
    mu, T = np.asarray(line.get_xdata(), float), np.asarray(line.get_ydata(), float)
    assert sorted(mu) == [1.2, 1.5]  # the non-zero grid mu (no onset at mu = 0)
    tr = tables.transitions
    x_c = float(tr.loc[(tr["model_id"] == "hhh") & (tr["type"] == "second-order"), "mu_over_T"].iloc[0])
    np.testing.assert_allclose(T, mu / x_c, rtol=1e-12)
    # HHH PRL (3 digits): T_c = 0.118 sqrt(rho) for <O_2>; on the probe normal brane (d = 3, e^2 = 1)
    # rho = mu r_h and T = 3 r_h / (4 pi), so T_c / sqrt(rho) = sqrt(3 / (4 pi x_c))
    assert round(math.sqrt(3 / (4 * math.pi * x_c)), 3) == 0.118
    # no model line anywhere on the rn diagram
    assert plot_phase_diagram(tables, "rn", "rn").lines == {}


def _pixel(pd_, mu, T):
    j = int(np.searchsorted(pd_.mu_edges, mu) - 1)
    i = int(np.searchsorted(pd_.T_edges, T) - 1)
    return pd_.raster[i, j]


def test_shading_follows_the_phases_table(tables):
    from holoscan.scan.figures.phase_diagram import plot_phase_diagram

    pd_ = plot_phase_diagram(tables, "hhh", "charged-scalar")
    ph = tables.phases[tables.phases["model_id"] == "hhh"]
    assert set(ph["dominant_phase"]) == {"normal", "condensed"}
    for r in ph.itertuples():
        assert pd_.phase_names[_pixel(pd_, r.mu, r.T)] == r.dominant_phase, (r.T, r.mu)
    # and the table itself agrees with the located onset: condensed exactly below T_c = mu / x_c
    on = tables.transitions[tables.transitions["model_id"] == "hhh"]["mu_over_T"].iloc[0]
    assert all((r.dominant_phase == "condensed") == (r.mu / r.T > on) for r in ph.itertuples())


def test_condensate_vanishes_at_T_c(tables):
    from holoscan.scan.figures.condensate import plot_condensate

    c = plot_condensate(tables, "hhh", "charged-scalar")
    assert set(c.curves) == {1.2, 1.5}
    for mu, (t, y) in c.curves.items():
        assert np.all(y[t >= 1] == 0) and np.all(y[t < 1] > 0), mu
    # conformal: both mu fall on one curve in these units. Mean field: <O>^2 is linear in (1 - t) near
    # T_c; the line through the two points nearest below T_c (t = 0.993 at mu = 1.2, 0.908 at mu = 1.5)
    # must reach 0 at t = 1, within the curvature of <O>^2 over that interval
    t = np.concatenate([c.curves[m][0] for m in c.curves])
    y = np.concatenate([c.curves[m][1] for m in c.curves])
    below = np.argsort(np.where(t < 1, -t, np.inf))[:2]
    (t1, t2), (y1, y2) = t[below], y[below] ** 2
    assert t1 > 0.99 and t2 > 0.9
    t0 = t1 - y1 * (t2 - t1) / (y2 - y1)
    assert abs(t0 - 1) < 0.01, t0
    # two condensed points near T_c are too few for the mean-field guide: it is left out, and the
    # caption says so
    assert c.fit_points == 2 and c.amplitude is None and "no mean-field guide" in c.caption


def test_eos_against_mu_over_T_with_conformal_limits(tables):
    from holoscan.scan.figures.eos import plot_eos

    e = plot_eos(tables, "rn", "rn")
    x, ys = e.curves["all grid points"]
    assert e.x_name == "mu/T"
    # AdS5 brane at mu = 0: s = (2 pi / kappa^2) (pi T)^3, so s/T^3 = 2 pi^4 / kappa^2 (closed form)
    i0 = int(np.argmin(abs(x)))
    assert x[i0] == 0 and ys["s_hat"][i0] == pytest.approx(2 * math.pi**4 / 0.5, rel=1e-12)
    np.testing.assert_allclose(ys["cs2"], 1 / 3, rtol=1e-9)
    np.testing.assert_allclose(ys["trace_anomaly"], 0, atol=1e-9)
    assert np.all(np.diff(x) > 0) and np.all(ys["s_hat"][x > 0][1:] > ys["s_hat"][x > 0][:-1])


def test_failed_point_is_marked_and_other_figures_are_byte_identical(scan, tmp_path):
    _, root = scan
    copy = tmp_path / "figs"
    shutil.copytree(root, copy, ignore=shutil.ignore_patterns("figures"))
    # inject one failed grid point of model rn into both tables (observables gone, status failed)
    pts = pq.read_table(copy / "points.parquet")
    df = pts.to_pandas()
    k = df.index[(df["model_id"] == "rn") & (df["T"] == 1.0) & (df["mu"] == 1.0)][0]
    for col in ("s", "P", "error_estimate", "P_mismatch", "cs2", "s_hat", "P_hat"):
        df.loc[k, col] = np.nan
    df.loc[k, ["status", "dominant"]] = ["failed", False]
    pq.write_table(pa.Table.from_pandas(df, schema=pts.schema, preserve_index=False), copy / "points.parquet")
    ph = pq.read_table(copy / "phases.parquet")
    pdf = ph.to_pandas()
    j = pdf.index[(pdf["model_id"] == "rn") & (pdf["T"] == 1.0) & (pdf["mu"] == 1.0)][0]
    pdf.loc[j, ["status", "dominant_branch"]] = ["failed", -1]
    pq.write_table(pa.Table.from_pandas(pdf, schema=ph.schema, preserve_index=False), copy / "phases.parquet")

    p = subprocess.run([sys.executable, "-m", "holoscan", "figures", str(copy)], capture_output=True, text=True,
                       timeout=300)
    assert p.returncode == 0, p.stderr
    assert sorted(p.stdout.split()[1::2]) == sorted(str(copy / n) for n in [*figure_files(MODELS), MANIFEST])

    from holoscan.scan.figures.convergence import plot_convergence
    from holoscan.scan.figures.data import load_scan
    from holoscan.scan.figures.phase_diagram import plot_phase_diagram

    t = load_scan(copy)
    d = plot_phase_diagram(t, "rn", "rn")
    assert d.marked["failed"] == [(1.0, 1.0)] and d.marked["unconverged"] == []
    xs = [ln for ln in d.ax.lines if ln.get_marker() == "X"]
    assert len(xs) == 1 and list(xs[0].get_xdata()) == [1.0] and list(xs[0].get_ydata()) == [1.0]
    assert d.phase_names[_pixel(d, 1.0, 1.0)] == "none"  # no dominant phase shaded there
    conv = plot_convergence(t, MODELS)
    assert conv.marked[("rn", "failed")] == [(1.0, 1.0)] and conv.marked[("hhh", "failed")] == []
    # the figures that do not show model rn's points are the same bytes as the workflow's (reproducible)
    for n in figure_files([("hhh", "charged-scalar")])[:-2]:
        assert (copy / n).read_bytes() == (root / n).read_bytes(), n
    for n in ("figures/rn-phase-diagram.png", "figures/convergence.png"):
        assert (copy / n).read_bytes() != (root / n).read_bytes(), n


def test_figures_of_untouched_models_are_copied_not_drawn(scan, tmp_path):
    # a figure is a function of its model's rows, config block and the drawing code (common practice,
    # no source): run again on unchanged tables, every model figure comes from figures/.cache with the
    # same bytes; change model rn's rows, and only rn's figures (and the all-model convergence map)
    # are drawn again
    _, root = scan
    copy = tmp_path / "again"
    shutil.copytree(root, copy)
    assert any((copy / "figures" / ".cache").iterdir())
    n_model = len(figure_files(MODELS)) // 2 - 1          # figures per model, without the convergence map

    def run():
        p = subprocess.run([sys.executable, "-m", "holoscan", "figures", str(copy)], capture_output=True,
                           text=True, timeout=300)
        assert p.returncode == 0, p.stderr
        return p.stderr

    assert f"1 figure(s) drawn, {n_model} of untouched models copied" in run()
    for n in figure_files(MODELS):
        assert (copy / n).read_bytes() == (root / n).read_bytes(), n
    pts = pq.read_table(copy / "points.parquet")
    df = pts.to_pandas()
    for col in ("P", "P_hat", "s", "s_hat", "chi2_hat"):
        df.loc[(df["model_id"] == "rn") & (df["T"] == 1.0), col] *= 1.5
    pq.write_table(pa.Table.from_pandas(df, schema=pts.schema, preserve_index=False), copy / "points.parquet")
    n_rn = len(figure_files([("rn", "rn")])) // 2 - 1
    assert f"{1 + n_rn} figure(s) drawn, {n_model - n_rn} of untouched models copied" in run()
    for n in figure_files([("hhh", "charged-scalar")])[:-2]:
        assert (copy / n).read_bytes() == (root / n).read_bytes(), n
    assert (copy / "figures/rn-eos.png").read_bytes() != (root / "figures/rn-eos.png").read_bytes()


def test_missing_points_table_is_an_error(tmp_path):
    p = subprocess.run([sys.executable, "-m", "holoscan", "figures", str(tmp_path)], capture_output=True,
                       text=True, timeout=120)
    assert p.returncode == 3 and "points.parquet" in p.stderr
