"""The charged brane with a dynamical scalar: boundary data read off the scalar's falloff.

Same field equations and gauge as :mod:`holoscan.bulk.charged_brane`. Near the boundary
(``A -> infinity``) the scalar of mass ``m^2 = Delta (Delta - d)`` falls off as::

    phi = a e^{-(d-Delta) A} + b e^{-Delta A} + ...        (Delta != d/2)
    phi = (a A + b) e^{-(d/2) A} + ...                      (Delta  = d/2)

``a`` is the source of the dual operator (in the frame of the bulk solution). Everything is read in
units of the temperature, which removes the unknown frame shift ``A0 = lim (A - r/sqrt(h_inf))``::

    sqrt(h_inf) from h = h_inf + c e^{-dA},   Phi_inf = Phi + Phi'/((d-2) A')
    mu/T     = 4 pi Phi_inf,           s/T^(d-1)   = (2 pi / kappa^2) (4 pi sqrt(h_inf))^(d-1)
    rho/T^(d-1) = G/(2 kappa^2) (4 pi sqrt(h_inf))^(d-1),   G = f(phi) e^{(d-2)A} Phi'  (Gauss law)
    j = J / T^(d-Delta) = a (4 pi sqrt(h_inf))^(d-Delta)       (dimensionless source)

(the horizon gauge ``A(0) = 0``, ``h'(0) = 1`` gives ``T = 1/(4 pi e^{A0} sqrt(h_inf))``). The
integration stops where ``A = A_end``. The first non-linear correction to the falloff,
``c2 a^2 e^{-2(d-Delta)A}`` with ``c2 = V3 / (2 (d-Delta)(2d - 3 Delta))`` (``V3`` the third
derivative of V at 0; from the scalar equation near the boundary), is removed, and
``A_end = 18/(d - Delta)`` leaves the next one below ``1e-15`` relative.
"""
from __future__ import annotations

import numpy as np

from .charged_brane import ChargedBrane


def _third_derivative_at_0(V) -> float:
    """The third derivative of V at 0 from a coupling's Taylor coefficients (0 without them)."""
    taylor = getattr(V, "taylor0", None)
    if taylor is None:
        return 0.0
    return float(taylor(3)[2])


class ScalarBrane(ChargedBrane):
    """Charged brane with a scalar of dimension ``delta`` (``d/2 <= delta < d``)."""

    def __init__(self, d, V, f, delta: float, A_end: float | None = None):
        super().__init__(d, V, f)
        self.delta = float(delta)
        k = d - self.delta
        if abs(self.delta - d / 2) < 1e-12:
            self.c2 = 0.0
            default_end = 15.0  # corrections e^{-dA} A^2: below 1e-22 at A = 15
        else:
            # phi = a e^{-kA} + c2 a^2 e^{-2kA} + ...: the quadratic term comes from the cubic term
            # of V; it is removed below, so the remaining relative error is O(a^2 e^{-2kA})
            V3 = _third_derivative_at_0(V)
            self.c2 = V3 / (2.0 * k * (2 * d - 3 * self.delta)) if V3 else 0.0
            default_end = max(10.0, 18.0 / k)
        self.A_end = float(A_end) if A_end is not None else default_end

    def boundary_dimensionless_many(self, Y, kappa_sq: float) -> dict:
        """:meth:`boundary_dimensionless` for end states (8, B) at once (arrays; NaN where invalid)."""
        d, D = self.d, self.delta
        A, dA, h, dh, Ph, dPh, ph, dph = np.asarray(Y, dtype=float)
        with np.errstate(all="ignore"):
            f = np.asarray(self.f.derivs(ph)[0], dtype=float)
            h_inf = h + dh / (d * dA)
            valid = (h_inf > 0) & (dA > 0) & np.isfinite(h_inf)
            sq = 4.0 * np.pi * np.sqrt(np.where(valid, h_inf, np.nan))
            G = f * np.exp((d - 2) * A) * dPh
            if abs(D - d / 2) < 1e-12:
                a = (dph + 0.5 * d * dA * ph) * np.exp(0.5 * d * A) / dA
            else:
                k = d - D
                a = (D * ph + dph / dA) * np.exp(k * A) / (2 * D - d)
                if self.c2:
                    a = a - self.c2 * a * a * (D - 2 * k) / (2 * D - d) * np.exp(-k * A)
            return {
                "x": 4.0 * np.pi * (Ph + dPh / ((d - 2) * dA)) + 0 * sq,
                "j": a * sq ** (d - D),
                "s_hat": 2.0 * np.pi / kappa_sq * sq ** (d - 1),
                "rho_hat": G / (2.0 * kappa_sq) * sq ** (d - 1),
                "h_inf": h_inf,
                "frame_mismatch": np.abs(dA * np.sqrt(np.where(valid, h_inf, np.nan)) - 1.0),
            }

    def boundary_dimensionless(self, y_end, kappa_sq: float) -> dict:
        """``x = mu/T``, ``j``, ``s_hat = s/T^(d-1)``, ``rho_hat = rho/T^(d-1)`` (see module docstring),
        as floats, for one end state (NaN where invalid)."""
        o = self.boundary_dimensionless_many(np.asarray(y_end, dtype=float).reshape(-1, 1), kappa_sq)
        return {k: float(np.asarray(v).reshape(-1)[0]) for k, v in o.items()}
