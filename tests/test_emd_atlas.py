"""The production path of kind ``emd``: the atlas of the horizon-data map (holoscan/atlas/,
holoscan/emd_batch.py), checked against outside references and against the point-by-point solver.

References: numpy's Chebyshev module (a general-purpose library) for the patch interpolation; the
closed-form one-charge black hole (Behrndt, Cvetic & Sabra 1999, Nucl. Phys. B 553, 317, in the
normalisation of DeWolfe, Gubser & Rosen 2011, Phys. Rev. D 83, 086005; ``closed`` in
test_emd_onecharge.py, whose docstring gives the formulas) for values on both branches; our
point-by-point shooting solver (an independent method: Newton on direct shots, finite-difference
derivatives, pressure paths of shots) for the invented demo model.
"""
import math

import numpy as np
import pytest
from numpy.polynomial import chebyshev as C
from test_emd_onecharge import ONE_CHARGE, X_MAX, closed

from holoscan import SolverSettings, Status, model_from_block, solve_point
from holoscan.kinds.emd.batch import BatchSolver
from holoscan.kinds.emd.pointwise import shooter_for
from holoscan.numerics.cheb import PatchSet, fit, nodes

DEMO = {"id": "demo", "kind": "emd", "kappa_sq": 1.0, "source": True,
        "V": "-12*cosh(0.6*phi) + 0.77*phi**2 - 0.15*phi**4 + 0.0015*phi**6", "f": "sech(1.1*phi)"}


def test_patch_interpolation_matches_numpy_chebyshev():
    # numpy.polynomial.chebyshev.chebval2d and chebder as the reference
    rng = np.random.default_rng(7)
    n = 12
    c = rng.normal(size=(2, n, n)) / (1 + np.arange(n))[:, None] ** 2
    bounds = np.array([[-1.0, 3.0, 0.5, 0.9]])
    ps = PatchSet(bounds, c[None])
    x0, x1 = rng.uniform(-1, 3, 50), rng.uniform(0.5, 0.9, 50)
    z0, z1 = (x0 + 1) / 2 - 1, (x1 - 0.5) / 0.2 - 1
    val, grad = ps.evaluate(x0, x1)
    for f in range(2):
        assert np.allclose(val[:, f], C.chebval2d(z0, z1, c[f]), rtol=0, atol=1e-13)
        assert np.allclose(grad[:, f, 0], C.chebval2d(z0, z1, C.chebder(c[f], axis=0)) / 2.0, atol=1e-12)
        assert np.allclose(grad[:, f, 1], C.chebval2d(z0, z1, C.chebder(c[f], axis=1)) / 0.2, atol=1e-11)
    # fit() inverts evaluation at the first-kind nodes
    z = nodes(n)
    Z0, Z1 = np.meshgrid(z, z, indexing="ij")
    assert np.allclose(fit(np.array([C.chebval2d(Z0, Z1, c[0])]))[0], c[0], atol=1e-14)


@pytest.fixture(scope="module")
def one_charge():
    return model_from_block(ONE_CHARGE)


@pytest.fixture(scope="module")
def one_charge_rows(one_charge):
    rng = np.random.default_rng(11)
    T = rng.uniform(0.5, 2.0, 300)
    x = rng.uniform(0.2, 0.999 * X_MAX, 300)  # the unstable branch is in the scan (phi0 > -6) from x = 0.162
    targets = list(zip(T, x * T))
    return targets, one_charge.solve_many(targets, SolverSettings())


def test_one_charge_both_branches_against_the_closed_form(one_charge_rows):
    # bar: 1e-8 relative in s, rho (the accuracy a row marked ok promises) on the stable branch, every stable row
    # ok. Both branches: a row that says ok is within accept_error (1e-8) of the closed form, and
    # every row's error estimate bounds its actual error. Deep on the unstable branch the boundary
    # read-out at Delta = 2 drifts with where the shot stops; the read-out check must catch it there
    # (those rows come back not converged, see the README).
    targets, results = one_charge_rows
    worst, flagged = 0.0, 0
    for (T, mu), rows in zip(targets, results):
        assert len(rows) == 2 and all(r.method == "atlas" for r in rows)
        stable = [r for r in rows if r.stability == "stable"]
        unstable = [r for r in rows if r.stability == "unstable"]
        assert len(stable) == 1 and len(unstable) == 1
        assert stable[0].status is Status.OK
        for r, branch in ((stable[0], 0), (unstable[0], 1)):
            s0, rho0, _ = closed(T, mu, branch)
            err = max(abs(r.s / float(s0) - 1), abs(r.rho / float(rho0) - 1))
            if branch == 0:
                worst = max(worst, err)
            assert err <= r.error_estimate
            if r.status is Status.OK:
                assert err < 1e-8 and r.residual < 1e-8
            else:
                flagged += 1
                assert r.status is Status.NOT_CONVERGED and "estimated error" in r.message
            assert r.P == pytest.approx((T * r.s + mu * r.rho) / 4, rel=1e-14)  # noqa: SIM300 - P is the pressure, not a constant
    assert worst < 1e-10, worst  # measured 7e-13
    assert flagged > 0  # the deep unstable rows (phi0 < -3.5) are flagged, not passed off as ok


def test_one_charge_chi2_against_the_closed_form(one_charge_rows):
    # chi2 from the atlas's exact derivatives against mpmath's derivative of the closed form
    targets, results = one_charge_rows
    for (T, mu), rows in list(zip(targets, results))[:20]:
        r = next(r for r in rows if r.stability == "stable")
        assert r.chi2 == pytest.approx(float(closed(T, mu, 0)[2]), rel=1e-7)


def test_no_brane_beyond_the_bound(one_charge):
    (r,) = one_charge.solve_many([(1.0, 1.01 * X_MAX)], SolverSettings())[0]
    assert r.status is Status.NO_SOLUTION and "mu/T" in r.message


@pytest.fixture(scope="module")
def demo():
    return model_from_block(DEMO)


# a point with three branches at nonzero mu (each compared) and the neutral point; a single-branch
# point at nonzero mu adds nothing the three branches do not already check
@pytest.mark.parametrize("T,mu", [(0.17, 1.0), (0.25, 0.0)])
def test_demo_matches_the_point_by_point_solver(demo, T, mu):
    atlas = solve_point(demo, T, mu)
    direct = solve_point(demo, T, mu, SolverSettings(method="shooting"))
    assert len(atlas) == len(direct)  # (0.17, 1.0) has three branches
    for a, d in zip(atlas, direct):
        assert a.method == "atlas" and d.method == "shooting"
        assert a.stability == d.stability and a.phase_flag == d.phase_flag
        tol = max(1e-8, 10 * (a.error_estimate + d.error_estimate))
        # the conductivity that stays finite at nonzero density: the horizon value
        # f(phi_h) (s kappa^2/(2 pi))^(1/3)/(2 kappa^2) in AdS5 times (sT/(epsilon+P))^2 (DeWolfe,
        # Gubser & Rosen 2011, Phys. Rev. D 84, 126014; Hartnoll 2009), f = sech(1.1 phi) evaluated here
        for r in (a, d):
            horizon = (r.s / (2 * math.pi)) ** (1 / 3) / (2 * math.cosh(1.1 * r.extra["horizon_phi0"]))
            assert r.sigma == pytest.approx(horizon * (T * r.s / (T * r.s + mu * r.rho)) ** 2, rel=1e-12)
        for k in ("s", "rho", "P", "chi2", "sigma"):
            va, vd = getattr(a, k), getattr(d, k)
            if vd == 0.0:
                assert va == 0.0
                continue
            assert va == pytest.approx(vd, rel=tol if k != "chi2" else 1e-6), k


def test_a_corrupted_atlas_is_caught_by_the_verification_shot(demo):
    # the per-point error estimate is evidence, not decoration (common practice, no source): perturb
    # the atlas (log s_hat) by 1e-6 on the leaf holding the root; the direct shot must expose it
    V, f = demo.couplings()
    solver = BatchSolver(demo, shooter_for(demo, V, f), SolverSettings().with_method("atlas"))
    (good,) = solver.solve(np.array([0.25]), np.array([0.3]))[0]
    assert good.status is Status.OK and good.error_estimate < 1e-8
    c0, c1 = math.log(good.extra["horizon_phi0"]), good.extra["horizon_u"]
    leaf = int(solver.map.atlas.locate(np.array([c0]), np.array([c1]))[0])
    solver.map.atlas.leaf_coeffs[leaf][2, 0, 0] += 1e-6
    solver.map.atlas._ps = None
    (bad,) = solver.solve(np.array([0.25]), np.array([0.3]))[0]
    assert bad.status is Status.NOT_CONVERGED and "estimated error" in bad.message
    assert bad.extra["atlas_mismatch"] == pytest.approx(1e-6, rel=0.1)


def test_values_do_not_depend_on_the_batch(demo):
    # the subdivision is canonical (reproducibility; common practice, no source): a point solved alone
    # in a fresh atlas and within a batch in another gets the same numbers (to rounding of the
    # batched arithmetic)
    V, f = demo.couplings()
    settings = SolverSettings().with_method("atlas")
    alone = BatchSolver(demo, shooter_for(demo, V, f), settings).solve(np.array([0.21]), np.array([0.55]))[0]
    T = np.r_[np.linspace(0.17, 0.27, 7), 0.21]
    mu = np.r_[np.linspace(0.0, 1.0, 7), 0.55]
    batch = BatchSolver(demo, shooter_for(demo, V, f), settings).solve(T, mu)[-1]
    assert len(alone) == len(batch)
    for a, b in zip(alone, batch):
        for k in ("s", "rho", "P", "chi2", "cs2"):
            assert getattr(a, k) == pytest.approx(getattr(b, k), rel=1e-13, abs=0), k


def test_a_brane_beyond_the_atlas_goes_to_the_point_solver(demo):
    # our own routing rule (no source): mu/T = 40 at T = 0.1, the brane sits at u ~ 0.90, outside the
    # atlas (u <= 0.9), so the point solver takes it
    rows = solve_point(demo, 0.1, 4.0)
    assert rows and all(r.method == "shooting" for r in rows)
    assert rows[0].status is Status.OK and rows[0].extra["horizon_u"] > 0.9
