"""The compiled mechanism: species roles, stoichiometry, tendency and analytic Jacobian.

A :class:`Mechanism` turns a parsed reaction list into arrays: which species are solved,
which are fixed (taken from the neutral source), which are algebraic (electrons from charge
neutrality, or the balance ion when the electron density is given), the net stoichiometry
of every reaction, and the reactant slots of every rate law. With those, the tendency
``f = ν · r(n)`` and its Jacobian are a handful of vectorised numpy operations over any
number of columns (altitude rows, possibly the rows of many samples stacked).

It knows nothing of the atmosphere: rate coefficients and fixed densities come in as arrays.

Shapes: ``B`` columns (altitude rows, or sample × altitude flattened), ``S`` solved
species, ``R`` reactions, ``F`` fixed species.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ionochem.errors import MechanismError
from ionochem.mechanism.rows import ELECTRON, MAX_REACTANT_SLOTS, BoundRows

THIRD_BODY = "M"


@dataclass(frozen=True)
class DerivedTotal:
    """A species reported as the sum of others (a family's total, or ``X(total)``)."""

    name: str
    members: tuple[str, ...]


class Mechanism:
    """Stoichiometry and rate-law structure of a reaction list.

    Parameters
    ----------
    reaction_list : ReactionList
        The parsed list (``ionochem.mechanism.parser``).
    fixed : iterable of str
        Species whose densities come from the environment (the neutral source). Species of
        the list that are in ``fixed`` become fixed; ``e`` and ``M`` are handled apart.
    electrons : {"neutrality", "table"}
        ``"neutrality"``: the electron density is the charge-weighted sum of the solved
        ions. ``"table"``: the electron density is given (a fixed profile) and
        ``balance_ion`` is Ne minus the other ions.
    balance_ion : str
        Ion made algebraic in ``electrons="table"`` mode.
    """

    def __init__(self, reaction_list, fixed=(), *, electrons: str = "neutrality",
                 balance_ion: str = "O+"):
        if electrons not in ("neutrality", "table"):
            raise MechanismError(f"unknown electron mode {electrons!r}")
        self.reaction_list = reaction_list
        self.reactions = list(reaction_list.reactions)
        self.reaction_ids = [r.id for r in self.reactions]
        self.electrons = electrons
        self.balance_ion = balance_ion if electrons == "table" else None

        species = {}
        for r in self.reactions:
            for sp, _ in (*r.reactants, *r.products):
                species.setdefault(sp.name, sp)
        self.species_info = species
        fixed = set(fixed)
        uses_m = THIRD_BODY in species
        self.fixed = [s for s in species if s in fixed and s not in (ELECTRON, THIRD_BODY)]
        algebraic = []
        if ELECTRON in species or any(sp.charge for sp in species.values()):
            if electrons == "neutrality":
                algebraic.append(ELECTRON)
            else:
                if balance_ion not in species:
                    raise MechanismError(
                        f"balance ion {balance_ion!r} does not appear in the reaction list")
                if species[balance_ion].charge == 0:
                    raise MechanismError(f"balance ion {balance_ion!r} is not charged")
                algebraic.append(balance_ion)
        self.algebraic = algebraic
        excluded = set(self.fixed) | set(algebraic) | {THIRD_BODY}
        if electrons == "table":
            excluded.add(ELECTRON)
        self.solved = [s for s in species if s not in excluded]
        self.given = list(self.fixed)
        if electrons == "table":
            self.given.append(ELECTRON)
        if uses_m:
            self.given.append(THIRD_BODY)
        # Column order of the full density vector: solved, algebraic, given, then a constant 1
        # used to pad reaction slots.
        self.all_species = self.solved + self.algebraic + self.given
        self._index = {s: i for i, s in enumerate(self.all_species)}
        n_all = len(self.all_species)
        self._one = n_all
        S, R = len(self.solved), len(self.reactions)

        self._charges = np.array([species[s].charge if s in species else -1
                                  for s in self.all_species], dtype=float)
        # Net stoichiometry of solved species (S, R); gross production and loss (S, R).
        nu_all = np.zeros((n_all, R))
        slots = np.full((R, MAX_REACTANT_SLOTS), self._one, dtype=np.intp)
        for j, r in enumerate(self.reactions):
            k = 0
            for sp, count in r.reactants:
                nu_all[self._index[sp.name], j] -= count
                for _ in range(count):
                    if k >= MAX_REACTANT_SLOTS:
                        raise MechanismError(
                            f"reaction {r.id} has more than {MAX_REACTANT_SLOTS} reactants",
                            file=r.file, line=r.line)
                    slots[j, k] = self._index[sp.name]
                    k += 1
            for sp, count in r.products:
                nu_all[self._index[sp.name], j] += count
        self.nu_all = nu_all
        self.nu = nu_all[:S].copy()
        self.slots = slots
        self.molecularity = (slots != self._one).sum(axis=1)

        # Affine map from solved densities to all densities: n_all = E @ n + c(given).
        # E is (N_all, S): identity for solved, charge weights for the algebraic species.
        E = np.zeros((n_all + 1, S))
        E[:S, :S] = np.eye(S)
        q = self._charges[:S]
        if electrons == "neutrality" and algebraic:
            E[S, :] = q                              # Ne = sum_i q_i n_i
        elif electrons == "table":
            qb = species[balance_ion].charge
            E[S, :] = -q / qb                        # n_b = (Ne - sum_i q_i n_i) / q_b
        self.E = E
        self._n_given = len(self.given)
        # Jacobian kernel: J[b, i, j] = Σ_m Σ_r ∂r_r/∂n_slot(m) · ν[i, r] · E[slot(m, r), j],
        # stored as G[(m, r), (i, j)] so the Jacobian of every altitude row is one matrix product.
        G = np.zeros((MAX_REACTANT_SLOTS, R, S, S))
        for m in range(MAX_REACTANT_SLOTS):
            G[m] = self.nu.T[:, :, None] * E[slots[:, m]][:, None, :]
        self._G = G.reshape(MAX_REACTANT_SLOTS * R, S * S)

        self.derived = self._derived_totals()

    # ------------------------------------------------------------------ structure
    def index(self, name: str) -> int:
        """Column of ``name`` in the full density vector."""
        return self._index[name]

    def role(self, name: str) -> str:
        if name in self.solved:
            return "solved"
        if name == ELECTRON:
            return "electron"
        if name in self.algebraic:
            return "balance"
        if name == THIRD_BODY:
            return "third_body"
        return "fixed"

    def structural_problems(self):
        """Solved species that are produced but never lost, as ``(name, reaction)`` pairs.

        The reaction is the first one producing the species (for its file and line).
        """
        problems = []
        for i, name in enumerate(self.solved):
            produced = np.nonzero(self.nu[i] > 0)[0]
            lost = np.any(self.nu[i] < 0)
            if produced.size and not lost:
                problems.append((name, self.reactions[produced[0]]))
        return problems

    def never_made(self):
        """Solved species that are consumed but never produced, as ``(name, reaction)``
        pairs (the first reaction consuming it). At any steady state their density is zero,
        so every reaction needing them is silently off: a reactant the neutral source was
        meant to supply (O3, say) and does not."""
        problems = []
        for i, name in enumerate(self.solved):
            lost = np.nonzero(self.nu[i] < 0)[0]
            if lost.size and not np.any(self.nu[i] > 0):
                problems.append((name, self.reactions[lost[0]]))
        return problems

    def _derived_totals(self):
        """Family totals under the bare name and ``X(total)`` for state groups."""
        present = [s for s in self.all_species if s not in (THIRD_BODY,)]
        totals = []
        by_base = {}
        for s in present:
            sp = self.species_info[s]
            if sp.vib is not None:
                by_base.setdefault(sp.base, []).append(s)
        for base, members in by_base.items():
            if base in self.species_info:
                raise MechanismError(
                    f"species {base} appears both unresolved and as vibrational levels "
                    f"({', '.join(members)}); use one or the other")
            totals.append(DerivedTotal(base, tuple(members)))
        # Electronic-state groups: same elements and charge, different state, not fixed.
        groups = {}
        for s in present:
            sp = self.species_info[s]
            if s in self.fixed or s == ELECTRON:
                continue
            groups.setdefault((sp.elements, sp.charge), []).append(s)
        for members in groups.values():
            states = {self.species_info[m].electronic for m in members}
            if len(members) > 1 and len(states) > 1:
                ground = min(members, key=lambda m: (self.species_info[m].electronic is not None,
                                                      len(m)))
                name = f"{self.species_info[ground].base.split('(')[0]}(total)"
                totals.append(DerivedTotal(name, tuple(members)))
        return totals

    # ------------------------------------------------------------------ arrays
    def full_densities(self, n, given):
        """All densities, shape (B, N_all + 1), the last column the constant 1.

        Parameters
        ----------
        n : ndarray (B, S)
            Solved densities, cm-3.
        given : ndarray (B, G)
            Densities of the ``given`` species (fixed neutrals, given electrons, M), cm-3.
        """
        B = n.shape[0]
        out = n @ self.E.T
        S, A = len(self.solved), len(self.algebraic)
        if self.electrons == "table" and A:
            qb = self.species_info[self.balance_ion].charge
            out[:, S] += given[:, self.given.index(ELECTRON)] / qb
        out[:, S + A:S + A + self._n_given] = given
        out[:, -1] = 1.0
        assert out.shape == (B, len(self.all_species) + 1)
        return out

    def rates(self, k, n_all):
        """Reaction rates r_j = k_j Π n_reactants, cm-3 s-1, shape (B, R)."""
        r = k.copy()
        for m in range(MAX_REACTANT_SLOTS):
            r *= np.take(n_all, self.slots[:, m], axis=1)  # faster than fancy indexing
        return r

    def tendency(self, n, k, given):
        """dn/dt of the solved species, cm-3 s-1, shape (B, S)."""
        return self.rates(k, self.full_densities(n, given)) @ self.nu.T

    def production_loss(self, n, k, given):
        """Gross production and loss of every species, each (B, N_all), cm-3 s-1."""
        return self.gross_rates(self.rates(k, self.full_densities(n, given)))

    def gross_rates(self, r):
        """Gross production and loss of every species from the reaction rates ``r``
        (B, R), each (B, N_all), cm-3 s-1 (:meth:`production_loss` when the rates are at
        hand)."""
        cached = self.__dict__.get("_gross_all")
        if cached is None:
            cached = self._gross_all = (np.clip(self.nu_all, 0, None).T.copy(),
                                        np.clip(-self.nu_all, 0, None).T.copy())
        return r @ cached[0], r @ cached[1]

    def tendency_production_loss(self, n, k, given):
        """:meth:`tendency` and the solved species' columns of :meth:`production_loss` from
        one evaluation of the rates (the same numbers as the two calls), each (B, S)."""
        r = self.rates(k, self.full_densities(n, given))
        pos, neg = self._solved_gross_matrices()
        return r @ self.nu.T, r @ pos, r @ neg

    def solved_production_loss(self, n, k, given):
        """The solved species' columns of :meth:`production_loss`, each (B, S)."""
        r = self.rates(k, self.full_densities(n, given))
        pos, neg = self._solved_gross_matrices()
        return r @ pos, r @ neg

    def _solved_gross_matrices(self):
        """Positive and negative parts of the solved rows of ν, transposed (R, S); cached."""
        cached = self.__dict__.get("_solved_gross")
        if cached is None:
            S = len(self.solved)
            cached = self._solved_gross = (np.clip(self.nu_all[:S], 0, None).T.copy(),
                                           np.clip(-self.nu_all[:S], 0, None).T.copy())
        return cached

    def jacobian(self, n, k, given):
        """Analytic Jacobian J[b, i, j] = ∂f_i/∂n_j of the solved species, (B, S, S).

        The algebraic species (electrons by neutrality, or the balance ion) are carried
        through their affine dependence on the solved densities.
        """
        # Built with rows last by the steady solvers' evaluation (mechanism/rows.py).
        n = np.asarray(n, float)
        J = BoundRows(self, np.asarray(k, float), np.asarray(given, float)).jacobian(
            n, np.arange(n.shape[0]))
        return np.ascontiguousarray(J)

    def jacobian_kernel(self):
        """The Jacobian kernel G transposed, (S², 3R), as a sparse matrix; cached."""
        # G is sparse (a few nonzeros per reaction): a sparse product is ~10x faster than
        # the dense one for hundreds of rows (measured: 1,000 rows of the default list,
        # 309 x 144 with 520 nonzeros, 1.0 ms against 7-16 ms).
        GT = self.__dict__.get("_GT_sparse")
        if GT is None:
            import scipy.sparse
            GT = self._GT_sparse = scipy.sparse.csr_array(self._G.T)
        return GT

    def rate_sensitivity_columns(self, n, k, given):
        """∂f/∂ln k_j = ν_j r_j for every reaction, shape (B, S, R)."""
        r = self.rates(k, self.full_densities(n, given))
        return self.nu[None, :, :] * r[:, None, :]
