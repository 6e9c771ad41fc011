"""Solar geometry: zenith angle and Earth–Sun distance from UTC time and place.

The algorithm is the one of the NOAA solar calculator, which implements the low-precision
solar coordinates of Meeus, *Astronomical Algorithms*, 2nd ed. (Willmann-Bell, 1998),
chapter 25 (geometric mean longitude, mean anomaly, equation of centre, apparent longitude,
obliquity of the ecliptic with the nutation correction, declination, radius vector) and the
equation of time of chapter 28 (Smart's series, Meeus eq. 28.3). The hour angle follows from
the true solar time. The stated accuracy of the method is about 0.01° in declination for
years 1800–2100; UT is used in place of dynamical time (ΔT ≈ 70 s moves the Sun by < 0.001°).

The zenith angle returned is geometric: no atmospheric refraction, which an ionospheric
column (above the refracting lower atmosphere) must not have. Latitude is geodetic, the
zenith is the local ellipsoid normal.

This module knows nothing about the atmosphere or the planet's radius; the flux distance
factor is for the Earth (the only body whose orbit is coded here).
"""

from __future__ import annotations

import numpy as np

__all__ = ["solar_zenith_angle_deg", "earth_sun_distance_au", "flux_distance_factor",
           "julian_day", "equation_of_time_min", "local_solar_time_h", "utc_at_local_solar_time"]

# J2000.0 epoch, 2000-01-01 12:00 (Meeus 1998, ch. 21: JD 2451545.0).
_J2000 = np.datetime64("2000-01-01T12:00:00", "us")
_JD_J2000 = 2451545.0


def _as_datetime64_us(utc) -> np.ndarray:
    """Convert times (numpy datetime64, ISO strings, datetime) to datetime64[us]."""
    arr = np.asarray(utc)
    if arr.dtype.kind not in ("M", "U", "S", "O"):
        raise TypeError(f"utc must be numpy datetime64 (or ISO text), got dtype {arr.dtype}")
    return arr.astype("datetime64[us]")


def _days_since_j2000(utc) -> np.ndarray:
    t = _as_datetime64_us(utc)
    return (t - _J2000) / np.timedelta64(1, "D")


def julian_day(utc) -> np.ndarray | float:
    """Julian day number of UTC times (UT used as the time scale).

    Parameters
    ----------
    utc : numpy.datetime64 or array of them
        Times in UTC.

    Returns
    -------
    float or ndarray
        Julian day (days), same shape as ``utc``.
    """
    jd = _days_since_j2000(utc) + _JD_J2000
    return float(jd) if np.ndim(jd) == 0 else jd


def _sun(utc):
    """Meeus (1998) ch. 25 low-precision solar quantities for the given times.

    Returns a dict of numpy arrays: ``L0`` geometric mean longitude (deg), ``M`` mean
    anomaly (deg), ``e`` orbital eccentricity, ``R`` radius vector (AU), ``eps`` apparent
    obliquity (deg), ``decl`` apparent declination (deg), ``eot_min`` equation of time
    (minutes), ``day_fraction`` UTC fraction of the day.
    """
    t = _as_datetime64_us(utc)
    d = (t - _J2000) / np.timedelta64(1, "D")
    T = d / 36525.0  # Julian centuries since J2000.0 (Meeus eq. 25.1)

    # Meeus eq. 25.2-25.4.
    L0 = np.mod(280.46646 + T * (36000.76983 + 0.0003032 * T), 360.0)
    M = 357.52911 + T * (35999.05029 - 0.0001537 * T)
    e = 0.016708634 - T * (0.000042037 + 0.0000001267 * T)
    Mr = np.radians(M)
    # Equation of centre (Meeus ch. 25, p. 164).
    C = (np.sin(Mr) * (1.914602 - T * (0.004817 + 0.000014 * T))
         + np.sin(2 * Mr) * (0.019993 - 0.000101 * T)
         + np.sin(3 * Mr) * 0.000289)
    true_long = L0 + C
    true_anom = M + C
    # Radius vector (Meeus eq. 25.5).
    R = 1.000001018 * (1.0 - e * e) / (1.0 + e * np.cos(np.radians(true_anom)))
    # Apparent longitude: aberration and nutation in longitude (Meeus ch. 25, p. 164).
    omega = np.radians(125.04 - 1934.136 * T)
    lam = np.radians(true_long - 0.00569 - 0.00478 * np.sin(omega))
    # Mean obliquity (Meeus eq. 22.2) and the correction for the apparent position
    # (Meeus eq. 25.8).
    eps0 = 23.0 + (26.0 + (21.448 - T * (46.8150 + T * (0.00059 - T * 0.001813))) / 60.0) / 60.0
    eps = eps0 + 0.00256 * np.cos(omega)
    epsr = np.radians(eps)
    decl = np.degrees(np.arcsin(np.sin(epsr) * np.sin(lam)))  # Meeus eq. 25.7
    # Equation of time, Smart's series (Meeus eq. 28.3), in minutes of time. The NOAA
    # calculator uses the mean obliquity corrected as above.
    y = np.tan(epsr / 2.0) ** 2
    L0r = np.radians(L0)
    eot_rad = (y * np.sin(2 * L0r) - 2 * e * np.sin(Mr)
               + 4 * e * y * np.sin(Mr) * np.cos(2 * L0r)
               - 0.5 * y * y * np.sin(4 * L0r) - 1.25 * e * e * np.sin(2 * Mr))
    eot_min = 4.0 * np.degrees(eot_rad)
    day_fraction = (t - t.astype("datetime64[D]")) / np.timedelta64(1, "D")
    return {"L0": L0, "M": M, "e": e, "R": R, "eps": eps, "decl": decl,
            "eot_min": eot_min, "day_fraction": day_fraction}


def solar_zenith_angle_deg(utc, latitude_deg, longitude_deg):
    """Geometric solar zenith angle (no refraction) at a place and time.

    NOAA solar calculator equations after Meeus, *Astronomical Algorithms*, 2nd ed. (1998),
    ch. 25 (solar coordinates) and ch. 28 (equation of time).

    Parameters
    ----------
    utc : numpy.datetime64 or array of datetime64
        Times in UTC (ISO strings are accepted too).
    latitude_deg : float or array
        Geodetic latitude, degrees north, in [-90, 90].
    longitude_deg : float or array
        Longitude, degrees east (west negative).

    Returns
    -------
    float or ndarray
        Zenith angle in degrees, 0 (Sun overhead) to 180; above 90 the Sun is below the
        geometric horizon. Shape: the broadcast of the three inputs.
    """
    lat = np.asarray(latitude_deg, dtype=float)
    lon = np.asarray(longitude_deg, dtype=float)
    if np.any(np.abs(lat) > 90.0):
        raise ValueError("latitude_deg must lie in [-90, 90]")
    s = _sun(utc)
    # True solar time in minutes, hour angle in degrees (NOAA calculator).
    tst = np.mod(s["day_fraction"] * 1440.0 + s["eot_min"] + 4.0 * lon, 1440.0)
    hour_angle = np.radians(tst / 4.0 - 180.0)
    latr = np.radians(lat)
    declr = np.radians(s["decl"])
    cosz = np.sin(latr) * np.sin(declr) + np.cos(latr) * np.cos(declr) * np.cos(hour_angle)
    zen = np.degrees(np.arccos(np.clip(cosz, -1.0, 1.0)))
    return float(zen) if np.ndim(zen) == 0 else zen


def earth_sun_distance_au(utc):
    """Earth–Sun distance (Meeus 1998, eq. 25.5, radius vector of the Sun).

    Parameters
    ----------
    utc : numpy.datetime64 or array of datetime64
        Times in UTC.

    Returns
    -------
    float or ndarray
        Distance in astronomical units, same shape as ``utc``.
    """
    r = _sun(utc)["R"]
    return float(r) if np.ndim(r) == 0 else r


def flux_distance_factor(utc):
    """Factor (1 AU / r)^2 that scales a solar flux given at 1 AU to the date.

    Parameters
    ----------
    utc : numpy.datetime64 or array of datetime64
        Times in UTC.

    Returns
    -------
    float or ndarray
        Dimensionless factor, about 1.034 in early January and 0.967 in early July.
    """
    r = np.asarray(earth_sun_distance_au(utc))
    f = 1.0 / (r * r)
    return float(f) if np.ndim(f) == 0 else f


def equation_of_time_min(utc):
    """Equation of time, apparent minus mean solar time (minutes), Meeus (1998) eq. 28.3.

    Parameters
    ----------
    utc : numpy.datetime64 or array of datetime64
        Times in UTC.

    Returns
    -------
    float or ndarray
        Minutes, within about ±17 over the year; same shape as ``utc``.
    """
    e = _sun(utc)["eot_min"]
    return float(e) if np.ndim(e) == 0 else e


def local_solar_time_h(utc, longitude_deg):
    """Local apparent (true) solar time at a longitude, hours in [0, 24).

    True solar time is UTC + longitude/15 h + the equation of time (the NOAA calculator's
    ``tst`` of :func:`solar_zenith_angle_deg`): 12 h is the Sun's meridian transit, where
    the zenith angle is least for the day.

    Parameters
    ----------
    utc : numpy.datetime64 or array of datetime64
        Times in UTC.
    longitude_deg : float or array
        Degrees east.

    Returns
    -------
    float or ndarray
        Hours.
    """
    s = _sun(utc)
    tst = np.mod(s["day_fraction"] * 1440.0 + s["eot_min"]
                 + 4.0 * np.asarray(longitude_deg, float), 1440.0) / 60.0
    return float(tst) if np.ndim(tst) == 0 else tst


def utc_at_local_solar_time(date, hour, longitude_deg):
    """The UTC moment at which the local apparent solar time is ``hour`` on ``date``.

    Inverse of :func:`local_solar_time_h` on one local day: solves
    UTC = date + hour − longitude/15 h − EoT(UTC) by fixed-point iteration (the equation of
    time changes by less than 30 s a day, so three steps reach well below a millisecond).

    Parameters
    ----------
    date : numpy.datetime64 (day precision) or datetime.date
        The local (solar) calendar date.
    hour : float
        Local apparent solar time, hours, 0 ≤ hour ≤ 24.
    longitude_deg : float
        Degrees east (west negative); 180..360 are taken as −180..0.

    Returns
    -------
    numpy.datetime64
        Microsecond precision. It may fall on the UTC day before or after ``date``.
    """
    day = np.datetime64(date, "D").astype("datetime64[us]")
    lon = float(longitude_deg)
    lon = lon - 360.0 if lon > 180.0 else lon
    mean_min = 60.0 * float(hour) - 4.0 * lon
    t = day + np.timedelta64(int(round(mean_min * 60e6)), "us")
    for _ in range(3):
        eot = float(_sun(t)["eot_min"])
        t = day + np.timedelta64(int(round((mean_min - eot) * 60e6)), "us")
    return t
