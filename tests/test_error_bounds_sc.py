"""Error bounds of the charged-scalar condensed branch (holoscan.kinds.charged_scalar.model,
holoscan.kinds.charged_scalar.solver) against an independent route written here: a Chebyshev collocation solve of
the backreacted hairy brane in z = r_h/r, in a different gauge (chi = 0 at the boundary), with the
pressure read from the z^3 coefficient of the metric (the stress tensor) rather than from the
Euler relation, and chi2 from central differences of whole solves. Nothing here imports a holoscan
solver; holoscan's own horizon value of the scalar is used only as the starting guess of Newton's
iteration (the converged collocation solution does not depend on it).

Equations: the backreacted holographic superconductor of Hartnoll, Herzog & Horowitz 2008, JHEP 12,
015 (restated from memory for 2 kappa^2 = 1, e = 1, and written for general kappa^2, e^2 as in
holoscan/bulk/hairy_brane.py), with ds^2 = -g e^{-chi} dt^2 + dr^2/g + r^2 dx^2, A = phi dt, psi
real, in AdS_4 (d = 3). With z = 1/r (r_h = 1), g = h/z^2, they become (derived here)

    chi_z = 2 kappa^2 z (psi_z^2 + q^2 phi^2 psi^2 e^chi / h^2)
    z^4 W_z = kappa^2 B,  h = 1 + z^3 W,
        B = z^2 h psi_z^2 + q^2 z^2 phi^2 psi^2 e^chi / h + m^2 psi^2 + z^4 phi_z^2 e^chi / (2 e^2)
    phi_zz = -chi_z phi_z / 2 + 2 q^2 e^2 psi^2 phi / (z^2 h)
    psi_zz = (-h_z/h + chi_z/2 + 2/z) psi_z - (q^2 phi^2 e^chi / h^2 - m^2 / (z^2 h)) psi

and are solved for psi = z^Delta F, phi = (1 - z) Phi, h = (1 - z)(1 + z + z^2 + z^3 L), which
makes the scalar unsourced, A_t vanish and the metric close at the horizon by construction.
Thermodynamics (boundary time t since chi(0) = 0): T = h'(r_h) e^{-chi_h/2}/(4 pi) =
(3 + L(1)) e^{-chi(1)/2}/(4 pi), mu = Phi(0), rho = (Phi(0) - Phi'(0))/e^2, s = 2 pi/kappa^2,
P = M/(2 kappa^2) with h = 1 - M z^3 + ... (common practice, no source: the area law, Gauss's law
and the holographic stress tensor of an asymptotically AdS_4 brane). cs2 = 1/(d-1) = 1/2 for a
conformal fluid (common practice, no source).
"""
import math

import numpy as np
import pytest
import yaml
from test_charged_scalar import cheb  # Chebyshev differentiation matrix (Trefethen 2000)

from holoscan import SolverSettings, Status, model_from_block

ROOT = __import__("pathlib").Path(__file__).resolve().parents[1]


def demo_block():
    cfg = yaml.safe_load((ROOT / "config" / "config.yaml").read_text())
    (blk,) = [m for m in cfg["models"] if m["id"] == "sc-demo"]
    return {k: v for k, v in blk.items() if k not in ("grid", "points_per_job")}


class Collocation:
    """The hairy brane of the module docstring on N + 1 Chebyshev nodes in z in [0, 1]."""

    def __init__(self, N, m_sq, delta, q, kappa_sq, e_sq):
        Dm, xs = cheb(N)
        self.z = (1.0 - xs) / 2.0          # z[0] = 0 (boundary), z[N] = 1 (horizon)
        self.D1 = -2.0 * Dm
        self.D2 = self.D1 @ self.D1
        self.n = N + 1
        self.m2, self.Dl, self.q2, self.k2, self.e2 = m_sq, delta, q * q, kappa_sq, e_sq

    def split(self, u):
        n = self.n
        return u[:n], u[n:2 * n], u[2 * n:3 * n], u[3 * n:]

    def fields(self, u):
        F, Ph, chi, L = self.split(u)
        z, D1 = self.z, self.D1
        F1, Ph1, chi1, L1 = D1 @ F, D1 @ Ph, D1 @ chi, D1 @ L
        H = 1 + z + z**2 + z**3 * L
        W = -1 + (1 - z) * L
        h = (1 - z) * H
        hz = 3 * z**2 * W + z**3 * (-L + (1 - z) * L1)
        phz = -Ph + (1 - z) * Ph1
        return F, Ph, chi, L, F1, Ph1, chi1, L1, H, W, h, hz, phz

    def observables(self, u):
        _F, Ph, chi, L, _F1, Ph1, *_ = self.fields(u)
        T = (3.0 + L[-1]) * np.exp(-chi[-1] / 2) / (4 * math.pi)
        mu, rho = Ph[0], (Ph[0] - Ph1[0]) / self.e2
        s, P = 2 * math.pi / self.k2, (1.0 - L[0]) / (2 * self.k2)
        return {"x": mu / T, "s_hat": s / T**2, "rho_hat": rho / T**2, "p_hat": P / T**3}

    def residual(self, u, cond):
        """cond: ("psi_h", value) fixes F(1); ("x", value) fixes mu/T."""
        F, Ph, chi, L, F1, Ph1, chi1, L1, H, W, h, hz, phz = self.fields(u)
        z, D2 = self.z, self.D2
        m2, Dl, q2, k2, e2 = self.m2, self.Dl, self.q2, self.k2, self.e2
        F2, Ph2 = D2 @ F, D2 @ Ph
        ec = np.exp(chi)
        dpsi = z * F1 + Dl * F                     # psi_z = z^(Delta-1) dpsi, z^(2 Delta - 2) = z^3
        r_chi = chi1 - 2 * k2 * z * (z**3 * dpsi**2 + q2 * z**5 * Ph**2 * F**2 * ec / H**2)
        r_chi[0] = chi[0]
        r_W = (-L + (1 - z) * L1) - k2 * (z * h * dpsi**2 + q2 * z**3 * (1 - z) * Ph**2 * F**2 * ec / H
                                           + m2 * z * F**2 + phz**2 * ec / (2 * e2))
        r_Ph = -2 * Ph1 + (1 - z) * Ph2 + chi1 * phz / 2 - 2 * q2 * e2 * z**3 * F**2 * Ph / H
        T = (3.0 + L[-1]) * np.exp(-chi[-1] / 2) / (4 * math.pi)
        g = hz - h * chi1 / 2
        r_F = (z * h * F2 + (2 * Dl - 2) * h * F1 + z * g * F1 + Dl * g * F + m2 * z**2 * W * F
               + z * q2 * (1 - z) * Ph**2 / H * ec * F)
        if cond[0] == "psi_h":
            r_Ph[0] = F[-1] - cond[1]
        else:
            r_Ph[0] = Ph[0] - cond[1] * T
        return np.concatenate([r_F, r_Ph, r_chi, r_W])

    def newton(self, u, cond, tol=1e-13, max_iter=40):
        n = u.size
        for _ in range(max_iter):
            r = self.residual(u, cond)
            J = np.empty((n, n))
            for k in range(n):  # complex-step Jacobian (exact to rounding)
                du = np.zeros(n, complex)
                du[k] = 1e-30j
                J[:, k] = self.residual(u + du, cond).imag / 1e-30
            step = np.linalg.solve(J, -r)
            lam = min(1.0, 0.5 / max(np.max(np.abs(step)), 1e-300))
            u = u + lam * step
            if lam == 1.0 and np.max(np.abs(step)) <= tol * max(1.0, np.max(np.abs(u))):
                return u
        raise RuntimeError("collocation Newton did not converge")

    def solve_x(self, x, psi_h, start):
        """Solution at mu/T = x: continuation in the horizon value of the scalar from ``start``
        (psi_h, E) of a point near the onset (Phi = E, chi = 0, Schwarzschild h as first guess) up to
        ``psi_h``, in steps of at most 0.05, then Newton on mu/T = x."""
        n = self.n
        p0, E = start
        u = np.concatenate([np.full(n, p0), np.full(n, E), np.zeros(n), np.zeros(n)])
        for p in np.linspace(p0, psi_h, math.ceil(abs(psi_h - p0) / 0.05) + 1):
            u = self.newton(u, ("psi_h", p))
        return self.newton(u, ("x", x))


def reference(col, x, psi_h, start, delta=3e-3):
    """Collocation observables at mu/T = x (T = 1 units); chi2 = d rho_hat/dx from central
    differences with steps delta x, 2 delta x, 4 delta x, Richardson-extrapolated from the first
    two; ``chi2_spread`` (|R(h) - R(2h)|, plus the change of the plain difference) is the
    reference's own uncertainty of chi2 (1e-10 to 1e-9 here: the Newton iterations stop at 1e-13
    and the step is divided into it)."""
    u0 = col.solve_x(x, psi_h, start)
    out = col.observables(u0)
    rho = {f: col.observables(col.newton(u0, ("x", x * (1 + f * delta))))["rho_hat"] for f in (1, -1, 2, -2, 4, -4)}
    h = delta * x
    d = {k: (rho[k] - rho[-k]) / (2 * k * h) for k in (1, 2, 4)}
    r1, r2 = (4 * d[1] - d[2]) / 3, (4 * d[2] - d[4]) / 3
    out["chi2_hat"], out["chi2_spread"] = r1, abs(r1 - r2)
    return out


# demo grid points (T, mu) on the condensed branch, mu/T = 1.06 x_c and 1.46 x_c (x_c = 10.99).
# Deeper points (mu/T = 33, 45: horizon scalar 0.8, 0.92) are not covered: this reference's
# continuation in the horizon scalar does not converge there from the near-onset guess.
POINTS = [(0.09, 1.05), (0.075, 1.2)]


@pytest.fixture(scope="module")
def demo():
    return model_from_block(demo_block())


@pytest.fixture(scope="module")
def rows(demo):
    out = []
    for T, mu in POINTS:
        res = demo.solve(T, mu, SolverSettings())
        (r,) = [x for x in res if x.extra["phase"] == "condensed"]
        out.append((T, mu, r))
    return out


def test_collocation_reference_is_converged_and_consistent(demo, rows):
    # The reference converges spectrally (N = 40 against N = 56) and its stress-tensor pressure obeys
    # the Euler relation P = (T s + mu rho)/3 of a conformal fluid (common practice, no source): a
    # check of the reference that uses neither holoscan nor the pressure route under test.
    T, mu, r = rows[1]
    x = mu / T
    a = Collocation(40, demo.m_sq, demo.delta, demo.q, demo.kappa_sq, demo.e_sq)
    b = Collocation(56, demo.m_sq, demo.delta, demo.q, demo.kappa_sq, demo.e_sq)
    start = (rows[0][2].extra["horizon_psi0"], rows[0][2].extra["horizon_E"])
    ua = a.solve_x(x, r.extra["horizon_psi0"], start)
    ub = b.solve_x(x, r.extra["horizon_psi0"], start)
    oa, ob = a.observables(ua), b.observables(ub)
    for k in ("s_hat", "rho_hat", "p_hat"):
        assert abs(oa[k] / ob[k] - 1) < 1e-11, k
    assert 3 * ob["p_hat"] == pytest.approx(ob["s_hat"] + ob["x"] * ob["rho_hat"], rel=1e-11)
    assert abs(ob["x"] / x - 1) < 1e-13


def test_condensed_error_estimate_bounds_the_actual_error(demo, rows):
    # Every demo point of the condensed branch is ok, within accept_error of the collocation route in
    # s, rho, epsilon, P, chi2, cs2, and its error_estimate is at least its actual error.
    acc = SolverSettings().accept_error
    col = Collocation(48, demo.m_sq, demo.delta, demo.q, demo.kappa_sq, demo.e_sq)
    bad, under = [], []
    start = (rows[0][2].extra["horizon_psi0"], rows[0][2].extra["horizon_E"])
    report = []
    for T, mu, r in rows:
        assert r.status is Status.OK, r.message
        ref = reference(col, mu / T, r.extra["horizon_psi0"], start)
        exact = {"s": ref["s_hat"] * T**2, "rho": ref["rho_hat"] * T**2, "P": ref["p_hat"] * T**3,
                 "epsilon": 2 * ref["p_hat"] * T**3, "chi2": ref["chi2_hat"] * T, "cs2": 0.5}
        errs = {}
        for k, v in exact.items():
            scale = max(abs(v), 1e-3 * exact["s"]) if k == "rho" else abs(v)
            errs[k] = abs(getattr(r, k) - v) / scale
        # the reference's own chi2 uncertainty is granted to the comparison (at most 1e-9)
        spread = ref["chi2_spread"] / abs(ref["chi2_hat"])
        assert spread < 1e-9
        errs["chi2"] = max(errs["chi2"] - spread, 0.0)
        bad += [(T, mu, k, e) for k, e in errs.items() if e > acc]
        report.append((T, mu, max(errs.values()), r.error_estimate))
        if max(errs.values()) > r.error_estimate:
            under.append((T, mu, errs, r.error_estimate))
    print("actual vs estimate:", [(T, mu, f"{a:.2e}", f"{e:.2e}", f"{a / e:.3f}") for T, mu, a, e in report])
    assert not bad
    assert not under
