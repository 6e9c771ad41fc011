"""Species names of the reaction-list language: kept here for old imports; the module is
:mod:`ionochem.species` (the bottom layer, docs/design.md §3.1)."""

from ionochem.species import (  # noqa: F401 (re-exported)
    ATOMIC_MASS_AMU,
    ELECTRON,
    ELECTRON_MASS_AMU,
    PHOTON,
    THIRD_BODY,
    Species,
    format_elements,
    parse_species,
)

__all__ = ["Species", "parse_species", "ATOMIC_MASS_AMU", "ELECTRON_MASS_AMU",
           "ELECTRON", "THIRD_BODY", "PHOTON", "format_elements"]
