"""Error evidence of the dilaton kind (method atlas) against the one-charge black hole's closed form.

The closed form and its normalisation are those of tests/test_emd_onecharge.py (Behrndt, Cvetic &
Sabra 1999, Nucl. Phys. B 553, 317; DeWolfe, Gubser & Rosen 2011, Phys. Rev. D 83, 086005). The
floor of the relative measure of rho is the README's, max(|rho|, 1e-3 s) (common practice, no
source: rho of a neutral brane vanishes at mu = 0); s and chi2 against their own magnitude.
"""
import math

import numpy as np
import pytest
from test_emd_onecharge import ONE_CHARGE, closed

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


def test_estimates_bound_the_actual_error_on_a_grid(model):
    T = np.linspace(0.4, 2.0, 6)
    X = np.linspace(0.0, 2.0, 6)
    targets = [(t, x * t) for t in T for x in X]
    n_ok = 0
    for (t, mu), rows in zip(targets, model.solve_many(targets)):
        assert len(rows) == (1 if mu == 0 else 2)
        for branch, r in enumerate(sorted(rows, key=lambda r: -r.s)):
            act = _actual(r, t, mu, branch)
            assert act <= r.error_estimate, (t, mu, branch, act, r.error_estimate)
            if r.status is Status.OK:
                n_ok += 1
                assert act <= 1e-8
    assert n_ok >= len(targets)   # at least as many ok rows as targets (every stable branch)


def test_a_branch_beyond_the_scan_is_announced(model):
    # below mu/T ~ 0.016 the unstable branch's horizon scalar passes -12, outside the scan
    rows = model.solve_many([(1.0, 0.005)])[0]
    assert all("beyond_reach" in r.extra for r in rows)
    assert "may exist" in rows[0].message
