"""The IGRF evaluation of environment/magnetic.py against ``ppigrf.igrf`` itself.

magnetic.py reads the coefficient file once with numpy instead of letting ``ppigrf.igrf``
build pandas frames on every call; the field must stay the one ``ppigrf`` gives.
"""

import datetime as dt

import numpy as np
import pytest

from ionochem.environment.magnetic import _igrf_geodetic, geomagnetic_field

ppigrf = pytest.importorskip("ppigrf")

#: Places and dates: the demo site, the south, high latitude at the end of a year, the dip
#: equator on the last epoch, near the pole on the first epoch, west of Greenwich mid-epoch.
CASES = [
    (40.0, 15.0, dt.datetime(2025, 3, 20, 11)),
    (-40.0, 15.0, dt.datetime(2025, 3, 20)),
    (69.6, 19.2, dt.datetime(1999, 12, 31, 23, 59, 59)),
    (0.5, -75.0, dt.datetime(2030, 1, 1)),
    (-89.0, 170.0, dt.datetime(1900, 1, 1)),
    (60.0, -1.0, dt.datetime(1965, 7, 1, 6, 30)),
]


@pytest.mark.parametrize("lat, lon, when", CASES)
def test_field_components_match_ppigrf_igrf(lat, lon, when):
    """East, north and up components equal ``ppigrf.igrf`` to 1e-9 relative (in practice
    bit for bit: the same steps on the same coefficients)."""
    z = np.arange(80.0, 1000.0, 7.0)
    ours = _igrf_geodetic(lon, lat, z, when)
    ref = ppigrf.igrf(lon, lat, z, when)
    for a, b in zip(ours, ref, strict=True):
        np.testing.assert_allclose(np.ravel(a), np.ravel(b), rtol=1e-9, atol=0.0)


def test_strength_and_dip_match_ppigrf_on_the_demo_grid():
    """B (T) and dip (degrees) on the demo grid (40 N, 15 E, 90-600 km, 2025-03-20 11 UTC),
    computed from ``ppigrf.igrf``'s components as magnetic.py did before, to 1e-9."""
    z = np.arange(90.0, 601.0, 2.0)
    when = dt.datetime(2025, 3, 20, 11, tzinfo=dt.timezone.utc)
    B, dip = geomagnetic_field(40.0, 15.0, z, when)
    be, bn, bu = (np.ravel(c) for c in ppigrf.igrf(15.0, 40.0, z, when.replace(tzinfo=None)))
    horizontal = np.hypot(be, bn)
    np.testing.assert_allclose(B, np.sqrt(horizontal ** 2 + bu ** 2) * 1e-9, rtol=1e-9)
    np.testing.assert_allclose(dip, np.degrees(np.arctan2(-bu, horizontal)), rtol=1e-9)


def test_longitude_east_of_180_is_the_same_place_west():
    """345 E and -15 E are one meridian: the same field."""
    when = dt.datetime(2010, 6, 1)
    a = geomagnetic_field(50.0, 345.0, [300.0], when)
    b = geomagnetic_field(50.0, -15.0, [300.0], when)
    np.testing.assert_array_equal(a[0], b[0])
    np.testing.assert_array_equal(a[1], b[1])
