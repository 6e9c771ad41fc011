"""The geomagnetic field of the column: strength and dip angle from the IGRF.

The field enters the column in two places: the dip angle I projects field-aligned O+
diffusion and the wind-induced drift on the vertical (``diffusion``), and the field strength
sets the ion gyrofrequency that decides where ions are magnetised, and so where an
electric-field drift heats them (``temperatures``).

The field model is the International Geomagnetic Reference Field, 14th generation (Alken et
al. 2021, Earth Planets Space 73, 49 for IGRF-13; IGRF-14 released by IAGA Working Group V-MOD
in 2024), evaluated by the PyPI package ``ppigrf`` (pure Python, coefficient files shipped in
the package, so no network at run time). Its coefficients cover 1900–2030; outside that the
caller must give the dip angle. ``ppigrf.igrf`` builds pandas frames from the coefficient file
on every call (about 30 ms each); here the file is read once with numpy and the sum is
evaluated with ``ppigrf``'s own coordinate and Legendre functions in ``ppigrf``'s steps, so
the field is the same to the last bit (tests/test_magnetic_field.py).

This module knows nothing of reactions or scenarios; it takes a place, heights and a date.
"""

from __future__ import annotations

import datetime as _dt
from functools import lru_cache

import numpy as np

#: Years covered by the IGRF coefficients shipped with ``ppigrf`` 2.x (IGRF-14: 1900–2030).
IGRF_FIRST = _dt.datetime(1900, 1, 1)
IGRF_LAST = _dt.datetime(2030, 1, 1)
_EPOCH = _dt.datetime(1970, 1, 1)


class FieldModelRangeError(ValueError):
    """The date is outside the years the field model's coefficients cover."""


def geomagnetic_field(latitude_deg, longitude_deg, altitude_km, when):
    """Field strength and dip angle along a vertical column (IGRF, ``ppigrf``'s formulas).

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
    if when.tzinfo is not None:
        when = when.astimezone(_dt.timezone.utc).replace(tzinfo=None)
    if not IGRF_FIRST <= when <= IGRF_LAST:
        raise FieldModelRangeError(
            f"{when:%Y-%m-%d} is outside the IGRF coefficients (1900-2030)")
    z = np.atleast_1d(np.asarray(altitude_km, dtype=float))
    lon = float(longitude_deg)
    if lon > 180.0:
        lon -= 360.0
    be, bn, bu = _igrf_geodetic(lon, float(latitude_deg), z.ravel(), when)
    be, bn, bu = (np.asarray(c, float).reshape(z.shape) for c in (be, bn, bu))
    horizontal = np.hypot(be, bn)
    B = np.sqrt(horizontal ** 2 + bu ** 2) * 1e-9
    dip = np.degrees(np.arctan2(-bu, horizontal))
    return B, dip


@lru_cache(maxsize=4)
def _shc(path: str):
    """Gauss coefficients of an ``.shc`` file, read once per process with numpy.

    Reads the file as ``ppigrf.ppigrf.read_shc`` does (the first line after the comments
    holds the parameters, the second the epochs in decimal years, then one line per
    ``n m`` with a value per epoch; m < 0 are the h coefficients), without building pandas
    frames on every call.

    Returns
    -------
    keys : tuple of (n, m)
        Degree and order of each g term (m >= 0), in the file's order.
    epochs_us : ndarray, shape (epoch,)
        Epochs, microseconds since 1970-01-01 (integers, as float64 exactly).
    g, h : ndarray, shape (epoch, term)
        Coefficients (nT) of the cos and sin terms of ``keys``; h is 0 for m = 0.
    """
    rows = {}
    years = None
    header_done = False
    with open(path) as f:
        for line in f:
            if line.startswith("#") or not line.strip():
                continue
            if not header_done:            # N_MIN N_MAX NTIMES SP_ORDER N_STEPS ...
                header_done = True
                continue
            if years is None:
                years = [float(x) for x in line.split()]
                continue
            parts = line.split()
            rows[(int(parts[0]), int(parts[1]))] = [float(x) for x in parts[2:]]
    if any(y != int(y) for y in years):   # IGRF epochs are whole years
        raise ValueError(f"{path}: epochs that are not whole years are not supported")
    epochs_us = np.array([(_dt.datetime(int(y), 1, 1) - _EPOCH) // _dt.timedelta(microseconds=1)
                          for y in years], dtype=np.int64)
    keys = tuple(k for k in rows if k[1] >= 0)
    g = np.array([rows[k] for k in keys]).T
    h = np.array([rows[(n, -m)] if m > 0 else [0.0] * len(years) for n, m in keys]).T
    return keys, epochs_us.astype(float), g, h


@lru_cache(maxsize=16)
def _coefficients_at(path: str, when: _dt.datetime):
    """g and h interpolated linearly in time to ``when`` (naive UTC), each shape (term,).

    Linear in time between epochs, column by column with ``np.interp`` on the time in
    microseconds, which is what ``ppigrf`` gets from pandas' ``interpolate(method="time")``.
    """
    keys, epochs, g, h = _shc(path)
    x = float((when - _EPOCH) // _dt.timedelta(microseconds=1))
    gi = np.array([np.interp(x, epochs, g[:, k]) for k in range(g.shape[1])])
    hi = np.array([np.interp(x, epochs, h[:, k]) for k in range(h.shape[1])])
    return keys, gi, hi


def _igrf_geodetic(lon, lat, height_km, when):
    """East, north and up field components (nT) at geodetic points, shape (1, point).

    The steps and array shapes of ``ppigrf.igrf`` and ``ppigrf.igrf_gc`` (degrees 1-13),
    with its own coordinate and Legendre functions, so the numbers are the same bit for bit
    (tests/test_magnetic_field.py compares them); only the coefficients come from
    :func:`_coefficients_at` instead of pandas frames built on every call (about 30 ms).
    """
    from ppigrf import ppigrf as _p

    lon, lat, h = np.broadcast_arrays(lon, lat, height_km)
    lon, lat, h = (x.flatten() for x in (lon, lat, h))
    theta, r, _, __ = _p.geod2geoc(lat, h, h, h)
    keys, g, hc = _coefficients_at(_p.shc_fn, when)

    r_c, theta_c, phi_c = (x.flatten().reshape((-1, 1))
                           for x in np.broadcast_arrays(r, theta, lon))
    n, m = np.array(keys).T
    n, m = n.reshape((1, -1)), m.reshape((1, -1))
    P, dP = _p.get_legendre(theta_c, keys)
    phi_rad = np.radians(phi_c)
    cosmphi = np.cos(phi_rad * m)
    sinmphi = np.sin(phi_rad * m)
    nn, mm = np.tile(n, 2), np.tile(m, 2)
    n_map = ((nn >= 1) & (nn <= 13)).astype(int)
    coef = np.hstack((g[None, :], hc[None, :])).T
    re_km = _p.RE
    G = n_map * (re_km / r_c) ** (nn + 2) * (nn + 1) * np.hstack((P * cosmphi, P * sinmphi))
    Br = G.dot(coef).T
    G = - n_map * (re_km / r_c) ** (nn + 1) * np.hstack((dP * cosmphi, dP * sinmphi)) \
        * re_km / r_c
    Btheta = G.dot(coef).T
    G = - n_map * (re_km / r_c) ** (nn + 1) * mm * np.hstack((-P * sinmphi, P * cosmphi)) \
        * re_km / r_c / np.sin(np.radians(theta_c))
    Bphi = G.dot(coef).T
    _, __, Bn, Bu = _p.geoc2geod(theta, r, Btheta, Br)
    return Bphi, Bn, Bu
