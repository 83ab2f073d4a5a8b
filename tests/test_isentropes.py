"""Isentropes (paths of fixed s/rho) traced from a solved grid.

Scenarios: a conformal model in process (below); a two-phase model in closed form whose paths follow
its first-order line (fast, no solver); the default config's dilaton-demo block through the workflow,
checked against direct solves (workflow tier). Each section names its sources.

Scenario: Reissner-Nordstrom-AdS5 (closed form: Chamblin, Emparan, Johnson & Myers 1999, Phys. Rev.
D 60, 064018), a conformal model, so s/rho depends on mu/T alone (common practice, no source):
- on a grid given as mu/T ratios each isentrope must be exactly a line mu/T = const, at the ratio
  where the closed form's s/rho takes the value (found here by scipy's brentq on the closed form);
- on a grid given in mu, the located points must have the requested s/rho when the closed form is
  evaluated there, within the stated mu_err.
"""
from __future__ import annotations

import math

import pyarrow.parquet as pq
import pytest
from scipy.optimize import brentq

from holoscan import RNModel, SolverSettings, solve_point
from holoscan.scan.assemble import assemble
from holoscan.scan.chunk import run_chunk
from holoscan.scan.config import validate_scan_config
from holoscan.scan.isentropes import isentropes_table
from holoscan.scan.plan import make_plan, write_plan_files

CLOSED = SolverSettings(method="closed-form")
MODEL = {"id": "q", "kind": "rn", "d": 4, "kappa_sq": 0.5, "e_sq": 2.0}
VALUES = [20.0, 40.0]   # s/rho between 11 (mu/T = 4) and 79 (mu/T = 0.5) of this model


def s_over_rho(T, mu):
    (r,) = solve_point(RNModel("q", 4, kappa_sq=0.5, e_sq=2.0), T, mu, CLOSED)
    return r.s / r.rho


def traced(cfg, tmp_path):
    plan = make_plan(validate_scan_config(cfg), tmp_path)
    write_plan_files(plan)
    for c in plan.chunk_ids:
        run_chunk(plan.chunk_manifest(c), plan.segment(c), log_file="", log=lambda m: None)
    out = plan.root / "points.parquet"
    assemble(plan.table_file, out, plan.root / "summary.json")
    import json

    models = json.loads(plan.table_file.read_text())["models"]
    return isentropes_table(pq.read_table(out), models).to_pylist()


def test_isentropes_of_a_conformal_model_are_lines_of_fixed_mu_over_T(tmp_path):
    cfg = {"scan": "iso", "models": [{**MODEL, "isentropes": VALUES}],
           "grid": {"T": [0.2, 0.35, 0.6, 1.1], "mu_over_T": {"min": 0.0, "max": 4.0, "num": 41}}}
    rows = traced(cfg, tmp_path)
    for v in VALUES:
        mine = [r for r in rows if r["s_over_rho"] == v]
        assert len(mine) == 4 and all(r["status"] == "ok" for r in mine)
        x = [r["mu_over_T"] for r in mine]
        assert max(x) - min(x) <= 1e-12 * max(x)                       # one straight line
        exact = brentq(lambda y, v=v: s_over_rho(1.0, y) - v, 0.05, 4.0, xtol=1e-15, rtol=1e-15)
        err = max(r["mu_err"] / r["T"] for r in mine)
        assert abs(x[0] - exact) <= err, (x[0], exact, err)             # the estimate bounds the error


def test_isentropes_on_a_mu_grid_have_the_requested_s_over_rho(tmp_path):
    cfg = {"scan": "iso2", "models": [{**MODEL, "isentropes": VALUES}],
           "grid": {"T": [0.25, 0.5], "mu": {"min": 0.0, "max": 2.0, "num": 41}}}
    rows = traced(cfg, tmp_path)
    assert {r["status"] for r in rows} == {"ok"} and len(rows) == 4
    # the phase diagram draws them where the table puts them
    pytest.importorskip("matplotlib")
    import pyarrow as pa

    from holoscan.scan.figures.data import load_scan
    from holoscan.scan.figures.phase_diagram import plot_phase_diagram

    root = tmp_path / "iso2"
    pq.write_table(pa.Table.from_pylist(rows), root / "isentropes.parquet")
    fig = plot_phase_diagram(load_scan(root), "q", "rn")
    for v in VALUES:
        assert fig.isentropes[v] == [(r["mu"], r["T"]) for r in rows if r["s_over_rho"] == v]
    for r in rows:
        h = 1e-6
        slope = (s_over_rho(r["T"], r["mu"] + h) - s_over_rho(r["T"], r["mu"] - h)) / (2 * h)
        assert abs(s_over_rho(r["T"], r["mu"]) - r["s_over_rho"]) <= abs(slope) * r["mu_err"] * (1 + 1e-6)
    # a value outside the grid's range of s/rho has no crossing: no row, not a made-up one
    cfg["models"][0]["isentropes"] = [1e-3]
    assert traced(cfg, tmp_path / "again") == []


def test_isentropes_must_be_nonzero_numbers():
    from holoscan.errors import InputError

    with pytest.raises(InputError) as e:
        validate_scan_config({"scan": "x", "grid": {"T": [0.2], "mu": [0.0]}, "models": [{**MODEL, "isentropes": [0]}]})
    assert "models[0].isentropes[0]" in str(e.value)
    assert math.isfinite(VALUES[0])


# --- paths that meet a first-order line ------------------------------------------------------------
#
# Scenario (fast, no solver): a two-phase model in closed form, each phase a polynomial pressure
# P = a T^4 + b T^2 mu^2 + c mu^4 - B, the form of the bag-model equation of state (Chodos, Jaffe,
# Johnson, Thorn & Weisskopf 1974, Phys. Rev. D 9, 3471; from memory) with invented coefficients;
# both phases exist (and are locally stable) at every (T, mu), the dominant one has the larger P.
# Exact answers, found here with scipy's brentq and the quadratic formula:
# - the first-order line is P_high = P_low (a quadratic in T^2 at fixed mu, in mu^2 at fixed T);
# - off the line s/rho of a phase depends on mu/T alone, so a path is a ray mu/T = x with
#   s/rho(x) = value;
# - on the line the fluid is a mixture, volume fraction lambda of the high-entropy phase, with
#   (lambda s_high + (1 - lambda) s_low) / (lambda rho_high + (1 - lambda) rho_low) = value (the lever
#   rule of coexisting phases: common practice, no source; e.g. Callen 1985, Thermodynamics and an
#   Introduction to Thermostatistics, ch. 9, from memory); the path leaves the line where lambda is
#   0 or 1, i.e. where one phase's own s/rho equals the value.
# Measured (2026-12-05): worst actual/estimate 0.12 (mu off the line), 0.065 (mu on the line), 0.067
# (mu of the segment's ends), 0.052 (T of the ends), 0.11 (lambda and the phases' densities).

TOY_HIGH = {"a": 4.0, "b": 2.0, "c": 0.1, "B": 0.05}
TOY_LOW = {"a": 1.5, "b": 0.2, "c": 0.01, "B": 0.0}
TOY_VALUES = [3.0, 6.0]


def _P(ph, T, mu):
    return ph["a"] * T**4 + ph["b"] * T**2 * mu**2 + ph["c"] * mu**4 - ph["B"]


def _s(ph, T, mu):
    return 4 * ph["a"] * T**3 + 2 * ph["b"] * T * mu**2


def _rho(ph, T, mu):
    return 2 * ph["b"] * T**2 * mu + 4 * ph["c"] * mu**3


def _ray(ph, v):
    """mu/T where the phase's own s/rho (a function of mu/T alone) equals v."""
    return brentq(lambda x: (4 * ph["a"] + 2 * ph["b"] * x**2) / (2 * ph["b"] * x + 4 * ph["c"] * x**3) - v,
                  1e-3, 50.0, xtol=1e-15, rtol=1e-15)


_DA, _DB, _DC = (TOY_HIGH[k] - TOY_LOW[k] for k in "abc")


def _line_T(mu):
    """T* at mu: da t^2 + db mu^2 t + dc mu^4 - B = 0 with t = T^2 (None where the line does not reach)."""
    q = _DC * mu**4 - TOY_HIGH["B"]
    disc = (_DB * mu**2) ** 2 - 4 * _DA * q
    t = (-_DB * mu**2 + math.sqrt(disc)) / (2 * _DA) if disc >= 0 else -1.0
    return math.sqrt(t) if t > 0 else None


def _line_mu(T):
    q = _DA * T**4 - TOY_HIGH["B"]
    return math.sqrt((-_DB * T**2 + math.sqrt((_DB * T**2) ** 2 - 4 * _DC * q)) / (2 * _DC))


def _line_on_ray(x):
    T = (TOY_HIGH["B"] / (_DA + _DB * x**2 + _DC * x**4)) ** 0.25
    return T, x * T


@pytest.fixture(scope="module")
def toy_rows():
    import numpy as np
    import pyarrow as pa

    Ts = np.round(np.linspace(0.1, 0.45, 15), 12)
    mus = np.round(np.linspace(0.0, 1.0, 21), 12)
    pts = []
    for T in map(float, Ts):
        for mu in map(float, mus):
            dom = "high" if _P(TOY_HIGH, T, mu) > _P(TOY_LOW, T, mu) else "low"
            for name, ph in (("high", TOY_HIGH), ("low", TOY_LOW)):
                pts.append({"model_id": "toy", "T": T, "mu": mu, "s": _s(ph, T, mu), "rho": _rho(ph, T, mu),
                            "status": "ok", "phase": f"{name}-entropy",
                            "phase_flag": "stable" if name == dom else "metastable", "dominant": name == dom})
    lines = []
    for mu in map(float, mus):
        T = _line_T(mu)
        if T is not None and Ts[0] <= T <= Ts[-1]:
            lines.append({"model_id": "toy", "type": "first-order", "T": T, "mu": mu, "T_err": 1e-12,
                          "s_high": _s(TOY_HIGH, T, mu), "s_low": _s(TOY_LOW, T, mu),
                          "rho_jump": _rho(TOY_HIGH, T, mu) - _rho(TOY_LOW, T, mu), "status": "ok"})
    rows = isentropes_table(pa.Table.from_pylist(pts), {"toy": {"isentropes": TOY_VALUES}}, lines=lines).to_pylist()
    return rows, [float(T) for T in Ts]


def test_paths_follow_a_first_order_line_as_a_mixture_of_the_two_phases(toy_rows):
    rows, Ts = toy_rows
    worst = {}

    def within(kind, actual, estimate):
        assert actual <= estimate, (kind, actual, estimate)
        worst[kind] = max(worst.get(kind, 0.0), actual / estimate if estimate > 0 else 0.0)

    for v in TOY_VALUES:
        mine = [r for r in rows if r["s_over_rho"] == v]
        assert {r["status"] for r in mine} == {"ok", "coexistence"}
        x_high, x_low = _ray(TOY_HIGH, v), _ray(TOY_LOW, v)
        # the segment's ends: where the line meets the rays of the two phases
        (enter,) = [r for r in mine if r["site"] == "enters line"]
        (leave,) = [r for r in mine if r["site"] == "leaves line"]
        assert enter["fraction_high_entropy"] == 1.0 and leave["fraction_high_entropy"] == 0.0
        for r, x in ((enter, x_high), (leave, x_low)):
            T, mu = _line_on_ray(x)
            within("end mu", abs(r["mu"] - mu), r["mu_err"])
            within("end T", abs(r["T"] - T), r["T_err"])
        assert enter["T"] > leave["T"]
        for r in mine:
            T, mu = r["T"], r["mu"]
            if r["status"] == "ok":   # in one phase: on its ray
                assert r["site"] == "grid T" and not leave["T"] - leave["T_err"] < T < enter["T"] + enter["T_err"]
                ph = TOY_HIGH if enter["T"] < T else TOY_LOW
                x = x_high if ph is TOY_HIGH else x_low
                assert (_P(ph, T, x * T) > _P(TOY_LOW if ph is TOY_HIGH else TOY_HIGH, T, x * T))  # dominant there
                within("ok mu", abs(mu - x * T), r["mu_err"])
                continue
            if r["site"] in ("enters line", "leaves line"):
                continue
            exact_mu = _line_mu(T) if r["site"] == "grid T" else mu
            if r["site"] == "line point":
                assert _line_T(mu) == T           # the line's own located point
            within("line mu", abs(mu - exact_mu), max(r["mu_err"], 1e-300))
            sh, sl = _s(TOY_HIGH, T, exact_mu), _s(TOY_LOW, T, exact_mu)
            rh, rl = _rho(TOY_HIGH, T, exact_mu), _rho(TOY_LOW, T, exact_mu)
            within("densities", max(abs(r["rho_high"] - rh), abs(r["rho_low"] - rl)), r["rho_err"])
            within("densities", max(abs(r["s_high"] - sh), abs(r["s_low"] - sl)), r["s_err"])
            lam = (v * rl - sl) / ((sh - sl) - v * (rh - rl))
            within("fraction", abs(r["fraction_high_entropy"] - lam), r["fraction_err"])
            # the row's own mixture has the value, and the phases' own s/rho bracket it
            f = r["fraction_high_entropy"]
            assert 0.0 <= f <= 1.0
            mix = (f * r["s_high"] + (1 - f) * r["s_low"]) / (f * r["rho_high"] + (1 - f) * r["rho_low"])
            assert mix == pytest.approx(v, rel=1e-12)
            assert r["s_high"] / r["rho_high"] <= v <= r["s_low"] / r["rho_low"]
        # every grid temperature inside the segment has its row on the line, every other its ray
        on_line = {r["T"] for r in mine if r["site"] == "grid T" and r["status"] == "coexistence"}
        assert on_line == {T for T in Ts if leave["T"] < T < enter["T"]}
        assert {r["T"] for r in mine if r["site"] == "grid T"} == set(Ts)
    assert max(worst.values()) < 1.0


# --- the demo dilaton model's first-order line, through the workflow -------------------------------
#
# Scenario: the default config's dilaton-demo block (config/config.yaml, with its isentropes), scanned
# through Snakemake. References: the lever rule of a mixture of coexisting phases and the
# Clausius-Clapeyron relation dT*/dmu* = -(rho_high - rho_low)/(s_high - s_low) along a first-order
# line (equal pressure of the coexisting phases; common practice, no source; e.g. Callen 1985,
# Thermodynamics and an Introduction to Thermostatistics, ch. 9, from memory); and direct solves of
# the model at the rows' own (T, mu) (method atlas, error below 1e-8), a route that shares nothing with
# the interpolation between grid points and line points that placed the rows.

@pytest.fixture(scope="module")
def demo_scan(tmp_path_factory):
    import yaml
    from workflow_helpers import REPO, scanned_workspace

    doc = yaml.safe_load((REPO / "config" / "config.yaml").read_text())
    (block,) = [m for m in doc["models"] if m["id"] == "dilaton-demo"]
    _, root = scanned_workspace(tmp_path_factory, {"scan": "isodemo", "models": [block],
                                                   "solver": doc.get("solver", {"method": "auto"})})
    rows = pq.read_table(root / "isentropes.parquet").to_pylist()
    line = sorted((r for r in pq.read_table(root / "transitions.parquet").to_pylist()
                   if r["type"] == "first-order" and r["status"] == "ok" and r["mu"] >= 0), key=lambda r: r["mu"])
    return block, root, rows, line


def _mixed(rows):
    return [r for r in rows if r["status"] == "coexistence" and r["fraction_high_entropy"] is not None]


@pytest.mark.workflow
def test_demo_paths_follow_its_first_order_line(demo_scan):
    import numpy as np

    block, root, rows, line = demo_scan
    assert {r["s_over_rho"] for r in rows} == set(block["isentropes"])
    mixed = _mixed(rows)
    assert {r["site"] for r in mixed} >= {"grid T", "line point", "enters line", "leaves line"}
    for r in mixed:
        v, f = r["s_over_rho"], r["fraction_high_entropy"]
        assert 0.0 <= f <= 1.0
        mix = (f * r["s_high"] + (1 - f) * r["s_low"]) / (f * r["rho_high"] + (1 - f) * r["rho_low"])
        if r["site"] in ("enters line", "leaves line"):   # fraction 1 or 0: that phase's own s/rho, within its errors
            s, rho = (r["s_high"], r["rho_high"]) if f == 1.0 else (r["s_low"], r["rho_low"])
            assert abs(mix - v) <= mix * (r["s_err"] / s + r["rho_err"] / rho)
            continue
        assert mix == pytest.approx(v, rel=1e-12)
        own = sorted((r["s_high"] / r["rho_high"], r["s_low"] / r["rho_low"]))
        assert own[0] * (1 - 1e-12) <= v <= own[1] * (1 + 1e-12)
    # the segment lies between its ends
    for v in block["isentropes"]:
        mine = [r for r in mixed if r["s_over_rho"] == v]
        for end, below in (("enters line", True), ("leaves line", False)):
            for e in (r for r in mine if r["site"] == end):
                assert all((r["T"] <= e["T"] + e["T_err"]) if below else (r["T"] >= e["T"] - e["T_err"]) for r in mine)
    # Clausius-Clapeyron at the line's own points on a segment: the slope of the located T*(mu)
    # (derivative of the polynomial through the 5 nearest located points; uncertainty: its change
    # against the 3 nearest, and the points' T_err over the spacing)
    mus, Ts = np.array([p["mu"] for p in line]), np.array([p["T"] for p in line])
    checked = 0
    for r in (r for r in mixed if r["site"] == "line point"):
        near = np.argsort(np.abs(mus - r["mu"]), kind="stable")
        d = {k: np.polyder(np.polyfit(mus[near[:k]] - r["mu"], Ts[near[:k]], k - 1))[-1] for k in (3, 5)}
        h = np.min(np.diff(mus))
        slope_err = abs(d[5] - d[3]) + 2 * max(p["T_err"] for p in line) / h
        ds, drho = r["s_high"] - r["s_low"], r["rho_high"] - r["rho_low"]
        cc = -drho / ds
        cc_err = 2 * r["rho_err"] / abs(ds) + abs(drho) * 2 * r["s_err"] / ds**2
        assert abs(d[5] - cc) <= slope_err + cc_err, (r["mu"], d[5], cc, slope_err, cc_err)
        checked += 1
    assert checked >= 3
    # the phase diagram draws the segment on the line where the table puts it
    pytest.importorskip("matplotlib")
    from holoscan.scan.figures.data import load_scan
    from holoscan.scan.figures.phase_diagram import plot_phase_diagram

    fig = plot_phase_diagram(load_scan(root), "dilaton-demo", "emd")
    for v in block["isentropes"]:
        on = sorted((r for r in mixed if r["s_over_rho"] == v), key=lambda r: r["T"])
        assert fig.isentrope_mixed.get(v, []) == [(r["mu"], r["T"]) for r in on]
        drawn = sorted((r for r in rows if r["s_over_rho"] == v and r["status"] in ("ok", "coexistence")),
                       key=lambda r: r["T"])
        assert fig.isentropes[v] == [(r["mu"], r["T"]) for r in drawn]


@pytest.mark.workflow
def test_demo_rows_on_and_near_the_line_against_direct_solves(demo_scan):
    from holoscan import model_from_block

    block, _, rows, _ = demo_scan
    model = model_from_block({k: x for k, x in block.items() if k not in ("grid", "points_per_job", "isentropes")})

    def phases(T, mu):
        """(high-entropy, low-entropy) locally stable ok branches at (T, mu) by a direct solve."""
        st = [r for r in solve_point(model, T, mu, SolverSettings()) if r.status.value == "ok"
              and r.stability == "stable"]
        return max(st, key=lambda r: r.s), min(st, key=lambda r: r.s)

    def ratio(T, mu, high):
        b = phases(T, mu)[0 if high else 1]
        return b.s / b.rho

    (enter,) = [r for r in _mixed(rows) if r["site"] == "enters line" and r["fraction_high_entropy"] == 1.0]
    v = enter["s_over_rho"]
    # the coexisting phases' densities at the line's own points on the path
    for r in (r for r in _mixed(rows) if r["s_over_rho"] == v and r["site"] == "line point"):
        hi, lo = phases(r["T"], r["mu"])
        assert abs(hi.rho - r["rho_high"]) <= r["rho_err"] and abs(lo.rho - r["rho_low"]) <= r["rho_err"]
        for b, s in ((hi, r["s_high"]), (lo, r["s_low"])):
            assert abs(b.s - s) <= r["s_err"] + b.error_estimate * b.s
    # a grid-temperature row on the line: the phases' pressures are equal there (at fixed T they part
    # at the rate rho_high - rho_low per unit mu), and the fraction follows from their densities
    on = max((r for r in _mixed(rows) if r["s_over_rho"] == v and r["site"] == "grid T"),
             key=lambda r: r["fraction_high_entropy"])
    hi, lo = phases(on["T"], on["mu"])
    assert abs(hi.P - lo.P) <= abs(hi.rho - lo.rho) * on["mu_err"] + hi.error_estimate * hi.P + lo.error_estimate * lo.P
    lam = (v * lo.rho - lo.s) / ((hi.s - lo.s) - v * (hi.rho - lo.rho))
    assert abs(lam - on["fraction_high_entropy"]) <= on["fraction_err"]
    # where the path enters the line the high-entropy phase's own s/rho has the value, within what
    # the row's uncertainties allow (slopes by central differences of direct solves)
    h = 1e-4
    T, mu = enter["T"], enter["mu"]
    dr_dmu = (ratio(T, mu + h, True) - ratio(T, mu - h, True)) / (2 * h)
    dr_dT = (ratio(T + h, mu, True) - ratio(T - h, mu, True)) / (2 * h)
    assert abs(ratio(T, mu, True) - v) <= abs(dr_dmu) * enter["mu_err"] + abs(dr_dT) * enter["T_err"]
    # and so does the ok row on that side nearest to it, within its mu_err
    (above,) = sorted((r for r in rows if r["s_over_rho"] == v and r["status"] == "ok" and r["T"] > T),
                      key=lambda r: r["T"])[:1]
    r0, r1 = ratio(above["T"], above["mu"], True), ratio(above["T"], above["mu"] + h, True)
    assert abs(r0 - v) <= abs(r1 - r0) / h * above["mu_err"]


def test_a_change_of_phase_label_without_a_first_order_line_is_crossed_not_coexistence():
    # Scenario: the RN-AdS5 closed form on a mu grid, the points above mu/T = 2 labelled as another
    # phase with the same densities, as at a continuous (second-order) transition, where s and rho
    # are continuous (common practice, no source). No first-order line is recorded, so the path
    # crosses: the row is ok and the closed form's own crossing (brentq) lies within mu_err.
    from holoscan.scan.isentropes import locate
    T = 0.5
    rows = []
    for k in range(21):
        mu = 0.1 * k
        (r,) = solve_point(RNModel("q", 4, kappa_sq=0.5, e_sq=2.0), T, mu, CLOSED)
        rows.append({"T": T, "mu": mu, "s": r.s, "rho": r.rho, "status": "ok",
                     "phase": "normal" if mu / T <= 2.0 else "condensed"})
    lo, hi = rows[10], rows[11]                 # the bracket where the label changes
    v = 0.5 * (lo["s"] / lo["rho"] + hi["s"] / hi["rho"])
    (row,) = locate("q", rows, [v])
    assert row["status"] == "ok" and "label changes" in row["message"]
    exact = brentq(lambda m: s_over_rho(T, m) - v, lo["mu"], hi["mu"], xtol=1e-14)
    assert abs(row["mu"] - exact) <= row["mu_err"] <= hi["mu"] - lo["mu"]
