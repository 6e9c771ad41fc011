"""Constants and input checks shared by the laboratory toolkit.

Units throughout ``ionochem.rates``: energies in eV, cross sections in cm2, temperatures in
K, rate coefficients in cm3 s-1, velocities in cm s-1. Every refusal is an
:class:`ionochem.errors.InputError` with a message a scientist understands.
"""

from __future__ import annotations

import numpy as np
from scipy import constants as _c

from ionochem.errors import InputError

__all__ = ["ELECTRON_MASS_G", "EV_ERG", "K_B_EV", "speed_cm_s", "check_energy_grid",
           "check_cross_sections", "check_positive"]

# CODATA 2018 values as carried by scipy.constants (Tiesinga et al. 2021, Rev. Mod. Phys.
# 93, 025010).
ELECTRON_MASS_G = _c.m_e * 1e3          # g
EV_ERG = _c.e * 1e7                     # erg per eV
K_B_EV = _c.k / _c.e                    # eV per K


def speed_cm_s(energy_eV):
    """Electron speed (cm s-1) at kinetic energy ``energy_eV`` (non-relativistic)."""
    return np.sqrt(2.0 * np.asarray(energy_eV, float) * EV_ERG / ELECTRON_MASS_G)


def check_positive(value, name, *, allow_zero=False):
    """Return ``value`` as a float array after checking it is finite and positive."""
    arr = np.asarray(value, dtype=float)
    if arr.size == 0:
        raise InputError(f"{name} is empty")
    bad = ~np.isfinite(arr) | ((arr < 0) if allow_zero else (arr <= 0))
    if bad.any():
        word = "non-negative" if allow_zero else "positive"
        raise InputError(f"{name} must be finite and {word} (found {arr[bad].flat[0]!r})")
    return arr


def check_energy_grid(energy_eV):
    """Check an energy grid: 1-D, at least two points, finite, >= 0, strictly increasing."""
    E = np.asarray(energy_eV, dtype=float)
    if E.ndim != 1 or E.size < 2:
        raise InputError("the energy grid must be one-dimensional with at least two points")
    if not np.isfinite(E).all() or (E < 0).any():
        raise InputError("energies must be finite and non-negative (eV)")
    steps = np.diff(E)
    if (steps <= 0).any():
        i = int(np.argmax(steps <= 0)) + 1
        raise InputError(f"energies must be strictly increasing ({E[i]:g} eV after "
                         f"{E[i - 1]:g} eV, point {i + 1})")
    return E


def check_cross_sections(sigma_cm2, n_energy):
    """Cross sections as a 2-D array (energy, column); also returns whether input was 1-D."""
    S = np.asarray(sigma_cm2, dtype=float)
    if S.ndim not in (1, 2) or S.shape[0] != n_energy:
        raise InputError(f"cross sections must be shaped (energy,) or (energy, column) with "
                         f"{n_energy} energies; got shape {S.shape}")
    if not np.isfinite(S).all() or (S < 0).any():
        raise InputError("cross sections must be finite and non-negative (cm2)")
    return (S[:, None] if S.ndim == 1 else S), S.ndim == 1
