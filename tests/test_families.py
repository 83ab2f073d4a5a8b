"""Model families (``vary:`` and ``params:`` in a scan config), in process (no Snakemake).

Scenarios: a Reissner-Nordstrom-AdS5 family over the Maxwell coupling e^2; a dilaton family whose
potential takes named parameters; edits of a family (one value changed, one added) and what they
leave to solve; configs with a mistake in a family.

References: the rn closed form (Chamblin, Emparan, Johnson & Myers 1999, Phys. Rev. D 60, 064018;
normalisation of Hartnoll 2009, Class. Quant. Grav. 26, 224002), checked against published values
in tests/test_rn_thermo.py; the rescaling of the gauge field A -> e A, which turns the Maxwell term
F^2/(4 e^2) into F^2/4 and the chemical potential mu into mu/e, so that P(T, mu; e^2) =
P(T, mu/e; 1) and rho(T, mu; e^2) = rho(T, mu/e; 1)/e (common practice, no source).
"""
from __future__ import annotations

import json
import math

import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from holoscan import RNModel, SolverSettings, solve_point
from holoscan.errors import InputError
from holoscan.expr import parse
from holoscan.scan.assemble import assemble
from holoscan.scan.chunk import run_chunk
from holoscan.scan.config import validate_scan_config
from holoscan.scan.landmarks import NAMES, families_table, member_landmarks
from holoscan.scan.lines_job import run_lines
from holoscan.scan.plan import make_plan, write_plan_files

CLOSED = SolverSettings(method="closed-form")

RN_FAMILY = {
    "scan": "fam",
    "models": [{"id": "q4", "kind": "rn", "d": 4, "kappa_sq": 0.5, "e_sq": 1.0, "vary": {"e_sq": [0.5, 1.0, 2.0]}}],
    "grid": {"T": {"min": 0.2, "max": 1.0, "num": 3}, "mu": [0.0, 0.8, 1.6]},
}

DILATON = {"id": "dl", "kind": "emd", "kappa_sq": 1.0, "params": {"g": 0.6, "b": 0.77},
           "V": "-12*cosh(g*phi) + b*phi**2 - 0.15*phi**4 + 0.0015*phi**6", "f": "sech(1.1*phi)",
           "vary": {"g": [0.55, 0.6, 0.65], "b": {"min": 0.7, "max": 0.8, "num": 3}}}


def run(cfg, root):
    """Plan, solve every new chunk and assemble; returns (plan, table)."""
    plan = make_plan(validate_scan_config(cfg), root)
    write_plan_files(plan)
    for c in plan.chunk_ids:
        run_chunk(plan.chunk_manifest(c), plan.segment(c), log_file="", log=lambda m: None)
    out = plan.root / "points.parquet"
    assemble(plan.table_file, out, plan.root / "summary.json")
    return plan, pq.read_table(out).to_pandas()


def test_rn_family_rows_equal_each_members_closed_form(tmp_path):
    _, t = run(RN_FAMILY, tmp_path)
    assert sorted(t["model_id"].unique()) == ["q4_e_sq0.5", "q4_e_sq1", "q4_e_sq2"]
    assert set(t["family"]) == {"q4"} and len(t) == 27
    for mid, rows in t.groupby("model_id"):
        e_sq = float(rows["vary_e_sq"].iloc[0])
        assert mid == f"q4_e_sq{e_sq:g}"
        alone = RNModel(mid, 4, kappa_sq=0.5, e_sq=e_sq)
        unit = RNModel("unit", 4, kappa_sq=0.5, e_sq=1.0)
        for r in rows.itertuples():
            (c,) = solve_point(alone, r.T, r.mu, CLOSED)
            for k in ("s", "rho", "P", "epsilon", "chi2"):
                assert getattr(r, k) == getattr(c, k), (mid, k)  # the same model: the same bits
            # the gauge-field rescaling: an outside relation between members
            (u,) = solve_point(unit, r.T, r.mu / math.sqrt(e_sq), CLOSED)
            assert r.P == pytest.approx(u.P, rel=1e-13)  # noqa: SIM300 - P is the pressure
            assert r.rho == pytest.approx(u.rho / math.sqrt(e_sq), rel=1e-13, abs=1e-300)


def test_params_are_substituted_exactly():
    cfg = validate_scan_config({"scan": "p", "grid": {"T": [0.2], "mu": [0.0]}, "models": [DILATON]})
    members = {m.model.id: m for m in cfg.models}
    assert len(members) == 9 and "dl_g0.55_b0.75" in members
    m = members["dl_g0.65_b0.8"]
    assert m.family == {"id": "dl", "values": {"g": 0.65, "b": 0.8}}
    by_hand = parse("-12*cosh(0.65*phi) + 0.8*phi**2 - 0.15*phi**4 + 0.0015*phi**6", "V")
    assert parse(m.model.V, "V") is by_hand          # the same canonical tree (interned)
    assert m.model.spec()["V"] == str(by_hand)        # and the point key sees it


def test_zip_pairs_values_and_members_keep_their_ids():
    cfg = validate_scan_config({**RN_FAMILY, "models": [
        {"id": "z", "kind": "rn", "d": 3, "kappa_sq": 1.0, "e_sq": 1.0,
         "vary": {"zip": {"e_sq": [2.0, 0.5], "kappa_sq": [0.25, 4.0]}}}]})
    got = {m.model.id: (m.model.e_sq, m.model.kappa_sq) for m in cfg.models}
    assert got == {"z_e_sq2_kappa_sq0.25": (2.0, 0.25), "z_e_sq0.5_kappa_sq4": (0.5, 4.0)}


def test_changing_or_adding_a_value_solves_only_that_member(tmp_path):
    run(RN_FAMILY, tmp_path)
    n_grid = 9
    changed = {**RN_FAMILY, "models": [{**RN_FAMILY["models"][0], "vary": {"e_sq": [0.5, 1.0, 3.0]}}]}
    plan = make_plan(validate_scan_config(changed), tmp_path)
    assert plan.n_missing == n_grid                      # member e_sq = 3 only
    assert {m for c in plan.chunk_ids for m in plan.chunk_models[c]} == {"q4_e_sq3"}
    added = {**RN_FAMILY, "models": [{**RN_FAMILY["models"][0], "vary": {"e_sq": [0.5, 1.0, 2.0, 4.0]}}]}
    plan2, t = run(added, tmp_path)
    assert plan2.n_missing == n_grid and {m for c in plan2.chunk_ids for m in plan2.chunk_models[c]} == {"q4_e_sq4"}
    assert len(t) == 4 * n_grid
    again = make_plan(validate_scan_config(added), tmp_path)
    assert again.n_missing == 0 and again.chunk_ids == ()


@pytest.mark.parametrize("change,key,words", [
    ({"vary": {"q": [1.0, 2.0]}}, "models[0].vary.q", "has no key 'q'"),
    ({"params": {"g": 0.6, "b": 0.77, "unused": 1.0}}, "models[0].params.unused", "no formula uses it"),
    # b = -2.5 puts the scalar's mass below the Breitenlohner-Freedman bound m^2 >= -4
    # (Breitenlohner & Freedman 1982, Ann. Phys. 144, 249): that member alone is refused
    ({"vary": {"b": [0.77, -2.5]}}, "models[0] (member dl_b-2.5).V", "V''(0)"),
    ({"params": {"pi": 3.0}}, "models[0].params", "not one of"),
])
def test_a_mistake_in_a_family_names_the_member_and_key(change, key, words):
    block = {**DILATON, **change}
    if "vary" not in change:
        block["vary"] = {"g": [0.6]}
    with pytest.raises(InputError) as e:
        validate_scan_config({"scan": "x", "grid": {"T": [0.2], "mu": [0.0]}, "models": [block]})
    text = str(e.value)
    assert key in text and words in text, text
    assert len(text.splitlines()) == 1


def _lines(cfg, tmp_path):
    """(the plan's models, line rows, critical-point rows) of ``cfg``: its lines jobs, run in process."""
    plan = make_plan(validate_scan_config(cfg), tmp_path)
    write_plan_files(plan)
    lines, crit = [], []
    for key in plan.lines_ids:
        out_l, out_c = plan.lines_outputs(key)
        run_lines(plan.lines_manifest_file(key), out_l, out_c, log=lambda m: None)
        lines += pq.read_table(out_l).to_pylist()
        crit += pq.read_table(out_c).to_pylist()
    return json.loads(plan.table_file.read_text())["models"], lines, crit


def test_emd_family_landmarks_equal_separate_models_and_match_a_scale(tmp_path):
    # three members of an invented dilaton family (g varied) and the middle one written out by hand:
    # the lines of each are located by the same finders, so that member's landmarks in
    # families.parquet must be exactly those of its twin; with match:, every member's crossover at
    # mu = 0 is put at 150 MeV (the matched landmark equals the target to its uncertainty, by
    # construction of the scale) and its other landmarks carry the same scale (common practice, no source)
    v = "-12*cosh({g}*phi) + 0.77*phi**2 - 0.15*phi**4 + 0.0015*phi**6"
    family = {"id": "dl", "kind": "emd", "kappa_sq": 1.0, "params": {"g": 0.6}, "V": v.format(g="g"),
              "f": "sech(1.1*phi)", "vary": {"g": [0.58, 0.6, 0.62]},
              "match": {"landmark": "crossover_T_mu0", "value": 150.0, "unit": "MeV"}}
    twins = [{"id": f"twin{g}", "kind": "emd", "kappa_sq": 1.0, "V": v.format(g=g), "f": "sech(1.1*phi)"}
             for g in (0.6,)]
    cfg = {"scan": "lm", "models": [family, *twins],
           "grid": {"T": [0.17, 0.27], "mu": [0.0, 0.8]}}
    models, lines, crit = _lines(cfg, tmp_path)
    fam = families_table(models, lines, crit).to_pylist()
    assert [r["model_id"] for r in fam] == ["dl_g0.58", "dl_g0.6", "dl_g0.62"]
    for r, g in zip(fam, (0.58, 0.6, 0.62)):
        assert r["family"] == "dl" and r["vary_g"] == g
        if g == 0.6:
            twin = member_landmarks([x for x in lines if x["model_id"] == f"twin{g}"],
                                    [x for x in crit if x["model_id"] == f"twin{g}"])
            for n in NAMES:
                assert r[n] == twin[n] and r[n + "_err"] == twin[n + "_err"] and \
                    r[n + "_status"] == twin[n + "_status"], n
            assert r["first_order_T"] == twin["first_order_T"] and r["first_order_mu"] == twin["first_order_mu"]
        assert r["crossover_T_mu0_status"] == "ok" and r["cep_T_status"] == "ok"
        # the scale
        assert r["match_landmark"] == "crossover_T_mu0" and r["match_unit"] == "MeV"
        assert abs(r["crossover_T_mu0_in_unit"] - 150.0) <= max(r["scale"] * r["crossover_T_mu0_err"], 1e-12 * 150)
        assert r["cep_T_in_unit"] == pytest.approx(r["cep_T"] * 150.0 / r["crossover_T_mu0"], rel=1e-15)
    # the landmarks move with the coupling: a larger g, a hotter crossover
    assert fam[0]["crossover_T_mu0"] < fam[1]["crossover_T_mu0"] < fam[2]["crossover_T_mu0"]
    # the landmarks figure draws exactly the table's values (the matched one in E, the others in MeV)
    pytest.importorskip("matplotlib")
    from holoscan.scan.figures.data import ScanTables
    from holoscan.scan.figures.family import plot_family_landmarks

    df = families_table(models, lines, crit).to_pandas()
    empty = pa.table({}).to_pandas()
    fig = plot_family_landmarks(ScanTables(tmp_path, empty, empty, empty, empty, {}, [], df), "dl")
    drawn = fig.drawn
    assert [p[1] for p in drawn[("crossover_T_mu0", "g")]] == [r["crossover_T_mu0"] for r in fam]
    assert [p[1] for p in drawn[("cep_T", "g")]] == [r["cep_T_in_unit"] for r in fam]
    assert "150 MeV" in fig.caption


def _landmarks(cfg, tmp_path):
    """families.parquet rows of ``cfg`` from its lines jobs, run in process."""
    return families_table(*_lines(cfg, tmp_path)).to_pylist()


def test_onset_ratio_of_a_probe_superconductor_family_scales_with_q(tmp_path):
    # probe limit: the scalar sees only q A_t, so T_c is proportional to q mu and mu/T_c to 1/q
    # (Hartnoll, Herzog & Horowitz 2008, PRL 101, 031601, probe equations; the scaling is common
    # practice, no source)
    cfg = {"scan": "on", "models": [{"id": "hhh", "kind": "charged-scalar", "d": 3, "m_sq": -2.0, "q": 1.0,
                                     "delta": 2.0, "probe": True, "vary": {"q": [1.0, 2.0]}}],
           "grid": {"T": [0.02, 0.04, 0.08, 0.12], "mu": [1.0]}}
    a, b = _landmarks(cfg, tmp_path)
    assert a["onset_mu_over_T_status"] == b["onset_mu_over_T_status"] == "ok"
    assert a["onset_mu_over_T"] == pytest.approx(2 * b["onset_mu_over_T"], rel=1e-9)
    assert a["onset_mu_over_T_err"] < 1e-9 * a["onset_mu_over_T"]
    assert a["cep_T_status"] == "absent" and a["first_order_T"] == []


def test_instability_ratio_of_a_one_charge_family_is_pi_over_sqrt2(tmp_path):
    # the one-charge black hole (Behrndt, Cvetic & Sabra 1999; Gubser 1998) has its thermodynamic
    # instability at mu/T = pi/sqrt(2) whatever kappa^2 (derived in tests/reference/onecharge.py):
    # the line rows (one per grid temperature and sign of mu) and the member's landmark
    x_max = math.pi / math.sqrt(2)
    cfg = {"scan": "oc", "models": [{"id": "oc", "kind": "emd", "V": "-(8*exp(phi/sqrt(6)) + 4*exp(-2*phi/sqrt(6)))",
                                     "f": "exp(-4*phi/sqrt(6))", "source": False, "kappa_sq": 1.0,
                                     "vary": {"kappa_sq": [0.5]}}],
           "grid": {"T": [0.5, 1.0], "mu": [-0.2, 0.1, 0.2]}}
    models, rows, crit = _lines(cfg, tmp_path)
    assert crit == [] and {r["type"] for r in rows} == {"instability"}
    assert all(r["status"] == "ok" for r in rows)
    for r in rows:
        assert abs(abs(r["mu"]) / r["T"] - x_max) < 1e-6 and r["mu_err"] / r["T"] < 1e-6
    assert sorted(r["mu"] for r in rows) == pytest.approx([-x_max, -0.5 * x_max, 0.5 * x_max, x_max], rel=1e-6)
    (r,) = families_table(models, rows, crit).to_pylist()
    assert r["model_id"] == "oc_kappa_sq0.5" and r["instability_mu_over_T_status"] == "ok"
    assert abs(r["instability_mu_over_T"] - x_max) < 1e-6
    assert r["crossover_T_mu0_status"] == "absent"
