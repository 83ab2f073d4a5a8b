"""Higher cumulants and transport from horizon data of the Reissner-Nordstrom-AdS_{d+1} brane.

References:
- closed form: Chamblin, Emparan, Johnson & Myers 1999, Phys. Rev. D 60, 064018 (normalisation of
  Hartnoll 2009, Class. Quant. Grav. 26, 224002): d r_h^2 - 4 pi T r_h - (d-2) mu^2/gamma^2 = 0,
  rho = (d-2) mu r_h^(d-2)/e^2, gamma^2 = (d-1) e^2/((d-2) kappa^2);
- chi3, chi4 checked against mpmath's numerical derivatives (40 digits) of that closed form, an
  independent route (no implicit differentiation);
- eta/s = 1/(4 pi): Kovtun, Son & Starinets 2005, Phys. Rev. Lett. 94, 111601;
- the conductivity: the horizon (membrane) value r_h^(d-3)/e^2 times (sT/(epsilon+P))^2 (Hartnoll
  2009, as above); at mu = 0 in AdS5 it is pi T/e^2, which with 1/e^2 = N^2/(16 pi^2) (the
  R-current of N = 4 SYM) is N^2 T/(16 pi) (Caron-Huot, Kovtun, Moore, Starinets & Yaffe 2006,
  JHEP 0612:015; the value recalled from memory);
- D = sigma/chi2: the Einstein relation (common practice, no source).
"""
from __future__ import annotations

import math

import mpmath as mp
import pytest

from holoscan import RNModel, SolverSettings, solve_point

CLOSED = SolverSettings(method="closed-form")


def rho_closed(d, kappa_sq, e_sq, T, mu):
    """rho(T, mu) of the closed form in mpmath."""
    g2 = mp.mpf(d - 1) * e_sq / ((d - 2) * kappa_sq)
    rh = (4 * mp.pi * T + mp.sqrt(16 * mp.pi**2 * T**2 + 4 * d * (d - 2) * mu**2 / g2)) / (2 * d)
    return (d - 2) * mu * rh ** (d - 2) / e_sq


@pytest.mark.parametrize("d", [3, 4, 5])
@pytest.mark.parametrize("x", [0.0, 0.8, 3.0, -2.0])
def test_chi3_chi4_against_high_precision_derivatives_of_the_closed_form(d, x):
    kappa_sq, e_sq, T = 0.7, 1.3, 0.4
    mu = x * T
    (r,) = solve_point(RNModel("m", d, kappa_sq=kappa_sq, e_sq=e_sq), T, mu, CLOSED)
    mp.mp.dps = 40
    f = lambda m: rho_closed(d, mp.mpf(kappa_sq), mp.mpf(e_sq), mp.mpf(T), m)
    for n, got in ((1, r.chi2), (2, r.chi3), (3, r.chi4)):
        ref = float(mp.diff(f, mp.mpf(mu), n))
        assert got == pytest.approx(ref, rel=1e-12, abs=1e-13 * abs(r.chi2) * T ** (1 - n)), (n, got, ref)
    row = r.to_dict()
    assert row["kurtosis_ratio"] == pytest.approx(r.chi4 / r.chi2, rel=1e-15)
    if x == 0.0:  # rho is odd in mu: its even derivatives vanish at mu = 0 (charge conjugation)
        assert r.chi3 == 0.0


@pytest.mark.parametrize("d", [3, 4, 5])
def test_transport_from_horizon_data(d):
    kappa_sq, e_sq = 0.7, 1.3
    m = RNModel("m", d, kappa_sq=kappa_sq, e_sq=e_sq)
    for T, mu in ((0.3, 0.0), (0.3, 0.9), (1.1, -2.0)):
        (r,) = solve_point(m, T, mu, CLOSED)
        assert r.eta_over_s == 1 / (4 * math.pi)
        rh = r.extra["r_h"]
        w = T * r.s + mu * r.rho
        assert w == pytest.approx(r.epsilon + r.P, rel=1e-13)              # Euler relation
        assert r.sigma == pytest.approx(rh ** (d - 3) / e_sq * (T * r.s / w) ** 2, rel=1e-14)
        assert r.to_dict()["D_charge"] == pytest.approx(r.sigma / r.chi2, rel=1e-15)
        if mu == 0.0:  # no charge: sigma is the horizon value, r_h = 4 pi T/d
            assert r.sigma == pytest.approx((4 * math.pi * T / d) ** (d - 3) / e_sq, rel=1e-14)
    if d == 4:  # N = 4 SYM R-current: 1/e^2 = N^2/(16 pi^2) gives sigma = N^2 T/(16 pi)
        N, T = 5.0, 0.6
        (r,) = solve_point(RNModel("sym", 4, kappa_sq=kappa_sq, e_sq=16 * math.pi**2 / N**2), T, 0.0, CLOSED)
        assert r.sigma == pytest.approx(N**2 * T / (16 * math.pi), rel=1e-14)


def test_emd_conductivity_reduces_to_rn_and_follows_the_horizon_coupling():
    # V = -12, f = c (a constant) is Einstein-Maxwell: the rn kind with d = 4 and e^2 = 2 kappa^2/c
    # (from the two actions), so sigma must be the RN closed form's (the dilaton case is checked
    # against the horizon formula in tests/test_emd_atlas.py)
    from holoscan import model_from_block

    for c in (2.5,):
        emd = model_from_block({"id": "e", "kind": "emd", "kappa_sq": 0.7, "V": "-12", "f": str(c)})
        rn = RNModel("r", 4, kappa_sq=0.7, e_sq=1.4 / c)
        for T, mu in ((0.3, 1.2),):
            (a,) = solve_point(emd, T, mu)
            (b,) = solve_point(rn, T, mu, CLOSED)
            assert a.sigma == pytest.approx(b.sigma, rel=1e-8) and a.eta_over_s == 1 / (4 * math.pi)
