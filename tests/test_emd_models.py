"""Einstein-Maxwell-dilaton kind: model validation, a sourced (non-conformal) test model of our own,
and the command line."""
import json
import math

import pytest

from holoscan import InputError, Status, model_from_block, solve_point

# An invented test model (our coefficients): V = -12 cosh(0.6 phi) + 0.88 phi^2 gives
# m^2 = -12 (0.36) + 1.76 = -2.56 = Delta (Delta - 4) with Delta = 3.2; f falls off like sech.
TEST_MODEL = {"id": "t", "kind": "emd", "kappa_sq": 1.0, "V": "-12*cosh(0.6*phi) + 0.88*phi**2",
              "f": "sech(1.1*phi)"}


@pytest.fixture(scope="module")
def model():
    return model_from_block(TEST_MODEL)


@pytest.mark.parametrize("change,key,needle", [
    ({"V": "-11*cosh(0.6*phi)"}, "models[0].V", "V(0)"),                  # AdS radius not 1
    ({"V": "-12 + 0.1*phi"}, "models[0].V", "V'(0)"),                     # phi = 0 not an extremum
    ({"V": "-12 - 5*phi**2"}, "models[0].V", "m^2"),                      # below the BF bound
    ({"V": "-12 + phi**2"}, "models[0].V", "m^2"),                        # irrelevant operator
    ({"f": "-sech(phi)"}, "models[0].f", "f(0)"),                          # wrong-sign gauge coupling
    ({"f": "__import__('os')"}, "models[0].f", "position"),              # not a formula
    ({"V": "phi.__class__"}, "models[0].V", "position"),
    ({"source": "yes"}, "models[0].source", "true or false"),
    ({"kappa_sq": 0}, "models[0].kappa_sq", "> 0"),
    ({"energy_scale": -1}, "models[0].energy_scale", "> 0"),
    ({"V": "-(8*exp(phi/sqrt(6)) + 4*exp(-2*phi/sqrt(6)))", "f": "exp(-4*phi/sqrt(6))"}, "models[0].source",
     "Delta > 2"),                                                         # sourced at the BF bound
])
def test_invalid_models_are_rejected_before_solving(change, key, needle):
    # The conditions are those of an asymptotically AdS5 solution with L = 1 and a scalar dual to an
    # operator of dimension Delta in [2, 4), m^2 = Delta (Delta - 4) (common practice, no source).
    with pytest.raises(InputError) as ei:
        model_from_block({**TEST_MODEL, **change}, "models[0]")
    assert str(ei.value).startswith(key) and needle in str(ei.value)


def test_high_temperature_approaches_the_conformal_plasma(model):
    # At mu = 0 and high T a relevant deformation dies out: s/T^3 -> 2 pi^4 / kappa^2 (the AdS5 black
    # brane) and cs2 -> 1/3, with corrections that fall like (J/T^(4-Delta))^2 = T^(-2(4-Delta))
    # (common practice, no source).
    devs, cs = [], []
    for T in (4.0, 16.0, 64.0):
        (r,) = solve_point(model, T, 0.0)
        assert r.status is Status.OK, r.message
        devs.append(abs(r.s / T**3 / (2 * math.pi**4) - 1))
        cs.append(abs(r.cs2 - 1 / 3))
    assert devs[2] < 2e-2 and cs[2] < 1e-2
    for a, b in ((devs[0], devs[1]), (devs[1], devs[2]), (cs[0], cs[1]), (cs[1], cs[2])):
        assert 4 ** (1.6 * 0.7) < a / b < 4 ** (1.6 * 1.3)  # close to the predicted 4^(2(4-3.2))


@pytest.mark.parametrize("T,mu", [(0.4, 0.3), (0.25, 0.0), (0.9, 1.5)])
def test_first_law_and_two_pressure_routes(model, T, mu):
    # s = dP/dT and rho = dP/dmu by central differences over a small grid of points (first law,
    # common practice, no source); the two integration routes of P agree; Euler's relation holds.
    h = 5e-4 * T
    (r,) = solve_point(model, T, mu)
    assert r.status is Status.OK, r.message
    assert abs(r.P_check / r.P - 1) < 1e-8

    def P(T, mu):
        (x,) = solve_point(model, T, mu)
        return x.P

    dPdT = (P(T + h, mu) - P(T - h, mu)) / (2 * h)
    dPdmu = (P(T, mu + h) - P(T, mu - h)) / (2 * h) if mu else 0.0
    assert dPdT == pytest.approx(r.s, rel=5e-6)
    assert dPdmu == pytest.approx(r.rho, rel=5e-6)
    assert r.epsilon + r.P == pytest.approx(T * r.s + mu * r.rho, rel=1e-12)
    assert r.trace_anomaly == pytest.approx((r.epsilon - 3 * r.P) / T**4, rel=1e-12)
    assert r.trace_anomaly > 0  # a relevant deformation lowers P below its conformal value


@pytest.mark.workflow
def test_point_command_prints_every_branch(tmp_path, run_cli):
    cfg = tmp_path / "m.yaml"
    cfg.write_text("models:\n  - {id: q1, kind: emd, kappa_sq: 1.0, source: false,\n"
                   "     V: '-(8*exp(phi/sqrt(6)) + 4*exp(-2*phi/sqrt(6)))', f: 'exp(-4*phi/sqrt(6))'}\n")
    out = run_cli("point", "--config", cfg, "--model", "q1", "--T", 1.0, "--mu", 1.5)
    assert out.returncode == 0, out.stderr
    rows = json.loads(out.stdout)
    assert isinstance(rows, list) and [r["branch"] for r in rows] == [0, 1]
    assert sorted(r["stability"] for r in rows) == ["stable", "unstable"]
    bad = run_cli("point", "--config", cfg, "--model", "q1", "--T", 1.0, "--mu", 2.5)
    assert json.loads(bad.stdout)["status"] == "no solution"  # mu/T > pi/sqrt(2): physics, not failure
