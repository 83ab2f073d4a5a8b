"""Kind ``rn``: the planar Reissner-Nordstrom-AdS_{d+1} brane (closed form, and shooting as a check)."""
from .model import RNModel

__all__ = ["RNModel"]
