"""Charged-scalar kind (holographic superconductor): onset against published values and an independent
spectral method, the probe limit of the backreacted model, the normal branch against the
Reissner-Nordstrom closed form (the second-order transition and the first law on the condensed branch are
in tests/test_charged_scalar_condensed.py).

Probe conventions: Hartnoll, Herzog & Horowitz 2008, Phys. Rev. Lett. 101, 031601 ("HHH PRL");
backreaction: Hartnoll, Herzog & Horowitz 2008, JHEP 12, 015 ("HHH JHEP").
"""
import itertools
import math

import numpy as np
import pytest
from scipy.linalg import eig

from holoscan import InputError, RNModel, SolverSettings, Status, model_from_block, solve_point
from holoscan.kinds.charged_scalar import model as charged_scalar
from holoscan.kinds.charged_scalar.brane import HairyBrane

DEFAULT = SolverSettings()
TIGHT = SolverSettings(rtol=1e-12, horizon_offset=1e-9)


def block(**kw):
    base = {"id": "hs", "kind": "charged-scalar", "d": 3, "m_sq": -2.0, "q": 1.0, "delta": 2.0}
    base.update(kw)
    return base


def branches(model, T, mu, settings=DEFAULT):
    rows = model.solve(T, mu, settings)
    return {r.extra["phase"]: r for r in rows}


# -- independent second method for the onset: Chebyshev collocation --------------------------------
def cheb(N):
    """Chebyshev differentiation matrix on x_j = cos(pi j/N) (Trefethen 2000, Spectral Methods in MATLAB)."""
    x = np.cos(np.pi * np.arange(N + 1) / N)
    c = np.hstack([2.0, np.ones(N - 1), 2.0]) * (-1.0) ** np.arange(N + 1)
    X = np.tile(x, (N + 1, 1)).T
    D = np.outer(c, 1.0 / c) / (X - X.T + np.eye(N + 1))
    return D - np.diag(D.sum(axis=1)), x


def collocation_onset(d, delta, N=40):
    """Probe onset lambda_c = q mu / r_h as the lowest eigenvalue of a generalized eigenproblem.

    On Schwarzschild-AdS_{d+1} (z = r_h/r, f = 1 - z^d, A_t = mu (1 - z^(d-2))) the static scalar
    psi = z^Delta F(z) obeys (derived here from the action of the module under test, independently of
    its shooting code)

        f z F'' + [(2 Delta - d + 1) f - d z^d] F' - Delta^2 z^(d-1) F + lambda^2 z (1 - z^(d-2))^2 / f F = 0,

    regular at the horizon z = 1 (the collocation row there is the regularity condition) and with no
    source at z = 0 (natural when 2 Delta - d + 1 != 0; else F'(0) = 0 is imposed).
    """
    D, x = cheb(N)
    z = (1.0 - x) / 2.0
    D1 = -2.0 * D
    D2 = D1 @ D1
    f = 1.0 - z**d
    b = (1.0 - z ** (d - 2)) * sum(z**k for k in range(d - 2)) / sum(z**k for k in range(d))
    A = np.diag(f * z) @ D2 + np.diag((2 * delta - d + 1) * f - d * z**d) @ D1 - np.diag(delta**2 * z ** (d - 1))
    B = np.diag(z * b)
    i0 = int(np.argmin(z))
    if abs(2 * delta - d + 1) < 1e-12:
        A[i0, :], B[i0, :] = D1[i0, :], 0.0
    w = eig(A, -B, right=False)
    w = w[np.isfinite(w)]
    w = w[(np.abs(w.imag) < 1e-8 * np.abs(w)) & (w.real > 0)].real
    return math.sqrt(w.min())


# -- onset: published values, convergence, second method -------------------------------------------
@pytest.mark.parametrize("delta, published", [(1.0, 0.226), (2.0, 0.118)])
def test_probe_ads4_onset_hhh(delta, published):
    m = model_from_block(block(delta=delta))
    o, o2 = m.onset(1.0, DEFAULT), m.onset(1.0, TIGHT)
    assert o["status"] == "ok" and o2["status"] == "ok", (o["message"], o2["message"])
    assert o["method"] == "zero mode, shooting"
    ratio, ratio2 = o["T_c"] / math.sqrt(o["rho"]), o2["T_c"] / math.sqrt(o2["rho"])
    # convergence: two tolerances and two horizon offsets
    assert abs(ratio / ratio2 - 1) <= 1e-6
    assert o["error_estimate"] <= 1e-8
    # second method: Chebyshev collocation (lambda = q mu / r_h, T = d r_h / (4 pi), rho = mu r_h)
    lam = collocation_onset(3, delta, 40)
    assert collocation_onset(3, delta, 50) == pytest.approx(lam, rel=1e-9)  # the collocation has converged
    x_coll = 4 * math.pi * lam / 3
    assert abs(o["mu_over_T"] / x_coll - 1) <= 1e-6
    ratio_coll = 1.0 / math.sqrt(4 * math.pi * x_coll / 3)
    assert abs(ratio / ratio_coll - 1) <= 1e-6
    # HHH PRL: T_c ~ 0.226 sqrt(rho) for <O_1>, 0.118 sqrt(rho) for <O_2> (3 digits)
    assert round(ratio, 3) == published
    # onset dict: rho is the normal brane's density at (T_c, mu), odd in mu
    assert m.onset(-1.0, DEFAULT)["rho"] == pytest.approx(-o["rho"], rel=1e-14)


def test_onset_scales_with_mu_and_q():
    # Conformal model: T_c proportional to |mu|; probe scaling psi -> psi/q, A -> A/q (HHH PRL eqs.):
    # mu_c/T_c ~ 1/q and T_c/sqrt(q rho) independent of q (follows from the field equations, no source).
    m1, m3 = model_from_block(block(q=1.0)), model_from_block(block(q=3.0))
    a, b = m1.onset(2.0), m1.onset(5.0)
    assert b["T_c"] / a["T_c"] == pytest.approx(2.5, rel=1e-12)
    c = m3.onset(2.0)
    assert c["mu_over_T"] == pytest.approx(a["mu_over_T"] / 3.0, rel=1e-8)
    assert c["T_c"] / math.sqrt(3.0 * c["rho"]) == pytest.approx(a["T_c"] / math.sqrt(a["rho"]), rel=1e-8)
    assert m1.onset(0.0)["T_c"] == 0.0


@pytest.mark.parametrize("m_sq, delta", [(-3.0, 3.0), (-3.75, 1.5)])
def test_probe_ads5_onset_two_methods(m_sq, delta):
    m = model_from_block(block(d=4, m_sq=m_sq, delta=delta))
    o = m.onset(1.0)
    assert o["status"] == "ok", o["message"]
    lam = collocation_onset(4, delta, 40)
    assert collocation_onset(4, delta, 50) == pytest.approx(lam, rel=1e-9)
    assert abs(o["mu_over_T"] / (4 * math.pi * lam / 4) - 1) <= 1e-6
    # d = 4 probe: rho = 2 mu r_h^2 at the onset, r_h = pi T (normal brane, closed form)
    assert o["rho"] == pytest.approx(2.0 * (math.pi * o["T_c"]) ** 2, rel=1e-12)


def test_backreacted_onset_approaches_probe_as_q_grows():
    # HHH JHEP: the probe limit is q -> infinity with q psi, q A fixed. With the gauge coupling written
    # as 1/(4 e^2) F^2 the effective charge is q e, so T_c / sqrt(q e^2 rho) -> the probe T_c / sqrt(q rho)
    # (derived in charged_scalar's docstring) with corrections O(kappa^2 / (q e)^2).
    probe = model_from_block(block()).onset(1.0)
    ref = probe["T_c"] / math.sqrt(probe["rho"])
    devs = []
    for q in (3.0, 6.0, 12.0):
        m = model_from_block(block(q=q, probe=False, kappa_sq=1.0, e_sq=2.0))
        o = m.onset(1.0)
        assert o["status"] == "ok", o["message"]
        devs.append(abs(o["T_c"] / math.sqrt(q * 2.0 * o["rho"]) / ref - 1))
    assert devs[0] > devs[1] > devs[2]
    for a, b in itertools.pairwise(devs):
        assert 3.0 < a / b < 4.5  # roughly 1/q^2: doubling q divides the deviation by ~4


# -- normal branch ----------------------------------------------------------------------------------
@pytest.mark.parametrize("d", [3, 4])
def test_backreacted_normal_branch_is_rn(d):
    # Chamblin, Emparan, Johnson & Myers 1999, Phys. Rev. D 60, 064018 (the rn model's closed form).
    k2, e2 = 0.7, 1.6
    m = model_from_block(block(d=d, m_sq=-3.0 if d == 4 else -2.0, delta=3.0 if d == 4 else 2.0, q=2.0,
                               probe=False, kappa_sq=k2, e_sq=e2))
    rn = RNModel("rn", d, k2, e2)
    T, mu = 0.3, 0.5
    normal = branches(m, T, mu)["normal"]
    ref = rn.closed_form(T, mu)
    for k in ("s", "rho", "P", "epsilon", "chi2", "cs2"):
        assert getattr(normal, k) == pytest.approx(getattr(ref, k), rel=1e-12), k
    # independent: our own bulk equations with psi = 0, shot from the horizon, reproduce the closed form
    brane = m.brane()
    for E in (0.3, 1.2, 2.0):
        sh = brane.shoot([0.0], [E], 1e-10, 1e-8)
        x = float(sh.x[0])
        c = rn.closed_form(1.0, x)
        assert sh.residual[0] < 1e-9
        assert float(sh.s_hat[0]) == pytest.approx(c.s, rel=1e-9)
        assert float(sh.rho_hat[0]) == pytest.approx(c.rho, rel=1e-9)
        assert float(sh.p_hat[0]) == pytest.approx(c.P, rel=1e-9)


def test_probe_normal_branch_closed_form():
    # Probe gauge field on Schwarzschild-AdS4: A_t = mu (1 - r_h/r), P = mu^2 r_h / 2, r_h = 4 pi T / 3
    # (HHH PRL conventions, e^2 = 1); checked against our shooting at psi = 0.
    brane = HairyBrane(3, -2.0, 2.0, 1.0)
    sh = brane.shoot([0.0], [2.0], 1e-10, 1e-8)
    m = model_from_block(block())
    n = branches(m, 1.0, float(sh.x[0]))["normal"]
    assert n.P == pytest.approx(float(sh.p_hat[0]), rel=1e-10)  # noqa: SIM300 - P is the pressure, not a constant
    assert n.rho == pytest.approx(float(sh.rho_hat[0]), rel=1e-10)
    assert n.s == pytest.approx(float(sh.s_hat[0]), rel=1e-9)


# -- condensed branch -----------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def probe2():
    return model_from_block(block(delta=2.0))


def test_branches_and_symmetry(probe2):
    Tc = probe2.onset(1.0)["T_c"]
    assert [r.extra["phase"] for r in probe2.solve(1.2 * Tc, 1.0)] == ["normal"]
    assert [r.extra["phase"] for r in probe2.solve(1.0, 0.0)] == ["normal"]
    rows = probe2.solve(0.7 * Tc, 1.0)
    assert [(r.branch, r.extra["phase"]) for r in rows] == [(0, "normal"), (1, "condensed")]
    c = rows[1]
    assert c.status is Status.OK, c.message
    assert c.extra["T_c"] == pytest.approx(Tc, rel=1e-15) and c.extra["condensate"] > 0
    assert rows[0].extra["condensate"] == 0.0
    # mu -> -mu: rho odd, everything else even (charge conjugation; common practice, no source)
    m = probe2.solve(0.7 * Tc, -1.0)[1]
    assert m.rho == -c.rho and m.P == c.P and m.s == c.s and m.extra["condensate"] == c.extra["condensate"]
    # conformal: at (2T, 2mu) observables of dimension n scale by 2^n (common practice, no source)
    t = probe2.solve(1.4 * Tc, 2.0)[1]
    assert t.P == pytest.approx(8 * c.P, rel=1e-8) and t.rho == pytest.approx(4 * c.rho, rel=1e-8)  # noqa: SIM300 - P: pressure
    assert t.extra["condensate"] == pytest.approx(4 * c.extra["condensate"], rel=1e-8)  # Delta = 2
    assert c.trace_anomaly == 0.0 and c.cs2 == pytest.approx(0.5, rel=1e-6)


def test_determinism(probe2):
    Tc = probe2.onset(1.0)["T_c"]
    a = probe2.solve(0.8 * Tc, 1.0)[1].to_dict()
    charged_scalar._CACHE.clear()
    b = probe2.solve(0.8 * Tc, 1.0)[1].to_dict()
    a.pop("wall_time"), b.pop("wall_time")
    assert a == b


# -- input validation ---------------------------------------------------------------------------------
@pytest.mark.parametrize("kw, key, value", [
    (dict(d=5), "models[2].d", 5),
    (dict(m_sq=-2.5), "models[2].m_sq", -2.5),                  # below the BF bound -9/4
    (dict(m_sq=-2.25, delta=1.5), "models[2].m_sq", -2.25),      # at the BF bound
    (dict(m_sq=0.5), "models[2].m_sq", 0.5),
    (dict(delta=1.7), "models[2].delta", 1.7),                  # not a root of Delta(Delta - 3) = -2
    (dict(m_sq=-1.0, delta=1.5 - math.sqrt(1.25)), "models[2].delta", 1.5 - math.sqrt(1.25)),  # Delta_- outside window
    (dict(q=0.0), "models[2].q", 0.0),
    (dict(q=-1.0), "models[2].q", -1.0),
    (dict(probe="yes"), "models[2].probe", "yes"),
    (dict(kappa_sq=1.0), "models[2].kappa_sq", 1.0),
    (dict(e_sq=1.0), "models[2].e_sq", 1.0),
    (dict(probe=False, e_sq=1.0), "models[2].kappa_sq", None),
    (dict(probe=False, kappa_sq=1.0), "models[2].e_sq", None),
    (dict(probe=False, kappa_sq=-1.0, e_sq=1.0), "models[2].kappa_sq", -1.0),
    (dict(kapa_sq=1.0), "models[2].kapa_sq", 1.0),
])
def test_bad_input_names_key_and_value(kw, key, value):
    with pytest.raises(InputError) as exc:
        model_from_block(block(**kw), "models[2]")
    assert exc.value.key == key
    assert exc.value.value == value
    assert key in str(exc.value)


def test_delta_errors_list_allowed_values():
    with pytest.raises(InputError) as exc:
        model_from_block(block(m_sq=-1.0, delta=1.5 - math.sqrt(1.25)))
    assert "Delta_+ = 2.61803398875" in exc.value.reason and "Delta_-" in exc.value.reason
    with pytest.raises(InputError) as exc:
        model_from_block(block(delta=1.7))
    assert "Delta_+ = 2" in exc.value.reason and "Delta_- = 1" in exc.value.reason
    # Delta_- with backreaction needs 3 Delta_- > Delta_+ (d = 3: nu < 3/4)
    with pytest.raises(InputError) as exc:
        model_from_block(block(m_sq=-1.5, delta=1.5 - math.sqrt(0.75), probe=False, kappa_sq=1.0, e_sq=1.0))
    assert exc.value.key == "model.delta"


def test_spec_and_registration():
    m = model_from_block(block(probe=False, kappa_sq=0.5, e_sq=2.0, delta=2.0 + 1e-11))
    s = m.spec()
    assert list(s) == sorted(s)
    assert s == {"d": 3, "delta": 2.0, "e_sq": 2.0, "id": "hs", "kappa_sq": 0.5, "kind": "charged-scalar",
                 "m_sq": -2.0, "probe": False, "q": 1.0}
    assert "kappa_sq" not in model_from_block(block()).spec()
    rows = solve_point(m, 1.0, 0.5)
    assert rows[0].kind == "charged-scalar"


def test_ads5_probe_condensed_points():
    # d = 4 probe, both quantisations of m^2 = -15/4: condensed points solve, with the first-law pressure
    # equal to the on-shell action (two routes; common practice, no source) and P above the normal P.
    for delta in (2.5, 1.5):
        m = model_from_block(block(d=4, m_sq=-3.75, delta=delta))
        Tc = m.onset(1.0)["T_c"]
        b = branches(m, 0.6 * Tc, 1.0)
        c = b["condensed"]
        assert c.status is Status.OK, c.message
        assert c.P_check == pytest.approx(c.P, rel=1e-9) and c.P > b["normal"].P
        assert c.cs2 == pytest.approx(1.0 / 3.0, rel=1e-6)


def test_failures_are_reported_not_raised(probe2):
    # Within 1e-9 of T_c, x(psi0) is flat and psi0 is fixed only to the shots' noise: the point must be
    # reported with its (large) error estimate rather than as ok, never as a silent NaN.
    Tc = probe2.onset(1.0)["T_c"]
    c = branches(probe2, Tc * (1 - 1e-9), 1.0)["condensed"]
    assert c.status in (Status.OK, Status.NOT_CONVERGED)
    assert math.isfinite(c.P) and math.isfinite(c.extra["condensate"])
    if c.status is Status.NOT_CONVERGED:
        assert "estimated error" in c.message and c.error_estimate > DEFAULT.accept_error
    # the probe O_1 condensate grows without bound as T -> 0 and the horizon field underflows: the
    # family ends, and points beyond are FAILED with the reason, with NaN observables
    m = model_from_block(block(delta=1.0))
    Tc1 = m.onset(1.0)["T_c"]
    c = branches(m, 0.05 * Tc1, 1.0)["condensed"]
    assert c.status is Status.FAILED and "condensed family" in c.message and math.isnan(c.P)
