"""Field-aligned transport of one ion species as a coupling process of the column system.

The discretised flux divergence (:mod:`ionochem.solve.transport`: diffusion and drift on the
column's grid, the upper-boundary flux) is linear in the transported density, so its
Jacobian is a constant sparse matrix that links each altitude row to its neighbours.
"""

from __future__ import annotations

from ionochem.system.process import Process


class Transport(Process):
    """One species' transport, placed in the state of ``n_columns`` stacked columns.

    Parameters
    ----------
    transport : ionochem.solve.transport.SpeciesTransport
        The operator of one column and the state column of the moving species.
    """

    name = "transport"
    reads = ("density",)
    couples_rows = True

    def __init__(self, transport):
        self.operator = transport
        self.index = transport.index
        self.rows_per_column = transport.A

    def tendency(self, n, rows):
        return self.operator.tendency(n)

    def gross(self, n, rows):
        return self.operator.gross(n)

    def tendency_gross(self, n, rows):
        P, L = self.operator.gross(n)
        return self.operator.tendency(n), P, L

    def coupling(self, n_columns):
        return self.operator.matrix(n_columns)
