"""Vibrational temperature Tv of neutral N2 linked to the electron temperature.

Electron impact excites N2 vibration efficiently (the 2Pi_g shape resonance near 2 eV), so
where electrons are hot the N2 vibrational temperature rises above Tn toward Te (docs/physics.md
§4b; modelled in detail by, e.g., Pavlov 1998, Ann. Geophys. 16, 176 *(from
memory)*). Without a vibrational-kinetics model of N2 the column offers a documented
parametric link,

    Tv = Tn + c max(Te - Tn, 0),    0 <= c <= 1,

between the two limits Tv = Tn (c = 0, no electron heating of vibration) and Tv = Te
(c = 1, vibration in equilibrium with the electrons). c is the scenario key
``temperatures.vibrational_coupling`` (default 0.5, the midpoint of the two limits,
*(common practice)*: a choice, not a fitted value). Tv matters through O+ + N2, whose rate
rises steeply with it (Schmeltekopf et al. 1968, J. Chem. Phys. 48, 2966).

This module knows nothing of reactions; it turns temperature profiles into a profile.
"""

from __future__ import annotations

import numpy as np

__all__ = ["DEFAULT_COUPLING", "vibrational_temperature"]

#: Default coupling c of Tv to Te (module docstring; *(common practice)*).
DEFAULT_COUPLING = 0.5


def vibrational_temperature(Tn, Te, coupling: float = DEFAULT_COUPLING) -> np.ndarray:
    """N2 vibrational temperature from Tn and Te.

    Parameters
    ----------
    Tn, Te : array_like, shape (altitude,)
        Neutral and electron temperatures (K).
    coupling : float
        c in [0, 1] (module docstring).

    Returns
    -------
    ndarray, shape (altitude,)
        Tv (K), between Tn and max(Te, Tn).
    """
    Tn = np.asarray(Tn, float)
    Te = np.asarray(Te, float)
    c = float(coupling)
    if not 0.0 <= c <= 1.0:
        raise ValueError(f"coupling must be between 0 and 1, got {c}")
    return Tn + c * np.maximum(Te - Tn, 0.0)
