"""congest: congestion on road networks -- equilibrium, pricing, learning and sweeps.

Planning-level estimates only; see the README for the cautions that go with them.
"""

from .equilibrium import METHODS, Equilibrium, solve
from .exceptions import (
    CongestError,
    ConvergenceWarning,
    InputError,
    NetworkError,
    SolverError,
)
from .network import Network

__version__ = "0.1.0"

__all__ = [
    "Network",
    "solve",
    "Equilibrium",
    "METHODS",
    "CongestError",
    "NetworkError",
    "InputError",
    "SolverError",
    "ConvergenceWarning",
]
