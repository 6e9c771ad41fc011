"""Plausible ranges of the physical values a scenario gives.

Each value has a *hard* range, outside which the run would be meaningless or the models
behind it break (an error at ``file: key`` stating the range), and, where useful, a narrower
*soft* range of conditions actually met in the ionosphere, outside which the value is
accepted with a warning. docs/scenario.md lists the same table; a test keeps the two equal.

This module only states and applies the ranges; it reads no file and computes no physics.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

__all__ = ["RANGES", "Range", "check_range", "MAX_DIURNAL_DAYS", "MAX_GRID_ROWS",
           "YEAR_RANGE"]
#: Most days a diurnal run integrates: a year; the sun's activity indices are held
#: fixed, so longer runs mean nothing, and two or three days reach a repeating day
#: *(common practice)*.
MAX_DIURNAL_DAYS = 366


@dataclass(frozen=True)
class Range:
    """The accepted and the usual values of one scenario key.

    Attributes
    ----------
    unit : str
        Unit of the value, as written in docs/scenario.md.
    hard : (float, float)
        Closed interval of accepted values (an error outside).
    soft : (float, float) or None
        Closed interval of usual values (a warning outside), inside ``hard``.
    basis : str
        Why these numbers (source or *(common practice)*).
    low_open : bool
        The lower end of ``hard`` is excluded (a value that must be positive).
    quiet_zero : bool
        Exactly 0 is a deliberate setting (a reaction switched off): no soft-range warning.
    """

    unit: str
    hard: tuple[float, float]
    soft: tuple[float, float] | None
    basis: str
    low_open: bool = False
    quiet_zero: bool = False


#: Calendar years the scenario time may lie in: the solar-position formulas (NOAA solar
#: calculator after Meeus 1998, Astronomical Algorithms, 2nd ed., ch. 25) are stated for
#: 1901–2099 *(from memory)*.
YEAR_RANGE = (1901, 2099)

#: Most altitude rows a grid may have: memory grows as rows × species² (Jacobians), and
#: 20 000 rows is a 0.05 km grid over 1000 km *(common practice: a bound, not a need)*.
MAX_GRID_ROWS = 20_000

_SFU = ("observed daily F10.7 since 1947 lies between about 60 and 460 sfu (Tapping 2013, "
        "Space Weather 11, 394) *(from memory)*; the hard range keeps NRLMSIS and EUVAC "
        "inside their fitted domain with margin *(common practice)*")

#: Scenario key -> range. Keys are the dotted keys of docs/scenario.md.
RANGES: dict[str, Range] = {
    "sun.f107": Range("sfu", (30.0, 600.0), (60.0, 350.0), _SFU),
    "sun.f107a": Range("sfu", (30.0, 600.0), (60.0, 300.0), _SFU),
    "geomagnetic.ap": Range("nT-equivalent", (0.0, 400.0), (0.0, 300.0),
                            "ap runs 0..400 by construction (Mayaud 1980, AGU Geophysical "
                            "Monograph 22) *(from memory)*; daily Ap above 300 has not been "
                            "recorded *(from memory)*"),
    "location.latitude_deg": Range("degrees north", (-90.0, 90.0), None, "geodetic latitude"),
    "location.longitude_deg": Range("degrees east", (-180.0, 360.0), None,
                                    "either convention, -180..180 or 0..360"),
    "grid.altitude_km": Range("km", (0.0, 3000.0), (50.0, 1500.0),
                              "NRLMSIS is fitted from the ground to the exobase (~1000 km) "
                              "*(common practice)*; photochemical equilibrium is not the "
                              "right model far above the F2 peak"),
    "temperatures.ion_drift_m_s": Range("m/s", (0.0, 10_000.0), (0.0, 3000.0),
                                        "auroral ion drifts reach 2–3 km/s in strong "
                                        "convection (Schunk & Nagy 2009, Ionospheres, 2nd ed., "
                                        "ch. 8) *(from memory)*"),
    "temperatures.profile.te_peak_K": Range("K", (0.0, 20_000.0), (500.0, 6000.0),
                                            "topside Te lies between about 1000 and 4000 K "
                                            "(Schunk & Nagy 2009, ch. 10) *(from memory)*",
                                            low_open=True),
    "temperatures.profile.ti_offset_K": Range("K", (0.0, 10_000.0), (0.0, 2000.0),
                                              "Ti − Tn rarely exceeds 1000 K outside "
                                              "frictional heating *(common practice)*"),
    "temperatures.profile.base_km": Range("km", (0.0, 1000.0), (80.0, 250.0),
                                          "Te departs from Tn in the lower thermosphere "
                                          "*(common practice)*"),
    "temperatures.profile.scale_km": Range("km", (0.0, 2000.0), (10.0, 300.0),
                                           "Te rises over tens of km *(common practice)*",
                                           low_open=True),
    "photons.lyman_alpha_photons_cm2_s": Range("photons cm-2 s-1", (0.0, 1e13),
                                               (2e11, 1e12),
                                               "solar Lyman-alpha at 1 AU is 3–6e11 photons "
                                               "cm-2 s-1 over the cycle (Woods et al. 2000, "
                                               "JGR 105, 27195) *(from memory)*"),
    "solve.rtol": Range("1", (1e-14, 1e-2), (1e-12, 1e-6),
                        "below 1e-14 the residual is below double-precision rounding of "
                        "the gross rates; above 1e-2 the answer is not a steady state "
                        "*(common practice)*"),
    "transport.upper_boundary_flux_cm2_s": Range(
        "cm-2 s-1", (-1e12, 1e12), (-1e9, 1e9),
        "plasmaspheric fluxes into the night F layer are of order 1e8 cm-2 s-1 "
        "*(common practice)*; positive upward"),
    "transport.dip_deg": Range("degrees", (-90.0, 90.0), None,
                               "magnetic inclination, positive where the field points down"),
    "transport.meridional_wind_m_s": Range(
        "m/s", (-1000.0, 1000.0), (-300.0, 300.0),
        "thermospheric meridional winds are tens to a few hundred m/s *(common practice)*; "
        "positive northward"),
    "changes.scale": Range("1", (0.0, 1e6), (1e-3, 1e3),
                           "rate coefficients are rarely uncertain by more than a factor "
                           "of 1000 *(common practice)*; 0 switches a reaction off (no "
                           "warning)", quiet_zero=True),
}


def check_range(key: str, value: float, *, range_key: str | None = None):
    """Place ``value`` of scenario ``key`` against its range.

    Parameters
    ----------
    key : str
        The dotted key to name (``changes.scale.DR_O2plus``).
    value : float
        The value, finite.
    range_key : str, optional
        Key of :data:`RANGES` when it differs from ``key`` (``changes.scale``).

    Returns
    -------
    (str or None, str or None)
        (error message, warning message): the first when the value is outside the hard
        range, the second when outside the soft one; both None when usual.
    """
    r = RANGES[range_key or key]
    lo, hi = r.hard
    unit = "" if r.unit == "1" else f" {r.unit}"
    below = value <= lo if r.low_open else value < lo
    if below or value > hi or not math.isfinite(value):
        if r.low_open:
            return f"must be above {lo:g} and at most {hi:g}{unit} (got {value:g})", None
        return f"must be between {lo:g} and {hi:g}{unit} (got {value:g})", None
    if r.quiet_zero and value == 0:
        return None, None
    if r.soft is not None and not r.soft[0] <= value <= r.soft[1]:
        return (None, f"{key} = {value:g}{unit} is outside the usual range "
                      f"{r.soft[0]:g}–{r.soft[1]:g}{unit}; check it is meant")
    return None, None
