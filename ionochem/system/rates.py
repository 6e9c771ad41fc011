"""Rate coefficients of a reaction list on a column environment.

:class:`ColumnRates` evaluates every reaction's compiled rate law at each altitude row of an
environment: temperatures (Te, Ti, Tn, Tv, and the effective ion temperature Teff of drifting
ions), the vibrational level ``v`` of per-level reactions, and the sources the environment
supplies — photo and photoelectron rates per channel (N2+ split by vibrational level bin by
bin when the environment does, else by the level fractions of
:mod:`ionochem.environment.n2plus_levels`) and prescribed production. It also evaluates the
reactions' uncertainty factors and tabulated bands. Values are checked: a negative or
non-finite rate names its reaction and the first altitude.

It reads the environment's arrays and the reactions' compiled expressions; it never reads
files and never solves.
"""

from __future__ import annotations

import numpy as np

from ionochem.environment.n2plus_levels import n2plus_level_fractions
from ionochem.environment.temperatures import effective_temperature
from ionochem.errors import MechanismError, TableRangeError
from ionochem.mechanism.mechanism import ELECTRON, THIRD_BODY

SOURCE_KINDS = ("photo", "photoelectron", "prescribed")
#: Photo and photoelectron production (cm-3 s-1) below which a channel counts as dark. Near
#: the terminator attenuation leaves rates of 1e-200 and less, whose products underflow
#: and leave the steady state undetermined; such a rate makes at most ~1e-7 cm-3 of ions
#: (sqrt(1e-20/1e-7) with recombination) and is set to zero *(a numerical choice)*.
PRODUCTION_FLOOR = 1e-20


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


def level_channel(reaction, kind):
    """``"photo:N2->N2+(v=1)"`` for a photo/photoelectron reaction making N2+ in a
    vibrational level, else None (the environment splits only N2+ bin by bin)."""
    if kind not in ("photo", "photoelectron"):
        return None
    ions = [sp for sp, _ in reaction.products if sp.charge > 0]
    if not ions or ions[0].vib is None or ions[0].base != "N2+":
        return None
    absorbers = [sp.name for sp, _ in reaction.reactants if sp.charge == 0]
    if absorbers != ["N2"]:
        return None
    return f"{kind}:N2->N2+(v={ions[0].vib})"


def environment_needs(reactions, expressions):
    """What an environment must supply for these reactions and rate laws: ``photo:CHANNEL``,
    ``photoelectron:CHANNEL``, ``prescribed:ID`` and species names (frozenset of str)."""
    needs = set()
    for r, expr in zip(reactions, expressions):
        for kind in SOURCE_KINDS:
            if kind in expr.variables:
                needs.add(f"prescribed:{r.id}" if kind == "prescribed"
                          else f"{kind}:{channel_of(r)}")
                key = level_channel(r, kind)
                if key is not None:
                    needs.add(key)
        for sp, _ in (*r.reactants, *r.products):
            needs.add(sp.name)
    return frozenset(needs)


def vibrational_fractions(reactions, expressions):
    """Share of each vibrational level in the photo/photoelectron production of its family,
    ``{base: {v: fraction}}`` (N2+ only: :func:`n2plus_level_fractions`)."""
    levels = {}
    for r, e in zip(reactions, expressions):
        if e.variables & {"photo", "photoelectron"}:
            ions = [sp for sp, _ in r.products if sp.charge > 0 and sp.vib is not None]
            if ions:
                levels.setdefault(ions[0].base, set()).add(ions[0].vib)
    out = {}
    for base, lv in levels.items():
        if base != "N2+":
            raise MechanismError(f"no vibrational split of photo production is known for "
                                 f"{base}; write its levels' rates explicitly")
        lv = sorted(lv)
        if lv != list(range(lv[0], lv[-1] + 1)) or lv[0] != 0:
            raise MechanismError("photo production of N2+ levels must cover v = 0..top")
        out[base] = dict(zip(lv, n2plus_level_fractions(lv)))
    return out


class ColumnRates:
    """The rate coefficients of ``reactions`` on ``environment``.

    Parameters
    ----------
    reactions : sequence of Reaction
        Parsed reactions (their ids, species, line numbers).
    expressions : sequence
        Compiled rate law of each reaction as used (after ``--set`` changes).
    scale : ndarray (R,)
        Multiplicative factor on each k.
    environment : Environment
        The column (:func:`ionochem.environment.column.build_environment`).
    default_f : expression, optional
        The list's ``@default f`` uncertainty factor.
    """

    def __init__(self, reactions, expressions, scale, environment, default_f=None):
        self.reactions = list(reactions)
        self.expressions = list(expressions)
        self.scale = np.asarray(scale, float)
        self.environment = environment
        self.default_f = default_f
        env = environment
        self.level_fractions = vibrational_fractions(self.reactions, self.expressions)
        self.source_reactions = [j for j, e in enumerate(self.expressions)
                                 if e.variables & {"photo", "photoelectron"}]
        A = env.altitude_km.size
        ones = np.ones(A)
        self._absorber = np.stack(
            [env.neutrals.get(channel_of(self.reactions[j]).split("->")[0], ones)
             for j in self.source_reactions], -1) if self.source_reactions \
            else np.zeros((A, 0))
        sun = getattr(env, "sun", None)
        req = getattr(sun, "level_requests", {}) if sun is not None else {}
        self._level_keys = frozenset(f"{b}(v={v})" for b, lv in req.items() for v in lv)
        self.static = self._evaluate(time_s=None)
        # The expression language allows a source only times constant factors, so a photo
        # rate is coefficient × source(t): the coefficients are computed once for transient
        # runs, and the rates of each node of the sun's lattice are kept.
        self._src_keys = [self._source_key(j, "photo" if "photo" in self.expressions[j].variables
                                           else "photoelectron")
                          for j in self.source_reactions]
        self._node_columns = {}
        if self.source_reactions and env.time_dependent:
            unit = {k: ones for k in self._src_keys}
            with np.errstate(all="ignore"):
                self._src_coef = np.stack([self._evaluate_one(j, unit)
                                           for j in self.source_reactions], -1)

    # ------------------------------------------------------------ one reaction
    def _source_key(self, j, kind):
        """Source key of reaction j: its level's own channel when the environment splits
        it bin by bin (``photo:N2->N2+(v=1)``), else the channel total."""
        key = level_channel(self.reactions[j], kind)
        if key is not None and key in self._level_keys:
            return key
        return f"{kind}:{channel_of(self.reactions[j])}"

    def _temperatures(self, r, temps=None):
        env = self.environment
        Te, Ti, Tn, Tv = temps if temps is not None else (env.Te, env.Ti, env.Tn, env.Tv)
        d = {"Te": Te, "Ti": Ti, "Tn": Tn, "Tv": Tv}
        if r.level is not None:
            d["v"] = float(r.level)
        return d

    def _teff(self, r, Ti, Tn):
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

    def _variables(self, r, expr, temps=None):
        d = self._temperatures(r, temps)
        if "Teff" in expr.variables:
            d["Teff"] = self._teff(r, d["Ti"], d["Tn"])
        return d

    def _prescribed(self, r):
        env = self.environment
        P = env.prescribed[r.id]
        denom = np.ones_like(P)
        for sp, c in r.reactants:
            if sp.name not in env.neutrals:
                raise MechanismError(f"reaction {r.id} is prescribed but its reactant "
                                     f"{sp.name} is not a fixed neutral", file=r.file,
                                     line=r.line)
            denom = denom * env.neutrals[sp.name] ** c
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(denom > 0, P / denom, 0.0)

    def _source_values(self, r, expr, sources):
        out = {}
        if "prescribed" in expr.variables:
            out["prescribed"] = self._prescribed(r)
        for kind in ("photo", "photoelectron"):
            if kind not in expr.variables:
                continue
            key = level_channel(r, kind)
            if key is not None and key in sources:
                # Split bin by bin by the environment (n2plus_levels.level_sources).
                out[kind] = sources[key]
                continue
            ch = channel_of(r)
            if f"{kind}:{ch}" not in sources:
                avail = ", ".join(sorted(k for k in sources if k.startswith(kind)))
                raise MechanismError(f"reaction {r.id}: the environment has no {kind} "
                                     f"channel {ch} (available: {avail or 'none'})",
                                     file=r.file, line=r.line)
            val = sources[f"{kind}:{ch}"]
            ions = [sp for sp, _ in r.products if sp.charge > 0]
            if ions and ions[0].vib is not None:
                val = val * self.level_fractions[ions[0].base][ions[0].vib]
            out[kind] = val
        return out

    def _evaluate_one(self, j, sources, temps=None):
        r, expr = self.reactions[j], self.expressions[j]
        d = self._variables(r, expr, temps)
        d.update(self._source_values(r, expr, sources))
        try:
            k = np.asarray(expr.evaluate(d), float)
        except TableRangeError:
            raise
        except FloatingPointError as exc:  # pragma: no cover - numpy raises only if asked
            raise MechanismError(f"rate of {r.id} cannot be evaluated: {exc}",
                                 file=r.file, line=r.line) from None
        k = np.broadcast_to(k, np.broadcast_shapes(k.shape, d["Tn"].shape)) * self.scale[j]
        bad = ~np.isfinite(k) | (k < 0)
        if bad.any():
            alt = self.environment.altitude_km[np.nonzero(np.atleast_1d(bad).any(
                axis=tuple(range(bad.ndim - 1))))[0][0]] if bad.ndim else float("nan")
            raise MechanismError(f"rate coefficient of {r.id} is negative or not finite "
                                 f"(first at {alt:g} km): check its expression",
                                 file=r.file, line=r.line)
        return k

    # ------------------------------------------------------------ all reactions
    def _evaluate(self, time_s=None, temps=None):
        sources = self.environment.sources(time_s) if self.source_reactions else {}
        with np.errstate(all="ignore"):
            cols = [self._evaluate_one(j, sources, temps) for j in range(len(self.reactions))]
        return self._flush_dark(np.stack(cols, axis=-1))

    def _flush_dark(self, k):
        """Zero the photo and photoelectron rates below :data:`PRODUCTION_FLOOR`."""
        if not self.source_reactions:
            return k
        src = k[..., self.source_reactions]
        k[..., self.source_reactions] = np.where(src * self._absorber < PRODUCTION_FLOOR,
                                                 0.0, src)
        return k

    def __call__(self, time_s=None, temperatures=None):
        """Rate coefficients k, (altitude, reaction); see
        :meth:`ionochem.model.Model.rate_coefficients`."""
        if temperatures is not None:
            env = self.environment
            base = {"Te": env.Te, "Ti": env.Ti, "Tn": env.Tn, "Tv": env.Tv}
            base.update(temperatures)
            return self._evaluate(time_s, temps=(base["Te"], base["Ti"], base["Tn"],
                                                 base["Tv"]))
        if time_s is None or not self.environment.time_dependent \
                or not self.source_reactions:
            return self.static
        k = self.static.copy()
        # The sun's sources are linear between lattice nodes: mix the source reactions'
        # rate coefficients of the nodes (kept per node) instead of every channel of the sun.
        columns = None
        for node, weight in self.environment.source_nodes(time_s):
            part = weight * self._source_columns(node)
            columns = part if columns is None else columns + part
        k[:, self.source_reactions] = columns
        return self._flush_dark(k)

    def _source_columns(self, node):
        """Rate coefficients of the source reactions, (altitude, source reaction), at one
        lattice node of the sun (before the flush of dark rows), kept per node."""
        columns = self._node_columns.get(node)
        if columns is None:
            sources = self.environment.sources(node)
            columns = self._node_columns[node] = self._src_coef * np.stack(
                [sources[key] for key in self._src_keys], -1)
        return columns

    def uncertainty_factors(self):
        """One-sigma multiplicative factors f of every rate, shape (altitude, reaction)."""
        out = np.ones_like(self.static)
        with np.errstate(all="ignore"):
            for j, r in enumerate(self.reactions):
                expr = r.f if r.f is not None else self.default_f
                if expr is None:
                    continue
                val = np.broadcast_to(np.asarray(expr.evaluate(self._variables(r, expr)),
                                                 float), out[:, j].shape)
                if np.any(~np.isfinite(val)) or np.any(val < 1):
                    raise MechanismError(f"uncertainty factor f of {r.id} must be ≥ 1",
                                         file=r.file, line=r.line)
                out[:, j] = val
        return out

    def bands(self):
        """Tabulated (low, high) bands of k where a table rate has them: {index: (A,), (A,)}."""
        out = {}
        sources = self.environment.sources(None) if self.source_reactions else {}
        with np.errstate(all="ignore"):
            for j, (r, expr) in enumerate(zip(self.reactions, self.expressions)):
                if not getattr(expr, "_has_bands", False):
                    continue
                d = self._variables(r, expr)
                d.update(self._source_values(r, expr, sources))
                band = expr.bands(d)
                if band is not None:
                    shape = self.static[:, j].shape
                    out[j] = tuple(np.broadcast_to(b, shape) * self.scale[j] for b in band)
        return out
