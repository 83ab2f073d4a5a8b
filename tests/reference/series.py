"""Series tools of the reference solver: Taylor coefficients of the couplings, the regular horizon
series and the near-boundary series on the lattice of exponents ``i*alpha + j*Delta + 2k``.

Everything here is plain numpy; see :mod:`emd_zgauge` for the field equations.

Taylor coefficients of ``V`` and ``f`` about any real point come from the Cauchy integral on a
circle of radius ``r`` in the complex field plane, evaluated by the trapezoidal rule (exponentially
accurate for analytic functions; common practice, no source). The couplings must therefore accept
complex numpy arrays (write them with ``np.cosh``, ``np.exp``, ...).
"""
from __future__ import annotations

import numpy as np


def taylor(fun, x0: float, order: int, radius: float = 0.4, n: int = 128) -> np.ndarray:
    """Coefficients c_0..c_order of fun(x0 + w) = sum c_k w^k (Cauchy integral, trapezoidal rule)."""
    k = np.arange(n)
    w = radius * np.exp(2j * np.pi * k / n)
    vals = np.asarray(fun(x0 + w), dtype=complex) * np.ones(n)
    c = np.fft.fft(vals) / n
    return (c[: order + 1] / radius ** np.arange(order + 1)).real


# ---------------------------------------------------------------------------------------------
# Horizon series in x = z_h - z (z_h = 1): F = sum F_k x^k (F_0 = 0), chi = sum chi_k x^k (chi_0 = 0),
# phi = sum phi_k x^k (phi_0 = phi_h). Each order is affine in the next unknown: solved one at a time.
# ---------------------------------------------------------------------------------------------

def _mul(a, b, K):
    return np.convolve(a, b)[:K]


def _compose(coef, dphi, K):
    """sum_n coef[n] dphi^n, dphi a truncated series with dphi[0] = 0."""
    out = np.zeros(K)
    p = np.zeros(K)
    p[0] = 1.0
    for c in coef[:K]:
        out += c * p
        p = _mul(p, dphi, K)
    return out


def _deriv_x(a):
    """d/dx of a series in x (length kept)."""
    out = np.zeros_like(a)
    out[:-1] = a[1:] * np.arange(1, len(a))
    return out


def horizon_series(model, phi_h: float, Q: float, order: int = 14):
    """Taylor coefficients (in x = 1 - z) of F, chi, phi at a regular horizon z_h = 1.

    Field equations in z (see emd_zgauge), with ' = d/dz = -d/dx:
        chi' = z phi'^2 / 3
        z F' = 4 F + V/3 + z^2 F phi'^2 / 6 + Q^2 z^6 / (6 f)
        z^2 F phi'' + z^2 (F' - 3F/z - chi' F / 2) phi' - V'(phi) + f'(phi) Q^2 z^6 / (2 f^2) = 0
    """
    K = order + 2
    Vc = taylor(model.V, phi_h, K)
    dVc = taylor(model.dV, phi_h, K)
    ic = taylor(lambda p: 1.0 / model.f(p), phi_h, K)
    gc = taylor(lambda p: model.df(p) / model.f(p) ** 2, phi_h, K)
    zser = np.zeros(K)
    zser[0] = 1.0
    zser[1] = -1.0
    z2 = _mul(zser, zser, K)
    z6 = _mul(_mul(z2, z2, K), z2, K)
    F = np.zeros(K)
    chi = np.zeros(K)
    phi = np.zeros(K)
    phi[0] = phi_h

    def residuals(F, chi, phi):
        dphi = phi.copy()
        dphi[0] = 0.0
        Vs, dVs = _compose(Vc, dphi, K), _compose(dVc, dphi, K)
        ifs, gs = _compose(ic, dphi, K), _compose(gc, dphi, K)
        Fp, chip, php = -_deriv_x(F), -_deriv_x(chi), -_deriv_x(phi)
        phpp = _deriv_x(_deriv_x(phi))
        r1 = chip - _mul(zser, _mul(php, php, K), K) / 3.0
        r2 = (_mul(zser, Fp, K) - 4 * F - Vs / 3.0 - _mul(z2, _mul(F, _mul(php, php, K), K), K) / 6.0
              - Q ** 2 * _mul(z6, ifs, K) / 6.0)
        inner = Fp - 3 * _mul(F, np.ones(K), K) - 0.5 * _mul(chip, F, K)   # 1/z = sum x^k
        r3 = (_mul(z2, _mul(F, phpp, K), K) + _mul(z2, _mul(inner, php, K), K) - dVs
              + 0.5 * Q ** 2 * _mul(z6, gs, K))
        return r1, r2, r3

    def solve_one(arr, idx, which, k):
        arr[idx] = 0.0
        r0 = residuals(F, chi, phi)[which][k]
        arr[idx] = 1.0
        r1 = residuals(F, chi, phi)[which][k]
        arr[idx] = -r0 / (r1 - r0)

    for k in range(order):
        solve_one(F, k + 1, 1, k)      # order k of the F equation fixes F_{k+1}
        solve_one(phi, k + 1, 2, k)    # order k of the scalar equation fixes phi_{k+1}
        solve_one(chi, k + 1, 0, k)    # order k of the chi equation fixes chi_{k+1}
    return F[: order + 1], chi[: order + 1], phi[: order + 1]


# ---------------------------------------------------------------------------------------------
# Near-boundary series on the exponent lattice e = i*alpha + j*Delta + 2k (alpha = 4 - Delta).
# theta = z d/dz. Unknowns: phi (starts at alpha), G = F - 1 and X = chi - chi(0) (start at 2 alpha).
#   theta X = (theta phi)^2 / 3
#   (theta - 4) G = V(phi)/3 + 4 + (1 + G)(theta phi)^2/6 + Q^2 z^6 / (6 f)
#   (theta^2 - 4 theta - m^2) phi = -[G theta^2 phi - 4 G theta phi + (theta G)(theta phi)
#        - (theta X)(1 + G)(theta phi)/2 - (V'(phi) - m^2 phi) + f'(phi) Q^2 z^6 / (2 f^2)]
# Free data: J (z^alpha), v (z^Delta), G4 (z^4); the equations fix every other coefficient.
# ---------------------------------------------------------------------------------------------

class BoundaryLattice:
    def __init__(self, model, emax: float = 13.0):
        self.alpha = model.alpha
        self.Delta = model.Delta
        a, D = self.alpha, self.Delta
        ex = set()
        for i in range(int(emax / a) + 2):
            for j in range(int(emax / D) + 2):
                for k in range(int(emax / 2) + 2):
                    e = i * a + j * D + 2 * k
                    if e <= emax + 1e-12:
                        ex.add(e)
        merged = []
        for e in sorted(ex):                     # exponents closer than 1e-9 are one exponent
            if not merged or e - merged[-1] > 1e-9:
                merged.append(e)
        self.E = np.array(merged)
        N = len(self.E)
        self.N = N

        def index(e):
            n = int(np.searchsorted(self.E, e - 1e-9))
            return n if n < N and abs(self.E[n] - e) < 1e-9 else None

        key = type("K", (), {"__getitem__": lambda _s, e: index(e)})()
        ia, ib, ic = [], [], []
        for p in range(N):
            for q in range(N):
                s = self.E[p] + self.E[q]
                if s > emax + 1e-9:
                    break
                n = index(s)
                if n is None:
                    raise ValueError("exponent lattice not closed under addition")
                ia.append(p)
                ib.append(q)
                ic.append(n)
        self.ia, self.ib, self.ic = np.array(ia), np.array(ib), np.array(ic)
        self.ialpha = key[a]
        self.iDelta = key[D]
        self.i4 = key[4.0]
        self.i6 = key[6.0]
        self.i0 = key[0.0]
        e = self.E
        self.Pphi = (e - a) * (e - D)
        self.PG = e - 4.0
        for n, pe in enumerate(self.Pphi):
            if n not in (self.ialpha, self.iDelta) and abs(pe) < 1e-6:
                raise ValueError(f"resonant exponent {e[n]} in the scalar falloff (logarithms needed)")
        nmax = int(emax / a) + 1
        self.nmax = nmax
        self.Vc = taylor(model.V, 0.0, nmax + 1)
        self.dVc = taylor(model.dV, 0.0, nmax + 1)
        self.ic_ = taylor(lambda p: 1.0 / model.f(p), 0.0, nmax + 1)
        self.gc = taylor(lambda p: model.df(p) / model.f(p) ** 2, 0.0, nmax + 1)
        self.m2 = model.m2

    def mul(self, x, y):
        return np.bincount(self.ic, weights=x[self.ia] * y[self.ib], minlength=self.N)

    def powers(self, x):
        out = [np.zeros(self.N), x]
        out[0][self.i0] = 1.0
        for _ in range(self.nmax - 1):
            out.append(self.mul(out[-1], x))
        return out

    def solve(self, J, v, G4, Q):
        """Coefficients (phi, G, X) for the free data; X has no constant term."""
        N, E = self.N, self.E
        phi = np.zeros(N)
        phi[self.ialpha] = J
        phi[self.iDelta] += v
        G = np.zeros(N)
        G[self.i4] = G4
        X = np.zeros(N)
        z6 = np.zeros(N)
        z6[self.i6] = 1.0
        fixed_phi = np.ones(N, bool)
        fixed_phi[[self.ialpha, self.iDelta]] = False
        fixed_G = np.ones(N, bool)
        fixed_G[self.i4] = False
        self.gap4 = 0.0
        for _ in range(int(E[-1] / self.alpha) + 3):
            pw = self.powers(phi)
            Vs = sum(self.Vc[n] * pw[n] for n in range(2, self.nmax + 1)) / 3.0
            dVs = sum(self.dVc[n] * pw[n] for n in range(2, self.nmax + 1))
            ifs = sum(self.ic_[n] * pw[n] for n in range(self.nmax + 1))
            gs = sum(self.gc[n] * pw[n] for n in range(self.nmax + 1))
            tp = E * phi
            tp2 = self.mul(tp, tp)
            onepG = G.copy()
            onepG[self.i0] += 1.0
            rhsG = Vs + self.mul(onepG, tp2) / 6.0 + Q ** 2 * self.mul(z6, ifs) / 6.0
            tX = tp2 / 3.0
            N3 = -(self.mul(G, E * tp) - 4 * self.mul(G, tp) + self.mul(E * G, tp)
                   - 0.5 * self.mul(self.mul(tX, onepG), tp) - dVs + 0.5 * Q ** 2 * self.mul(z6, gs))
            newphi = phi.copy()
            newphi[fixed_phi] = N3[fixed_phi] / self.Pphi[fixed_phi]
            newG = G.copy()
            newG[fixed_G] = rhsG[fixed_G] / self.PG[fixed_G]
            with np.errstate(divide="ignore", invalid="ignore"):
                newX = np.where(E > 0, tX / np.where(E > 0, E, 1.0), 0.0)
            done = np.array_equal(newphi, phi) and np.array_equal(newG, G) and np.array_equal(newX, X)
            phi, G, X = newphi, newG, newX
            self.gap4 = rhsG[self.i4]
            if done:
                break
        self._last = (phi, G, X)
        return phi, G, X

    def evaluate(self, coef, z, theta=False):
        zE = np.exp(np.log(z) * self.E)
        return np.sum(coef * (self.E if theta else 1.0) * zE)

    def int_z_times(self, coef, z):
        """integral_0^z s * sum c_e s^e ds."""
        return np.sum(coef * z ** (self.E + 2.0) / (self.E + 2.0))
