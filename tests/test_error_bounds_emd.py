"""Error evidence of the dilaton kind (method atlas) against the one-charge black hole's closed form.

The closed form and its normalisation are those of tests/test_emd_onecharge.py (Behrndt, Cvetic &
Sabra 1999, Nucl. Phys. B 553, 317; DeWolfe, Gubser & Rosen 2011, Phys. Rev. D 83, 086005). The
floor of the relative measure of rho is the README's, max(|rho|, 1e-3 s) (common practice, no
source: rho of a neutral brane vanishes at mu = 0); s and chi2 against their own magnitude.
"""
import math

import numpy as np
import pytest
from test_emd_onecharge import ONE_CHARGE, closed, cumulants

from holoscan import Status, model_from_block


@pytest.fixture(scope="module")
def model():
    return model_from_block(ONE_CHARGE)


def _actual(r, T, mu, branch):
    s, rho, chi2 = closed(T, mu if mu > 0 else 1e-25 * T, branch)
    return max(abs(r.s / s - 1), abs(r.rho - rho) / max(abs(rho), 1e-3 * s), abs(r.chi2 / chi2 - 1))


def test_neutral_point_is_ok_with_the_free_energy_of_the_neutral_brane(model):
    # s/T^3 = pi^2 N^2 / 2 with N^2 = 4 pi^2 / kappa^2 (L = 1): Gubser, Klebanov & Peet 1996,
    # Phys. Rev. D 54, 3915 (the normalisation of kappa from memory)
    for T in (0.4, 1.0, 2.0):
        rows = model.solve_many([(T, 0.0)])[0]
        stable = max(rows, key=lambda r: r.s)
        assert stable.status is Status.OK, stable.message
        assert stable.s / T**3 == pytest.approx(2 * math.pi**4 / ONE_CHARGE["kappa_sq"], rel=1e-10)
        assert stable.error_estimate < 1e-9


def test_both_branches_at_small_mu_over_T(model):
    # at mu/T = 0.05 the unstable branch has horizon scalar -sqrt(2/3) log(1 + y^2), y ~ 126: about -7.9
    rows = model.solve_many([(1.0, 0.05)])[0]
    assert len(rows) == 2
    for branch, r in enumerate(sorted(rows, key=lambda r: -r.s)):
        assert r.status in (Status.OK, Status.NOT_CONVERGED), r.message
        assert _actual(r, 1.0, 0.05, branch) <= r.error_estimate
    assert min(r.extra["horizon_phi0"] for r in rows) < -7.5


GRID = [(t, x * t) for t in np.linspace(0.4, 2.0, 6) for x in np.linspace(0.0, 2.0, 6)]


@pytest.fixture(scope="module")
def grid_rows(model):
    return model.solve_many(GRID)


def test_estimates_bound_the_actual_error_on_a_grid(grid_rows):
    n_ok = 0
    for (t, mu), rows in zip(GRID, grid_rows):
        assert len(rows) == (1 if mu == 0 else 2)
        for branch, r in enumerate(sorted(rows, key=lambda r: -r.s)):
            act = _actual(r, t, mu, branch)
            assert act <= r.error_estimate, (t, mu, branch, act, r.error_estimate)
            if r.status is Status.OK:
                n_ok += 1
                assert act <= 1e-8
    assert n_ok >= len(GRID)   # at least as many ok rows as targets (every stable branch)


def test_higher_cumulants_are_bounded_by_their_estimates_on_the_grid(grid_rows):
    # chi3, chi4 (exact derivatives of the atlas) against mpmath derivatives of the closed form, on
    # both branches away from mu = 0 (where the unstable branch leaves the scan); at mu = 0, chi3
    # vanishes by the symmetry rho(-mu) = -rho(mu) and chi4 is the closed form's limit
    worst = 0.0
    for (t, mu), rows in zip(GRID, grid_rows):
        for branch, r in enumerate(sorted(rows, key=lambda r: -r.s)):
            if r.method != "atlas":
                continue
            c3, c4 = cumulants(t, mu if mu > 0 else 1e-30, branch)
            for got, ref, est in ((r.chi3, c3, r.chi3_err), (r.chi4, c4, r.chi4_err)):
                assert abs(got - ref) <= est, (t, mu, branch, got, ref, est)
                worst = max(worst, abs(got - ref) / est)
            if r.status is Status.OK:
                # the stable branch's cumulants are accurate, not only bounded
                assert r.chi3_err <= 1e-6 * max(abs(c3), abs(r.chi2) / t)
                assert r.chi4_err <= 1e-5 * max(abs(c4), abs(r.chi2) / t**2)
    assert 0.0 < worst <= 1.0


def test_a_branch_beyond_the_scan_is_announced(model):
    # below mu/T ~ 0.016 the unstable branch's horizon scalar passes -12, outside the scan
    rows = model.solve_many([(1.0, 0.005)])[0]
    assert all("beyond_reach" in r.extra for r in rows)
    assert "may exist" in rows[0].message
