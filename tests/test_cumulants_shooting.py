"""Higher cumulants (chi3 = d^2 rho/dmu^2, chi4 = d^3 rho/dmu^3 at fixed T) and transport on the
shooting paths: kind ``rn`` with method ``shooting`` (holoscan.bulk.conformal) and kind
``charged-scalar`` (holoscan.kinds.charged_scalar), each value against its own error bound.

References:
- the planar Reissner-Nordstrom-AdS_{d+1} brane (Chamblin, Emparan, Johnson & Myers 1999, Phys.
  Rev. D 60, 064018; normalisation of Hartnoll 2009, Class. Quant. Grav. 26, 224002), written out
  here: d r_h^2 - 4 pi T r_h - (d-2) mu^2/gamma^2 = 0, gamma^2 = (d-1) e^2/((d-2) kappa^2),
  s = 2 pi r_h^(d-1)/kappa^2, rho = (d-2) mu r_h^(d-2)/e^2,
  P = (r_h^d + mu^2 r_h^(d-2)/gamma^2)/(2 kappa^2), epsilon = (d-1) P; its mu-derivatives by
  mpmath's numerical differentiation at 40 digits (no implicit differentiation, no finite
  differences of shots);
- the conductivity that stays finite at nonzero density: the horizon value r_h^(d-3)/e^2 times
  (s T/(epsilon + P))^2 (Hartnoll 2009, as above); eta/s = 1/(4 pi) (Kovtun, Son & Starinets 2005,
  Phys. Rev. Lett. 94, 111601);
- the probe normal phase of the holographic superconductor: A_t = mu (1 - (r_h/r)^(d-2)) on
  Schwarzschild-AdS_{d+1}, r_h = 4 pi T/d, e = 1 (Hartnoll, Herzog & Horowitz 2008, Phys. Rev. Lett.
  101, 031601), so rho is linear in mu and the conductivity is the horizon value r_h^(d-3): 1 in
  AdS4 (recalled from memory: the flat normal-phase conductivity of that letter);
- the condensed branch has no closed form: chi3 is checked against d chi2/dmu and chi4 against
  d chi3/dmu from separate targeted solves at mu +- delta, mu +- 2 delta (central differences,
  one Richardson step; common practice, no source), within the sum of both routes' bounds.

Measured worst actual/estimate ratios (2026-12-05): rn shooting, 276 rows (d = 3 to 6, T = 0.05, 1,
3, 23 values of mu/T from 0 to 300): chi3 0.37, chi4 0.19; charged-scalar condensed branch, 24
points (four models, T/T_c = 0.97 to 0.3), |difference| over the sum of both routes' bounds:
chi3 0.15, chi4 0.49.
"""
import math

import mpmath as mp
import pytest

from holoscan import RNModel, SolverSettings, Status, model_from_block
from holoscan.numerics import derivatives as fd

SHOOT = SolverSettings(method="shooting")
COUPLINGS = {3: (0.8, 1.7), 4: (1.3, 0.6), 5: (0.5, 2.2)}  # d -> (kappa_sq, e_sq), our choice
#: d -> (T, mu/T): zero, moderate (either sign) and large density
TARGETS = {3: ((0.7, 0.0), (1.3, 2.5), (0.4, 60.0)), 4: ((1.3, 2.5), (1.3, -2.5), (0.4, 60.0)),
           5: ((0.7, 0.0), (0.4, 60.0))}


def rn_closed(d, k2, e2, T, mu):
    """s, rho, epsilon, P and r_h of the RN-AdS_{d+1} brane (module docstring), in mpmath."""
    g2 = mp.mpf(d - 1) * e2 / ((d - 2) * k2)
    rh = (4 * mp.pi * T + mp.sqrt(16 * mp.pi**2 * T**2 + 4 * d * (d - 2) * mu**2 / g2)) / (2 * d)
    P = (rh**d + mu**2 * rh ** (d - 2) / g2) / (2 * k2)
    return {"s": 2 * mp.pi * rh ** (d - 1) / k2, "rho": (d - 2) * mu * rh ** (d - 2) / e2, "P": P,
            "epsilon": (d - 1) * P, "r_h": rh}


def rn_reference(d, k2, e2, T, mu):
    """chi3, chi4 (mpmath derivatives of rho at fixed T) and sigma of the closed form, as floats."""
    with mp.workdps(40):
        k2, e2, T, mu = (mp.mpf(v) for v in (k2, e2, T, mu))
        c = rn_closed(d, k2, e2, T, mu)
        rho = lambda m: rn_closed(d, k2, e2, T, m)["rho"]
        sigma = c["r_h"] ** (d - 3) / e2 * (c["s"] * T / (c["epsilon"] + c["P"])) ** 2
        return {"chi3": float(mp.diff(rho, mu, 2)), "chi4": float(mp.diff(rho, mu, 3)), "sigma": float(sigma)}


@pytest.fixture(scope="module")
def rn_rows():
    out = []
    for d, (k2, e2) in COUPLINGS.items():
        m = RNModel("m", d, kappa_sq=k2, e_sq=e2)
        for T, x in TARGETS[d]:
            (r,) = m.solve(T, x * T, SHOOT)
            out.append((d, T, x, r, rn_reference(d, k2, e2, T, x * T)))
    return out


def test_rn_shooting_cumulants_within_their_bounds(rn_rows):
    worst = 0.0
    for d, T, x, r, ref in rn_rows:
        assert r.status is Status.OK, (d, x, r.message)
        for n in ("chi3", "chi4"):
            got, err = getattr(r, n), getattr(r, f"{n}_err")
            # mpmath's numerical derivative of an odd function at mu = 0 is zero to its 40 digits
            actual = abs(got - ref[n]) if abs(ref[n]) > 1e-30 else abs(got)
            assert actual <= err, (d, T, x, n, got, ref[n], err)
            worst = max(worst, actual / err if err else 0.0)
            # not vacuous: relative to max(|chi_n|, 1e-3 chi2 / max(mu, T)^(n-2)) (the module's floor);
            # at large mu/T in d = 3 chi4 falls as (mu/T)^-4 while the terms it is made of do not
            limit = 1e-6 if n == "chi3" else (1e-3 if x < 10 else 0.1)
            assert r.extra["error_by_observable"][n] < limit, (d, x, n)
        if x == 0.0:  # rho is odd in mu: chi3 vanishes exactly on the symmetric stencil
            assert r.chi3 == 0.0 and r.chi3_err == 0.0
    assert worst <= 1.0


def test_rn_shooting_bounds_stay_out_of_error_estimate(rn_rows):
    # error_estimate is the largest of the six equation-of-state observables, as before chi3, chi4
    keys = ("s", "rho", "epsilon", "P", "chi2", "cs2")
    for *_, r, _ in rn_rows:
        by_obs = r.extra["error_by_observable"]
        assert r.error_estimate == max(by_obs[k] for k in keys)
        assert set(by_obs) == {*keys, "chi3", "chi4"}


def test_rn_shooting_transport_from_the_rows_own_horizon(rn_rows):
    for d, T, x, r, ref in rn_rows:
        assert r.eta_over_s == 1 / (4 * math.pi)
        # first-order propagation of the errors of s and rho through r_h ~ s^(1/(d-1)) and
        # (s T/(T s + mu rho))^2 (common practice, no source)
        bound = (4 + (d - 3) / (d - 1)) * r.error_estimate + 1e-13
        assert abs(r.sigma - ref["sigma"]) <= bound * ref["sigma"], (d, x, r.sigma, ref["sigma"])
        row = r.to_dict()
        assert row["D_charge"] == r.sigma / r.chi2 and row["kurtosis_ratio"] == r.chi4 / r.chi2
        if x == 0.0:  # no charge: sigma is the horizon value, r_h = 4 pi T/d
            assert r.sigma == pytest.approx((4 * math.pi * T / d) ** (d - 3) / COUPLINGS[d][1], rel=bound)


def test_rn_shooting_chi3_odd_chi4_even(rn_rows):
    # charge conjugation mu -> -mu: rho odd, so chi3 odd and chi4 even (common practice, no source)
    rows = {x: r for d, T, x, r, _ in rn_rows if d == 4 and T == 1.3}
    a, b = rows[2.5], rows[-2.5]
    assert b.chi3 == -a.chi3 and b.chi4 == a.chi4 and b.chi3_err == a.chi3_err and b.sigma == a.sigma


def test_rn_shooting_cumulant_failure_leaves_the_row_alone():
    # the widest finite-difference step (fd_step = 0.1) puts the cumulant stencil's outer shots past
    # the extremal brane at mu/T = 30: chi3, chi4 are NaN with the reason, the rest is still there
    m = RNModel("m", 4, kappa_sq=1.3, e_sq=0.6)
    (r,) = m.solve(1.0, 30.0, SolverSettings(method="shooting", fd_step=0.1))
    assert math.isnan(r.chi3) and math.isnan(r.chi4) and math.isnan(r.chi3_err)
    assert "chi3, chi4 not computed" in r.extra["cumulant_failure"]
    assert math.isfinite(r.chi2) and "chi3" not in r.extra["error_by_observable"]
    assert r.error_estimate == max(r.extra["error_by_observable"].values())


# -- charged-scalar: the normal branch --------------------------------------------------------------
def sc_block(**kw):
    base = {"id": "hs", "kind": "charged-scalar", "d": 3, "m_sq": -2.0, "q": 1.0, "delta": 2.0}
    base.update(kw)
    return base


@pytest.mark.parametrize("d, m_sq, delta", [(3, -2.0, 2.0), (4, -3.0, 3.0)])
def test_backreacted_normal_branch_is_rn(d, m_sq, delta):
    k2, e2 = 0.6, 1.4
    m = model_from_block(sc_block(d=d, m_sq=m_sq, delta=delta, probe=False, kappa_sq=k2, e_sq=e2))
    for T, mu in ((0.3, 0.8), (1.1, -2.0)):
        r = m.normal_branch(T, mu, {}, "")
        ref = rn_reference(d, k2, e2, T, mu)
        assert r.chi3 == pytest.approx(ref["chi3"], rel=1e-12) and r.chi4 == pytest.approx(ref["chi4"], rel=1e-12)
        assert r.chi3_err == 0.0 and r.chi4_err == 0.0
        assert r.sigma == pytest.approx(ref["sigma"], rel=1e-13) and r.eta_over_s == 1 / (4 * math.pi)


@pytest.mark.parametrize("d", [3, 4])
def test_probe_normal_branch(d):
    m = model_from_block(sc_block(d=d, m_sq=-2.0 if d == 3 else -3.0, delta=2.0 if d == 3 else 3.0))
    for T, mu in ((0.2, 1.0), (0.7, -0.4)):
        r = m.normal_branch(T, mu, {}, "")
        assert r.chi3 == 0.0 and r.chi4 == 0.0 and r.chi3_err == 0.0 and r.chi4_err == 0.0
        assert r.sigma == pytest.approx((4 * math.pi * T / d) ** (d - 3), rel=1e-15)
        if d == 3:
            assert r.sigma == 1.0
        assert r.eta_over_s == 1 / (4 * math.pi)


# -- charged-scalar: the condensed branch against differences of targeted solves ------------------
DELTA = 2e-3


@pytest.fixture(scope="module")
def condensed():
    m = model_from_block(sc_block())
    T = 0.8 * m.onset(1.0)["T_c"]
    rows = {}
    for k in (0, 1, -1, 2, -2):
        (rows[k],) = [r for r in m.solve(T, 1.0 + k * DELTA) if r.extra["phase"] == "condensed"]
    return rows


def richardson(vals, errs):
    """d/dmu at the centre from values at mu +- delta, +- 2 delta: (4 D(delta) - D(2 delta))/3, and
    its bound: the values' bounds carried through, plus the eliminated term |D(delta) - D(2 delta)|/3
    (an upper bound of the O(delta^4) remainder for smooth data; common practice, no source)."""
    D1 = (vals[1] - vals[-1]) / (2 * DELTA)
    D2 = (vals[2] - vals[-2]) / (4 * DELTA)
    bound = (4 * (errs[1] + errs[-1]) / (2 * DELTA) + (errs[2] + errs[-2]) / (4 * DELTA)) / 3 + abs(D1 - D2) / 3
    return (4 * D1 - D2) / 3, bound


def test_condensed_cumulants_against_second_route(condensed):
    rows = condensed
    assert all(r.status is Status.OK for r in rows.values()), [r.message for r in rows.values()]
    c = rows[0]
    chi2 = {k: r.chi2 for k, r in rows.items()}
    chi2_err = {k: r.extra["error_by_observable"]["chi2"] * abs(r.chi2) for k, r in rows.items()}
    chi3, chi3_err = ({k: r.chi3 for k, r in rows.items()}, {k: r.chi3_err for k, r in rows.items()})
    ref3, bound3 = richardson(chi2, chi2_err)
    ref4, bound4 = richardson(chi3, chi3_err)
    assert abs(c.chi3 - ref3) <= c.chi3_err + bound3, (c.chi3, ref3, c.chi3_err, bound3)
    assert abs(c.chi4 - ref4) <= c.chi4_err + bound4, (c.chi4, ref4, c.chi4_err, bound4)
    # the bounds say something: measured 5e-9 and 1.5e-6 relative here
    assert c.chi3_err < 1e-7 * abs(c.chi3) and c.chi4_err < 1e-4 * abs(c.chi4)


def test_condensed_transport(condensed):
    c = condensed[0]
    # the superfluid's DC conductivity is a delta function at zero frequency (Hartnoll, Herzog &
    # Horowitz 2008, PRL 101, 031601): no finite value is reported
    assert math.isnan(c.sigma) and math.isnan(c.to_dict()["D_charge"])
    assert c.eta_over_s == 1 / (4 * math.pi)


# -- the generic pieces -----------------------------------------------------------------------------
def test_level_set_derivatives_against_mpmath():
    # d^n y/dx^n along the curve C(s, t) = 0, from exact partial derivatives, against mpmath's
    # derivatives of x(s), y(s) on the curve solved by findroot (an independent route)
    with mp.workdps(30):
        C = lambda s, t: t - mp.sin(s) + 0.2 * s * t
        X = lambda s, t: s + 0.3 * t**2 + 0.1 * s * t
        Y = lambda s, t: mp.exp(s) * (1 + t) + t**3
        s0 = mp.mpf("0.4")
        t_of = lambda s: mp.findroot(lambda t: C(s, t), mp.sin(s))
        t0 = t_of(s0)
        partials = lambda F: {n: [float(mp.diff(F, (s0, t0), (n - k, k))) for k in range(n + 1)] for n in (1, 2, 3, 4)}
        cx, cy = fd.along_level_set(partials(C), [partials(X), partials(Y)], 4)
        got, _ = fd.curve_derivatives(cx, cy)
        ref, _ = fd.curve_derivatives([float(mp.diff(lambda s: X(s, t_of(s)), s0, n)) for n in (1, 2, 3, 4)],
                                      [float(mp.diff(lambda s: Y(s, t_of(s)), s0, n)) for n in (1, 2, 3, 4)])
        assert got == pytest.approx(ref, rel=1e-12)
        # and the inverse chain rule itself: y = x^5 along x(u) = u + u^3 at u = 0.3
        u = 0.3
        xd = [1 + 3 * u**2, 6 * u, 6.0, 0.0]
        x = u + u**3
        yd = [float(mp.diff(lambda v: (v + v**3) ** 5, u, n)) for n in (1, 2, 3, 4)]
        Yn, _ = fd.curve_derivatives(xd, yd)
        assert Yn == pytest.approx([5 * x**4, 20 * x**3, 60 * x**2, 120 * x], rel=1e-12)


def test_symmetric_differences_eliminate_their_leading_errors():
    # exp at 0: every derivative is 1; three steps leave an O(h^6) error (common practice, no source)
    h = 5e-2
    vals = {k: math.exp(k * h) for k in (0, 1, -1, 2, -2, 4, -4, 8, -8)}
    for n in (1, 2, 3, 4):
        one = abs(fd.symmetric(vals, (1,) if n < 3 else (1, 2), n, h) - 1.0)
        three = abs(fd.symmetric(vals, (1, 2, 4) if n < 3 else (1, 2, 4, 8), n, h) - 1.0)
        assert three < 1e-3 * one, (n, one, three)
    assert fd.weights((1, 2), 1) == pytest.approx([4 / 3, -1 / 6])  # (4 D(h) - D(2h))/3 in odd differences
