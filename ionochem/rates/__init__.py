"""The laboratory toolkit: cross sections to rate coefficients, merged-beam convolutions,
fits to standard forms and level populations.

Numpy in, numpy out: energies in eV, cross sections in cm2, temperatures in K, rate
coefficients in cm3 s-1. This package knows nothing of the ionospheric column; its output
reaches the model only through rate tables and reaction-list entries
(:mod:`ionochem.rates.tables`).

- :func:`maxwellian_rate` (maxwellian.py): k(T) of an isotropic Maxwellian.
- :func:`beam_rate` (beam.py): rate against detuning for a flattened Maxwellian.
- :func:`fit_rate` (fit.py): fits to power law, broken power law, modified Arrhenius.
- :func:`level_populations` (populations.py): non-negative level mix with covariance;
  :func:`beam_populations` for a measured beam rate curve.
"""

from ionochem.rates.beam import beam_rate
from ionochem.rates.fit import fit_rate
from ionochem.rates.maxwellian import maxwellian_rate
from ionochem.rates.populations import beam_populations, level_populations

__all__ = ["maxwellian_rate", "beam_rate", "fit_rate", "level_populations",
           "beam_populations"]
