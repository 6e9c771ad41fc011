"""ionochem: photochemistry of one ionospheric altitude column from a plain-text reaction list.

The public names (docs/design.md §4) are imported on first use, so that the command line starts
without loading numpy, xarray and the model for ``ionochem --help`` or a bad option.
"""

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

#: Public name → module that defines it (imported on first access).
_LAZY = {
    "Model": "ionochem.model",
    "load_mechanism": "ionochem.model",
    "load_observations": "ionochem.io.observations",
    "load_reaction_list": "ionochem.model",
    "load_scenario": "ionochem.model",
    "run": "ionochem.runner",
    "run_model": "ionochem.runner",
}

__all__ = [
    "Error", "InputError", "MechanismError", "ReactionListError", "ScenarioError",
    "SolverError", "TableRangeError", "__version__", *_LAZY,
]


def __getattr__(name):
    if name in _LAZY:
        import importlib
        value = getattr(importlib.import_module(_LAZY[name]), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'ionochem' has no attribute {name!r}")


def __dir__():
    return sorted(set(globals()) | set(_LAZY))
