"""Field-aligned transport of one ion species as a coupling process of the column system.

The discretised flux divergence (:mod:`ionochem.solve.transport`: diffusion and drift on the
column's grid, the upper-boundary flux) is linear in the transported density, so its
Jacobian is a constant sparse matrix that links each altitude row to its neighbours.
"""

from __future__ import annotations

from ionochem.errors import MechanismError
from ionochem.solve.transport import SpeciesTransport, transport_operator
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

    @classmethod
    def for_model(cls, model, k=None, given=None):
        """The transport of ``model``'s moving species, or None for a photochemical column."""
        return None if model.transport is None else cls(model.transport)

    def tendency(self, n, rows):
        return self.operator.tendency(n)

    def gross(self, n, rows):
        return self.operator.gross(n)

    def tendency_gross(self, n, rows):
        P, L = self.operator.gross(n)
        return self.operator.tendency(n), P, L

    def coupling(self, n_columns):
        return self.operator.matrix(n_columns)

    def kept_structures(self):
        # On the operator, which the models of one environment share (species_transport).
        return self.operator.__dict__.setdefault("_kept_structures", {})


def species_transport(scenario, environment, species, reaction_path):
    """The transport operator of the scenario's moving species on the environment's column
    (``SpeciesTransport``), or None for a photochemical column.

    Raises
    ------
    MechanismError
        When ``[transport]`` moves a species the list does not solve.
    """
    coef = getattr(environment, "transport", None)
    if coef is None:
        return None
    # One operator per environment and species list: a model's changed copies share it
    # (and the Jacobian structure kept on it).
    key = (tuple(species), tuple(scenario.transport.species))
    kept = environment.__dict__.setdefault("_species_transport", {})
    if key in kept:
        return kept[key]
    names = scenario.transport.species
    for name in names:
        if name not in species:
            raise MechanismError(f"[transport] moves {name}, but {name} is not a solved "
                                 f"species of {reaction_path}", file=scenario.source)
    op = transport_operator(coef.altitude_km, coef.D_cm2_s, coef.V_cm_s,
                            coef.upper_flux_cm2_s)
    kept[key] = SpeciesTransport(op, list(species).index(names[0]), len(species))
    return kept[key]
