"""Targets at the edge of double precision give rows with a status and a message, never a traceback,
and a row is ``ok`` only when every number it reports is an ordinary double.

Physics reference: the planar RN-AdS_{d+1} brane at mu = 0 has r_h = 4 pi T / d and
P = r_h^d / (2 kappa^2) (Chamblin, Emparan, Johnson & Myers 1999, Phys. Rev. D 60, 064018; in the
normalisation of Hartnoll 2009, Class. Quant. Grav. 26, 224002), so P/T^d = (4 pi / d)^d / (2 kappa^2).
Double-precision facts (IEEE 754; common practice, no source): the smallest normal double is
``sys.float_info.min``; below it a number is subnormal and keeps fewer than 53 bits.
"""
from __future__ import annotations

import json
import math
import sys
from dataclasses import dataclass, replace

import pytest

from holoscan import RNModel, SolverSettings, Status, solve_point
from holoscan.kinds.base import ModelKind
from holoscan.phases.dominance import classify
from holoscan.point import solve_points
from holoscan.result import PointResult, checked, range_problems

SHOOT = SolverSettings(method="shooting")
CLOSED = SolverSettings(method="closed-form")


def _p_hat_mu0(d: int, kappa_sq: float) -> float:
    """P/T^d of the neutral brane (module docstring)."""
    return (4 * math.pi / d) ** d / (2 * kappa_sq)


@pytest.mark.parametrize("T", [1e-300, 1e300])
def test_closed_form_at_an_extreme_temperature_is_an_out_of_range_row(T):
    m = RNModel("m", 3, kappa_sq=1.0, e_sq=1.0)
    (r,) = solve_point(m, T, 1.0, CLOSED)
    assert r.status is Status.OUT_OF_RANGE
    assert f"T = {T!r}" in r.message and "d = 3" in r.message
    assert math.isnan(r.P) and not r.dominant and r.phase_flag == "unknown"
    # the row is writable as JSON with NaN as null, as `holoscan point` prints it
    json.dumps({k: (v if not (isinstance(v, float) and math.isnan(v)) else None) for k, v in r.to_dict().items()},
               allow_nan=False)


@pytest.mark.workflow
@pytest.mark.parametrize("T", ["1e-300", "1e300"])
def test_point_command_prints_the_row_of_an_extreme_temperature(tmp_path, run_cli, T):
    cfg = tmp_path / "m.yaml"
    cfg.write_text("models:\n  - {id: rn4, kind: rn, d: 3, kappa_sq: 1.0, e_sq: 1.0}\n")
    p = run_cli("point", "--config", cfg, "--model", "rn4", "--T", T, "--mu", "1")
    assert p.returncode == 0, p.stderr
    assert "Traceback" not in p.stderr
    row = json.loads(p.stdout)
    assert row["status"] == "out of range" and row["P"] is None and row["P_hat"] is None
    assert f"T = {float(T)!r}" in row["message"]


def test_overflow_inside_the_closed_form_is_an_out_of_range_row():
    # mu^2 = 1e400 does not fit in a double: the solve overflows, the row says so
    m = RNModel("m", 4, kappa_sq=0.5, e_sq=2.0)
    (r,) = solve_point(m, 1.0, 1e200, CLOSED)
    assert r.status is Status.OUT_OF_RANGE and "OverflowError" in r.message and "mu = 1e+200" in r.message


def test_the_edge_of_double_precision_for_the_reduced_pressure():
    # T^3 is normal just above T_edge = (smallest normal)^(1/3) and subnormal below it
    kappa_sq = 1.0
    m = RNModel("m", 3, kappa_sq=kappa_sq, e_sq=1.0)
    T_edge = sys.float_info.min ** (1.0 / 3.0)
    (inside,) = solve_point(m, 4.0 * T_edge, 0.0, CLOSED)
    assert inside.status is Status.OK
    assert inside.ratios()["P_hat"] == pytest.approx(_p_hat_mu0(3, kappa_sq), rel=1e-12)
    (outside,) = solve_point(m, 0.5 * T_edge, 0.0, CLOSED)
    assert outside.status is Status.OUT_OF_RANGE and "T^3" in outside.message


@pytest.mark.parametrize("d, T, x", [(5, 1e-55, 0.0), (5, 1e-55, 1.0), (12, 1e25, 0.0), (12, 1e25, 0.3)])
def test_far_but_representable_temperatures_keep_cs2_and_stability(d, T, x):
    # The Hessian's determinant (~T^(2d-4)) and the cs2 formula's terms (~T^(3d-4)) leave double
    # precision here although every reported number is ordinary. The brane is conformal, so
    # epsilon = (d-1) P and cs2 = 1/(d-1) exactly, and it is locally stable at every mu/T (positive
    # specific heat and susceptibility; both common practice, no source); P/T^d at mu = 0 is the
    # closed form of the module docstring, and at mu/T = x it equals its value at T = 1.
    m = RNModel("m", d, kappa_sq=1.0, e_sq=1.0)
    (r,) = solve_point(m, T, x * T, CLOSED)
    assert r.status is Status.OK and r.stability == "stable" and r.dominant
    assert r.cs2 == pytest.approx(1 / (d - 1), rel=1e-13)
    (unit,) = solve_point(m, 1.0, x, CLOSED)
    assert r.ratios()["P_hat"] == pytest.approx(unit.ratios()["P_hat"], rel=1e-13)
    if x == 0.0:
        assert unit.ratios()["P_hat"] == pytest.approx(_p_hat_mu0(d, 1.0), rel=1e-13)


def test_shooting_deep_in_temperature_is_ok_only_while_representable():
    # At T = 1e-110 (d = 3) P = 36.7 T^3 underflows to 0 and P/T^3 cannot be formed: that row was
    # reported ok with P = 0 before; it must not be ok. At T = 1e-100 it is representable and ok,
    # and agrees with the closed form to the solver's accept_error.
    kappa_sq = 1.0
    m = RNModel("m", 3, kappa_sq=kappa_sq, e_sq=1.0)
    (deep,) = solve_point(m, 1e-110, 0.0, SHOOT)
    assert deep.status is not Status.OK and deep.status is Status.OUT_OF_RANGE and deep.message
    (cold,) = solve_point(m, 1e-100, 0.0, SHOOT)
    assert cold.status is Status.OK
    assert cold.ratios()["P_hat"] == pytest.approx(_p_hat_mu0(3, kappa_sq), rel=SHOOT.accept_error)


# -- the rule for every model kind: a toy kind that returns whatever it is told ---------------------

@dataclass
class Toy(ModelKind):
    """A model kind that returns one prepared row (or raises) at every target; d = 4."""

    fields: dict
    raise_: type | None = None
    id: str = "toy"
    kind: str = "toy"
    d: int = 4
    methods = ("closed-form",)
    default_method = "closed-form"
    seen: list | None = None

    def _row(self, T, mu):
        if self.seen is not None:
            self.seen.append((T, mu))
        if self.raise_ is not None:
            raise self.raise_("raised inside the solve")
        base = dict(s=1.0, rho=0.5, epsilon=3.0, P=1.0, chi2=0.2, cs2=1 / 3, P_check=1.0, trace_anomaly=0.0,
                    stability="stable", message="toy")
        return PointResult(model_id=self.id, kind=self.kind, d=4, method="closed-form", T=T, mu=mu,
                           **{**base, **self.fields})

    def solve(self, T, mu, settings=None):
        return [self._row(T, mu)]


@dataclass
class ToyBatch(Toy):
    """The same, solving many targets at once."""

    batched = True

    def solve_many(self, targets, settings=None):
        return [[self._row(T, mu)] for T, mu in targets]


@pytest.mark.parametrize("field, value, word", [
    ("P", math.inf, "not finite"),
    ("s", math.nan, "not finite"),
    ("cs2", -math.inf, "not finite"),
    ("P_check", 1e-320, "subnormal"),
    ("trace_anomaly", math.nan, "not finite"),
])
def test_an_ok_row_with_a_number_outside_double_precision_is_not_ok(field, value, word):
    (r,) = solve_point(Toy({field: value}), 1.0, 0.5)
    assert r.status is Status.OUT_OF_RANGE
    assert field in r.message and word in r.message and "toy" in r.message  # the solver's own note kept
    assert not r.dominant and r.phase_flag == "unknown"
    assert repr(getattr(r, field)) == repr(value)  # the value is kept for inspection


def test_a_reduced_ratio_that_cannot_be_formed_makes_the_row_not_ok():
    # at T = 1e-50 every power of T is normal and s/T^3, P/T^4 are 1, but chi2/T^2 with
    # chi2 = 1e300 is 1e400: it overflows
    r = checked(PointResult(model_id="x", kind="toy", d=4, method="m", T=1e-50, mu=0.0, s=1e-150, rho=0.0,
                            epsilon=3e-200, P=1e-200, chi2=1e300, cs2=1 / 3, P_check=1e-200, trace_anomaly=0.0))
    assert r.status is Status.OUT_OF_RANGE and "chi2_hat" in r.message and math.isinf(r.ratios()["chi2_hat"])


def test_rows_already_not_ok_and_ordinary_rows_are_left_alone():
    failed = PointResult(model_id="x", kind="toy", d=4, method="m", T=1.0, mu=0.0, status=Status.FAILED,
                         message="no shot")
    assert checked(failed) is failed
    (ok,) = Toy({}).solve(1.0, 0.5)
    assert range_problems(ok) == [] and checked(ok) is ok
    # exact zeros are ordinary doubles (rho at mu = 0)
    assert range_problems(replace(ok, rho=0.0, mu=0.0)) == []


def test_range_errors_become_rows_and_bugs_propagate():
    for exc in (OverflowError, ZeroDivisionError, FloatingPointError):
        (r,) = solve_point(Toy({}, raise_=exc), 1.0, 0.5)
        assert r.status is Status.OUT_OF_RANGE and exc.__name__ in r.message
    with pytest.raises(RuntimeError):
        solve_point(Toy({}, raise_=RuntimeError), 1.0, 0.5)


def test_a_batch_kind_gets_the_same_rule_and_never_sees_an_unrepresentable_target():
    seen = []
    toy = ToyBatch({}, seen=seen)
    out = solve_points(toy, [(0.5, 0.0), (1e-300, 0.0), (1e100, 1.0), (2.0, 1.0)])
    assert [rs[0].status for rs in out] == [Status.OK, Status.OUT_OF_RANGE, Status.OUT_OF_RANGE, Status.OK]
    assert seen == [(0.5, 0.0), (2.0, 1.0)]  # T^4 of 1e-300 and of 1e100 are not ordinary doubles
    bad = solve_points(ToyBatch({"epsilon": math.inf}), [(0.5, 0.0)])
    assert bad[0][0].status is Status.OUT_OF_RANGE and "epsilon" in bad[0][0].message
    # an overflow raised by the batch is traced to its target, one by one
    assert solve_points(ToyBatch({}, raise_=OverflowError), [(0.5, 0.0)])[0][0].status is Status.OUT_OF_RANGE


@pytest.mark.parametrize("T, mu, settings", [(0.37, 0.7, CLOSED), (2.5, -3.0, CLOSED), (0.37, 1.1, SHOOT)])
def test_normal_targets_keep_every_number_bit_for_bit(T, mu, settings):
    # the guard adds nothing to an ordinary solve: solve_point equals the kind's own solve, classified
    m = RNModel("m", 3, kappa_sq=0.8, e_sq=1.7)
    (r,) = solve_point(m, T, mu, settings)
    (ref,) = classify(m.solve(T, mu, settings))
    assert r.status is Status.OK
    a, b = r.to_dict(), ref.to_dict()
    for k in a:
        if k != "wall_time":
            assert repr(a[k]) == repr(b[k]), k


def test_a_chunk_writes_the_out_of_range_row_beside_the_others():
    from holoscan.scan.chunk import solve_manifest
    from holoscan.scan.identity import code_hash
    from holoscan.scan.tables import rows_to_table

    m = RNModel("m", 4, kappa_sq=0.5, e_sq=2.0)
    manifest = {"chunk": "c", "code_hash": code_hash(),
                "models": {"m": {"spec": m.spec(), "solver": CLOSED.canonical()}},
                "points": [["m", 1e300, 1.0, "k1"], ["m", 0.5, 1.0, "k2"], ["m", 1.0, 1e200, "k3"]]}
    rows = solve_manifest(manifest, log=lambda msg: None)
    assert [r["status"] for r in rows] == ["out of range", "ok", "out of range"]
    t = rows_to_table(rows)
    assert t.num_rows == 3 and t["message"][0].as_py().startswith("T = 1e+300")
