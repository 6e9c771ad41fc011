"""The column system: processes summed on one state, and its one path to every solution.

:class:`ColumnSystem` holds the unknowns of each altitude row and the processes
(:mod:`ionochem.system.process`) that change them. It assembles

- the tendency and the gross production and loss (sums over the processes);
- the Jacobian: the row processes' dense blocks, plus the coupling processes' sparse
  matrices (constant, or refilled at each state for a nonlinear coupling), in one sparse
  CSC matrix whose structure is built once per system
  (:class:`ionochem.solve.column.ColumnJacobian`; each call only fills values);

and hands them to the solvers, which know nothing of the physics:

- :meth:`ColumnSystem.steady`: without a coupling process the rows are independent and
  Newton runs on all of them at once with batched dense LU (:mod:`ionochem.solve.steady`);
  with one, Newton runs on the whole column's sparse Jacobian (:mod:`ionochem.solve.column`)
  from the rows' own steady state. Same convergence rule, positivity and failure messages;
- :meth:`ColumnSystem.integrate`: ``scipy.integrate.solve_ivp`` (BDF or Radau) with the
  assembled sparse Jacobian (:mod:`ionochem.solve.transient`), processes evaluated at each
  time (:meth:`Process.at`: the sun moves).

The row-by-row path is the whole-column path with a block-diagonal matrix, factorised block
by block because that is faster (measured: benchmarks/bench_perf.py, issue 13); the answers
are the same solution of the same equations.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from ionochem.errors import SolverError
from ionochem.solve.column import ColumnJacobian, block_diagonal, solve_column
from ionochem.solve.steady import solve_steady

#: Relative residual of the rows' own steady state that starts the coupled Newton (a start,
#: not an answer; the column Newton then reaches the requested tolerance).
ROW_START_RTOL = 1e-6


class _RowSum:
    """The row processes of a system as one set of rows-first callables for
    :func:`solve_steady` (which wraps them rows last in its ``RowsCallables``)."""

    def __init__(self, processes):
        self.processes = processes

    def tendency(self, n, rows):
        return sum(p.tendency(n, rows) for p in self.processes)

    def gross(self, n, rows):
        parts = [p.gross(n, rows) for p in self.processes]
        return sum(P for P, _ in parts), sum(L for _, L in parts)

    def both(self, n, rows):
        parts = [p.tendency_gross(n, rows) for p in self.processes]
        return tuple(sum(part[i] for part in parts) for i in range(3))

    def jacobian(self, n, rows):
        return sum(p.blocks(n, rows) for p in self.processes)



def _kernel(rows):
    """The rows-last kernel Newton uses: the chemistry's own (BoundRows) when it has one,
    else None (solve_steady then wraps the callables)."""
    return rows if hasattr(rows, "both_t") else None


class ColumnSystem:
    """Processes acting on the unknowns of ``n_rows`` altitude rows.

    Parameters
    ----------
    unknowns : sequence of str
        Names of the U unknowns of a row, the column order of the state (species names).
    n_rows : int
        B, the rows of the state (C stacked columns of ``n_rows / C`` rows each).
    processes : sequence of Process
        Row processes (at least one: the chemistry) and coupling processes.
    n_columns : int
        C, columns stacked in the state (an ensemble's samples); 1 for one column.
    row_labels : sequence of str, optional
        Label of each row for error messages (altitudes).
    """

    def __init__(self, unknowns, n_rows, processes, *, n_columns=1, row_labels=None):
        self.unknowns = list(unknowns)
        self.n_rows = int(n_rows)
        self.n_columns = int(n_columns)
        self.processes = list(processes)
        self.row_labels = row_labels
        self.row_processes = [p for p in self.processes if not p.couples_rows]
        self.coupling_processes = [p for p in self.processes if p.couples_rows]
        if not self.row_processes:
            raise ValueError("a column system needs at least one row process (chemistry)")
        self._all = np.arange(self.n_rows)
        self._assembler = None

    @property
    def coupled(self) -> bool:
        """True when a process links rows (the steady solve is then column-wide)."""
        return bool(self.coupling_processes)

    def at(self, time_s):
        """The same system with every process at ``time_s`` (s after the scenario's time)."""
        new = object.__new__(ColumnSystem)
        new.__dict__.update(self.__dict__)
        new.processes = [p.at(time_s) for p in self.processes]
        new.row_processes = [p for p in new.processes if not p.couples_rows]
        new.coupling_processes = [p for p in new.processes if p.couples_rows]
        return new

    # ------------------------------------------------------------ assembly
    def _rows(self):
        """The row processes as one kernel: the process itself when there is one."""
        if len(self.row_processes) == 1 and hasattr(self.row_processes[0], "bound"):
            return self.row_processes[0].bound
        return _RowSum(self.row_processes)

    def tendency(self, n):
        """d(state)/dt of every row, (B, U)."""
        n = np.asarray(n, float)
        f = self._rows().tendency(n, self._all)
        for p in self.coupling_processes:
            f = f + p.tendency(n, self._all)
        return f

    def evaluate(self, n):
        """d(state)/dt of every row as reported (:meth:`Process.evaluate` summed), (B, U)."""
        n = np.asarray(n, float)
        return sum(p.evaluate(n) for p in self.processes)

    def gross(self, n):
        """Gross (production, loss) of every row, each (B, U), all processes."""
        n = np.asarray(n, float)
        P, L = self._rows().gross(n, self._all)
        for p in self.coupling_processes:
            Pc, Lc = p.gross(n, self._all)
            P, L = P + Pc, L + Lc
        return P, L

    def row_jacobian(self, n):
        """The Jacobian's blocks within each row, (B, U, U), coupling processes' own-row
        entries included (the whole matrix is :meth:`jacobian`)."""
        n = np.asarray(n, float)
        J = np.array(self._rows().jacobian(n, self._all))
        U = len(self.unknowns)
        for p in self.coupling_processes:
            C = self._coupling_of(p, n).tocsr()
            d = C.diagonal().reshape(self.n_rows, U)
            J[:, np.arange(U), np.arange(U)] += d
            if U > 1:
                # Entries linking two unknowns of one row (a nonlinear coupling may have
                # them: conduction's dependence on a density).
                coo = C.tocoo()
                same = (coo.row // U == coo.col // U) & (coo.row != coo.col)
                np.add.at(J, (coo.row[same] // U, coo.row[same] % U, coo.col[same] % U),
                          coo.data[same])
        return J

    @property
    def constant_coupling(self) -> bool:
        """True when every coupling process's Jacobian is constant (or there is none)."""
        return all(p.constant_coupling for p in self.coupling_processes)

    def _coupling_of(self, p, n):
        """Process ``p``'s coupling Jacobian at the state ``n``."""
        if p.constant_coupling:
            return p.coupling(self.n_columns)
        return p.coupling(self.n_columns, n)

    def coupling(self, n=None):
        """Sum of the coupling processes' sparse Jacobians at the state ``n`` (their
        structure when ``n`` is None and one is nonlinear), or None without any."""
        if n is None:
            mats = [p.coupling(self.n_columns) for p in self.coupling_processes]
        else:
            mats = [self._coupling_of(p, np.asarray(n, float)) for p in self.coupling_processes]
        return sum(mats[1:], mats[0]) if mats else None

    def jacobian(self, n):
        """The whole Jacobian, scipy.sparse CSC (B·U, B·U); its structure is built once."""
        n = np.asarray(n, float)
        blocks = self._rows().jacobian(n, self._all)
        if not self.coupled:
            return block_diagonal(np.asarray(blocks))
        if self._assembler is None:
            self._assembler = self._kept_assembler()
        if self.constant_coupling:
            return self._assembler(blocks)
        return self._assembler(blocks, self.coupling(n))

    def _kept_assembler(self):
        """The CSC structure of the whole Jacobian, kept by the coupling process when there
        is one (its structure does not change): every system that shares it — a model and
        its changed copies on the same environment — builds the structure once."""
        key = (self.n_rows, len(self.unknowns), self.n_columns)
        store = None
        if len(self.coupling_processes) == 1:
            store = self.coupling_processes[0].kept_structures()
            if key in store:
                return store[key]
        if self.constant_coupling:
            structure = self.coupling()
        else:
            # Ones where any process may have an entry: no sum cancels an entry away.
            parts = [sp.coo_matrix(p.coupling(self.n_columns))
                     for p in self.coupling_processes]
            structure = sum(sp.coo_matrix((np.ones(c.nnz), (c.row, c.col)), shape=c.shape)
                            for c in parts)
        assembler = ColumnJacobian(self.n_rows, len(self.unknowns), structure)
        if store is not None:
            store[key] = assembler
        return assembler

    # ------------------------------------------------------------ solutions
    def steady(self, *, rtol, n0=None, atol=1e-30, linear=None, stats=None):
        """Steady state of the system → ``SteadyResult`` (n shaped (B, U)).

        ``n0`` (B, U), when given, is a warm start near the solution (the nominal column of
        an ensemble). ``linear`` and ``stats`` are those of
        :func:`ionochem.solve.column.solve_column` (coupled systems only).
        """
        rows = self._rows()
        if not self.coupled:
            start = np.zeros((self.n_rows, len(self.unknowns))) if n0 is None else n0
            return solve_steady(start, rows.tendency, rows.jacobian, rows.gross, rtol=rtol,
                                atol=atol, row_labels=self.row_labels,
                                species_names=self.unknowns, both=rows.both,
                                kernel=_kernel(rows), warm=n0 is not None)
        if self.n_rows % self.coupling_processes[0].rows_per_column:
            raise ValueError("the rows are not a whole number of columns")
        if n0 is not None:
            start = np.asarray(n0, float)
        else:
            try:
                start = solve_steady(np.zeros((self.n_rows, len(self.unknowns))),
                                     rows.tendency, rows.jacobian, rows.gross,
                                     rtol=max(rtol, ROW_START_RTOL), kernel=_kernel(rows)).n
            except SolverError:
                start = np.zeros((self.n_rows, len(self.unknowns)))
        return solve_column(start, self.tendency, self.jacobian, self.gross, rtol=rtol,
                            atol=atol, row_labels=self.row_labels, linear=linear,
                            stats=stats)

    def integrate(self, times_s, n0, *, method="BDF", rtol=1e-8, atol=1e-6):
        """The state at ``times_s`` (s after the scenario's time) from ``n0`` at t = 0,
        processes evaluated at each time → ndarray (T, B, U)."""
        # Lazy: scipy.integrate (with scipy.optimize) costs ~0.2 s at start-up, and steady
        # runs never need it (tests/test_cli_imports.py).
        from ionochem.solve.transient import integrate as integrate_ivp

        def tendency(t, n):
            return self.at(t).evaluate(n)

        def jacobian(t, n):
            return self.at(t).jacobian(n)

        return integrate_ivp(np.asarray(times_s, float), np.asarray(n0, float), tendency,
                             jacobian, method=method, rtol=rtol, atol=atol)
