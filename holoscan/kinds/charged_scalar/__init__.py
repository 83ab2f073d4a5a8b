"""Kind ``charged-scalar``: a charged scalar on a charged brane (holographic superconductor).

- :mod:`.model`: the model class; :mod:`.brane`: field equations, horizon series, batched shooting;
- :mod:`.solver`: zero-mode onset, the condensed family, targeted Newton, family derivatives;
- :mod:`.lines`: the second-order line T_c(mu).
"""
from .model import ChargedScalarModel

__all__ = ["ChargedScalarModel"]
