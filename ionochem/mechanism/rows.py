"""A mechanism's array methods bound to fixed rows, evaluated with the rows last.

The steady solvers evaluate the tendency, the gross production and loss, and the Jacobian
of the same rows (levels, or sample × level) many times with the same rate coefficients
and fixed densities. :class:`BoundRows` keeps those inputs transposed once — (reactions,
rows) and (given species, rows) — so every gather of a reactant density is a copy of one
contiguous row of length B instead of B scattered elements, and gives the tendency and the
gross rates from one evaluation of the rates and one matrix product. The numbers are those
of :meth:`Mechanism.tendency`, :meth:`Mechanism.solved_production_loss` and
:meth:`Mechanism.jacobian` (to rounding; tests/test_engine.py checks it).
"""

from __future__ import annotations

import numpy as np

from ionochem.mechanism.mechanism import ELECTRON, MAX_REACTANT_SLOTS


def _tables(m, R):
    """The mechanism's arrays as :class:`BoundRows` uses them (they do not depend on the
    rows)."""
    t = {"R": R, "S": len(m.solved), "A": len(m.algebraic), "E": m.E,
         "n_given": m._n_given, "electron_row": None}
    if m.electrons == "table" and t["A"]:
        t["electron_row"] = (m.given.index(ELECTRON), m.species_info[m.balance_ion].charge)
    pos, neg = m._solved_gross_matrices()                           # (R, S) each
    # One product gives the tendency, the production and the loss: (R, 3S).
    t["out"] = np.ascontiguousarray(np.concatenate([m.nu.T, pos, neg], axis=1))
    t["nu_t"] = np.ascontiguousarray(m.nu.T)                         # (R, S)
    t["gross_out"] = np.ascontiguousarray(np.concatenate([pos, neg], axis=1))
    # Rates: the last reactant slot holds a density only for three-body reactions; the
    # others multiply by the constant 1 (exact), so that slot is applied to those alone.
    t["slots_main"] = np.ascontiguousarray(m.slots[:, :-1].T).ravel()   # (2R,)
    t["third"] = np.nonzero(m.slots[:, -1] != m._one)[0]
    t["third_slot"] = m.slots[t["third"], -1]
    # Jacobian: ∂r/∂n_slot(m) = k × the other two slots, needed only for the columns
    # (m, r) of the kernel with a nonzero (a reactant that is a solved or algebraic
    # species; about a third of them for the default list).
    assert MAX_REACTANT_SLOTS == 3
    GT = m.jacobian_kernel()
    used = np.unique(GT.indices)
    mslot, t["jac_r"] = np.divmod(used, R)
    others = np.array([[1, 2], [0, 2], [0, 1]])[mslot]
    t["jac_o1"] = m.slots[t["jac_r"], others[:, 0]]
    t["jac_o2"] = m.slots[t["jac_r"], others[:, 1]]
    t["jac_GT"] = GT[:, used]
    return t


class BoundRows:
    """Tendency, gross rates and Jacobian of ``mechanism`` on the rows of ``k``/``given``.

    Every method takes the solved densities ``n`` (b, S) of the rows ``rows`` (sorted,
    unique indices into the B bound rows; all B of them needs no copy of the inputs).
    """

    def __init__(self, mechanism, k, given):
        m = mechanism
        self.B = k.shape[0]
        self.k_t = np.ascontiguousarray(k.T, dtype=float)            # (R, B)
        self.given_t = np.ascontiguousarray(given.T, dtype=float)    # (G, B)
        # The tables that depend only on the mechanism are built once and kept on it.
        tables = m.__dict__.get("_bound_rows_tables")
        if tables is None or tables["R"] != k.shape[1]:
            tables = m._bound_rows_tables = _tables(m, k.shape[1])
        self.__dict__.update(tables)

    def _inputs(self, rows):
        if rows.size == self.B:
            return self.k_t, self.given_t
        return np.take(self.k_t, rows, axis=1), np.take(self.given_t, rows, axis=1)

    def _densities(self, n, given_t):
        """All densities with rows last, (N_all + 1, b), the last row the constant 1."""
        S, A = self.S, self.A
        dens = self.E @ n.T
        if self.electron_row is not None:
            e, qb = self.electron_row
            dens[S] += given_t[e] / qb
        dens[S + A:S + A + self.n_given] = given_t
        dens[-1] = 1.0
        return dens

    def _rates(self, n, rows):
        """Reaction rates (R, b), cm-3 s-1: k times the densities of the reactant slots,
        multiplied in slot order (the numbers of :meth:`Mechanism.rates`)."""
        k_t, given_t = self._inputs(rows)
        dens = self._densities(n, given_t)
        vals = np.take(dens, self.slots_main, axis=0).reshape(2, self.R, -1)
        r = k_t * vals[0]
        r *= vals[1]
        if self.third.size:
            r[self.third] *= dens[self.third_slot]
        return r

    def both(self, n, rows):
        """Tendency and gross production and loss of the solved species, each (b, S)."""
        out = self._rates(n, rows).T @ self.out
        S = self.S
        return out[:, :S], out[:, S:2 * S], out[:, 2 * S:]

    def tendency(self, n, rows):
        return self._rates(n, rows).T @ self.nu_t

    def gross(self, n, rows):
        out = self._rates(n, rows).T @ self.gross_out
        return out[:, :self.S], out[:, self.S:]

    def jacobian(self, n, rows):
        """J[b, i, j] = ∂f_i/∂n_j, (b, S, S) (as :meth:`Mechanism.jacobian`)."""
        k_t, given_t = self._inputs(rows)
        dens = self._densities(n, given_t)
        b = dens.shape[1]
        partial = np.take(k_t, self.jac_r, axis=0)
        partial *= np.take(dens, self.jac_o1, axis=0)
        partial *= np.take(dens, self.jac_o2, axis=0)
        # (S², b) from the sparse product, returned as a (b, S, S) view without a copy: the
        # batched LU copies each block into its own work array anyway (measured 0.12 ms
        # saved per call at 1,000 rows).
        out = self.jac_GT @ partial
        return out.T.reshape(b, self.S, self.S)
