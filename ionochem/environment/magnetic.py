"""The geomagnetic field of the column: strength and dip angle from the IGRF.

The field enters the column in two places: the dip angle I projects field-aligned O+
diffusion and the wind-induced drift on the vertical (``diffusion``), and the field strength
sets the ion gyrofrequency that decides where ions are magnetised, and so where an
electric-field drift heats them (``temperatures``).

The field model is the International Geomagnetic Reference Field, 14th generation (Alken et
al. 2021, Earth Planets Space 73, 49 for IGRF-13; IGRF-14 released by IAGA Working Group V-MOD
in 2024), evaluated by the PyPI package ``ppigrf`` (pure Python, coefficient files shipped in
the package, so no network at run time). Its coefficients cover 1900–2030; outside that the
caller must give the dip angle.

This module knows nothing of reactions or scenarios; it takes a place, heights and a date.
"""

from __future__ import annotations

import datetime as _dt

import numpy as np

#: Years covered by the IGRF coefficients shipped with ``ppigrf`` 2.x (IGRF-14: 1900–2030).
IGRF_FIRST = _dt.datetime(1900, 1, 1)
IGRF_LAST = _dt.datetime(2030, 1, 1)


class FieldModelRangeError(ValueError):
    """The date is outside the years the field model's coefficients cover."""


def geomagnetic_field(latitude_deg, longitude_deg, altitude_km, when):
    """Field strength and dip angle along a vertical column (IGRF via ``ppigrf``).

    Parameters
    ----------
    latitude_deg, longitude_deg : float
        Geodetic latitude (degrees north) and longitude (degrees east).
    altitude_km : array_like, shape (altitude,)
        Heights above the ellipsoid, km.
    when : datetime.datetime
        Date of the field (time zone aware or naive UTC).

    Returns
    -------
    B_T : ndarray, shape (altitude,)
        Field strength, tesla.
    dip_deg : ndarray, shape (altitude,)
        Inclination I, degrees, positive where the field points downward (northern
        magnetic hemisphere): I = atan2(−B_up, B_horizontal).

    Raises
    ------
    FieldModelRangeError
        For a date outside 1900–2030.
    """
    import ppigrf

    if when.tzinfo is not None:
        when = when.astimezone(_dt.timezone.utc).replace(tzinfo=None)
    if not IGRF_FIRST <= when <= IGRF_LAST:
        raise FieldModelRangeError(
            f"{when:%Y-%m-%d} is outside the IGRF coefficients (1900-2030)")
    z = np.atleast_1d(np.asarray(altitude_km, dtype=float))
    lon = float(longitude_deg)
    if lon > 180.0:
        lon -= 360.0
    be, bn, bu = ppigrf.igrf(lon, float(latitude_deg), z, when)
    be, bn, bu = (np.asarray(c, float).reshape(z.shape) for c in (be, bn, bu))
    horizontal = np.hypot(be, bn)
    B = np.sqrt(horizontal ** 2 + bu ** 2) * 1e-9
    dip = np.degrees(np.arctan2(-bu, horizontal))
    return B, dip
