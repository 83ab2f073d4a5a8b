"""Generic numerics, with no knowledge of branes or model kinds.

- :mod:`.shooting`: integrate any ODE problem from a near-horizon start to an end point, counting;
- :mod:`.batch`: DOP853 stepping a batch of columns at once (each with its own step size), with
  the method's coefficients in :mod:`.dop853_coefficients`;
- :mod:`.cheb`: Chebyshev and Chebyshev-Lobatto nodes, one-dimensional fits and their tails, DCT
  fits and vectorised tensor-Chebyshev evaluation with gradients;
- :mod:`.resolution`, :mod:`.lazy`: the atlas machinery (resolution test, noise plateau, the
  canonical subdivision built on demand);
- :mod:`.memo`: bounded per-process caches of solver state, keyed by content (:func:`.memo.clear_all`).
"""
from .shooting import Counters, ShootingProblem, ShootSettings, Shot, shoot

__all__ = ["Counters", "ShootSettings", "ShootingProblem", "Shot", "shoot"]
