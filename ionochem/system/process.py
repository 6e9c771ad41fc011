"""What a process of the column system provides.

A process is one physical mechanism that changes the column's state: the chemistry of a
reaction list, the transport of an ion along the field, (next) the electrons' heating,
cooling and conduction. The state is an array ``n`` shaped (B, U): B altitude rows (several
columns stacked row-major when an ensemble solves samples together), U unknowns per row
(the solved species' densities, then any temperatures).

A process is either

- a **row process**: its tendency at a row depends only on that row's unknowns. It may be
  evaluated on a subset of rows (the steady Newton drops converged rows), and its Jacobian
  is one dense (U, U) block per row; or
- a **coupling process**: its Jacobian is a sparse matrix that links rows (a discretised
  flux divergence). It is evaluated on whole columns. Most are linear in the state, with a
  constant Jacobian (``constant_coupling = True``: transport of one ion by given
  coefficients); a nonlinear one (heat conduction with a conductivity ∝ Te^(5/2), diffusion
  in the polarisation field of all ions) sets ``constant_coupling = False`` and gives its
  Jacobian at each state, on a sparsity structure that does not change.

Both kinds give gross production and loss (non-negative, shaped like the state): the steady
solver's convergence rule measures each residual against them (:mod:`ionochem.solve.steady`).

This module only states the interface; it holds no physics.
"""

from __future__ import annotations


class Process:
    """Base of the processes of :class:`ionochem.system.column.ColumnSystem`.

    Attributes
    ----------
    name : str
        Short name, used in messages (``"chemistry"``, ``"transport"``).
    unknowns : tuple of str
        State blocks the process adds (``("density",)`` for the chemistry, ``()`` for one
        that only acts on others' unknowns, ``("Te",)`` for an electron energy equation).
    reads : tuple of str
        State blocks it reads.
    couples_rows : bool
        True for a coupling process (see the module docstring).
    constant_coupling : bool
        Coupling process: True when its Jacobian does not depend on the state.
    rows_per_column : int
        Coupling process: altitude rows of one column (the state stacks whole columns).

    Row processes implement :meth:`tendency`, :meth:`gross` and :meth:`blocks` for a
    subset ``rows`` (sorted unique row indices; all rows needs no copy) and may offer
    :meth:`tendency_gross` (both from one evaluation). Coupling processes implement
    :meth:`tendency` and :meth:`gross` on all rows (``rows`` is then always all of them) and
    :meth:`coupling`.
    """

    name = "process"
    unknowns: tuple[str, ...] = ()
    reads: tuple[str, ...] = ()
    couples_rows = False
    constant_coupling = True

    def tendency(self, n, rows):
        """d(state)/dt of this process on ``rows``, shaped (len(rows), U)."""
        raise NotImplementedError

    def evaluate(self, n):
        """d(state)/dt of every row as reported (:meth:`ionochem.model.Model.tendency`, the
        time integration); by default :meth:`tendency` on all rows."""
        return self.tendency(n, slice(None))

    def gross(self, n, rows):
        """Gross (production, loss) of this process on ``rows``, each (len(rows), U)."""
        raise NotImplementedError

    def tendency_gross(self, n, rows):
        """``(tendency, production, loss)`` from one evaluation (default: two calls)."""
        P, L = self.gross(n, rows)
        return self.tendency(n, rows), P, L

    def blocks(self, n, rows):
        """Row process: Jacobian blocks J[b, i, j] = ∂f_{b,i}/∂n_{b,j}, (len(rows), U, U)."""
        raise NotImplementedError

    def coupling(self, n_columns, n=None):
        """Coupling process: its Jacobian, scipy.sparse (B·U, B·U) for ``n_columns`` stacked
        columns (entry (b·U + i, c·U + j) = ∂f_{b,i}/∂n_{c,j}).

        A constant coupling ignores ``n``. A nonlinear one (``constant_coupling = False``)
        returns its Jacobian at the state ``n`` (B, U); with ``n=None``, its structure: every
        entry that can be nonzero at some state stored (values arbitrary). The entries at any
        state must lie within that structure.
        """
        raise NotImplementedError

    def kept_structures(self):
        """Coupling process: a dict where the system keeps the assembled Jacobian's
        structure for this coupling, shared by every system using the process's
        operator."""
        return self.__dict__.setdefault("_kept_structures", {})

    def at(self, time_s):
        """The process at a time after the scenario's (the sun moves); default itself."""
        return self
