"""ionochem: photochemistry of one ionospheric altitude column from a plain-text reaction list."""

from ionochem.errors import (
    Error,
    InputError,
    MechanismError,
    ReactionListError,
    ScenarioError,
    SolverError,
    TableRangeError,
)

__version__ = "0.1.0"

__all__ = [
    "Error", "InputError", "MechanismError", "ReactionListError", "ScenarioError",
    "SolverError", "TableRangeError", "__version__",
]

from ionochem.io.observations import load_observations  # noqa: E402
from ionochem.model import (  # noqa: E402
    Model,
    load_mechanism,
    load_reaction_list,
    load_scenario,
)

__all__ += ["Model", "load_mechanism", "load_observations", "load_reaction_list",
            "load_scenario"]
