"""holoscan: thermodynamics and phase structure of charged black branes in AdS.

The physics core (models, bulk equations, numerical engine, thermodynamics) uses no files and no
workflow engine. Public entry points are re-exported here.
"""
__version__ = "0.1.0"

from .errors import InputError
from .kinds import KINDS, RNModel, model_from_block, models_from_list
from .point import solve_point
from .result import OBSERVABLES, PointResult, Status
from .settings import SolverSettings

__all__ = ["KINDS", "OBSERVABLES", "InputError", "PointResult", "RNModel", "SolverSettings", "Status", "__version__",
           "model_from_block", "models_from_list", "solve_point"]
