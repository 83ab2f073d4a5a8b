r"""Field equations, horizon series and boundary read-out of a planar black brane with a charged
scalar (holographic superconductor) in AdS_{d+1}, batched over many shots.

Action (L = 1, mostly-plus signature)::

    S = \int d^{d+1}x sqrt(-g) [ (R + d(d-1)) / (2 kappa^2) - F^2 / (4 e^2) - |D psi|^2 - m^2 |psi|^2 ],
    D = nabla - i q A.

``kappa_sq = 0`` is the probe limit: the metric is the neutral planar Schwarzschild-AdS brane and
``e^2 = 1`` (the normalisation of Hartnoll, Herzog & Horowitz 2008, Phys. Rev. Lett. 101, 031601).

Ansatz and gauge (the scalar's phase is gauged away, psi real)::

    ds^2 = -g(r) e^{-chi(r)} dt^2 + dr^2 / g(r) + r^2 dx_{d-1}^2,   A = phi(r) dt,   psi = psi(r)

Horizon at ``r = 1`` (the scaling ``r -> lambda r`` sets ``r_h = 1``), ``g(1) = 0``, ``phi(1) = 0``,
``chi(1) = 0`` (the time rescaling is undone at the boundary, where ``chi -> chi_inf``). Horizon data:
``psi0 = psi(1)`` and ``E = phi'(1)``. Equations (primes d/dr; derived from the action above)::

    psi'' = -(g'/g - chi'/2 + (d-1)/r) psi' - (q^2 phi^2 e^chi / g^2 - m^2 / g) psi
    phi'' = -(chi'/2 + (d-1)/r) phi' + 2 q^2 e^2 psi^2 phi / g
    chi'  = -(4 kappa^2 r / (d-1)) (psi'^2 + q^2 phi^2 psi^2 e^chi / g^2)
    g'    = -(d-2) g / r + d r - (2 kappa^2 r / (d-1)) B,
    B     = g psi'^2 + q^2 phi^2 psi^2 e^chi / g + m^2 psi^2 + phi'^2 e^chi / (2 e^2)

Near the boundary ``psi = psi_- r^{-Delta_-} + psi_+ r^{-Delta_+} + ...`` with
``Delta_pm = d/2 pm nu``, ``nu = sqrt(d^2/4 + m^2)``. The operator dimension ``Delta`` says which
coefficient is the vev (``r^{-Delta}``) and which the source (the other one); the scalar is unsourced.

Integration in two zones (each a batched DOP853 run, :func:`holoscan.numerics.batch.dop853_batch`):

1. ``r`` from ``1 + offset`` to ``R_MID`` in the plain variables above (first-order horizon series,
   second order in ``phi``; a state error O(offset) at a regular singular point only excites the
   singular solution at O(offset^2)).
2. ``t = log r`` from ``log R_MID`` to ``t_end`` in variables that converge to the boundary data
   (no extrapolation or fitting): the scalar's running coefficients (variation of parameters about
   the exact AdS solutions ``r^{-Delta_pm}``)::

       c_- = (Delta_+ psi + r psi') r^{Delta_-} / (2 nu),   c_+ = -(Delta_- psi + r psi') r^{Delta_+} / (2 nu)

   which tend to ``psi_-`` and ``psi_+``; ``a = phi + r phi'/(d-2) -> mu``; the electric flux
   ``Phi = e^{chi/2} r^{d-1} phi' -> e^2 rho``; ``Ghat = r^k (g/r^2 - 1)`` (``k = min(d, 2 Delta)``,
   a bounded rescaling of the metric deviation, so it keeps relative accuracy); ``chi -> chi_inf``;
   and the probe's on-shell integral ``I = q^2 \int r^{d-1} psi^2 phi^2 / g dr``.

The scalar is stored divided by ``psi0`` (``psi0`` rides along as a constant state component), so
its tolerance is relative to the horizon value; ``psi0 = 0`` is then exactly the linearised scalar on
the normal (Reissner-Nordstrom) brane, used for the onset of condensation.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ...numerics.batch import dop853_batch

#: end of the inner zone (plain variables in r)
R_MID = 2.0
#: where the residual (conserved radial charge) is checked a second time, inside zone 2
R_CHECK = 40.0

# zone-1 state rows
_R, _PS, _DPS, _PH, _DPH, _G, _CHI, _I, _P0 = range(9)
# zone-2 state rows
_T, _CM, _CP, _A, _FL, _GH = 0, 1, 2, 3, 4, 5


@dataclass
class Shots:
    """Boundary data of a batch of shots (arrays of shape (B,)); dimensionless, in units of T.

    ``src`` and ``vev`` are the scalar's source and vev coefficients divided by ``psi0`` (r_h = 1
    units); ``x = mu/T``; ``rho_hat = rho/T^(d-1)``; ``s_hat = s/T^(d-1)`` (backreacted only);
    ``p_hat = P/T^d`` (probe: on-shell action of the matter sector; backreacted: Euler relation);
    ``O_hat = <O>/T^Delta`` with ``<O> = sqrt(2) * vev``; ``residual`` is the relative drift of the
    conserved radial charge (backreacted; 0 in the probe limit, where there is none).
    """

    ok: np.ndarray
    src: np.ndarray
    vev: np.ndarray
    x: np.ndarray
    rho_hat: np.ndarray
    s_hat: np.ndarray
    p_hat: np.ndarray
    O_hat: np.ndarray
    T_raw: np.ndarray
    residual: np.ndarray
    nfev: int
    nsteps: int


class HairyBrane:
    """The ODE system above for one set of couplings; ``kappa_sq = 0`` is the probe limit.

    Parameters
    ----------
    d : int
        Boundary spacetime dimension (3 or 4).
    m_sq, delta, q : float
        Scalar mass squared, operator dimension (``Delta_+`` or ``Delta_-``), charge.
    kappa_sq, e_sq : float
        Gravitational and gauge couplings (``kappa_sq = 0`` and ``e_sq = 1``: probe).
    """

    def __init__(self, d: int, m_sq: float, delta: float, q: float, kappa_sq: float = 0.0, e_sq: float = 1.0):
        self.d, self.m_sq, self.q, self.kappa_sq, self.e_sq = int(d), float(m_sq), float(q), float(kappa_sq), float(e_sq)
        self.nu = math.sqrt(d * d / 4.0 + m_sq)
        self.dm, self.dp = d / 2.0 - self.nu, d / 2.0 + self.nu
        self.standard = delta > d / 2.0
        self.delta = self.dp if self.standard else self.dm
        self.k = float(min(d, 2.0 * self.delta))
        self.probe = self.kappa_sq == 0.0
        # slowest decay rate (in t = log r) of the tails that the outer zone must integrate out
        if self.standard:
            rate = 2.0
        else:
            rate = 2.0 - 2.0 * self.nu
            if not self.probe:
                rate = min(rate, self.d - 4.0 * self.nu)
        self.t_end = float(min(max(18.0, 36.0 / rate), 150.0))

    # -- equations -------------------------------------------------------------------------------
    def rhs_inner(self, y):
        d, q2, m2, e2, k2 = self.d, self.q**2, self.m_sq, self.e_sq, self.kappa_sq
        r, ps, dps, ph, dph, g, chi, _, p0 = y
        P2 = p0 * p0
        ec = np.exp(chi)
        pg = ph / g
        dps2 = P2 * dps * dps
        psi2 = P2 * ps * ps
        B = g * dps2 + q2 * ph * pg * psi2 * ec + m2 * psi2 + dph * dph * ec / (2.0 * e2)
        dchi = -(4.0 * k2 * r / (d - 1)) * (dps2 + q2 * pg * pg * psi2 * ec)
        dg = -(d - 2) * g / r + d * r - (2.0 * k2 * r / (d - 1)) * B
        ddps = -(dg / g - 0.5 * dchi + (d - 1) / r) * dps - (q2 * pg * pg * ec - m2 / g) * ps
        ddph = -(0.5 * dchi + (d - 1) / r) * dph + 2.0 * q2 * e2 * psi2 * pg
        dI = r ** (d - 1) * q2 * ps * ps * ph * pg
        one, zero = np.ones_like(r), np.zeros_like(r)
        return np.array([one, dps, ddps, dph, ddph, dg, dchi, dI, zero])

    def rhs_outer(self, y):
        d, q2, m2, e2, k2 = self.d, self.q**2, self.m_sq, self.e_sq, self.kappa_sq
        dm, dp, k, nu = self.dm, self.dp, self.k, self.nu
        t, cm, cp, a, fl, gh, chi, _, p0 = y
        P2 = p0 * p0
        em, ep = np.exp(-dm * t), np.exp(-dp * t)
        ps = cm * em + cp * ep                     # psi / psi0
        rdps = -(dm * cm * em + dp * cp * ep)      # r psi' / psi0
        ir2 = np.exp(-2.0 * t)                     # 1/r^2
        G = gh * np.exp(-k * t)
        w = 1.0 + G                                # g / r^2
        ec = np.exp(chi)
        rdph = fl * np.exp(-0.5 * chi + (2 - d) * t)   # r phi'
        ph = a - rdph / (d - 2)
        psi2 = P2 * ps * ps
        rdps2 = P2 * rdps * rdps
        B = w * rdps2 + q2 * ph * ph * psi2 * ec * ir2 / w + m2 * psi2 + rdph * rdph * ec * ir2 / (2.0 * e2)
        rdchi = -(4.0 * k2 / (d - 1)) * (rdps2 + q2 * ph * ph * psi2 * ec * ir2 / (w * w))
        rdG = -d * G - (2.0 * k2 / (d - 1)) * B
        dgh = (k - d) * gh - (2.0 * k2 / (d - 1)) * np.exp(k * t) * B
        r2S = -(rdG / w - 0.5 * rdchi) * rdps - (q2 * ph * ph * ec * ir2 / (w * w) + m2 * G / w) * ps
        dcm = r2S * np.exp(dm * t) / (2.0 * nu)
        dcp = -r2S * np.exp(dp * t) / (2.0 * nu)
        dfl = 2.0 * q2 * e2 * np.exp(0.5 * chi) * np.exp((d - 2) * t) * psi2 * ph / w
        da = (2.0 * q2 * e2 * psi2 * ph / w - 0.5 * rdchi * rdph) / (d - 2)
        dI = q2 * np.exp((d - 2) * t) * ps * ps * ph * ph / w
        one, zero = np.ones_like(t), np.zeros_like(t)
        return np.array([one, dcm, dcp, da, dfl, dgh, rdchi, dI, zero])

    # -- horizon ------------------------------------------------------------------------------------
    def horizon_slope(self, psi0, E):
        """g'(1) (= 4 pi T before the boundary time rescaling); must be > 0."""
        return self.d - (2.0 * self.kappa_sq / (self.d - 1)) * (self.m_sq * psi0**2 + E**2 / (2.0 * self.e_sq))

    def start_state(self, psi0, E, eps: float):
        """Zone-1 state at r = 1 + eps from the regular horizon series (arrays of shape (B,))."""
        d, q2, m2, e2, k2 = self.d, self.q**2, self.m_sq, self.e_sq, self.kappa_sq
        psi0, E = np.asarray(psi0, float), np.asarray(E, float)
        g1 = self.horizon_slope(psi0, E)
        ps1 = m2 / g1
        chi1 = -(4.0 * k2 / (d - 1)) * (psi0**2 * ps1**2 + q2 * E**2 * psi0**2 / g1**2)
        ph2 = -(0.5 * chi1 + (d - 1)) * E + 2.0 * q2 * e2 * psi0**2 * E / g1
        one = np.ones_like(psi0)
        return np.array([
            one * (1.0 + eps), 1.0 + ps1 * eps, ps1, E * eps + 0.5 * ph2 * eps**2, E + ph2 * eps,
            g1 * eps, chi1 * eps, q2 * E**2 * eps**2 / (2.0 * g1), psi0 * one,
        ]), g1

    def to_outer(self, y):
        """Zone-1 state -> zone-2 state (exact change of variables at any r > 0)."""
        d, dm, dp, nu, k = self.d, self.dm, self.dp, self.nu, self.k
        r, ps, dps, ph, dph, g, chi, I, p0 = y
        t = np.log(r)
        return np.array([
            t, (dp * ps + r * dps) * r**dm / (2 * nu), -(dm * ps + r * dps) * r**dp / (2 * nu),
            ph + r * dph / (d - 2), np.exp(0.5 * chi) * r ** (d - 1) * dph,
            r**k * (g / r**2 - 1.0), chi, I, p0,
        ])

    def radial_charge(self, y):
        """The radially conserved charge Q(r) = e^{-chi/2} r^{d+1} (g e^{-chi}/r^2)' e^{chi} / (2 kappa^2)
        - e^{chi/2} r^{d-1} phi phi' / e^2 (times 2 kappa^2), from a zone-2 state; equals g'(1) at the
        horizon. Used as the field-equation residual of a backreacted shot."""
        d, k, e2, k2 = self.d, self.k, self.e_sq, self.kappa_sq
        dy = self.rhs_outer(y)
        t, chi, gh = y[_T], y[6], y[_GH]
        G = gh * np.exp(-k * t)
        # r^{d+1} G' = r^{d-k} (dGhat/dt - k Ghat)
        rG = np.exp((d - k) * t) * (dy[_GH] - k * gh)
        rdph = y[_FL] * np.exp(-0.5 * chi + (2 - d) * t)
        ph = y[_A] - rdph / (d - 2)
        grav = np.exp(-0.5 * chi) * (rG - np.exp(d * t) * dy[6] * (1.0 + G))
        return grav - 2.0 * k2 * y[_FL] * ph / e2

    # -- shooting -----------------------------------------------------------------------------------
    def shoot(self, psi0, E, rtol: float, offset: float) -> Shots:
        """Shoot every column ``(psi0[i], E[i])`` to the boundary; never raises."""
        psi0 = np.atleast_1d(np.asarray(psi0, float))
        E = np.atleast_1d(np.asarray(E, float))
        nb = psi0.size
        d = self.d
        with np.errstate(all="ignore"):
            y0, g1 = self.start_state(psi0, E, offset)
        good = np.isfinite(g1) & (g1 > 0)
        y0[:, ~good] = 1.0  # harmless placeholder, flagged below
        # absolute tolerances: the scalar (stored / psi0) and chi are O(1) numbers near zero at times
        at1 = np.zeros((9, 1))
        at1[[_PS, _DPS], 0] = rtol
        at1[_CHI, 0] = 1e-2 * rtol
        b1 = dop853_batch(self.rhs_inner, np.full(nb, 1.0 + offset), y0, np.full(nb, R_MID), rtol, at1 + 1e-300)
        ok = good & b1.ok
        with np.errstate(all="ignore"):
            z = self.to_outer(b1.y)
        z[:, ~ok] = np.nan_to_num(z[:, ~ok], nan=1.0)
        at2 = np.zeros((9, 1))
        at2[[_CM, _CP], 0] = rtol
        at2[6, 0] = 1e-2 * rtol
        at2[_GH, 0] = rtol
        bc = dop853_batch(self.rhs_outer, z[_T], z, np.full(nb, math.log(R_CHECK)), rtol, at2 + 1e-300)
        b2 = dop853_batch(self.rhs_outer, bc.y[_T], bc.y, np.full(nb, self.t_end), rtol, at2 + 1e-300)
        ok &= bc.ok & b2.ok
        yb = b2.y
        with np.errstate(all="ignore"):
            if self.probe:
                residual = np.zeros(nb)
            else:
                Qh = g1
                residual = np.maximum(np.abs(self.radial_charge(z) / Qh - 1.0),
                                      np.abs(self.radial_charge(bc.y) / Qh - 1.0))
            chi_inf = yb[6]
            T_raw = g1 * np.exp(0.5 * chi_inf) / (4.0 * math.pi)
            mu = yb[_A] * np.exp(0.5 * chi_inf)
            rho = yb[_FL] / self.e_sq
            x = mu / T_raw
            rho_hat = rho / T_raw ** (d - 1)
            if self.standard:
                src, vev = yb[_CM], yb[_CP]
            else:
                src, vev = yb[_CP], yb[_CM]
            O_hat = math.sqrt(2.0) * psi0 * vev / T_raw**self.delta
            if self.probe:
                P = 0.5 * mu * rho - psi0**2 * yb[7]
                p_hat = P / T_raw**d
                s_hat = d * p_hat - x * rho_hat
            else:
                s_hat = (2.0 * math.pi / self.kappa_sq) / T_raw ** (d - 1)
                p_hat = (s_hat + x * rho_hat) / d
        vals = (src, vev, x, rho_hat, s_hat, p_hat, O_hat, T_raw, residual)
        for v in vals:
            ok &= np.isfinite(v)
        return Shots(ok, *vals, nfev=int(b1.nfev.sum() + bc.nfev.sum() + b2.nfev.sum()),
                     nsteps=int(b1.nsteps.sum() + bc.nsteps.sum() + b2.nsteps.sum()))
