"""Plausibility of the numbers in profile tables: hard bounds and unit-slip warnings.

A profile table (neutral densities, temperatures, prescribed production, a measured
electron density) whose numbers are in the wrong unit still parses: densities in m-3 are a
million times those in cm-3, temperatures in eV some 11,600 times too small. The column then
solves to nonsense, or, with values near the floating-point limit (1e300), to NaN deep in
the solver, where the message can no longer name the table. This module places each column
against bounds per kind of quantity, so the table is named at its line:

* beyond the *hard* bound: an error (the value would overflow the chemistry);
* beyond the *usual* bound: a warning that names the likely unit slip.

The bounds *(common practice)*: the densest neutral gas at the ground is 2.5e19 cm-3
(Loschmidt's number, CODATA), above 80 km any neutral is below 1e15 cm-3; the largest
ionospheric electron densities are some 3e6 cm-3 (F2 peak, solar maximum); ionization rates
peak near 1e4 cm-3 s-1 (E and F1 regions, solar maximum) and reach some 1e5 in hard aurora;
upper-atmosphere temperatures lie between about 130 K (mesopause) and a few thousand K
(the hottest electrons some 1e4 K), while 1 eV is 11,604.5 K (CODATA).
"""

from __future__ import annotations

import numpy as np

__all__ = ["HARD_MAX", "column_kind", "check_column", "peak_above_grid"]

#: Above these an input is refused: the products of the chemistry would overflow float64.
HARD_MAX = {"density": 1e25, "production": 1e20, "temperature": 1e6}
#: Usual ranges; outside them a warning names the likely slip.
USUAL = {"density": (None, 1e15), "electron_density": (None, 1e8),
         "production": (None, 1e7), "temperature": (50.0, 2e4)}
#: Lowest altitude (km) from which the neutral density bound applies.
NEUTRAL_BOUND_FROM_KM = 80.0


def column_kind(name, where):
    """``"temperature"``, ``"electron_density"``, ``"production"`` or ``"density"``."""
    if name.endswith("_K"):
        return "temperature"
    if where == "solve.electron_table" or name == "Ne":
        return "electron_density"
    if where == "production.table":
        return "production"
    return "density"


def check_column(name, where, values, altitude_km):
    """Place one column against its bounds.

    Parameters
    ----------
    name : str
        Column name (checked to be a plain name by the caller).
    where : str
        Scenario key of the table (``neutrals.table``).
    values, altitude_km : ndarray
        The column and the table's altitudes (km), same shape.

    Returns
    -------
    (int or None, str or None, str or None)
        Index of the first value beyond the hard bound (or None) with the error text, and
        a warning text (or None).
    """
    kind = column_kind(name, where)
    col = np.asarray(values, float)
    hard = HARD_MAX["density" if kind == "electron_density" else kind]
    over = np.flatnonzero(np.abs(col) > hard)
    if over.size:
        unit = {"temperature": "K", "production": "cm-3 s-1"}.get(kind, "cm-3")
        return (int(over[0]), f"column {name} has {col[over[0]]:g} {unit}, above "
                f"{hard:g}, beyond any atmosphere", None)
    lo, hi = USUAL[kind]
    if kind == "density":
        col = col[np.asarray(altitude_km, float) >= NEUTRAL_BOUND_FROM_KM]
    if col.size == 0:
        return None, None, None
    if kind == "temperature":
        if np.nanmax(col) < lo:
            return None, None, (f"{where}: column {name} is at most {np.nanmax(col):g} K, "
                                f"below the {lo:g} K of any upper atmosphere: is it in eV "
                                "(1 eV = 11604.5 K)?")
        if np.nanmax(col) > hi:
            return None, None, (f"{where}: column {name} reaches {np.nanmax(col):g} K, above "
                                f"the usual {hi:g} K")
        return None, None, None
    if np.nanmax(col) > hi:
        unit = "cm-3 s-1" if kind == "production" else "cm-3"
        above = f" above {NEUTRAL_BOUND_FROM_KM:g} km" if kind == "density" else ""
        return None, None, (f"{where}: column {name} reaches {np.nanmax(col):g} {unit}"
                            f"{above}, above the usual {hi:g}: is it per m3 (1e6 times per "
                            "cm3)?")
    return None, None, None


#: A grid whose top is below this (km) and whose electron density still rises at the top
#: is taken to end below the F peak (the F2 peak lies at some 200-400 km; the E and F1
#: layers below 200 km have their own maxima) *(common practice)*.
F_PEAK_CHECK_BELOW_KM = 400.0


def peak_above_grid(altitude_km, electron_density_cm3, dark=None) -> str | None:
    """A warning when the electron density of a sunlit column still rises at the grid's top
    below :data:`F_PEAK_CHECK_BELOW_KM` (the F peak and the topside are then missing, and
    results near the top depend on where the grid was cut), else None."""
    alt = np.asarray(altitude_km, float)
    ne = np.asarray(electron_density_cm3, float)
    if alt.size < 3 or not np.isfinite(ne).all():
        return None
    order = np.argsort(alt)
    alt, ne = alt[order], ne[order]
    if dark is not None and np.asarray(dark, bool)[order][-1]:
        return None
    top = alt[-1]
    if top >= F_PEAK_CHECK_BELOW_KM or not ne[-1] > ne[-2] or int(np.argmax(ne)) != ne.size - 1:
        return None
    return (f"the electron density still rises at the top of the grid ({top:g} km): the F "
            "peak lies above the grid; extend the grid upward (to 400 km or more) for "
            "results near the peak")
