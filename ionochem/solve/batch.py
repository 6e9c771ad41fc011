"""Steady states of stacked rows of a mechanism: the one batch-solve path.

Every steady solve of independent rows — the model's own column (one row per level) and the
samples of an ensemble (rows sample-major) — goes through :func:`solve_rows`, which binds the
mechanism's tendency, Jacobian and gross production/loss to the rows' rate coefficients and
fixed densities and hands them to :func:`ionochem.solve.steady.solve_steady` (or, when
transport couples the levels of each column, to :mod:`ionochem.solve.column`). It knows
nothing of the parser or the atmosphere: only arrays and a mechanism's array methods.
"""

from __future__ import annotations

import numpy as np


def solve_rows(mechanism, k, given, *, rtol, level_names=None, n0=None, transport=None):
    """Steady solved densities of B independent rows.

    Parameters
    ----------
    mechanism : Mechanism
        Anything with ``solved``, ``tendency(n, k, given)``, ``jacobian(n, k, given)`` and
        ``production_loss(n, k, given)`` (a light copy without its reaction list will do).
    k : ndarray (B, R)
        Rate coefficients of each row (cm3 s-1, s-1 or cm6 s-1 by order).
    given : ndarray (B, G)
        Fixed densities of each row, cm-3.
    rtol : float
        Relative residual target of the steady solver.
    level_names : sequence of str, optional
        Label of each row for error messages.
    n0 : ndarray (B, S), optional
        Starting densities (default zero: the solver builds its own start). When given,
        they are taken as a warm start near the solution (no fixed-point sweeps).
    transport : ionochem.solve.transport.SpeciesTransport, optional
        When given, the rows are whole columns coupled by transport (B a multiple of its
        levels, level-major within each column) and are solved together by
        :func:`ionochem.solve.column.steady_with_transport`.

    Returns
    -------
    SteadyResult
        From :func:`ionochem.solve.steady.solve_steady`.
    """
    from ionochem.solve.steady import solve_steady
    S = len(mechanism.solved)
    B = k.shape[0]
    if hasattr(mechanism, "jacobian_kernel"):
        # A Mechanism: its array methods bound to these rows, rows last (mechanism/rows.py).
        from ionochem.mechanism.rows import BoundRows
        bound = BoundRows(mechanism, k, given)
        tendency, jacobian, gross, both = (bound.tendency, bound.jacobian, bound.gross,
                                           bound.both)
        kernel = bound
    else:
        def take(rows):
            # Newton passes the active rows, sorted and unique: all rows need no copy.
            return (k, given) if rows.size == B else (k[rows], given[rows])

        def tendency(n, rows):
            return mechanism.tendency(n, *take(rows))

        def jacobian(n, rows):
            return mechanism.jacobian(n, *take(rows))

        def gross(n, rows):
            P, L = mechanism.production_loss(n, *take(rows))
            return P[:, :S], L[:, :S]

        both = kernel = None

    if transport is not None:
        from ionochem.solve.column import steady_with_transport
        return steady_with_transport(tendency, jacobian, gross, transport, B, rtol=rtol,
                                     level_names=level_names, n0=n0, kernel=kernel)
    start = np.zeros((B, S)) if n0 is None else n0
    return solve_steady(start, tendency, jacobian, gross, rtol=rtol, level_names=level_names,
                        species_names=list(mechanism.solved), both=both, kernel=kernel,
                        warm=n0 is not None)
