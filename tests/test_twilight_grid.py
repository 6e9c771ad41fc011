"""Every column over a grid of solar zenith angle × latitude × activity × altitude range solves.

Reference outside the project: the zenith angle of each column is set with the NOAA/Meeus
solar position (``ionochem.environment.geometry``, checked against astropy in
test_geometry.py), and the requirement is the one of docs/validation.md: a column that is lit
at any level, or wholly dark, yields a finite, non-negative photochemical equilibrium whose
column ionization and recombination balance (charge conservation). The zenith angles 100–120°
are the twilight columns whose upper levels see the Sun over the Earth's shadow while the
lower ones are dark — the case the steady-state solver once failed at 400–450 km.
"""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import numpy as np
import pytest

import ionochem
from ionochem.environment.geometry import solar_zenith_angle_deg

ROOT = Path(__file__).resolve().parent.parent
REACTIONS = ROOT / "reactions" / "ionosphere.reactions"
DAY = dt.datetime(2025, 3, 20, tzinfo=dt.timezone.utc)   # invented test date (an equinox)


def _utc_for_zenith(sza_deg, lat_deg, lon_deg=0.0):
    """The first afternoon minute (after local noon) whose zenith angle reaches ``sza_deg``."""
    minutes = np.arange(0, 2 * 1440)
    times = np.datetime64(DAY.replace(tzinfo=None)) + minutes.astype("timedelta64[m]")
    z = solar_zenith_angle_deg(times, lat_deg, lon_deg)
    noon = int(np.argmin(z[:1440]))
    after = np.flatnonzero(z[noon:] >= sza_deg)
    if after.size == 0:
        return None
    i = noon + after[0]
    return DAY + dt.timedelta(minutes=int(minutes[i]))


def _scenario(tmp_path, utc, lat, f107, ap, grid):
    text = f"""title = "twilight grid (invented test column)"
reactions = "{REACTIONS.as_posix()}"
[grid]
altitude_km = {{ start = {grid[0]}, stop = {grid[1]}, step = {grid[2]} }}
[location]
latitude_deg = {lat}
longitude_deg = 0.0
[time]
utc = {utc.strftime('%Y-%m-%dT%H:%M:%SZ')}
[sun]
f107 = {f107}
f107a = {f107}
[geomagnetic]
ap = {ap}
[neutrals]
model = "msis2.1"
[temperatures]
electron = "profile"
ion = "profile"
"""
    path = tmp_path / "column.toml"
    path.write_text(text)
    return path


ZENITH = (0, 30, 60, 85, 95, 100, 105, 110, 115, 120, 130)
LATITUDE = (0.0, 50.0)
ACTIVITY = ((70.0, 4.0), (200.0, 30.0))
GRIDS = ((60.0, 1000.0, 10.0), (90.0, 500.0, 5.0))


@pytest.mark.slow
@pytest.mark.parametrize("grid", GRIDS, ids=lambda g: f"{g[0]:g}-{g[1]:g}km")
@pytest.mark.parametrize("activity", ACTIVITY, ids=lambda a: f"F{a[0]:g}")
@pytest.mark.parametrize("lat", LATITUDE, ids=lambda x: f"lat{x:g}")
def test_every_column_over_the_zenith_angle_grid_solves(tmp_path, lat, activity, grid):
    """Each zenith angle 0–130° solves: finite, non-negative, charge balanced."""
    failures = []
    for sza in ZENITH:
        utc = _utc_for_zenith(sza, lat)
        if utc is None:          # not reached at this latitude on this day
            continue
        scen = ionochem.load_scenario(_scenario(tmp_path, utc, lat, *activity, grid))
        model = ionochem.Model(scen)
        try:
            ds = model.solve()
        except ionochem.SolverError as exc:
            failures.append(f"SZA {sza}°: {exc}")
            continue
        dens = ds["density"].values
        assert np.all(np.isfinite(dens)) and np.all(dens >= 0), f"SZA {sza}°"
        assert abs(ds.attrs.get("column_balance", 0.0)) < 1e-6, f"SZA {sza}°"
    assert not failures, "\n".join(failures)
