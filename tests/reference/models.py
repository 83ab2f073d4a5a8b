"""Hand-written couplings (numpy, complex-capable) of the models the reference is run on."""
from __future__ import annotations

import numpy as np

from .emd_zgauge import Model


def demo():
    """The invented demo model: V = -12 cosh(0.6 phi) + 0.77 phi^2 - 0.15 phi^4 + 0.0015 phi^6,
    f = sech(1.1 phi), kappa^2 = 1, sourced (Delta = 2 + sqrt(1.22))."""
    V = lambda p: -12 * np.cosh(0.6 * p) + 0.77 * p ** 2 - 0.15 * p ** 4 + 0.0015 * p ** 6
    dV = lambda p: -7.2 * np.sinh(0.6 * p) + 1.54 * p - 0.6 * p ** 3 + 0.009 * p ** 5
    d2V = lambda p: -4.32 * np.cosh(0.6 * p) + 1.54 - 1.8 * p ** 2 + 0.045 * p ** 4
    f = lambda p: 1 / np.cosh(1.1 * p)
    df = lambda p: -1.1 * np.tanh(1.1 * p) / np.cosh(1.1 * p)
    d2f = lambda p: 1.21 * (2 * np.tanh(1.1 * p) ** 2 - 1) / np.cosh(1.1 * p)
    return Model(V, dV, d2V, f, df, d2f, 1.0, True)


DEMO_V = "-12*cosh(0.6*phi) + 0.77*phi**2 - 0.15*phi**4 + 0.0015*phi**6"
DEMO_F = "sech(1.1*phi)"

# Second invented model: Delta = 2.8 (m^2 = -3.36 = -12*0.55^2 + 2*0.135), Gaussian gauge coupling.
SECOND_V = "-12*cosh(0.55*phi) + 0.135*phi**2"
SECOND_F = "exp(-0.3*phi**2)"


def second():
    V = lambda p: -12 * np.cosh(0.55 * p) + 0.135 * p ** 2
    dV = lambda p: -6.6 * np.sinh(0.55 * p) + 0.27 * p
    d2V = lambda p: -3.63 * np.cosh(0.55 * p) + 0.27
    f = lambda p: np.exp(-0.3 * p ** 2)
    df = lambda p: -0.6 * p * np.exp(-0.3 * p ** 2)
    d2f = lambda p: (0.36 * p ** 2 - 0.6) * np.exp(-0.3 * p ** 2)
    return Model(V, dV, d2V, f, df, d2f, 1.0, True)
