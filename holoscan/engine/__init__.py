"""Generic numerical engine: horizon-to-boundary shooting of ODE systems.

Knows nothing about gravity: a problem supplies the right-hand side, the starting state from a
near-horizon series, the end point and a residual function; the engine integrates and counts.
"""
from .shooting import Counters, ShootSettings, Shot, ShootingProblem, shoot

__all__ = ["Counters", "ShootSettings", "Shot", "ShootingProblem", "shoot"]
