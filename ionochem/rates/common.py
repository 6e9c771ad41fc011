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
           "check_cross_sections", "check_positive", "check_temperatures", "check_kt",
           "MAX_ENERGY_EV", "TEMPERATURE_RANGE_K", "KT_RANGE_EV", "MAX_PLAUSIBLE_SIGMA_CM2"]

#: Highest energy accepted (eV): the speeds are non-relativistic, 1.5 % off at 10 keV
#: (gamma = 1.0196) and worse above; collision cross sections of ionospheric interest end
#: well below *(common practice)*.
MAX_ENERGY_EV = 1e4
#: Temperatures accepted (K): 1 K (the coldest electron beams of storage rings are a few
#: K) to 1e6 K (86 eV, far beyond the ionosphere's few thousand K) *(common practice)*.
TEMPERATURE_RANGE_K = (1.0, 1e6)
#: Beam temperatures kT accepted (eV): 1e-9 eV (1e-5 K) to 10 eV *(common practice; cooled
#: electron beams reach kT_par of some 1e-5 eV, and the velocity grid is capped below)*.
KT_RANGE_EV = (1e-9, 10.0)
#: Largest plausible cross section (cm2): 1e-8 cm2 is a square micrometre, beyond any
#: atomic or molecular cross section even at meV energies (dissociative recombination near
#: 1 meV is some 1e-12 cm2); values above it are taken for Mb (1 Mb = 1e-18 cm2) or Å2
#: (1e-16 cm2) written as cm2 *(common practice)*.
MAX_PLAUSIBLE_SIGMA_CM2 = 1e-8

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
    if E[-1] > MAX_ENERGY_EV:
        raise InputError(f"energy {E.max():g} eV is above the {MAX_ENERGY_EV:g} eV the "
                         "toolkit accepts (its speeds are non-relativistic)")
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
    if S.size and S.max() > MAX_PLAUSIBLE_SIGMA_CM2:
        import warnings
        warnings.warn(f"the largest cross section is {S.max():g} cm2, above "
                      f"{MAX_PLAUSIBLE_SIGMA_CM2:g} cm2: are they in Mb (1e-18 cm2) or "
                      "Å2 (1e-16 cm2) rather than cm2?", stacklevel=3)
    return (S[:, None] if S.ndim == 1 else S), S.ndim == 1


def check_temperatures(temperature_K, name="temperature_K"):
    """Temperatures (K) as a float array, finite and inside :data:`TEMPERATURE_RANGE_K`."""
    T = check_positive(temperature_K, name)
    lo, hi = TEMPERATURE_RANGE_K
    bad = (T < lo) | (T > hi)
    if bad.any():
        raise InputError(f"{name} {T[bad].flat[0]:g} K is outside {lo:g} to {hi:g} K (in K, "
                         "not eV?)")
    return T


def check_kt(value, name):
    """A beam temperature kT (eV): one finite number inside :data:`KT_RANGE_EV`."""
    if np.ndim(value) != 0:
        raise InputError(f"{name} must be a single number (eV)")
    v = float(check_positive(value, name))
    lo, hi = KT_RANGE_EV
    if not lo <= v <= hi:
        raise InputError(f"{name} = {v:g} eV is outside {lo:g} to {hi:g} eV")
    return v
