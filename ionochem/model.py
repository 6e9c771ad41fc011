"""A mechanism bound to an environment: rate coefficients, tendency, Jacobian, solutions.

``Model(scenario)`` reads the scenario's reaction list, applies the scenario's changes, builds
the environment (neutrals, temperatures, sun) and compiles the mechanism; ``solve()`` and
``integrate()`` then do only chemistry. This is the only module that joins the mechanism
stage to the environment stage; the solvers below it see arrays and callables.
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path

import numpy as np

from ionochem.errors import (
    InputError,
    MechanismError,
    ScenarioError,
    SolverError,
    TableRangeError,
)
from ionochem.io.checks import balance_ion_problem
from ionochem.mechanism.mechanism import ELECTRON, THIRD_BODY, Mechanism

SOURCE_KINDS = ("photo", "photoelectron", "prescribed")
#: Photo and photoelectron production (cm-3 s-1) below which a channel counts as dark. Near
#: the terminator attenuation leaves rates of 1e-200 and less, whose products underflow
#: and leave the steady state undetermined; such a rate makes at most ~1e-7 cm-3 of ions
#: (sqrt(1e-20/1e-7) with recombination) and is set to zero *(a numerical choice)*.
PRODUCTION_FLOOR = 1e-20


def load_reaction_list(path):
    """Parse a reaction list (``*.reactions``) into a :class:`ReactionList`.

    The parsed list is text made structured; :class:`Model` compiles it into a
    :class:`~ionochem.mechanism.mechanism.Mechanism` (``model.mechanism``: stoichiometry,
    tendency, Jacobian) bound to a column.
    """
    from ionochem.mechanism.parser import parse_reaction_list
    return parse_reaction_list(path)


#: The contract name (DESIGN.md §4) of :func:`load_reaction_list`.
load_mechanism = load_reaction_list


def load_scenario(path):
    """Read and validate a scenario file (``*.toml``)."""
    from ionochem.io.scenario import load_scenario as _load
    return _load(path)


def channel_of(reaction) -> str:
    """Channel name of a photo or photoelectron reaction: ``"N2->N2+"``, ``"N2->N(2D)+N"``.

    The absorber is the single neutral reactant; the channel is named by the first ion
    product (a vibrational level by its family's base name), or, for a dissociation with no
    ion, by its products, excited states first.
    """
    absorbers = [sp for sp, c in reaction.reactants if sp.name not in (ELECTRON, THIRD_BODY)]
    if len(absorbers) != 1 or absorbers[0].charge != 0 or reaction.reactants[0][1] != 1:
        raise MechanismError(
            f"reaction {reaction.id}: a photo or photoelectron rate needs exactly one neutral "
            "reactant (the absorber)", file=reaction.file, line=reaction.line)
    absorber = absorbers[0].name
    ions = [sp for sp, _ in reaction.products if sp.charge > 0]
    if ions:
        return f"{absorber}->{ions[0].base}"
    prods = sorted({sp.name for sp, _ in reaction.products},
                   key=lambda n: ("(" not in n, n))
    return f"{absorber}->{'+'.join(prods)}"


def _level_channel(reaction, kind):
    """``"photo:N2->N2+(v=1)"`` for a photo/photoelectron reaction making N2+ in a level,
    else None (the environment splits only N2+ bin by bin)."""
    if kind not in ("photo", "photoelectron"):
        return None
    ions = [sp for sp, _ in reaction.products if sp.charge > 0]
    if not ions or ions[0].vib is None or ions[0].base != "N2+":
        return None
    absorbers = [sp.name for sp, _ in reaction.reactants if sp.charge == 0]
    if absorbers != ["N2"]:
        return None
    return f"{kind}:N2->N2+(v={ions[0].vib})"


class _LevelLabels(Sequence):
    """Labels "<altitude> km" of solver rows, formatted only when an error needs them."""

    def __init__(self, altitude_km):
        self.altitude_km = altitude_km

    def __len__(self):
        return self.altitude_km.size

    def __getitem__(self, i):
        if isinstance(i, slice):
            return [self[j] for j in range(*i.indices(len(self)))]
        return f"{self.altitude_km[i]:g} km"


class Model:
    """A reaction list solved in the column a scenario describes.

    Parameters
    ----------
    scenario : Scenario
        From :func:`load_scenario`.
    mechanism : ReactionList, optional
        A parsed reaction list (:func:`load_reaction_list`, contract name
        :func:`load_mechanism`); default the scenario's own ``reactions``. The keyword
        ``reaction_list=`` says the same; the compiled form is :attr:`mechanism`.
    environment : Environment, optional
        Reuse an already-built column (for changed copies of a model).

    Attributes
    ----------
    species : list of str
        Solved species, the column order of ``n``.
    reactions : list of str
        Reaction ids in order.
    reaction_list : ReactionList
        The parsed list the model was built from.
    mechanism : Mechanism
        The compiled mechanism (stoichiometry, tendency, Jacobian) on this column's fixed
        species.
    """

    def __init__(self, scenario, mechanism=None, *, reaction_list=None, environment=None,
                 _changes=None):
        from ionochem.environment.column import build_environment
        if mechanism is not None and reaction_list is not None:
            raise TypeError("give the reaction list once: mechanism= or reaction_list=")
        mechanism = reaction_list if mechanism is None else mechanism
        self.scenario = scenario
        if mechanism is None:
            mechanism = load_mechanism(scenario.reactions)
        self.reaction_list = mechanism
        rxns = list(mechanism.reactions)
        if not rxns:
            raise MechanismError("the reaction list holds no reactions",
                                 file=getattr(mechanism, "path", None) or scenario.reactions)
        self._rxns = rxns
        self.reactions = [r.id for r in rxns]
        self._id_index = {r.id: j for j, r in enumerate(rxns)}
        changes = _changes
        if changes is None:
            changes = (dict(scenario.changes.set), dict(scenario.changes.scale), "scenario",
                       {})
        self.changes = {"set": dict(changes[0]), "scale": dict(changes[1])}
        # Folder each --set expression's table paths resolve against (default: the list's).
        self._set_dirs = dict(changes[3])
        self._k_expr = [r.k for r in rxns]
        self._scale = np.ones(len(rxns))
        self._apply_changes(*changes[:3])

        needs = set()
        for r, expr in zip(rxns, self._k_expr):
            for kind in SOURCE_KINDS:
                if kind in expr.variables:
                    needs.add(f"prescribed:{r.id}" if kind == "prescribed"
                              else f"{kind}:{channel_of(r)}")
                    level_key = _level_channel(r, kind)
                    if level_key is not None:
                        needs.add(level_key)
            for sp, _ in (*r.reactants, *r.products):
                needs.add(sp.name)
        self._needs = frozenset(needs)
        if environment is None:
            environment = build_environment(scenario, self._needs)
        self.environment = environment
        env = environment
        if scenario.solve.electrons == "table":
            listed = {sp.name for r in mechanism.reactions
                      for sp, _ in (*r.reactants, *r.products)}
            problem = balance_ion_problem(scenario.solve.balance_ion, listed)
            if problem:
                raise ScenarioError(problem, file=scenario.source, key="solve.balance_ion")
        self.mechanism = Mechanism(mechanism, fixed=env.neutrals,
                                   electrons=scenario.solve.electrons,
                                   balance_ion=scenario.solve.balance_ion)
        mech = self.mechanism
        if not mech.solved:
            raise MechanismError("the reaction list has no species to solve: every species "
                                 "in it is fixed by the neutral source "
                                 f"({', '.join(sorted(env.neutrals)) or 'none'})",
                                 file=getattr(mechanism, "path", None) or scenario.reactions)
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
        self.species = list(mech.solved)
        self.altitude_km = env.altitude_km
        # The parser cannot know which species the neutral source fixes: its warnings of
        # "produced but never lost" are dropped for those (structural_problems covers the rest).
        list_warnings = [w for w in getattr(mechanism, "warnings", [])
                         if not any(str(getattr(w, "message", w)).startswith(f"{n} is produced")
                                    for n in env.neutrals)]
        self.warnings = (list(getattr(scenario, "warnings", ())) + list(env.warnings)
                         + list_warnings)
        A = env.altitude_km.size
        given = np.zeros((A, len(mech.given)))
        total_neutral = sum(env.neutrals.values())
        for g, name in enumerate(mech.given):
            if name == ELECTRON:
                given[:, g] = env.electron_density
            elif name == THIRD_BODY:
                given[:, g] = total_neutral
            else:
                given[:, g] = env.neutrals[name]
        self.given = given
        self._level_fractions = self._vibrational_fractions()
        self._source_reactions = [j for j, e in enumerate(self._k_expr)
                                  if e.variables & {"photo", "photoelectron"}]
        ones = np.ones(A)
        self._src_absorber = np.stack(
            [env.neutrals.get(channel_of(self._rxns[j]).split("->")[0], ones)
             for j in self._source_reactions], -1) if self._source_reactions \
            else np.zeros((A, 0))
        self._k_static = self._evaluate_k(time_s=None)
        from ionochem.mechanism.bounds import implausible_rates
        self.warnings += implausible_rates(rxns, self._k_static)
        # The expression language allows a source only times constant factors, so a photo
        # rate is coefficient × source(t): precompute the coefficients once for transient runs.
        self._src_keys = [self._source_key(j, "photo" if "photo" in self._k_expr[j].variables
                                           else "photoelectron")
                          for j in self._source_reactions]
        if self._source_reactions and self.environment.time_dependent:
            ones = {k: np.ones(A) for k in self._src_keys}
            with np.errstate(all="ignore"):
                self._src_coef = np.stack([self._evaluate_one(j, ones)
                                           for j in self._source_reactions], -1)
        self.transport = self._species_transport()

    # ---------------------------------------------------------------- public surface
    @property
    def reaction_objects(self):
        """The parsed reaction entries, in the order of :attr:`reactions` (read only)."""
        return tuple(self._rxns)

    @property
    def units(self):
        """The units of analysis of the reactions as used: a plain reaction, a whole family,
        or a tie of the list (:mod:`ionochem.mechanism.units`), tuple of ``Unit``."""
        from ionochem.mechanism.units import analysis_units
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
        """All reported densities from solved ones: ``(dens, names, roles)``.

        ``n_solved`` is shaped (..., altitude, solved species); ``dens`` (..., altitude,
        reported species) adds electrons, fixed neutrals and derived totals.
        """
        from ionochem.io.dataset import species_table
        return species_table(self, n_solved)

    # ---------------------------------------------------------------- changes
    def _ids_for(self, key, where=None):
        if key in self._id_index:
            return [self._id_index[key]]
        families = getattr(self.reaction_list, "families", {})
        for fam, members in families.items():
            if key in (fam, fam.split("(")[0]):
                return [self._id_index[m] for m in members]
        for unit in self.units:
            if unit.name == key:
                return [self._id_index[m] for m in unit.members]
        raise InputError(f"no reaction with id {key!r} in {self.reaction_list.path}",
                         file=where)

    def _apply_changes(self, set_dict, scale, origin):
        from ionochem.mechanism.expressions import compile_expression
        base_dir = Path(self.reaction_list.path).parent if self.reaction_list.path else Path(".")
        where = self.scenario.source if origin == "scenario" else "--set"
        for key, text in set_dict.items():
            for j in self._ids_for(key, where):
                r = self._rxns[j]
                self._k_expr[j] = compile_expression(str(text), file=where, line=None,
                                                     base_dir=self._set_dirs.get(key, base_dir),
                                                     level=r.level)
        for key, factor in scale.items():
            factor = float(factor)
            where = self.scenario.source if origin == "scenario" else "--scale"
            if not np.isfinite(factor) or factor < 0:
                raise InputError(f"scale factor for {key} must be a non-negative number",
                                 file=where)
            for j in self._ids_for(key, where):
                self._scale[j] *= factor

    def with_changes(self, set_dict=None, scale=None, *, base_dir=None):
        """A new model with some rate expressions replaced and some rates scaled.

        Parameters
        ----------
        set_dict : dict[str, str]
            Reaction id (or family id, for all its levels) → new rate expression.
        scale : dict[str, float]
            Reaction id (or family id) → multiplicative factor on k (0 switches it off).
        base_dir : path, optional
            Folder that relative ``table(...)`` paths in ``set_dict`` resolve against
            (default: the reaction list's folder; the command line passes the working
            directory).

        The changes add to those the scenario already makes. The environment is reused
        unless the new expressions need sources the old ones did not.
        """
        merged_set = dict(self.changes["set"])
        merged_set.update(set_dict or {})
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

    # ---------------------------------------------------------------- rates
    def _source_key(self, j, kind):
        """Source key of reaction j: its level's own channel when the environment splits
        it bin by bin (``photo:N2->N2+(v=1)``), else the channel total."""
        key = _level_channel(self._rxns[j], kind)
        if key is not None and key in self._level_keys():
            return key
        return f"{kind}:{channel_of(self._rxns[j])}"

    def _level_keys(self):
        if not hasattr(self, "_level_keys_cache"):
            sun = getattr(self.environment, "sun", None)
            req = getattr(sun, "level_requests", {}) if sun is not None else {}
            self._level_keys_cache = frozenset(f"{b}(v={v})" for b, lv in req.items()
                                               for v in lv)
        return self._level_keys_cache

    def _vibrational_fractions(self):
        """Share of each family level in photo/photoelectron production of that family."""
        levels = {}
        for r, e in zip(self._rxns, self._k_expr):
            if e.variables & {"photo", "photoelectron"}:
                ions = [sp for sp, _ in r.products if sp.charge > 0 and sp.vib is not None]
                if ions:
                    levels.setdefault(ions[0].base, set()).add(ions[0].vib)
        out = {}
        for base, lv in levels.items():
            if base != "N2+":
                raise MechanismError(f"no vibrational split of photo production is known for "
                                     f"{base}; write its levels' rates explicitly")
            from ionochem.environment.n2plus_levels import n2plus_level_fractions
            lv = sorted(lv)
            if lv != list(range(lv[0], lv[-1] + 1)) or lv[0] != 0:
                raise MechanismError("photo production of N2+ levels must cover v = 0..top")
            out[base] = dict(zip(lv, n2plus_level_fractions(lv)))
        return out

    def _temperature_env(self, r, temps=None):
        env = self.environment
        Te, Ti, Tn, Tv = temps if temps is not None else (env.Te, env.Ti, env.Tn, env.Tv)
        d = {"Te": Te, "Ti": Ti, "Tn": Tn, "Tv": Tv}
        if r.level is not None:
            d["v"] = float(r.level)
        return d

    def _teff(self, r, Ti, Tn):
        from ionochem.environment.temperatures import effective_temperature
        heavy = [sp for sp, c in r.reactants for _ in range(c)
                 if sp.name not in (ELECTRON, THIRD_BODY)]
        ions = [sp for sp in heavy if sp.charge != 0]
        neutrals = [sp for sp in heavy if sp.charge == 0]
        if len(ions) != 1 or len(neutrals) != 1:
            raise MechanismError(f"reaction {r.id} uses Teff but does not have exactly one ion "
                                 "and one neutral reactant", file=r.file, line=r.line)
        env = self.environment
        return effective_temperature(ions[0].mass_amu, neutrals[0].mass_amu, Ti, Tn,
                                     env.ion_drift_m_s,
                                     ti_includes_drift=env.ti_includes_drift)

    def _source_value(self, r, expr, sources):
        env = self.environment
        out = {}
        if "prescribed" in expr.variables:
            P = env.prescribed[r.id]
            denom = np.ones_like(P)
            for sp, c in r.reactants:
                if sp.name not in env.neutrals:
                    raise MechanismError(f"reaction {r.id} is prescribed but its reactant "
                                         f"{sp.name} is not a fixed neutral", file=r.file,
                                         line=r.line)
                denom = denom * env.neutrals[sp.name] ** c
            with np.errstate(divide="ignore", invalid="ignore"):
                out["prescribed"] = np.where(denom > 0, P / denom, 0.0)
        for kind in ("photo", "photoelectron"):
            if kind in expr.variables:
                ch = channel_of(r)
                level_key = _level_channel(r, kind)
                if level_key is not None and level_key in sources:
                    # Split bin by bin by the environment (n2plus_levels.level_sources).
                    out[kind] = sources[level_key]
                    continue
                key = f"{kind}:{ch}"
                if key not in sources:
                    avail = ", ".join(sorted(k for k in sources if k.startswith(kind)))
                    raise MechanismError(f"reaction {r.id}: the environment has no {kind} "
                                         f"channel {ch} (available: {avail or 'none'})",
                                         file=r.file, line=r.line)
                val = sources[key]
                ions = [sp for sp, _ in r.products if sp.charge > 0]
                if ions and ions[0].vib is not None:
                    val = val * self._level_fractions[ions[0].base][ions[0].vib]
                out[kind] = val
        return out

    def _evaluate_one(self, j, sources, temps=None):
        r, expr = self._rxns[j], self._k_expr[j]
        d = self._temperature_env(r, temps)
        if "Teff" in expr.variables:
            d["Teff"] = self._teff(r, d["Ti"], d["Tn"])
        d.update(self._source_value(r, expr, sources))
        try:
            k = np.asarray(expr.evaluate(d), float)
        except TableRangeError:
            raise
        except FloatingPointError as exc:  # pragma: no cover - numpy raises only if asked
            raise MechanismError(f"rate of {r.id} cannot be evaluated: {exc}",
                                 file=r.file, line=r.line) from None
        k = np.broadcast_to(k, np.broadcast_shapes(k.shape, d["Tn"].shape)) * self._scale[j]
        bad = ~np.isfinite(k) | (k < 0)
        if bad.any():
            alt = self.environment.altitude_km[np.nonzero(np.atleast_1d(bad).any(
                axis=tuple(range(bad.ndim - 1))))[0][0]] if bad.ndim else float("nan")
            raise MechanismError(f"rate coefficient of {r.id} is negative or not finite "
                                 f"(first at {alt:g} km): check its expression",
                                 file=r.file, line=r.line)
        return k

    def _evaluate_k(self, time_s=None, temps=None):
        sources = self.environment.sources(time_s) if self._source_reactions else {}
        cols = []
        with np.errstate(all="ignore"):
            for j in range(len(self._rxns)):
                cols.append(self._evaluate_one(j, sources, temps))
        return self._flush_dark(np.stack(cols, axis=-1))

    def _flush_dark(self, k):
        """Zero the photo and photoelectron rates below :data:`PRODUCTION_FLOOR`."""
        if not self._source_reactions:
            return k
        src = k[..., self._source_reactions]
        k[..., self._source_reactions] = np.where(src * self._src_absorber < PRODUCTION_FLOOR,
                                                  0.0, src)
        return k

    def _species_transport(self):
        """The O+ transport operator on the column, or None for a photochemical column."""
        coef = getattr(self.environment, "transport", None)
        if coef is None:
            return None
        from ionochem.solve.transport import SpeciesTransport, transport_operator
        names = self.scenario.transport.species
        for name in names:
            if name not in self.species:
                raise MechanismError(
                    f"[transport] moves {name}, but {name} is not a solved species of "
                    f"{self.reaction_list.path}", file=self.scenario.source)
        op = transport_operator(coef.altitude_km, coef.D_cm2_s, coef.V_cm_s,
                                coef.upper_flux_cm2_s)
        return SpeciesTransport(op, self.species.index(names[0]), len(self.species))

    def rate_coefficients(self, time_s=None, *, temperatures=None):
        """Rate coefficients k, shape (altitude, reaction), in cm3 s-1 / s-1 / cm6 s-1.

        Parameters
        ----------
        time_s : float, optional
            Time after the scenario time (transient runs; the sun moves).
        temperatures : dict, optional
            Replacement ``Te``, ``Ti``, ``Tn``, ``Tv`` arrays (K, shape (altitude,)); the rates
            are then re-evaluated (for temperature sensitivities and sampling).
        """
        if temperatures is not None:
            env = self.environment
            base = {"Te": env.Te, "Ti": env.Ti, "Tn": env.Tn, "Tv": env.Tv}
            base.update(temperatures)
            return self._evaluate_k(time_s, temps=(base["Te"], base["Ti"], base["Tn"],
                                                   base["Tv"]))
        if time_s is None:
            return self._k_static
        if not self.environment.time_dependent or not self._source_reactions:
            return self._k_static
        k = self._k_static.copy()
        # The sun's sources are linear between lattice nodes: mix the source reactions'
        # rate coefficients of the nodes (kept per node) instead of every channel of the sun.
        columns = None
        for node, weight in self.environment.source_nodes(time_s):
            part = weight * self._source_columns(node)
            columns = part if columns is None else columns + part
        k[:, self._source_reactions] = columns
        return self._flush_dark(k)

    def _source_columns(self, node):
        """Rate coefficients of the source reactions, (altitude, source reaction), at one
        lattice node of the sun (before the flush of dark levels), kept per node."""
        kept = self.__dict__.setdefault("_source_node_columns", {})
        columns = kept.get(node)
        if columns is None:
            sources = self.environment.sources(node)
            columns = kept[node] = self._src_coef * np.stack(
                [sources[key] for key in self._src_keys], -1)
        return columns

    def uncertainty_factors(self):
        """One-sigma multiplicative factors f of every rate, shape (altitude, reaction).

        A reaction's own ``f`` expression, else the list's ``@default f``, else 1 (not
        uncertain), evaluated at each level's temperatures.
        """
        default = getattr(self.reaction_list, "default_f", None)
        out = np.ones_like(self._k_static)
        with np.errstate(all="ignore"):
            for j, r in enumerate(self._rxns):
                expr = r.f if r.f is not None else default
                if expr is None:
                    continue
                d = self._temperature_env(r)
                if "Teff" in expr.variables:
                    d["Teff"] = self._teff(r, d["Ti"], d["Tn"])
                val = np.broadcast_to(np.asarray(expr.evaluate(d), float), out[:, j].shape)
                if np.any(~np.isfinite(val)) or np.any(val < 1):
                    raise MechanismError(f"uncertainty factor f of {r.id} must be ≥ 1",
                                         file=r.file, line=r.line)
                out[:, j] = val
        return out

    def rate_bands(self):
        """Tabulated (low, high) bands of k where a table rate has them: {index: (A,), (A,)}."""
        out = {}
        with np.errstate(all="ignore"):
            for j, (r, expr) in enumerate(zip(self._rxns, self._k_expr)):
                if not getattr(expr, "_has_bands", False):
                    continue
                d = self._temperature_env(r)
                if "Teff" in expr.variables:
                    d["Teff"] = self._teff(r, d["Ti"], d["Tn"])
                d.update(self._source_value(r, expr, self.environment.sources(None)
                                            if self._source_reactions else {}))
                band = expr.bands(d)
                if band is not None:
                    shape = self._k_static[:, j].shape
                    out[j] = tuple(np.broadcast_to(b, shape) * self._scale[j] for b in band)
        return out

    # ---------------------------------------------------------------- chemistry
    def tendency(self, n, time_s=None):
        """dn/dt of the solved species, cm-3 s-1; ``n`` shaped (altitude, species).

        With transport, the transported species' vertical flux divergence is included.
        """
        n = np.asarray(n, float)
        f = self.mechanism.tendency(n, self.rate_coefficients(time_s), self.given)
        if self.transport is not None:
            f = f + self.transport.tendency(n)
        return f

    def jacobian(self, n, time_s=None):
        """J[a, i, j] = ∂f_i/∂n_j, shape (altitude, species, species), s-1.

        The level's own blocks. With transport the levels are also coupled to their
        neighbours: the blocks hold the diagonal of the transport operator, and
        :meth:`column_jacobian` gives the whole matrix.
        """
        J = self.mechanism.jacobian(np.asarray(n, float), self.rate_coefficients(time_s),
                                    self.given)
        if self.transport is not None:
            i = self.transport.index
            J[:, i, i] += self.transport.diagonal()
        return J

    def column_jacobian(self, n, time_s=None):
        """Jacobian of the whole column, scipy.sparse (A·S, A·S), s-1.

        Entry (a·S + i, b·S + j) = ∂f_{a,i}/∂n_{b,j}: block diagonal without transport,
        block tridiagonal with it.
        """
        from ionochem.solve.column import block_diagonal
        J = block_diagonal(self.mechanism.jacobian(np.asarray(n, float),
                                                   self.rate_coefficients(time_s),
                                                   self.given))
        if self.transport is not None:
            J = J + self.transport.matrix(1)
        return J.tocsc()

    def structural(self, name, build):
        """``build()``, computed once per model and kept: tables that depend only on the
        reaction list, the grid and the model's environment (reaction orders, equations,
        emission reactions, the O+ diffusion time, the solar zenith angle), so repeated
        solves do not rebuild them. A kept array that becomes a data variable of a result
        is copied into it (a result is the user's to change)."""
        store = self.__dict__.setdefault("_structural", {})
        if name not in store:
            store[name] = build()
        return store[name]

    def steady_densities(self, k=None, given=None, *, rtol=None):
        """Steady solved densities for rate coefficients ``k`` (B, R) without a dataset.

        ``k`` and ``given`` default to the model's own (one row per altitude); they may
        stack several samples of the column as extra rows. Returns a ``SteadyResult``.
        """
        from ionochem.solve.batch import solve_rows
        k = self._k_static if k is None else k
        given = self.given if given is None else given
        if rtol is None:
            rtol = getattr(self.scenario.solve, "rtol", 1e-10)
        from ionochem.solve.threads import single_thread_blas
        names = _LevelLabels(np.tile(self.altitude_km, k.shape[0] // self.altitude_km.size))
        try:
            with single_thread_blas():  # batches of small matrices (solve/threads.py)
                return solve_rows(self.mechanism, k, given, rtol=rtol, level_names=names,
                                  transport=self.transport)
        except SolverError as exc:
            raise self._solver_failure(exc, rtol) from None

    def _solver_failure(self, exc, rtol):
        """``exc`` at the scenario's file, with what to try."""
        hints = []
        if rtol < 1e-12:
            hints.append(f"relax solve.rtol (now {rtol:g}; 1e-10 is the default)")
        hints.append("check the rates of the reactions that make and destroy "
                     f"{', '.join(dict.fromkeys(exc.species)) or 'those species'} at these "
                     "heights (`ionochem reactions SCENARIO --altitude KM`)")
        hints.append("or run the column with [solve] mode = \"transient\" to see whether it "
                     "settles")
        return SolverError(f"{exc.message}; try: {'; '.join(hints)}", file=self.scenario.source,
                           key="solve", levels=exc.levels, species=exc.species)

    def solve(self):
        """Steady state at every level → ``xarray.Dataset``.

        Photochemical equilibrium level by level, or, with a [transport] section, the
        steady state of the whole column with O+ transport.
        """
        import xarray as xr

        from ionochem.analysis.diagnostics import steady_diagnostic_vars
        from ionochem.io.dataset import steady_variables
        from ionochem.solve.steady import METHOD_NAMES
        from ionochem.solve.threads import single_thread_blas

        # Variables as plain dicts, one Dataset at the end (no merge per variable).
        with single_thread_blas():  # batches of small matrices (solve/threads.py)
            data_vars, coords, attrs = steady_variables(self, self.steady_densities(),
                                                        METHOD_NAMES)
            extra, extra_coords, extra_attrs = steady_diagnostic_vars(
                self, data_vars["density"][1], data_vars["loss"][1], coords["role"][1],
                data_vars["reaction_rate"][1], list(coords["species"][1]))
        data_vars.update(extra)
        coords.update(extra_coords)
        attrs.update(extra_attrs)
        return xr.Dataset(data_vars, coords=self._result_coordinates(coords), attrs=attrs)

    def _result_coordinates(self, coords):
        """``xarray.Coordinates`` of ``coords`` (name -> (dims, values[, attrs])), reused
        from the last solve when equal: building their indexes costs more than the rest of
        the dataset (pandas indexes of the species and reaction names). Each result gets
        its own shallow copy (its own attribute dicts)."""
        import xarray as xr

        def token(value):
            dims, values, *rest = value
            values = np.asarray(values)
            data = tuple(values.tolist()) if values.dtype == object else values.tobytes()
            return dims, values.dtype.str, values.shape, data, repr(rest)

        key = tuple((name, token(value)) for name, value in coords.items())
        cached = self.__dict__.get("_coords_cache")
        if cached is None or cached[0] != key:
            cached = self._coords_cache = (key, xr.Coordinates(coords))
        return cached[1].copy(deep=False)

    def integrate(self, times_s, initial=None, *, method="BDF", rtol=1e-8, atol=None):
        """Integrate in time from ``initial`` (default: zero ion densities).

        Parameters
        ----------
        times_s : array_like
            Output times, s after the scenario's time (t = 0).
        initial : ndarray (altitude, species) or Dataset, optional
        method : {"BDF", "Radau"}
        rtol : float
        atol : float, optional
            Absolute tolerance, cm-3 (default 1e-6 cm-3: far below any density of interest,
            far above the round-off of the largest).

        Returns
        -------
        xarray.Dataset with a ``time`` dimension.
        """
        from ionochem.io.dataset import transient_dataset
        from ionochem.solve.transient import integrate
        mech = self.mechanism
        A, S = self.altitude_km.size, len(mech.solved)
        if initial is None:
            n0 = np.zeros((A, S))
        elif hasattr(initial, "data_vars"):
            n0 = np.stack([initial["density"].sel(species=s).values for s in mech.solved], -1)
        else:
            n0 = np.asarray(initial, float).reshape(A, S)
        if atol is None:
            atol = 1e-6

        def tendency(t, n):
            return self.tendency(n, t)

        def jacobian(t, n):
            if self.transport is not None:
                return self.column_jacobian(n, t)
            return mech.jacobian(n, self.rate_coefficients(t), self.given)

        times = np.asarray(times_s, float)
        try:
            out = integrate(times, n0, tendency, jacobian, method=method, rtol=rtol,
                            atol=atol)
        except SolverError as exc:
            if exc.file is not None:
                raise
            raise SolverError(f"{exc.message}; try fewer or closer output times, or check "
                              "the rate laws for values far outside their physical bounds",
                              file=self.scenario.source, key="solve.times_s",
                              levels=exc.levels) from None
        return transient_dataset(self, times, out)

    def sensitivity(self, **kw):
        """Normalized sensitivities ∂ln n_i/∂ln k_j at steady state (see analysis)."""
        from ionochem.analysis.sensitivity import sensitivity
        return sensitivity(self, **kw)
