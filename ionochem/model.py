"""A reaction list bound to a column: assembly, rates, solve.

``Model(scenario)`` reads the scenario's reaction list, applies the scenario's changes, builds
the environment (neutrals, temperatures, sun), compiles the mechanism and evaluates the rate
coefficients (:class:`ionochem.system.rates.ColumnRates`). Its :attr:`Model.system` is the
column system (:mod:`ionochem.system`) of its processes — chemistry, and transport when the
scenario has it — through which every solution goes: :meth:`Model.solve` (steady state),
:meth:`Model.integrate` (time), and the Jacobian exact sensitivities factorise. Running a
scenario in its own solve mode is :func:`ionochem.runner.run`.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ionochem.environment.column import build_environment
from ionochem.errors import MechanismError, SolverError
from ionochem.io.dataset import species_table, steady_result, transient_dataset
from ionochem.io.scenario import load_scenario
from ionochem.mechanism.bounds import implausible_rates
from ionochem.mechanism.parser import parse_reaction_list
from ionochem.mechanism.units import analysis_units
from ionochem.solve.steady import METHOD_NAMES
from ionochem.solve.threads import single_thread_blas
from ionochem.system import PROCESSES, ColumnSystem
from ionochem.system.assembly import (
    RowLabels,
    compile_mechanism,
    given_densities,
    initial_state,
    integration_failure,
    list_warnings,
    solver_failure,
)
from ionochem.system.changes import apply_changes
from ionochem.system.rates import ColumnRates, environment_needs
from ionochem.system.timeline import model_timeline
from ionochem.system.transport import species_transport

__all__ = ["Model", "load_mechanism", "load_reaction_list", "load_scenario"]


def load_reaction_list(path):
    """Parse a reaction list (``*.reactions``) into a :class:`ReactionList`; :class:`Model`
    compiles it into a :class:`~ionochem.mechanism.mechanism.Mechanism` on its column."""
    return parse_reaction_list(path)


#: The contract name (docs/design.md, "Public contract") of :func:`load_reaction_list`.
load_mechanism = load_reaction_list


class Model:
    """A reaction list solved in the column a scenario describes.

    Parameters
    ----------
    scenario : Scenario
        From :func:`load_scenario`.
    mechanism : ReactionList, optional
        A parsed reaction list (:func:`load_reaction_list`); default the scenario's own
        ``reactions``. ``reaction_list=`` says the same; the compiled form is :attr:`mechanism`.
    environment : Environment, optional
        Reuse an already-built column (for changed copies of a model).

    Attributes
    ----------
    species : list of str
        Solved species, the column order of ``n`` (shaped (altitude, species)).
    reactions : list of str
        Reaction ids in order.
    reaction_list : ReactionList
        The parsed list the model was built from.
    mechanism : Mechanism
        The compiled mechanism on this column's fixed species.
    given : ndarray (altitude, given species)
        Fixed densities (neutrals, given electrons, third body), cm-3.
    transport : SpeciesTransport or None
        The transported species' operator, None for a photochemical column.
    """

    def __init__(self, scenario, mechanism=None, *, reaction_list=None, environment=None,
                 _changes=None):
        if mechanism is not None and reaction_list is not None:
            raise TypeError("give the reaction list once: mechanism= or reaction_list=")
        rl = reaction_list if mechanism is None else mechanism
        self.scenario = scenario
        self.reaction_list = rl = load_reaction_list(scenario.reactions) if rl is None else rl
        self._rxns = list(rl.reactions)
        if not self._rxns:
            raise MechanismError("the reaction list holds no reactions",
                                 file=getattr(rl, "path", None) or scenario.reactions)
        self.reactions = [r.id for r in self._rxns]
        changes = _changes or (dict(scenario.changes.set), dict(scenario.changes.scale),
                               "scenario", {})
        self.changes = {"set": dict(changes[0]), "scale": dict(changes[1])}
        self._set_dirs = dict(changes[3])  # folder each --set expression's tables resolve in
        self._k_expr = [r.k for r in self._rxns]
        self._scale = np.ones(len(self._rxns))
        apply_changes(self._rxns, rl, self.units, self._k_expr, self._scale,
                      (*changes[:3], self._set_dirs), where=scenario.source)
        self._needs = environment_needs(self._rxns, self._k_expr)
        env = self.environment = environment or build_environment(scenario, self._needs)
        self.mechanism = compile_mechanism(rl, scenario, env)
        self.species = list(self.mechanism.solved)
        self.altitude_km = env.altitude_km
        self.warnings = (list(getattr(scenario, "warnings", ())) + list(env.warnings)
                         + list_warnings(rl, env))
        self.given = given_densities(self.mechanism, env)
        self._rates = self.rates_on(env)
        self.warnings += implausible_rates(self._rxns, self._rates.static)
        self.transport = species_transport(scenario, env, self.species, rl.path)
        self.timeline = model_timeline(self)

    # ---------------------------------------------------------------- description
    @property
    def reaction_objects(self):
        """The parsed reaction entries, in the order of :attr:`reactions` (read only)."""
        return tuple(self._rxns)

    @property
    def units(self):
        """The units of analysis of the reactions as used: a plain reaction, a whole family,
        or a tie of the list (:mod:`ionochem.mechanism.units`), tuple of ``Unit``."""
        return self.structural("units", lambda: analysis_units(
            self._rxns, getattr(self.reaction_list, "ties", ())))

    @property
    def rate_expressions(self):
        """The compiled rate law of each reaction as used (after ``--set`` changes)."""
        return tuple(self._k_expr)

    @property
    def needs(self):
        """What the environment must supply: ``photo:CHANNEL``, ``photoelectron:CHANNEL``,
        ``prescribed:ID`` and species names (frozenset of str)."""
        return self._needs

    def species_table(self, n_solved):
        """``(dens, names, roles)`` of all reported densities from solved ones (..., altitude,
        solved species): electrons, fixed neutrals and derived totals added."""
        return species_table(self, n_solved)

    def structural(self, name, build):
        """``build()``, computed once per model and kept: tables that depend only on the
        reaction list, the grid and the environment (reaction orders, equations, the O+
        diffusion time, ...). A kept array that becomes a data variable of a result is
        copied into it (a result is the user's to change)."""
        store = self.__dict__.setdefault("_structural", {})
        if name not in store:
            store[name] = build()
        return store[name]

    # ---------------------------------------------------------------- changes
    def with_changes(self, set_dict=None, scale=None, *, base_dir=None):
        """A new model with some rate expressions replaced and some rates scaled.

        ``set_dict``: reaction, family or tie id → new rate expression; ``scale``: id →
        factor on k (0 switches it off); ``base_dir``: folder relative ``table(...)`` paths
        of ``set_dict`` resolve against (default the list's folder). The changes add to the
        scenario's; the environment is reused unless the new laws need new sources.
        """
        merged_set = {**self.changes["set"], **(set_dict or {})}
        merged_scale = dict(self.changes["scale"])
        for key, f in (scale or {}).items():
            merged_scale[key] = merged_scale.get(key, 1.0) * float(f)
        dirs = dict(self._set_dirs)
        if base_dir is not None:
            dirs.update({key: Path(base_dir) for key in (set_dict or {})})
        changes = (merged_set, merged_scale, "api", dirs)
        new = Model(self.scenario, self.reaction_list, environment=self.environment,
                    _changes=changes)
        if not new.needs <= self.needs:
            new = Model(self.scenario, self.reaction_list, _changes=changes)
        return new

    def at_time(self, utc):
        """The same model (reaction list, every change) at another scenario time (an aware
        UTC datetime): a new environment, the sun and neutrals of that time."""
        scen = self.scenario.replace(time=type(self.scenario.time)(utc=utc))
        return Model(scen, self.reaction_list, _changes=(
            self.changes["set"], self.changes["scale"], "api", self._set_dirs))

    # ---------------------------------------------------------------- rates
    def rates_on(self, environment):
        """The model's rate laws (with its changes) on another environment of the same
        grid: a :class:`~ionochem.system.rates.ColumnRates` (called with a time → k)."""
        return ColumnRates(self._rxns, self._k_expr, self._scale, environment,
                           getattr(self.reaction_list, "default_f", None))

    def given_at(self, time_s=None):
        """Fixed densities (altitude, given species), cm-3, at ``time_s`` (s after the
        scenario's time; they follow time in a transient run unless frozen)."""
        if time_s is None or self.timeline is None:
            return self.given
        return self.timeline.given(time_s)

    def rate_coefficients(self, time_s=None, *, temperatures=None):
        """Rate coefficients k, shape (altitude, reaction), in cm3 s-1 / s-1 / cm6 s-1.

        ``time_s``: time after the scenario's (transient runs: the sun moves);
        ``temperatures``: replacement ``Te``, ``Ti``, ``Tn``, ``Tv`` arrays (K, (altitude,)),
        for which the rates are re-evaluated (temperature sensitivities, sampling).
        """
        if time_s is not None and temperatures is None and self.timeline is not None:
            return self.timeline.rate_coefficients(time_s)
        return self._rates(time_s, temperatures)

    def uncertainty_factors(self):
        """One-sigma multiplicative factors f of every rate, (altitude, reaction): the
        reaction's own ``f``, else the list's ``@default f``, else 1 (not uncertain)."""
        return self._rates.uncertainty_factors()

    def rate_bands(self):
        """Tabulated (low, high) bands of k where a table rate has them: {index: (A,), (A,)}."""
        return self._rates.bands()

    # ---------------------------------------------------------------- the system
    def column_system(self, k=None, given=None):
        """The column system of this model's processes on rows with rate coefficients ``k``
        (B, R) and fixed densities ``given`` (B, G) — by default the model's own column
        (rates follow time); several samples of the column may be stacked as rows."""
        n_rows = self.altitude_km.size if k is None else np.shape(k)[0]
        built = (cls.for_model(self, k, given) for cls in PROCESSES)
        return ColumnSystem(self.species, n_rows, [p for p in built if p is not None],
                            n_columns=n_rows // self.altitude_km.size,
                            row_labels=RowLabels(self.altitude_km, n_rows))

    @property
    def system(self):
        """The model's own column system (kept; rebuilt if :attr:`transport` changes)."""
        kept = self.__dict__.get("_system")
        if kept is None or kept[0] is not self.transport:
            kept = self._system = (self.transport, self.column_system())
        return kept[1]

    def tendency(self, n, time_s=None):
        """dn/dt of the solved species, cm-3 s-1, (altitude, species); with transport the
        moving species' flux divergence is included."""
        sys = self.system if time_s is None else self.system.at(time_s)
        return sys.evaluate(n)

    def jacobian(self, n, time_s=None):
        """J[a, i, j] = ∂f_i/∂n_j, (altitude, species, species), s-1: each row's own block
        (with transport, its diagonal; :meth:`column_jacobian` is the whole matrix)."""
        sys = self.system if time_s is None else self.system.at(time_s)
        return sys.row_jacobian(n)

    def column_jacobian(self, n, time_s=None):
        """Jacobian of the whole column, scipy.sparse CSC (A·S, A·S), s-1: entry
        (a·S + i, b·S + j) = ∂f_{a,i}/∂n_{b,j} (block tridiagonal with transport)."""
        sys = self.system if time_s is None else self.system.at(time_s)
        return sys.jacobian(n).tocsc()

    def steady_densities(self, k=None, given=None, *, rtol=None):
        """Steady solved densities → ``SteadyResult``; ``k`` (B, R) and ``given`` (B, G)
        default to the model's own and may stack several samples of the column as rows."""
        rtol = getattr(self.scenario.solve, "rtol", 1e-10) if rtol is None else rtol
        sys = self.system if k is None and given is None else self.column_system(
            self._rates.static if k is None else k, given)
        try:
            with single_thread_blas():  # batches of small matrices (solve/threads.py)
                return sys.steady(rtol=rtol)
        except SolverError as exc:
            raise solver_failure(exc, rtol, self.scenario.source) from None

    def solve(self):
        """Steady state at every altitude → ``xarray.Dataset`` (photochemical equilibrium
        row by row, or with [transport] the whole column's steady state)."""
        with single_thread_blas():  # batches of small matrices (solve/threads.py)
            return steady_result(self, self.steady_densities(), METHOD_NAMES)

    def integrate(self, times_s, initial=None, *, method="BDF", rtol=1e-8, atol=None):
        """Integrate in time from ``initial`` (default zero ion densities) → ``Dataset`` with
        a ``time`` dimension.

        ``times_s``: output times, s after the scenario's time (t = 0); ``initial``: ndarray
        (altitude, species) or a steady Dataset; ``method``: "BDF" or "Radau"; ``atol``:
        absolute tolerance, default 1e-6 cm-3 (far below any density of interest, far above
        the round-off of the largest).
        """
        n0 = initial_state(initial, self.species, self.altitude_km.size)
        times = np.asarray(times_s, float)
        try:
            out = self.system.integrate(times, n0, method=method, rtol=rtol,
                                        atol=1e-6 if atol is None else atol)
        except SolverError as exc:
            raise integration_failure(exc, self.scenario.source) from None
        return transient_dataset(self, times, out)

    def sensitivity(self, **kw):
        """Normalized sensitivities ∂ln n_i/∂ln k_j at steady state
        (:func:`ionochem.analysis.sensitivity.sensitivity`)."""
        from ionochem.analysis.sensitivity import sensitivity  # analysis sits above the model
        return sensitivity(self, **kw)
