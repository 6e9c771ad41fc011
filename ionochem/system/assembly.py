"""Join a reaction list to a column environment: the checks and the fixed densities.

What a model must refuse before it solves anything — a list with nothing to solve, a species
produced but never lost, a reactant nobody supplies, a balance ion the list lacks — and the
fixed densities (neutrals, given electrons, third bodies) of every altitude row in the
mechanism's order. Errors name the reaction's file and line (or the scenario's key).
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from ionochem.errors import MechanismError, ScenarioError, SolverError
from ionochem.io.checks import balance_ion_problem
from ionochem.mechanism.mechanism import ELECTRON, THIRD_BODY, Mechanism


class RowLabels(Sequence):
    """Labels "<altitude> km" of the altitude rows of a state (several stacked columns
    repeat the altitudes), formatted only when an error message needs them."""

    def __init__(self, altitude_km, n_rows=None):
        self.altitude_km = np.asarray(altitude_km)
        self.n_rows = self.altitude_km.size if n_rows is None else int(n_rows)

    def __len__(self):
        return self.n_rows

    def __getitem__(self, i):
        if isinstance(i, slice):
            return [self[j] for j in range(*i.indices(len(self)))]
        return f"{self.altitude_km[i % self.altitude_km.size]:g} km"


def compile_mechanism(reaction_list, scenario, environment):
    """The reaction list compiled on the environment's fixed species, checked.

    Raises
    ------
    MechanismError, ScenarioError
        At the reaction's line (or the scenario's key) for a list that cannot be solved.
    """
    env = environment
    where = getattr(reaction_list, "path", None) or scenario.reactions
    if scenario.solve.electrons == "table":
        listed = {sp.name for r in reaction_list.reactions
                  for sp, _ in (*r.reactants, *r.products)}
        problem = balance_ion_problem(scenario.solve.balance_ion, listed)
        if problem:
            raise ScenarioError(problem, file=scenario.source, key="solve.balance_ion")
    mech = Mechanism(reaction_list, fixed=env.neutrals, electrons=scenario.solve.electrons,
                     balance_ion=scenario.solve.balance_ion)
    if not mech.solved:
        raise MechanismError("the reaction list has no species to solve: every species "
                             "in it is fixed by the neutral source "
                             f"({', '.join(sorted(env.neutrals)) or 'none'})", file=where)
    problems = mech.structural_problems()
    if problems:
        name, r = problems[0]
        raise MechanismError(
            f"{name} is produced (by {r.id}) but never lost; declare it fixed by giving "
            "its density in the neutral source, or add its loss", file=r.file, line=r.line)
    for name, r in mech.never_made():
        # A reactant nobody supplies is an error, not a zero density (docs/scenario.md,
        # "Species the list needs"): its reactions would be off without a word.
        raise MechanismError(
            f"{r.id} needs {name}, which the neutral source does not supply and no "
            f"reaction produces (its density would be zero); give {name} in the neutral "
            f"table or remove {r.id}", file=r.file, line=r.line)
    return mech


def given_densities(mechanism, environment):
    """Fixed densities of every altitude row, (altitude, given species), cm-3, in
    ``mechanism.given`` order: electrons (a given Ne table), the third body (the total
    neutral density) and the neutrals."""
    env = environment
    given = np.zeros((env.altitude_km.size, len(mechanism.given)))
    total_neutral = sum(env.neutrals.values())
    for g, name in enumerate(mechanism.given):
        if name == ELECTRON:
            given[:, g] = env.electron_density
        elif name == THIRD_BODY:
            given[:, g] = total_neutral
        else:
            given[:, g] = env.neutrals[name]
    return given


def list_warnings(reaction_list, environment):
    """The list's parser warnings that still apply: "produced but never lost" is dropped
    for species the neutral source fixes (the parser cannot know them)."""
    return [w for w in getattr(reaction_list, "warnings", [])
            if not any(str(getattr(w, "message", w)).startswith(f"{n} is produced")
                       for n in environment.neutrals)]


def solver_failure(exc, rtol, scenario_file):
    """A steady solver's ``SolverError`` at the scenario's file and key ``solve``, with
    what to try."""
    hints = ([f"relax solve.rtol (now {rtol:g}; 1e-10 is the default)"]
             if rtol < 1e-12 else [])
    hints += ["check the rates of the reactions that make and destroy "
              f"{', '.join(dict.fromkeys(exc.species)) or 'those species'} at these "
              "heights (`ionochem reactions SCENARIO --altitude KM`)",
              "or run the column with [solve] mode = \"transient\" to see whether it "
              "settles"]
    return SolverError(f"{exc.message}; try: {'; '.join(hints)}", file=scenario_file,
                       key="solve", levels=exc.levels, species=exc.species)


def initial_state(initial, species, n_rows):
    """Solved densities (altitude, species) to start a time integration from: zero ions
    (``None``), a steady result dataset's densities, or an array."""
    if initial is None:
        return np.zeros((n_rows, len(species)))
    if hasattr(initial, "data_vars"):
        return np.stack([initial["density"].sel(species=s).values for s in species], -1)
    return np.asarray(initial, float).reshape(n_rows, len(species))


def integration_failure(exc, scenario_file):
    """A time integration's ``SolverError`` at the scenario's ``solve.times_s`` with what
    to try (one that already names a file is returned as it is)."""
    if exc.file is not None:
        return exc
    return SolverError(f"{exc.message}; try fewer or closer output times, or check the rate "
                       "laws for values far outside their physical bounds",
                       file=scenario_file, key="solve.times_s", levels=exc.levels)
