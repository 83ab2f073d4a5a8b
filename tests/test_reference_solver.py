"""Tests of the independent reference solver (tests/reference), not of holoscan."""
import math

import numpy as np
import pytest
from reference import onecharge as oc
from reference.emd_zgauge import VARIANT, _derivatives, _obs, shoot, unsourced_point
from reference.models import demo, second

DEMO = demo()


def test_rn_ads5_closed_form():
    # RN-AdS5 (Chamblin, Emparan, Johnson & Myers 1999, Phys. Rev. D 60, 064018), derived
    # in the z gauge: F = 1 - (1 + Q^2/12) z^4 + (Q^2/12) z^6, T = (4 - Q^2/6)/(4 pi), mu = Q/2,
    # epsilon = 3 P = 3 (1 + mu^2/3)/(2 kappa^2), s = 2 pi/kappa^2 at z_h = 1. phi_h = 0 keeps phi = 0.
    for Q in (0.0, 1.3, 3.0):
        sh = shoot(DEMO, 0.0, Q)
        assert sh["T"] == pytest.approx((4 - Q * Q / 6) / (4 * math.pi), rel=1e-12)
        assert sh["mu"] == pytest.approx(Q / 2, rel=1e-12, abs=1e-15)
        assert sh["G4"] == pytest.approx(-(1 + Q * Q / 12), rel=1e-9)
        # first law of the closed form: P(T, mu) = (r_h^4 + mu^2 r_h^2/3)/2 with
        # pi T r_h = r_h^2 - mu^2/6 (common practice, no source: derived here)
        T, mu = sh["T"], sh["mu"]
        P = lambda T_, mu_: (lambda r: (r ** 4 + mu_ ** 2 * r ** 2 / 3) / 2)(
            (math.pi * T_ + math.sqrt(math.pi ** 2 * T_ ** 2 + 2 * mu_ ** 2 / 3)) / 2)
        h = 1e-5
        assert (P(T + h, mu) - P(T - h, mu)) / (2 * h) == pytest.approx(2 * math.pi, rel=1e-8)
        if Q:
            assert (P(T, mu + h) - P(T, mu - h)) / (2 * h) == pytest.approx(Q / 2, rel=1e-8)   # rho = Q/2


@pytest.mark.parametrize("phi_h", [-0.5, -1.5])
def test_onecharge_closed_form_both_branches(phi_h):
    # One-charge STU brane (Behrndt, Cvetic & Sabra 1999, Nucl. Phys. B 553, 317; DeWolfe, Gubser &
    # Rosen 2011, Phys. Rev. D 83, 086005; couplings recalled from memory, closed form derived in
    # reference/onecharge.py). phi_h = -0.5 is on the stable branch (y = k/r_h^2 < 2), -1.5 unstable.
    c = unsourced_point(oc.model(), phi_h)
    y = math.expm1(-math.sqrt(1.5) * phi_h)
    ref = oc.point(1.0, c["x"], 0 if y < 2 else 1)
    assert ref["y"] == pytest.approx(y, rel=1e-10)
    assert c["s_hat"] == pytest.approx(ref["s"], rel=1e-10)
    assert c["rho_hat"] == pytest.approx(ref["rho"], rel=1e-10)


def _first_law_of_the_closed_form(br, T, mu):
    p = oc.point(T, mu, br)
    P = lambda a, b: oc.point(a, b, br)["P"]
    rho = lambda a, b: oc.point(a, b, br)["rho"]
    d = lambda g, h=1e-4: (4 * (g(h / 2) - g(-h / 2)) / h - (g(h) - g(-h)) / (2 * h)) / 3   # Richardson
    assert d(lambda h: P(T + h, mu)) == pytest.approx(p["s"], rel=1e-9)
    assert d(lambda h: P(T, mu + h)) == pytest.approx(p["rho"], rel=1e-9)
    assert d(lambda h: rho(T, mu + h)) == pytest.approx(p["chi2"], rel=1e-9)


def test_onecharge_closed_form_first_law_and_bound():
    # Thermodynamic consistency of the closed form (common practice, no source): s = dP/dT,
    # rho = dP/dmu on both branches, and no brane past mu/T = pi/sqrt 2 (DeWolfe, Gubser & Rosen 2011).
    for br, (T, mu) in ((0, (1.0, 1.2)), (1, (0.8, 1.5))):
        _first_law_of_the_closed_form(br, T, mu)
    assert oc.point(1.0, math.pi / math.sqrt(2) * 1.001, 0) is None
    assert oc.point(1.0, math.pi / math.sqrt(2) * 0.999, 1) is not None


@pytest.mark.parametrize("x", [(1.2, 0.4), (2.5, 0.5)])
def test_first_law_and_maxwell_relation(x):
    # First law dP = s dT + rho dmu along both directions of horizon data, and the Maxwell relation
    # ds/dmu|_T = drho/dT|_mu (common practice, no source); P by the trace Ward identity.
    x = np.array(x)
    c = _obs(DEMO, *x)
    D, _ = _derivatives(DEMO, x, c["zm"])
    for k in range(2):
        dP = []
        for m_ in (1.0, 0.5):
            e = np.zeros(2)
            e[k] = 0.01 * m_
            a, b = _obs(DEMO, *(x + e), zm=c["zm"]), _obs(DEMO, *(x - e), zm=c["zm"])
            dP.append((a["P"] - b["P"]) / (0.02 * m_))
        dPr = (4 * dP[1] - dP[0]) / 3
        rhs = c["s"] * D[0, k] + c["rho"] * D[1, k]
        assert dPr == pytest.approx(rhs, rel=1e-7, abs=1e-9 * abs(c["P"]) / 0.01)
    G = D[2:] @ np.linalg.inv(D[:2])
    assert G[0, 1] == pytest.approx(G[1, 0], rel=1e-7)


@pytest.mark.parametrize("phi_h", [1.0, 3.0, 6.0])
def test_handover_and_readout_independence(phi_h):
    # Vary every numerical choice (horizon offset, series order, matching point, boundary series
    # length): the same horizon data must give the same boundary data (common practice, no source).
    a = _obs(DEMO, phi_h, 0.4)
    b = _obs(DEMO, phi_h, 0.4, **VARIANT)
    c = _obs(DEMO, phi_h, 0.4, delta=0.005, order=10, rtol=1e-13)
    for q in ("T", "mu", "s", "rho"):
        assert b[q] == pytest.approx(a[q], rel=1e-11)
        assert c[q] == pytest.approx(a[q], rel=1e-11)
    assert b["P"] == pytest.approx(a["P"], rel=1e-9)
    assert c["P"] == pytest.approx(a["P"], rel=1e-9)


@pytest.mark.parametrize("x", [(1.0, 0.0), (2.0, 0.5), (4.0, 0.3)])
def test_demo_pressure_two_routes(x):
    # Ward-identity pressure vs the stress tensor read from the metric falloff (z^4 coefficient of F)
    # (de Haro, Skenderis & Solodukhin 2001, Commun. Math. Phys. 217, 595; Bianchi, Freedman &
    # Skenderis 2002, Nucl. Phys. B 631, 159). The metric route is the worse-conditioned read-out.
    th = _obs(DEMO, *x)
    assert th["P_metric"] == pytest.approx(th["P"], rel=1e-7, abs=1e-9)
    assert abs(th["smarr"]) < 1e-6


def test_second_model_readout():
    # The second invented model (Delta = 2.8): hand-over independence and the two pressure routes
    # (common practice, no source).
    m = second()
    a, b = _obs(m, 1.0, 0.5), _obs(m, 1.0, 0.5, **VARIANT)
    for q in ("T", "mu", "P"):
        assert b[q] == pytest.approx(a[q], rel=1e-9)
    assert a["P_metric"] == pytest.approx(a["P"], rel=1e-7)


def test_vacuum_pressure_converges():
    # Along mu = 0 the stress-tensor pressure tends to the zero-temperature domain wall's value as
    # the horizon scalar grows; s T falls below 1e-11 (common practice, no source).
    p12, p15 = _obs(DEMO, 12.0, 0.0), _obs(DEMO, 15.0, 0.0)
    assert p15["s"] * p15["T"] < 1e-11
    # the remainder P(T) - P(0) ~ s T/(k + 1) with k > 0: positive and below s T
    assert 0.0 < p12["P"] - p15["P"] < p12["s"] * p12["T"]
