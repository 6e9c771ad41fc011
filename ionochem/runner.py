"""Run a scenario in its own solve mode: the library's ``ionochem run``.

:func:`run` takes a scenario (or its path), builds the model (with optional rate changes)
and returns the dataset of the mode the scenario's ``[solve]`` gives:

- ``"steady"``: the steady state at every altitude (:meth:`Model.solve`);
- ``"transient"``: the column through ``times_s`` from zero ions or from the steady state at
  t = 0 (``start``), the sun moving (:meth:`Model.integrate`);
- ``"diurnal"``: ``days`` whole days from local apparent midnight, the last one returned on a
  ``local_hour`` axis with the day-to-day change (:mod:`ionochem.analysis.diurnal`).

:func:`run_model` does the same for a model already built (the command line builds it first,
to check its options against the model before any solve). Both are research computations,
not forecasts.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ionochem.analysis.diurnal import diurnal_dataset, diurnal_start_utc
from ionochem.io.scenario import load_scenario
from ionochem.model import Model

__all__ = ["run", "run_model"]


def run(scenario, *, reaction_list=None, set=None, scale=None, base_dir=None):
    """Solve ``scenario`` in its own mode → ``xarray.Dataset`` (what ``ionochem run`` writes).

    Parameters
    ----------
    scenario : Scenario or path
        A loaded scenario (:func:`ionochem.load_scenario`) or the path of its TOML file.
    reaction_list : ReactionList, optional
        Replaces the scenario's ``reactions``.
    set : dict[str, str], optional
        Reaction, family or tie id → new rate expression (added to the scenario's changes).
    scale : dict[str, float], optional
        Id → factor on k.
    base_dir : path, optional
        Folder relative ``table(...)`` paths of ``set`` resolve against.
    """
    if isinstance(scenario, (str, Path)):
        scenario = load_scenario(scenario)
    model = Model(scenario, reaction_list)
    if set or scale:
        model = model.with_changes(set, scale, base_dir=base_dir)
    return run_model(model)


def run_model(model):
    """The dataset of ``model``'s scenario in its solve mode (see the module docstring)."""
    solve = model.scenario.solve
    if solve.mode == "transient":
        initial = model.solve() if solve.start == "steady" else None
        return model.integrate(np.asarray(solve.times_s, float), initial=initial)
    if solve.mode == "diurnal":
        scen = model.scenario
        start = diurnal_start_utc(scen, solve.days)
        if start != scen.time.utc:
            model = model.at_time(start)
        return diurnal_dataset(model, solve.days, solve.step_minutes * 60.0,
                               compare_days=solve.compare_days)
    return model.solve()
