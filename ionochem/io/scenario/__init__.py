"""Scenario files: load, validate and hold one run's settings.

A scenario (``*.toml``, specified key by key in ``docs/scenario.md``) says on which grid, with
which reaction list, neutral atmosphere, temperatures, sun and overrides a column is run. It
is parsed with the standard library's :mod:`tomllib`, every key is checked strictly (unknown
keys, wrong types, values outside their documented ranges, missing files are errors naming
the dotted key), every default is filled in and a frozen :class:`Scenario` is returned.

One idea per file:

* :mod:`~ionochem.io.scenario.sections` — the frozen dataclasses (``Scenario`` and its
  sections) and ``parse_budget``;
* :mod:`~ionochem.io.scenario.values` — typed checks of single values;
* :mod:`~ionochem.io.scenario.ranges` — hard and soft plausible ranges of physical values;
* :mod:`~ionochem.io.scenario.schema` — the walk over the sections;
* :mod:`~ionochem.io.scenario.load` — reading the file and the entry points;
* path rules are shared with every other input: :mod:`ionochem.io.paths`.

Nothing here computes physics: the parametric temperature shape, the neutral model and the
photon sources are only validated and stored. Referenced CSV profile tables are checked for
existence (as regular files within the size limit) when the scenario is loaded and read with
their own checks when the model is built. Nothing in a scenario is ever executed as code.
"""

from ionochem.io.scenario.load import load_scenario, scenario_from_dict
from ionochem.io.scenario.ranges import RANGES, Range
from ionochem.io.scenario.sections import (
    GRID_TOLERANCE,
    MSIS_MODELS,
    NEUTRAL_MODELS,
    Changes,
    Geomagnetic,
    Grid,
    Location,
    Neutrals,
    Output,
    Photons,
    Production,
    Scenario,
    Solve,
    Sun,
    TemperatureProfile,
    Temperatures,
    Time,
    Transport,
    parse_budget,
)

__all__ = [
    "Changes", "Geomagnetic", "Grid", "Location", "Neutrals", "Output", "Photons",
    "Production", "Scenario", "Solve", "Sun", "TemperatureProfile", "Temperatures", "Time",
    "Transport", "GRID_TOLERANCE", "NEUTRAL_MODELS", "MSIS_MODELS", "RANGES", "Range",
    "load_scenario", "parse_budget", "scenario_from_dict",
]
