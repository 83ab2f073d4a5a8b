"""Einstein-Maxwell-dilaton kind against closed forms.

The one-charge black hole (a truncation of the STU model): Behrndt, Cvetic & Sabra 1999, Nucl. Phys.
B 553, 317; in the normalisation of DeWolfe, Gubser & Rosen 2011, Phys. Rev. D 83, 086005:
V = -(8 e^{phi/sqrt6} + 4 e^{-2 phi/sqrt6}), f = e^{-4 phi/sqrt6}. Its planar brane, written with
H = 1 + q/r^2 and F = r^2 H - m/r^2 (we checked symbolically that it solves our field equations),

    ds^2 = -H^{-2/3} F dt^2 + H^{1/3} (dr^2/F + r^2 dx^2),   phi = -sqrt(2/3) log H,

gives, with y = sqrt(q)/r_H:  T = r_H (2 + y^2) / (2 pi sqrt(1 + y^2)),  mu = r_H y / sqrt(1 + y^2),
s = 2 pi r_H^3 sqrt(1 + y^2) / kappa^2,  rho = r_H^3 y sqrt(1 + y^2) / kappa^2, and
mu/T = 2 pi y / (2 + y^2) <= pi/sqrt(2) (the bound quoted by DeWolfe, Gubser & Rosen 2011), reached at
y = sqrt(2): below it two branches, y < sqrt(2) thermodynamically stable, y > sqrt(2) unstable.
chi2 = d rho/d mu at fixed T (and chi3, chi4, the next two derivatives) are taken from this closed form
with mpmath at 40 digits.
"""
import math

import mpmath as mp
import pytest

from holoscan import SolverSettings, Status, model_from_block, solve_point

ONE_CHARGE = {"id": "1q", "kind": "emd", "kappa_sq": 1.0, "source": False,
              "V": "-(8*exp(phi/sqrt(6)) + 4*exp(-2*phi/sqrt(6)))", "f": "exp(-4*phi/sqrt(6))"}
X_MAX = math.pi / math.sqrt(2)


def closed(T, mu, branch, k2=1.0):
    """(s, rho, chi2) of the one-charge brane on the stable (0) or unstable (1) branch."""
    mp.mp.dps = 40

    def state(T, mu):
        x = mp.mpf(mu) / T
        root = mp.sqrt(mp.pi**2 - 2 * x**2)
        y = (mp.pi - root) / x if branch == 0 else (mp.pi + root) / x
        rh = 2 * mp.pi * T * mp.sqrt(1 + y**2) / (2 + y**2)
        return rh, y

    def rho(T, mu):
        rh, y = state(T, mu)
        return rh**3 * y * mp.sqrt(1 + y**2) / k2

    rh, y = state(T, mu)
    s = 2 * mp.pi * rh**3 * mp.sqrt(1 + y**2) / k2
    chi2 = mp.diff(lambda m: rho(mp.mpf(T), m), mp.mpf(mu))
    return float(s), float(rho(T, mu)), float(chi2)


def cumulants(T, mu, branch, k2=1.0):
    """(chi3, chi4) = d^2 rho/d mu^2, d^3 rho/d mu^3 at fixed T of the closed form, by mpmath's
    numerical differentiation at 40 digits (far beyond double precision)."""
    mp.mp.dps = 40

    def rho(m):
        x = m / mp.mpf(T)
        root = mp.sqrt(mp.pi**2 - 2 * x**2)
        y = (mp.pi - root) / x if branch == 0 else (mp.pi + root) / x
        rh = 2 * mp.pi * T * mp.sqrt(1 + y**2) / (2 + y**2)
        return rh**3 * y * mp.sqrt(1 + y**2) / k2
    return tuple(float(mp.diff(rho, mp.mpf(mu), n)) for n in (2, 3))


@pytest.fixture(scope="module")
def model():
    return model_from_block(ONE_CHARGE)


def test_stable_and_unstable_branches_match_closed_form(model):
    T = 0.8
    for x in (0.5, 1.5, 2.1):
        rows = solve_point(model, T, x * T)
        assert len(rows) == 2
        by_s = sorted(rows, key=lambda r: -r.s)  # the stable branch has the larger entropy at fixed (T, mu)
        # the stable branch is ok; the unstable one may be flagged (its read-out at Delta = 2 is less
        # accurate at large |phi0|, test_emd_atlas.py), but its estimate must bound its error
        assert by_s[0].status is Status.OK, by_s[0].message
        assert by_s[1].status in (Status.OK, Status.NOT_CONVERGED), by_s[1].message
        for branch, r in enumerate(by_s):
            s, rho, chi2 = closed(T, x * T, branch)
            assert abs(r.s / float(s) - 1) <= max(r.error_estimate, 1e-12)
            assert r.s == pytest.approx(s, rel=1e-6)
            assert r.rho == pytest.approx(rho, rel=1e-6)
            assert r.chi2 == pytest.approx(chi2, rel=1e-6)
            assert r.stability == ("stable" if branch == 0 else "unstable")


def test_bound_on_mu_over_T(model):
    # past mu/T = pi/sqrt(2) there is no brane: status "no solution", which is physics, not failure
    (r,) = solve_point(model, 1.0, 1.02 * X_MAX)
    assert r.status is Status.NO_SOLUTION and "no brane" in r.message
    # chi2 grows without bound on the stable branch as the bound is approached
    chis = []
    for x in (1.8, 2.1, 2.2):
        rows = solve_point(model, 1.0, x)
        chis.append(max(rows, key=lambda r: r.s).chi2)
    assert chis[0] < chis[1] < chis[2]
    assert chis[2] == pytest.approx(closed(1.0, 2.2, 0)[2], rel=1e-6)


def test_negative_mu_and_zero_mu(model):
    a = max(solve_point(model, 0.5, 0.6), key=lambda r: r.s)
    b = max(solve_point(model, 0.5, -0.6), key=lambda r: r.s)
    assert b.rho == pytest.approx(-a.rho, rel=1e-10) and b.s == pytest.approx(a.s, rel=1e-10)
    # mu = 0: the neutral brane, s = pi^4 T^3 ... here 2 pi (pi T)^3 / kappa^2 (AdS5 black brane)
    r = max(solve_point(model, 0.5, 0.0), key=lambda r: r.s)
    assert r.s == pytest.approx(2 * math.pi * (math.pi * 0.5) ** 3, rel=1e-8)


def test_rn_through_emd_kind():
    # V = -12, f = 1 is Einstein-Maxwell: the rn kind with d = 4 and e^2 = 2 kappa^2 / f (from the two
    # actions; Reissner-Nordstrom closed form: Chamblin, Emparan, Johnson & Myers 1999, Phys. Rev. D 60, 064018)
    emd = model_from_block({"id": "e", "kind": "emd", "kappa_sq": 0.7, "V": "-12", "f": "1"})
    rn = model_from_block({"id": "r", "kind": "rn", "d": 4, "kappa_sq": 0.7, "e_sq": 1.4})
    for T, mu in ((0.3, 0.0), (0.3, 1.2), (1.1, -2.0)):
        (a,) = solve_point(emd, T, mu)
        (b,) = solve_point(rn, T, mu, SolverSettings(method="closed-form"))
        for k in ("s", "rho", "epsilon", "P", "chi2", "cs2"):
            assert getattr(a, k) == pytest.approx(getattr(b, k), rel=1e-8, abs=1e-14), k
