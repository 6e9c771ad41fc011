"""A mechanism's array methods bound to fixed rows, evaluated with the rows last.

The steady solvers evaluate the tendency, the gross production and loss, and the Jacobian
of the same rows (levels, or sample × level) many times with the same rate coefficients
and fixed densities. :class:`BoundRows` folds what does not change into one array when it
is bound: each reaction's rate coefficient times the densities of its fixed reactants
(neutrals, third bodies, given electrons), kept rows last (reactions, rows) — so a rate is
that coefficient times the densities of its solved or electron reactants alone (one
density for an ion–neutral reaction, two for a recombination, none for a photoionization)
and a Jacobian partial ∂r/∂n the coefficient times the other such densities (a constant for
most reactions). Every gather then copies whole rows of length B, and the tendency and the
gross rates come from one sparse matrix product. The numbers are those of
:meth:`Mechanism.tendency`, :meth:`Mechanism.solved_production_loss` and
:meth:`Mechanism.jacobian` to rounding (the factors are multiplied in another order;
tests/test_engine.py checks it against hand-written equations).

This module sits below :mod:`ionochem.mechanism.mechanism` (which imports it, never the
other way round): it reads a Mechanism's public arrays by attribute.
"""

from __future__ import annotations

import numpy as np

#: Most reactants a reaction may have (three-body reactions); the Mechanism refuses more.
MAX_REACTANT_SLOTS = 3
#: Name of the electron in a Mechanism's species lists.
ELECTRON = "e"


def _tables(m, R):
    """The mechanism's arrays as :class:`BoundRows` uses them (they do not depend on the
    rows)."""
    S, A = len(m.solved), len(m.algebraic)
    variable = S + A                        # densities below this index depend on n
    t = {"R": R, "S": S, "A": A, "E_alg": np.ascontiguousarray(m.E[S:variable]),
         "electron_row": None}
    if m.electrons == "table" and A:
        t["electron_row"] = (m.given.index(ELECTRON), m.species_info[m.balance_ion].charge)
    slots = m.slots                                                # (R, 3) density indices
    is_var = slots < variable
    # Reactions ordered by their number of variable reactants, most first, so that the
    # k-th factor applies to a leading block of the (folded) coefficients.
    nvar = is_var.sum(axis=1)
    order = np.argsort(-nvar, kind="stable")
    t["order"] = order
    t["var_counts"] = [int((nvar >= c).sum()) for c in range(1, MAX_REACTANT_SLOTS + 1)]
    # Each reaction's variable reactants first (the padding, never read, past them).
    var_sorted = np.sort(np.where(is_var, slots, variable), axis=1)[order]
    t["var_slots"] = [var_sorted[:t["var_counts"][c], c] for c in range(MAX_REACTANT_SLOTS)]
    # Fixed reactants (given species; the constant 1 is left out): per slot, the position
    # of the reaction in that order and the given row to multiply by.
    inverse = np.empty(R, np.intp)
    inverse[order] = np.arange(R)
    n_given = m._n_given
    fixed = []
    for c in range(MAX_REACTANT_SLOTS):
        r = np.nonzero((slots[:, c] >= variable) & (slots[:, c] < variable + n_given))[0]
        fixed.append((inverse[r], slots[r, c] - variable))
    t["fixed"] = fixed
    pos, neg = m._solved_gross_matrices()                           # (R, S) each
    # One product gives the tendency, the production and the loss: (3S, R) @ rates (R, b),
    # the columns in the reactions' order above. Sparse (each reaction touches a few
    # species): 2.5x faster than the dense product at 200 rows, measured. Each output is
    # the same sum, in the same order, in the three matrices, so the tendency and gross
    # rates equal those of ``out`` bitwise.
    stacked = np.concatenate([m.nu, pos.T, neg.T], axis=0)[:, order]
    # Lazy: `ionochem check` builds a Mechanism but never binds rows, and must start
    # without scipy (tests/test_cli_imports.py).
    import scipy.sparse as sp
    t["out"] = sp.csr_matrix(stacked)
    t["nu"] = sp.csr_matrix(stacked[:S])
    t["gross_out"] = sp.csr_matrix(stacked[S:])
    # Jacobian: ∂r/∂n_slot(c) = folded coefficient × the other variable reactants,
    # needed only for the columns (c, r) of the kernel with a nonzero (a reactant that is a
    # solved or algebraic species), ordered by their number of other variable reactants.
    GT = m.jacobian_kernel()
    used = np.unique(GT.indices)
    cslot, jr = np.divmod(used, R)
    assert MAX_REACTANT_SLOTS == 3
    others = slots[jr][:, [[1, 2], [0, 2], [0, 1]]][np.arange(jr.size), cslot]   # (u, 2)
    others = np.sort(np.where(others < variable, others, variable), axis=1)
    n_other = (others < variable).sum(axis=1)
    jorder = np.argsort(-n_other, kind="stable")
    t["jac_r"] = inverse[jr[jorder]]
    t["jac_counts"] = [int((n_other >= c).sum()) for c in (1, 2)]
    t["jac_slots"] = [others[jorder][:t["jac_counts"][c], c] for c in (0, 1)]
    t["jac_GT"] = GT[:, used[jorder]]
    return t


class BoundRows:
    """Tendency, gross rates and Jacobian of ``mechanism`` on the rows of ``k``/``given``.

    The methods ending in ``_t`` take the solved densities rows last, (S, b), and return
    (S, b); the others take and return (b, S). ``rows`` are sorted, unique indices into the
    B bound rows (all B of them needs no copy of the inputs).
    """

    def __init__(self, mechanism, k, given):
        m = mechanism
        self.B = k.shape[0]
        # The tables that depend only on the mechanism are built once and kept on it.
        tables = m.__dict__.get("_bound_rows_tables")
        if tables is None or tables["R"] != k.shape[1]:
            tables = m._bound_rows_tables = _tables(m, k.shape[1])
        self.__dict__.update(tables)
        given_t = np.asarray(given, dtype=float).T
        # Rate coefficients folded with the fixed reactants' densities, (R, B).
        folded = np.asarray(k, dtype=float).T[self.order]
        for where, row in self.fixed:
            folded[where] *= given_t[row]
        self.folded = folded
        self.alg_given = None
        if self.electron_row is not None:
            e, qb = self.electron_row
            self.alg_given = given_t[e][None, :] / qb                  # (1, B)

    def _variable(self, n_t, rows):
        """The folded coefficients of ``rows`` and the densities that depend on n:
        solved, then algebraic, (S + A, b)."""
        folded = self.folded if rows.size == self.B else np.take(self.folded, rows, axis=1)
        S, A = self.S, self.A
        if not A:
            return folded, n_t
        dens = np.empty((S + A, n_t.shape[1]))
        dens[:S] = n_t
        np.matmul(self.E_alg, n_t, out=dens[S:])
        if self.alg_given is not None:
            dens[S:] += self.alg_given if rows.size == self.B else self.alg_given[:, rows]
        return folded, dens

    def _rates(self, n_t, rows):
        """Reaction rates (R, b) in the reactions' order of the tables, cm-3 s-1."""
        folded, dens = self._variable(n_t, rows)
        (c1, c2, c3), (s1, s2, s3) = self.var_counts, self.var_slots
        r = np.empty(folded.shape)
        np.multiply(folded[:c1], np.take(dens, s1, axis=0), out=r[:c1])
        r[c1:] = folded[c1:]                      # no variable reactant (photo-ionisation)
        if c2:
            r[:c2] *= np.take(dens, s2, axis=0)
        if c3:
            r[:c3] *= np.take(dens, s3, axis=0)
        return r

    # Rows last: densities ``n_t`` (S, b), results (S, b) — the steady Newton's layout.

    def both_t(self, n_t, rows):
        """Tendency and gross production and loss of the solved species, each (S, b)."""
        out = self.out @ self._rates(n_t, rows)
        S = self.S
        return out[:S], out[S:2 * S], out[2 * S:]

    def gross_t(self, n_t, rows):
        out = self.gross_out @ self._rates(n_t, rows)
        return out[:self.S], out[self.S:]

    def jacobian_t(self, n_t, rows):
        """J[b, i, j] = ∂f_i/∂n_j, (b, S, S) (as :meth:`Mechanism.jacobian`)."""
        folded, dens = self._variable(n_t, rows)
        partial = np.take(folded, self.jac_r, axis=0)
        for count, slot in zip(self.jac_counts, self.jac_slots):
            if count:
                partial[:count] *= np.take(dens, slot, axis=0)
        # (S², b) from the sparse product, returned as a (b, S, S) view without a copy: the
        # batched LU copies each block into its own work array anyway (measured 0.12 ms
        # saved per call at 1,000 rows).
        out = self.jac_GT @ partial
        return out.T.reshape(-1, self.S, self.S)

    # Rows first: densities ``n`` (b, S), results (b, S) — the column solvers' layout.

    def both(self, n, rows):
        """Tendency and gross production and loss of the solved species, each (b, S)."""
        f, P, L = self.both_t(n.T, rows)
        return f.T, P.T, L.T

    def tendency(self, n, rows):
        return (self.nu @ self._rates(n.T, rows)).T

    def gross(self, n, rows):
        P, L = self.gross_t(n.T, rows)
        return P.T, L.T

    def jacobian(self, n, rows):
        """J[b, i, j] = ∂f_i/∂n_j, (b, S, S) (as :meth:`Mechanism.jacobian`)."""
        return self.jacobian_t(n.T, rows)
