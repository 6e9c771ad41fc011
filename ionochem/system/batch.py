"""Steady states of stacked columns of one mechanism: the ensemble's entry to the system.

An ensemble solves many samples of a column at once: their rows are stacked (sample-major,
altitude rows within each) with each sample's rate coefficients and fixed densities, and the
stack is one :class:`ionochem.system.column.ColumnSystem` — rows independent without
transport, coupled within each sample's column with it — solved by the same steady path as
the model's own column.
"""

from __future__ import annotations

from ionochem.system.chemistry import Chemistry
from ionochem.system.column import ColumnSystem
from ionochem.system.transport import Transport


def solve_rows(mechanism, k, given, *, rtol, row_labels=None, n0=None, transport=None):
    """Steady solved densities of B stacked rows → ``SteadyResult``.

    Parameters
    ----------
    mechanism : Mechanism
        Compiled mechanism (a light copy without its reaction list will do).
    k : ndarray (B, R)
        Rate coefficients of each row.
    given : ndarray (B, G)
        Fixed densities of each row, cm-3.
    rtol : float
        Relative residual target of the steady solver.
    row_labels : sequence of str, optional
        Label of each row for error messages.
    n0 : ndarray (B, S), optional
        Warm start near the solution (e.g. the central column, tiled).
    transport : SpeciesTransport, optional
        When given, B is a whole number of columns of its rows, each coupled by it.
    """
    processes = [Chemistry(mechanism, k, given)]
    n_columns = 1
    if transport is not None:
        processes.append(Transport(transport))
        n_columns = k.shape[0] // transport.A
    system = ColumnSystem(list(mechanism.solved), k.shape[0], processes,
                          n_columns=n_columns, row_labels=row_labels)
    return system.steady(rtol=rtol, n0=n0)
