"""``holoscan export --layout epsilon-rho``: the equation of state on a regular (epsilon, rho) grid.

Scenario: a scan of Reissner-Nordstrom-AdS5 (kind rn, closed form) made in process by the same code
the workflow's jobs run (plan, chunk job, assembly, phase tables; no Snakemake): model ``a`` on a
25 x 25 (T, mu) grid, model ``h`` (the same physics) on a 13 x 13 grid where one interior point is
then marked ``not converged`` with empty values, as a chunk job writes a failed point, and model
``r`` on a grid of 20 temperatures (log-spaced) by 21 ratios mu/T.

Reference: the closed form of Chamblin, Emparan, Johnson & Myers 1999 (Phys. Rev. D 60, 064018),
normalised as in Hartnoll 2009 (Class. Quant. Grav. 26, 224002), with d = 4 and
``gamma^2 = 3 e^2 / (2 kappa^2)``::

    r_h = (4 pi T + sqrt(16 pi^2 T^2 + 32 mu^2 / gamma^2)) / 8
    s = 2 pi r_h^3 / kappa^2,   rho = 2 mu r_h^2 / e^2,
    P = (r_h^4 + mu^2 r_h^2 / gamma^2) / (2 kappa^2),   epsilon = 3 P.

Given ``(epsilon, rho)``: ``mu = rho e^2 / (2 r_h^2)``, and ``epsilon = 3 (r_h^4 + c / r_h^2) / (2 kappa^2)``
with ``c = rho^2 e^4 / (4 gamma^2)`` is increasing in ``r_h`` on the branch ``T > 0``
(``r_h^6 > c / 2``), where ``T = (4 r_h^2 - 2 mu^2 / gamma^2) / (4 pi r_h)``. The test solves it for
``r_h`` with scipy's brentq, polished by mpmath's findroot at 30 digits, and checks that every
stated error bound holds: |actual| <= estimate for T, mu, P, s, cs2 and chi2 at every ok node.
The plasma is conformal, so ``P = epsilon / 3`` and ``cs2 = 1 / 3`` (d = 4; common practice, no
source); the table's ``P`` must equal ``epsilon / 3`` within its ``P_err``.
"""
from __future__ import annotations

import csv
import json

import mpmath as mp
import numpy as np
import pandas as pd
import pyarrow.parquet as pq
import pytest
from scipy.optimize import brentq

from holoscan.cli import main
from holoscan.scan.assemble import assemble
from holoscan.scan.chunk import run_chunk
from holoscan.scan.config import validate_scan_config
from holoscan.scan.export import InverseSpec, export_inverse
from holoscan.scan.invert import TensorGrid, invert, line_cuts
from holoscan.scan.phase_tables import build_phase_tables
from holoscan.scan.plan import make_plan, write_plan_files

KAPPA_SQ, E_SQ = 0.5, 2.0
RN = {"kind": "rn", "d": 4, "kappa_sq": KAPPA_SQ, "e_sq": E_SQ}
GRID_A = {"T": {"min": 0.25, "max": 1.0, "num": 25}, "mu": {"min": -1.0, "max": 2.0, "num": 25}}
GRID_H = {"T": {"min": 0.4, "max": 1.0, "num": 13}, "mu": {"min": 0.0, "max": 1.2, "num": 13}}
GRID_R = {"T": {"min": 0.3, "max": 1.0, "num": 20, "spacing": "log"}, "mu_over_T": {"min": 0.0, "max": 3.0, "num": 21}}
BAD = (0.7, 0.6)     # the point of model h marked not converged (grid indices 6, 6)
NUM = ["epsilon", "rho", "T", "mu", "P", "s", "cs2", "chi2", "T_err", "mu_err", "P_err", "s_err", "cs2_err", "chi2_err"]


@pytest.fixture(scope="module")
def scan(tmp_path_factory):
    """results/inv of the two models, made by the workflow's own steps in this process."""
    tmp = tmp_path_factory.mktemp("inverse")
    cfg = {"scan": "inv", "models": [{"id": "a", **RN}, {"id": "h", **RN, "grid": GRID_H},
                                     {"id": "r", **RN, "grid": GRID_R}], "grid": GRID_A}
    plan = make_plan(validate_scan_config(cfg), tmp)
    write_plan_files(plan)
    for c in plan.chunk_ids:
        run_chunk(plan.chunk_manifest(c), plan.segment(c), log_file="", log=lambda m: None)
    root = plan.root
    points = root / "points.parquet"
    assemble(plan.table_file, points, root / "summary.json")
    t = pq.read_table(points)
    rows = t.to_pylist()
    for r in rows:
        if r["model_id"] == "h" and (r["T"], r["mu"]) == BAD:
            r.update(status="not converged", message="failed to converge (marked for this test)",
                     **{k: None for k in ("s", "rho", "epsilon", "P", "Omega", "chi2", "cs2", "error_estimate")})
    pq.write_table(t.from_pylist(rows, schema=t.schema), points)
    models = json.loads(plan.table_file.read_text())["models"]
    build_phase_tables(points, [], [], root / "phases.parquet", root / "transitions.parquet",
                       root / "critical_points.parquet", models)
    return root


# -- the exact inversion of the closed form -------------------------------------------------------

GAMMA_SQ = 3 * E_SQ / (2 * KAPPA_SQ)


def exact(eps: float, rho: float):
    """(T, mu, s, chi2) of RN-AdS5 at (epsilon, rho), or None when no T > 0 has them (closed form above)."""
    c = rho * rho * E_SQ**2 / (4 * GAMMA_SQ)
    g = lambda r: 3 * (r**4 + (c / r**2 if c else 0.0)) / (2 * KAPPA_SQ) - eps
    r_min = (c / 2) ** (1 / 6)
    if c and g(r_min) >= 0:
        return None
    r_hi = max(2 * r_min, 1.0)
    while g(r_hi) < 0:
        r_hi *= 2
    r0 = brentq(g, r_min, r_hi, xtol=1e-15, rtol=1e-15)
    with mp.workdps(30):
        E, R, c_ = mp.mpf(eps), mp.mpf(rho), mp.mpf(rho) ** 2 * E_SQ**2 / (4 * GAMMA_SQ)
        r = mp.findroot(lambda r: 3 * (r**4 + c_ / r**2) / (2 * KAPPA_SQ) - E, mp.mpf(r0))
        mu = R * E_SQ / (2 * r * r)
        T = (4 * r * r - 2 * mu * mu / GAMMA_SQ) / (4 * mp.pi * r)
        s = 2 * mp.pi * r**3 / KAPPA_SQ
        root = mp.sqrt(16 * mp.pi**2 * T * T + 32 * mu * mu / GAMMA_SQ)
        dr_dmu = 4 * mu / (GAMMA_SQ * root)
        chi2 = (2 / mp.mpf(E_SQ)) * (r * r + 2 * mu * r * dr_dmu)
        if T <= 0:
            return None
        return float(T), float(mu), float(s), float(chi2)


def read_csv(path):
    """The CSV read back with Python's own float parser (exact: shortest repr round-trips)."""
    lines = [ln for ln in path.read_text().splitlines() if not ln.startswith("#")]
    names, *body = list(csv.reader(lines))
    cols = {n: [row[k] for row in body] for k, n in enumerate(names)}
    return pd.DataFrame({n: [float(x) if x else np.nan for x in v] if n in NUM else v for n, v in cols.items()})


def run(*args):
    return main(["export", *map(str, args)])


@pytest.fixture(scope="module")
def table_a(scan, tmp_path_factory):
    out = tmp_path_factory.mktemp("a") / "a.csv"
    assert run(scan, "--model", "a", "--layout", "epsilon-rho", "--nodes", "30", "--out", out) == 0
    return out, read_csv(out)


def test_every_stated_error_bounds_the_exact_inversion(table_a):
    out, t = table_a
    ok = t[t["status"] == "ok"]
    assert len(ok) > 300
    worst, checked = {}, 0
    for r in ok.itertuples():
        ref = exact(r.epsilon, r.rho)
        assert ref is not None, (r.epsilon, r.rho)
        T, mu, s, chi2 = ref
        for name, actual, est in (("T", r.T - T, r.T_err), ("mu", r.mu - mu, r.mu_err), ("s", r.s - s, r.s_err),
                                  ("P", r.P - r.epsilon / 3, r.P_err), ("cs2", r.cs2 - 1 / 3, r.cs2_err),
                                  ("chi2", r.chi2 - chi2, r.chi2_err)):
            assert abs(actual) <= est, (name, r.epsilon, r.rho, actual, est)
            worst[name] = max(worst.get(name, 0.0), abs(actual) / est)
        checked += 1
    header = json.loads(out.read_text().splitlines()[0].split("holoscan export: ", 1)[1])
    # the header's accuracy is the largest relative estimate over the ok nodes
    rel_T = (ok["T_err"] / ok["T"]).max()
    assert header["accuracy"]["T"] == pytest.approx(rel_T, rel=1e-12)
    assert header["accuracy"]["all"] >= max(v for k, v in header["accuracy"].items() if k != "all")
    print(f"\n{checked} ok nodes; worst actual/estimate: " + ", ".join(f"{k} {v:.3g}" for k, v in worst.items())
          + f"; stated accuracy {header['accuracy']}")


def test_a_grid_of_mu_over_T_ratios_is_inverted_within_its_bounds(scan, tmp_path):
    # mu = canon(ratio T) (12 digits): the nodes sit at their ratio to ~1e-12, which the bound counts
    out = tmp_path / "r.csv"
    assert run(scan, "--model", "r", "--layout", "epsilon-rho", "--nodes", "25", "--out", out) == 0
    t = read_csv(out)
    ok = t[t["status"] == "ok"]
    assert len(ok) > 150
    for r in ok.itertuples():
        T, mu, s, chi2 = exact(r.epsilon, r.rho)
        for actual, est in ((r.T - T, r.T_err), (r.mu - mu, r.mu_err), (r.s - s, r.s_err), (r.chi2 - chi2, r.chi2_err)):
            assert abs(actual) <= est, (r.epsilon, r.rho, actual, est)
    assert "mu_over_T" in out.read_text().splitlines()[0]


def test_nodes_are_marked_outside_the_solved_region_and_ok_inside(table_a):
    _, t = table_a
    Ts = np.linspace(0.25, 1.0, 25)
    mus = np.linspace(-1.0, 2.0, 25)
    hT, hmu = Ts[1] - Ts[0], mus[1] - mus[0]
    outside = inside = 0
    for r in t.itertuples():
        ref = exact(r.epsilon, r.rho)
        if ref is None:
            assert r.status == "outside grid", (r.epsilon, r.rho)     # no T > 0 has these densities
            outside += 1
            continue
        T, mu = ref[:2]
        margin = 0.05
        if Ts[0] + margin * hT < T < Ts[-1] - margin * hT and mus[0] + margin * hmu < mu < mus[-1] - margin * hmu:
            assert r.status == "ok", (r.epsilon, r.rho, T, mu, r.status)
            inside += 1
        elif not (Ts[0] - margin * hT < T < Ts[-1] + margin * hT and mus[0] - margin * hmu < mu < mus[-1] + margin * hmu):
            assert r.status == "outside grid" and "outside the region" in r.reason, (T, mu, r.status)
            assert np.isnan(r.T) and np.isnan(r.P)                      # marked, never filled
            outside += 1
    assert inside > 300 and outside > 100


def test_nodes_next_to_a_point_that_is_not_ok_are_marked(scan, tmp_path):
    out = tmp_path / "h.parquet"
    assert run(scan, "--model", "h", "--layout", "epsilon-rho", "--nodes", "40,30", "--format", "parquet",
               "--out", out) == 0
    t = pq.read_table(out).to_pandas()
    header = json.loads(pq.read_schema(out).metadata[b"holoscan-export"])
    assert header["layout"] == "epsilon-rho" and header["source_grid"]["usable"] == 13 * 13 - 1
    Ts, mus = np.linspace(0.4, 1.0, 13), np.linspace(0.0, 1.2, 13)
    hT, hmu = Ts[1] - Ts[0], mus[1] - mus[0]
    near = ok = 0
    for r in t.itertuples():
        ref = exact(r.epsilon, r.rho)
        if ref is None:
            assert r.status != "ok"
            continue
        T, mu = ref[:2]
        m = 0.05
        in_hole = abs(T - BAD[0]) < (1 - m) * hT and abs(mu - BAD[1]) < (1 - m) * hmu
        in_grid = Ts[0] + m * hT < T < Ts[-1] - m * hT and mus[0] + m * hmu < mu < mus[-1] - m * hmu
        # a node in a cell touched by the point is marked, with the point in its reason
        if in_hole:
            assert r.status == "next to not ok", (T, mu, r.status, r.reason)
            assert "the point T 0.7 E and mu 0.6 E is not converged" in r.reason
            assert np.isnan(r.T) and np.isnan(r.s)
            near += 1
        elif in_grid and (abs(T - BAD[0]) > (1 + m) * hT or abs(mu - BAD[1]) > (1 + m) * hmu):
            assert r.status == "ok", (T, mu, r.status, r.reason)
            assert abs(r.T - T) <= r.T_err and abs(r.mu - mu) <= r.mu_err and abs(r.s - ref[2]) <= r.s_err
            ok += 1
    assert near >= 4 and ok > 100, (near, ok)


def test_csv_round_trips_the_written_doubles(scan, table_a):
    _, back = table_a
    header, rows = export_inverse(scan, "a", InverseSpec((30, 30)))
    assert len(back) == len(rows) == 900
    assert header["grid"]["order"].startswith("epsilon outer")
    for c in NUM:
        want = [np.nan if r[c] is None else r[c] for r in rows]
        got = back[c].tolist()
        assert all((np.isnan(w) and np.isnan(g)) or w == g for w, g in zip(want, got)), c   # bit for bit
    assert back["status"].tolist() == [r["status"] for r in rows]
    assert back["reason"].tolist() == [r["reason"] for r in rows]


def test_a_scale_converts_every_column_by_its_power_of_E(scan, tmp_path, table_a):
    _, plain = table_a
    out = tmp_path / "mev.csv"
    assert run(scan, "--model", "a", "--layout", "epsilon-rho", "--nodes", "30", "--unit", "MeV", "--scale", 200,
               "--out", out) == 0
    scaled = read_csv(out)
    assert scaled["status"].tolist() == plain["status"].tolist()
    ok = plain["status"] == "ok"
    for c, power in (("epsilon", 4), ("rho", 3), ("T", 1), ("mu", 1), ("P", 4), ("s", 3), ("cs2", 0), ("chi2", 2),
                     ("T_err", 1), ("P_err", 4), ("s_err", 3)):
        assert scaled.loc[ok, c].tolist() == pytest.approx((plain.loc[ok, c] * 200.0**power).tolist(), rel=1e-9), c
    assert "epsilon [MeV^4]" in out.read_text().splitlines()[1]
    # an explicit range is in the output units
    out2 = tmp_path / "range.csv"
    assert run(scan, "--model", "a", "--layout", "epsilon-rho", "--nodes", "3,2", "--unit", "MeV", "--scale", 200,
               "--epsilon-range", "1e10,2e10", "--rho-range=-1e8,1e8", "--out", out2) == 0
    t = read_csv(out2)
    assert t["epsilon"].tolist() == [1e10, 1e10, 1.5e10, 1.5e10, 2e10, 2e10] and t["rho"].tolist() == [-1e8, 1e8] * 3


@pytest.mark.parametrize("args, key", [
    (("--layout", "eps-rho"), "--layout = 'eps-rho'"),
    (("--layout", "epsilon-rho", "--nodes", "1"), "--nodes = '1'"),
    (("--layout", "epsilon-rho", "--nodes", "10,x"), "--nodes = '10,x'"),
    (("--layout", "epsilon-rho", "--nodes", "4,5,6"), "--nodes = '4,5,6'"),
    (("--layout", "epsilon-rho", "--epsilon-range", "2,1"), "--epsilon-range = '2,1'"),
    (("--layout", "epsilon-rho", "--epsilon-range", "nan,1"), "--epsilon-range = 'nan,1'"),
    (("--layout", "epsilon-rho", "--rho-range", "1"), "--rho-range = '1'"),
    (("--nodes", "10"), "--nodes = '10': applies only to --layout epsilon-rho"),
    (("--layout", "epsilon-rho", "--scale", "-1"), "--scale = -1.0"),
])
def test_bad_options_are_one_line_before_any_work(args, key, tmp_path, capsys):
    out = tmp_path / "x.csv"
    # RESULTS_DIR does not exist: the options are checked first
    assert run(tmp_path / "missing", "--model", "a", *args, "--out", out) == 2
    err = capsys.readouterr().err
    assert err.startswith(f"holoscan: error: {key}") and err.count("\n") == 1, err
    assert not out.exists() and not (tmp_path / "missing").exists()


def test_an_unknown_model_is_named(scan, tmp_path, capsys):
    out = tmp_path / "x.csv"
    assert run(scan, "--model", "zz", "--layout", "epsilon-rho", "--out", out) == 2
    assert capsys.readouterr().err.startswith("holoscan: error: --model = 'zz'") and not out.exists()


# -- the inversion's numerics on maps built for the purpose ------------------------------------------

def _grid(fa, fb, label=None, x=None, y=None):
    x = np.linspace(1.0, 2.0, 11) if x is None else x
    y = np.linspace(-1.0, 1.0, 11) if y is None else y
    X, Y = np.meshgrid(x, y, indexing="ij")
    vals = {"a": fa(X, Y), "b": fb(X, Y)}
    errs = {k: np.zeros_like(v) for k, v in vals.items()}
    lab = np.zeros(X.shape, int) if label is None else label(X, Y)
    return TensorGrid(x, y, vals, errs, np.ones(X.shape, bool), lab)


@pytest.mark.parametrize("by", ["label", "line"])
def test_a_jump_is_never_interpolated_across(by):
    # a first-order line at x = 1.55: a jumps by 1 there (constructed, so the gap is known exactly);
    # it is known either from the branch labels or from a located line (one label then)
    jump = lambda X: X > 1.55
    g = _grid(lambda X, Y: X + jump(X), lambda X, Y: Y, label=(lambda X, Y: jump(X).astype(int)) if by == "label" else None)
    if by == "line":
        g.cut_x, g.cut_y, g.blocked = line_cuts(g.x, g.y, [([1.55, 1.55], [-3.0, 3.0], [0.0, 0.0], [0.0, 0.0])])
        assert g.cut_x[5].all() and not g.cut_x[[0, 1, 2, 3, 4, 6, 7, 8, 9]].any() and not g.cut_y.any()
        assert not g.blocked.any()                      # the line's ends are outside the grid
    targets = np.array([1.3, 1.9, 2.2, 2.8])          # 1.9, 2.2: in the gap between 1.5 and 2.6
    inv = invert(g, "a", "b", targets, np.array([0.05]), ["a"])
    assert inv.status == ["ok", "change", "change", "ok"]
    assert inv.x[0] == pytest.approx(1.3, abs=inv.x_err[0] + 1e-14)
    assert inv.x[3] == pytest.approx(1.8, abs=inv.x_err[3] + 1e-14)
    assert np.isnan(inv.x[1]) and inv.where[1] == ((5, 5),)     # the cell x in [1.5, 1.6], y in [0, 0.2]


def test_a_line_that_ends_blocks_its_cell_and_cuts_only_what_it_crosses():
    x, y = np.linspace(1.0, 2.0, 11), np.linspace(-1.0, 1.0, 11)
    # from below the grid up to (1.55, 0.1), the end inside the cell (5, 5), uncertain by 0.001 in y
    cut_x, cut_y, blocked = line_cuts(x, y, [([1.55, 1.55], [-3.0, 0.1], [0.0, 0.0], [0.0, 0.001])])
    assert cut_x[5, :6].all() and not cut_x[5, 6:].any() and not cut_y.any()
    assert np.argwhere(blocked).tolist() == [[5, 5]]


def test_a_folded_map_is_marked_not_filled():
    # a = (x - 1.52)^2 + y folds along x = 1.52: targets with a > 0 have two preimages in the grid
    g = _grid(lambda X, Y: (X - 1.52) ** 2, lambda X, Y: Y)
    inv = invert(g, "a", "b", np.array([0.01, 0.2]), np.array([0.1]), ["a"], orientation=-1)
    assert inv.status == ["fold", "fold"]
    assert np.isnan(inv.x).all()
