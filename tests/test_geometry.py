"""Solar geometry against reference libraries (astropy, pvlib), with the network blocked."""

from __future__ import annotations

import socket
import warnings

import numpy as np
import pytest

from ionochem.environment.geometry import (
    earth_sun_distance_au,
    flux_distance_factor,
    julian_day,
    solar_zenith_angle_deg,
)


@pytest.fixture
def no_network(monkeypatch):
    """Any attempt to open a network connection fails the test."""

    def refuse(*args, **kwargs):
        raise AssertionError("network access attempted")

    monkeypatch.setattr(socket.socket, "connect", refuse)
    monkeypatch.setattr(socket, "create_connection", refuse)


def _random_cases(n, seed):
    rng = np.random.default_rng(seed)
    t0 = np.datetime64("2000-01-01T00:00:00", "s")
    span = int((np.datetime64("2030-12-31T23:59:59", "s") - t0) / np.timedelta64(1, "s"))
    times = t0 + rng.integers(0, span, n).astype("timedelta64[s]")
    lat = rng.uniform(-89.0, 89.0, n)
    lon = rng.uniform(-180.0, 180.0, n)
    return times, lat, lon


@pytest.fixture
def astropy_offline():
    """astropy configured to use only its bundled IERS data, never a download."""
    from astropy.utils import data, iers

    with iers.conf.set_temp("auto_download", False), \
            iers.conf.set_temp("auto_max_age", None), \
            iers.conf.set_temp("iers_degraded_accuracy", "warn"), \
            data.conf.set_temp("allow_internet", False):
        yield


def test_zenith_angle_matches_astropy_altaz_without_refraction(no_network, astropy_offline):
    """Geometric zenith angle vs astropy: get_sun transformed to AltAz with pressure 0
    (no refraction), bundled IERS tables only, 400 seeded random times 2000–2030 and
    places; within 0.05°."""
    import astropy.units as u
    from astropy.coordinates import AltAz, EarthLocation, get_sun
    from astropy.time import Time

    times, lat, lon = _random_cases(400, seed=20240611)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # degraded-accuracy and ERFA "dubious year"
        t = Time(times.astype(str), scale="utc")
        loc = EarthLocation.from_geodetic(lon * u.deg, lat * u.deg, 0 * u.m)
        altaz = get_sun(t).transform_to(AltAz(obstime=t, location=loc, pressure=0 * u.hPa))
        ref = 90.0 - altaz.alt.to_value(u.deg)
    ours = solar_zenith_angle_deg(times, lat, lon)
    assert ours.shape == (400,)
    assert np.max(np.abs(ours - ref)) < 0.05


def test_zenith_angle_matches_pvlib_nrel_spa_geometric_zenith(no_network):
    """Geometric zenith vs pvlib's NREL SPA (Reda & Andreas 2004),
    get_solarposition(method='nrel_numpy')['zenith'] (not apparent_zenith), 20 seeded
    places × 20 times each, 2000–2030; within 0.05°."""
    import pandas as pd
    import pvlib

    rng = np.random.default_rng(7)
    worst = 0.0
    for _ in range(20):
        times, _, _ = _random_cases(20, seed=int(rng.integers(1 << 31)))
        lat, lon = rng.uniform(-89, 89), rng.uniform(-180, 180)
        idx = pd.DatetimeIndex(times).tz_localize("UTC")
        ref = pvlib.solarposition.get_solarposition(idx, lat, lon, method="nrel_numpy")
        ours = solar_zenith_angle_deg(times, lat, lon)
        worst = max(worst, float(np.max(np.abs(ours - ref["zenith"].to_numpy()))))
    assert worst < 0.05


def test_earth_sun_distance_matches_astropy_get_sun_distance(no_network, astropy_offline):
    """Earth–Sun distance (Meeus 1998 eq. 25.5) vs astropy get_sun(t).distance, 2000 seeded
    random times 2000–2030; within 1e-4 AU; the flux factor is 1/r²."""
    import astropy.units as u
    from astropy.coordinates import get_sun
    from astropy.time import Time

    times, _, _ = _random_cases(2000, seed=99)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ref = get_sun(Time(times.astype(str), scale="utc")).distance.to_value(u.au)
    r = earth_sun_distance_au(times)
    assert np.max(np.abs(r - ref)) < 1e-4
    np.testing.assert_allclose(flux_distance_factor(times), 1.0 / ref**2, rtol=3e-4)


def test_julian_day_of_j2000_epoch_and_meeus_example():
    """JD of 2000-01-01 12:00 is 2451545.0 (Meeus 1998, ch. 7) and of 1957-10-04.81 is
    2436116.31 (Meeus 1998, example 7.a)."""
    assert julian_day(np.datetime64("2000-01-01T12:00")) == pytest.approx(2451545.0, abs=1e-9)
    t = np.datetime64("1957-10-04T00:00") + np.timedelta64(int(0.81 * 86400), "s")
    assert julian_day(t) == pytest.approx(2436116.31, abs=1e-6)


def test_sun_declination_and_distance_match_meeus_example_25a():
    """Meeus (1998) example 25.a, 1992 October 13.0 TD: apparent declination
    −7.78507°, radius vector 0.99766 AU (low-precision method). The declination is
    checked through the zenith angle at the north pole, which is 90° − δ at every hour
    (UT stands for TD here: ΔT ≈ 1 min moves δ by < 0.001°)."""
    t = np.datetime64("1992-10-13T00:00")
    assert earth_sun_distance_au(t) == pytest.approx(0.99766, abs=1e-5)
    # At the pole the zenith angle is 90° − δ whatever the hour.
    assert solar_zenith_angle_deg(t, 90.0, 0.0) == pytest.approx(90.0 + 7.78507, abs=2e-3)


def test_scalar_inputs_give_float_and_arrays_broadcast():
    """Scalar time and place give a Python float; arrays give the broadcast shape, each
    element equal to the scalar call (vectorisation check)."""
    times = np.array(["2021-03-20T06:00", "2021-06-21T12:00", "2021-12-21T18:00"],
                     dtype="datetime64[m]")
    z = solar_zenith_angle_deg(times, 45.0, 7.0)
    assert z.shape == (3,)
    for i, t in enumerate(times):
        zi = solar_zenith_angle_deg(t, 45.0, 7.0)
        assert isinstance(zi, float)
        assert zi == pytest.approx(z[i], abs=1e-12)


def test_latitude_outside_range_is_refused():
    """A latitude beyond ±90° is an input error."""
    with pytest.raises(ValueError):
        solar_zenith_angle_deg(np.datetime64("2020-01-01T00:00"), 91.0, 0.0)
