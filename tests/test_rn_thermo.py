"""Reissner-Nordstrom-AdS_{d+1} brane: closed form against published values and against the
independent numerical (shooting) path."""
import functools
import math

import numpy as np
import pytest

from holoscan import RNModel, SolverSettings, Status, solve_point
from holoscan.bulk.charged_brane import ChargedBrane, Constant

SHOOT = SolverSettings(method="shooting")
CLOSED = SolverSettings(method="closed-form")


def one(model, T, mu, settings):
    (r,) = solve_point(model, T, mu, settings)
    return r


@pytest.mark.parametrize("method", ["closed-form", "shooting"])
def test_n4_sym_entropy_at_zero_density(method):
    # Gubser, Klebanov & Peet 1996, Phys. Rev. D 54, 3915: strongly coupled N = 4 SYM has
    # s = pi^2 N^2 T^3 / 2, i.e. 3/4 of the free-field value 2 pi^2 N^2 T^3 / 3.
    # Normalisation 1/(2 kappa^2) = N^2 / (8 pi^2) (AdS5 x S5 with L = 1; common practice).
    N = 7.0
    m = RNModel("sym", 4, kappa_sq=4 * math.pi**2 / N**2, e_sq=1.0)
    for T in (0.2, 1.0, 3.0):
        r = one(m, T, 0.0, SolverSettings(method=method))
        assert r.status is Status.OK
        assert r.s == pytest.approx(math.pi**2 * N**2 * T**3 / 2, rel=1e-10)
        assert r.s / (2 * math.pi**2 * N**2 * T**3 / 3) == pytest.approx(0.75, rel=1e-10)


@pytest.mark.parametrize("d", [3, 4, 5])
@pytest.mark.parametrize("x", [0.0, 0.7, 3.0, 10.0, -4.0])
def test_shooting_matches_closed_form(d, x):
    # Closed form: Chamblin, Emparan, Johnson & Myers 1999, Phys. Rev. D 60, 064018; normalisation
    # of Hartnoll 2009, Class. Quant. Grav. 26, 224002. Bar: 1e-8 relative, the default accept_error.
    m = RNModel("m", d, kappa_sq=0.8, e_sq=1.7)
    T = 0.37
    c, n = one(m, T, x * T, CLOSED), one(m, T, x * T, SHOOT)
    assert n.status is Status.OK, n.message
    for k in ("s", "rho", "epsilon", "P"):
        ref = getattr(c, k)
        got = getattr(n, k)
        if ref == 0.0:
            assert abs(got) < 1e-12
        else:
            assert abs(got / ref - 1) < 1e-8, (k, got, ref)
    # susceptibility from finite differences of the numerical path, speed of sound
    assert n.chi2 == pytest.approx(c.chi2, rel=1e-7)
    assert n.cs2 == pytest.approx(c.cs2, rel=1e-9)
    # the solver's own error estimate and residual are reported, finite and small
    assert 0 < n.error_estimate < 1e-8
    assert 0 <= n.residual < 1e-9
    assert n.nfev > 0 and n.nsteps > 0


@pytest.mark.parametrize("method", ["closed-form", "shooting"])
@pytest.mark.parametrize("d", [3, 4, 5])
def test_first_law_euler_trace_sound(method, d):
    # First law dP = s dT + rho dmu, Euler relation epsilon + P = T s + mu rho, conformal trace
    # epsilon = (d-1) P and cs2 = 1/(d-1): thermodynamics of a conformal fluid (common practice, no source).
    m = RNModel("m", d, kappa_sq=1.3, e_sq=0.6)
    st = SolverSettings(method=method)
    T, mu, h = 0.5, 1.1, 1e-2
    r = one(m, T, mu, st)

    def d4(fn):  # fourth-order central difference
        return (-fn(2 * h) + 8 * fn(h) - 8 * fn(-h) + fn(-2 * h)) / (12 * h)

    @functools.cache  # the four points at mu +- h, mu +- 2h serve both mu derivatives: each solved once
    def at(T_, mu_):
        return one(m, T_, mu_, st)

    assert d4(lambda e: at(T + e, mu).P) == pytest.approx(r.s, rel=1e-7)
    assert d4(lambda e: at(T, mu + e).P) == pytest.approx(r.rho, rel=1e-7)
    assert d4(lambda e: at(T, mu + e).rho) == pytest.approx(r.chi2, rel=1e-7)
    assert r.epsilon + r.P == pytest.approx(T * r.s + mu * r.rho, rel=1e-9)
    assert r.epsilon == pytest.approx((d - 1) * r.P, rel=1e-9)
    assert r.cs2 == pytest.approx(1.0 / (d - 1), rel=1e-9)


def test_sign_symmetry():
    # Charge conjugation A -> -A: rho odd in mu, everything else even (common practice, no source).
    m = RNModel("m", 4, kappa_sq=0.9, e_sq=1.1)
    for st in (CLOSED, SHOOT):
        a, b = one(m, 0.3, 0.8, st), one(m, 0.3, -0.8, st)
        assert b.rho == pytest.approx(-a.rho, rel=1e-12)
        for k in ("s", "epsilon", "P", "chi2", "cs2"):
            assert getattr(b, k) == pytest.approx(getattr(a, k), rel=1e-9)


@pytest.mark.parametrize("d", [3, 4, 5])
def test_extremal_entropy(d):
    # T -> 0 at fixed mu: finite entropy of the extremal brane, near-horizon AdS2 x R^(d-1), with
    # r_h -> sqrt((d-2)/d) mu / gamma (Chamblin et al. 1999; Hartnoll 2009). The numerical path at small
    # T is extrapolated to T = 0 by a quadratic in T (s - s0 is analytic in T, common practice, no source).
    m = RNModel("m", d, kappa_sq=0.8, e_sq=1.7)
    mu = 1.0
    s0 = 2 * math.pi * (math.sqrt((d - 2) / d) * mu / math.sqrt((d - 1) * 1.7 / ((d - 2) * 0.8))) ** (d - 1) / 0.8
    Ts = np.array([4e-4, 2e-4, 1e-4])
    ss = np.array([one(m, T, mu, SHOOT).s for T in Ts])
    extrap = np.polyval(np.polyfit(Ts, ss, 2), 0.0)  # s(T) = s0 + a T + b T^2 + O(T^3)
    assert extrap == pytest.approx(s0, rel=1e-7)
    assert np.all(np.diff(ss) < 0) and ss[-1] > s0  # approach from above, the entropy grows with T
    assert one(m, 1e-9, mu, CLOSED).s == pytest.approx(s0, rel=1e-7)


def test_field_equation_residual_detects_wrong_fields():
    # The constraint residual is ~0 on the exact RN solution written in the solver's gauge and O(1e-3)
    # when a field is perturbed: the reported residual is a real check (common practice, no source).
    d, f = 4, 2.0
    br = ChargedBrane(d, Constant(-12.0), Constant(f))
    Phi1 = 0.9
    a = d - f * Phi1**2 / (2 * (d - 1))
    r = np.linspace(0.01, 3.0, 50)
    G = f * Phi1
    c2 = G * G / (2 * (d - 1) * (d - 2) * f * a * a)
    hinf = 1 / a**2
    c1 = -hinf - c2  # h(0) = 0
    h = hinf + c1 * np.exp(-d * a * r) + c2 * np.exp(-2 * (d - 1) * a * r)
    dh = -d * a * c1 * np.exp(-d * a * r) - 2 * (d - 1) * a * c2 * np.exp(-2 * (d - 1) * a * r)
    dPhi = Phi1 * np.exp(-(d - 2) * a * r)
    Phi = Phi1 * (1 - np.exp(-(d - 2) * a * r)) / ((d - 2) * a)
    y = np.array([a * r, a + 0 * r, h, dh, Phi, dPhi, 0 * r, 0 * r])
    assert np.max(br.residual(r, y)) < 1e-13
    y_bad = y.copy()
    y_bad[3] *= 1.001
    assert np.max(br.residual(r, y_bad)) > 1e-4


def test_failures_are_returned_not_raised():
    # A scan needs failed points as records (common practice, no source): an impossible accuracy bar
    # gives "not converged", an unreachable target "failed" (mu/T = 1e30 lies beyond every shot
    # before the extremal limit), a temperature whose T^4 underflows "out of range"; none raises.
    m = RNModel("m", 4, kappa_sq=1.0, e_sq=1.0)
    r = one(m, 1.0, 1.0, SolverSettings(method="shooting", accept_error=1e-30))
    assert r.status is Status.NOT_CONVERGED and "accept_error" in r.message
    assert math.isfinite(r.s)
    r = one(m, 1e-30, 1.0, SHOOT)
    assert r.status is Status.FAILED and "not bracketed" in r.message
    r = one(m, 1e-300, 1.0, SHOOT)
    assert r.status is Status.OUT_OF_RANGE and "T = 1e-300" in r.message and math.isnan(r.P)
