"""Rate coefficient of an isotropic Maxwellian electron distribution from a cross section.

Method
------
k(T) = sqrt(8 / (pi m_e)) (kT)^(-3/2) * integral sigma(E) E exp(-E/kT) dE
(the Maxwellian average of sigma v; e.g. Schunk & Nagy, *Ionospheres*, 2nd ed., Cambridge
2009, ch. 4 *(from memory)*). With x = E/kT this is
k = sqrt(8 kT / (pi m_e)) * integral sigma x exp(-x) dx.

The cross section is taken as **piecewise linear between the user's energy points** and zero
outside them, and that interpolant is integrated *exactly*: on each segment the moments
integral u^n exp(-u) du (n = 0, 1, 2) are lower incomplete gamma functions, so the result does not
depend on how the grid is spaced (irregular, log-spaced, a few points or 10^5) beyond how
well the points describe sigma. The answer is linear in sigma, so it is one matrix of
weights (temperature, energy) times the cross-section columns; several columns (levels,
``_low``/``_high`` bands) cost one matrix product.

Coverage
--------
Outside the grid sigma is unknown. The weight the distribution puts there is reported as
``missing`` = (1 - exp(-x0)) + (1 + x1) exp(-x1), with x0 = E_first/kT and
x1 = E_last/kT: the first term is the share of the rate a 1/E cross section (the steepest
common low-energy law, that of exothermic electron capture) gets below the grid, the
second the share a constant cross section gets above it; an end where every cross section
is zero (a threshold at the first point, a cross section that has died away at the last)
misses nothing. More than ``tolerance`` of
missing weight is an error unless ``uncovered="warn"``, which warns and lets the caller flag
the temperatures (``return_coverage=True``).

This module knows nothing of reactions or of the atmosphere.
"""

from __future__ import annotations

import warnings

import numpy as np
from scipy.special import gammainc

from ionochem.errors import InputError
from ionochem.rates.common import (
    ELECTRON_MASS_G,
    EV_ERG,
    K_B_EV,
    check_cross_sections,
    check_energy_grid,
    check_temperatures,
)

__all__ = ["maxwellian_rate", "maxwellian_weights", "missing_weight"]

# Largest temperature x energy block evaluated at once (memory, not accuracy).
_BLOCK = 4_000_000


def _segment_weights(x0, dx):
    """Weights of sigma at a segment's start and end, times e^{x0}.

    With u = x - x0 on [0, dx] and j_n = integral_0^dx u^n e^-u du (lower incomplete gamma,
    accurate for small dx), integral sigma x e^-x dx over the segment is
    e^{-x0} [sigma_0 (x0 (dx j0 - j1) + dx j1 - j2) + sigma_1 (x0 j1 + j2)] / dx.
    Written this way nothing cancels catastrophically on tiny or distant segments.
    """
    j0 = gammainc(1.0, dx)
    j1 = gammainc(2.0, dx)
    j2 = 2.0 * gammainc(3.0, dx)
    start = (x0 * (dx * j0 - j1) + dx * j1 - j2) / dx
    end = (x0 * j1 + j2) / dx
    return start, end


def maxwellian_weights(energy_eV, temperature_K):
    """Weights W such that k(T) = W @ sigma for a piecewise-linear sigma.

    Parameters
    ----------
    energy_eV : array_like, shape (energy,)
        Strictly increasing energies (eV), >= 0.
    temperature_K : array_like, shape (temperature,)
        Electron temperatures (K), > 0.

    Returns
    -------
    ndarray, shape (temperature, energy)
        Weights in cm s-1 (k in cm3 s-1 when sigma is in cm2).
    """
    E = check_energy_grid(energy_eV)
    T = check_temperatures(np.atleast_1d(temperature_K)).reshape(-1)
    kT = T * K_B_EV                                                   # eV
    W = np.zeros((T.size, E.size))
    rows = max(1, _BLOCK // E.size)
    for start in range(0, T.size, rows):
        sl = slice(start, start + rows)
        x = E[None, :] / kT[sl, None]
        x0 = x[:, :-1]
        start_w, end_w = _segment_weights(x0, np.diff(x, axis=1))
        scale = np.exp(-x0)
        W[sl, :-1] += start_w * scale
        W[sl, 1:] += end_w * scale
    speed = np.sqrt(8.0 * kT * EV_ERG / (np.pi * ELECTRON_MASS_G))    # cm s-1
    return W * speed[:, None]


def missing_weight(energy_eV, temperature_K, *, below=True, above=True):
    """Share of the Maxwellian rate outside the energy grid (see the module docstring).

    Parameters
    ----------
    energy_eV : array_like, shape (energy,)
    temperature_K : array_like
    below, above : bool
        Count the part below the first (above the last) energy. A cross section that is zero
        at that end of the grid (a threshold, or one that has died away) misses nothing there.

    Returns
    -------
    ndarray
        Shaped like ``temperature_K``.
    """
    E = check_energy_grid(energy_eV)
    T = check_temperatures(temperature_K)
    kT = T * K_B_EV
    x0 = E[0] / kT
    x1 = E[-1] / kT
    low = -np.expm1(-x0) if below else 0.0
    high = (1.0 + x1) * np.exp(-x1) if above else 0.0
    return low + high + np.zeros_like(kT)


def maxwellian_rate(energy_eV, sigma_cm2, temperature_K, *, tolerance=1e-3,
                    uncovered="raise", return_coverage=False):
    """Rate coefficient k(T) of an isotropic Maxwellian from a cross section sigma(E).

    Parameters
    ----------
    energy_eV : array_like, shape (energy,)
        Energy grid (eV), strictly increasing, >= 0; any spacing.
    sigma_cm2 : array_like, shape (energy,) or (energy, column)
        Cross sections (cm2); several columns (levels, ``_low``/``_high`` bands) at once.
        Piecewise linear between the points, zero outside the grid.
    temperature_K : array_like
        Electron temperatures (K), > 0, any shape.
    tolerance : float
        Largest share of the rate allowed to fall outside the grid (default 1e-3).
    uncovered : {"raise", "warn"}
        What to do when a temperature exceeds ``tolerance``: raise
        :class:`~ionochem.errors.InputError`, or warn (``RuntimeWarning``) and go on.
    return_coverage : bool
        Also return the missing share per temperature.

    Returns
    -------
    k : ndarray
        Rate coefficients (cm3 s-1), shaped ``temperature_K.shape`` (+ ``(column,)`` when
        sigma is 2-D).
    missing : ndarray, optional
        Share of the rate outside the grid, shaped like ``temperature_K``.
    """
    if uncovered not in ("raise", "warn"):
        raise InputError(f"uncovered must be 'raise' or 'warn', not {uncovered!r}")
    E = check_energy_grid(energy_eV)
    S, one = check_cross_sections(sigma_cm2, E.size)
    T = check_temperatures(temperature_K)
    miss = missing_weight(E, T, below=bool((S[0] > 0).any()), above=bool((S[-1] > 0).any()))
    over = miss > tolerance
    if over.any():
        worst = T[over]
        text = (f"the energy grid ({E[0]:g} to {E[-1]:g} eV) misses {miss.max():.2g} of the "
                f"Maxwellian weight at T = {worst.min():g} .. {worst.max():g} K "
                f"(tolerance {tolerance:g}); extend the cross section to lower or higher "
                "energies")
        if uncovered == "raise":
            raise InputError(text)
        warnings.warn(text, RuntimeWarning, stacklevel=2)
    W = maxwellian_weights(E, T.reshape(-1))
    k = (W @ S).reshape(T.shape + (S.shape[1],))
    if one:
        k = k[..., 0]
    return (k, miss) if return_coverage else k
