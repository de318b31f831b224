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
from .io import from_networkx, read_gmns, read_network, read_tables, to_networkx, write_gmns
from .network import Network
from .pricing import first_best, marginal_cost_tolls, price_of_anarchy, second_best
from .scenarios import compare

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
    "read_network",
    "read_gmns",
    "read_tables",
    "write_gmns",
    "from_networkx",
    "to_networkx",
    "price_of_anarchy",
    "marginal_cost_tolls",
    "first_best",
    "second_best",
    "compare",
]
