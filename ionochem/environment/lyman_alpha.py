"""Solar Lyman alpha (1215.67 angstrom) flux at 1 AU as a function of solar activity.

Lyman alpha ionizes NO and so feeds NO+ in the E and D regions; its flux changes by about a
factor of two over the solar cycle. The relation used here is linear in the EUVAC activity
proxy P = (F10.7 + F10.7A) / 2 (Richards, Fennelly & Torr 1994, J. Geophys. Res. 99, 8981,
whose chromospheric bins follow the measured Lyman alpha variation of 1982-1988):

    I(P) = I_min * max(FLOOR, 1 + (R - 1) (P - P_min) / (P_max - P_min))

with

- R = 1.9, the ratio of the solar-maximum to the solar-minimum Lyman alpha flux of cycle 21
  (Lean & Skumanich 1983, J. Geophys. Res. 88, 5751: "the ratio of the average fluxes for
  December 1979 (cycle maximum) and July 1976 (cycle minimum) is 1.9");
- I_min = 3.5e11 photons cm-2 s-1, the solar-minimum level of the Lyman alpha composite of
  Woods et al. (2000), J. Geophys. Res. 105, 27195 *(from memory)* (Lean & Skumanich's own
  absolute minimum, 2.32e11, is on an older, lower calibration; they note the AE-E
  irradiances are 40-80 % higher than their model);
- P_min = 70 and P_max = 200, the 81-day F10.7 near the minimum (1976) and maximum (late
  1979) of cycle 21 *(from memory)*;
- FLOOR = 0.8, the floor EUVAC puts on its own activity factor (Richards et al. 1994), so a
  proxy below P_min never drives the flux far under the quiet-Sun level.

F10.7 is a fair proxy for the solar-cycle trend of Lyman alpha but not for its day-to-day
changes (Barth, Tobiska, Rottman & White 1990, Geophys. Res. Lett. 17, 571); a measured value
given as ``[photons] lyman_alpha_photons_cm2_s`` replaces the relation.

This module only gives the flux at 1 AU; it does not attenuate it or scale for the Earth-Sun
distance.
"""

from __future__ import annotations

import numpy as np

from ionochem.errors import InputError

#: Solar-minimum Lyman alpha flux at 1 AU, photons cm-2 s-1 (Woods et al. 2000 composite,
#: *(from memory)*).
LYMAN_ALPHA_MIN_PHOTONS_CM2_S = 3.5e11
#: Solar-maximum / solar-minimum ratio of the Lyman alpha flux (Lean & Skumanich 1983,
#: J. Geophys. Res. 88, 5751).
LYMAN_ALPHA_CYCLE_RATIO = 1.9
#: Activity proxy P = (F10.7 + F10.7A)/2 at the solar minimum and maximum of cycle 21
#: *(from memory)*.
P_MIN = 70.0
P_MAX = 200.0
#: Floor on the activity factor, as in EUVAC (Richards et al. 1994).
FACTOR_FLOOR = 0.8


def lyman_alpha_flux(f107, f107a) -> np.ndarray:
    """Solar Lyman alpha photon flux at 1 AU for the given solar activity.

    Parameters
    ----------
    f107, f107a : float or array_like
        Daily and 81-day mean F10.7 (1e-22 W m-2 Hz-1), adjusted to 1 AU; they broadcast.

    Returns
    -------
    ndarray
        Photons cm-2 s-1, shape ``broadcast(f107, f107a).shape``: 3.5e11 at P = 70, 6.65e11
        at P = 200 (module docstring).

    Raises
    ------
    InputError
        When an index is not positive and finite.
    """
    f107 = np.asarray(f107, dtype=float)
    f107a = np.asarray(f107a, dtype=float)
    for name, value in (("f107", f107), ("f107a", f107a)):
        if not np.all(np.isfinite(value)) or np.any(value <= 0):
            raise InputError(f"{name} must be a positive finite number, got {value!r}")
    p = 0.5 * (f107 + f107a)
    factor = 1.0 + (LYMAN_ALPHA_CYCLE_RATIO - 1.0) * (p - P_MIN) / (P_MAX - P_MIN)
    return LYMAN_ALPHA_MIN_PHOTONS_CM2_S * np.maximum(FACTOR_FLOOR, factor)


__all__ = ["LYMAN_ALPHA_CYCLE_RATIO", "LYMAN_ALPHA_MIN_PHOTONS_CM2_S", "lyman_alpha_flux"]
