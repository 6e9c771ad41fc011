"""Photo rates follow the sun in transient runs, and the two solvers agree with each other."""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import numpy as np

import ionochem

ROOT = Path(__file__).resolve().parents[1]
SUNSET = ROOT / "scenarios" / "midlatitude_sunset.toml"


def _coarse(scen, step=20.0):
    alt = tuple(np.arange(100.0, 400.0 + 1e-9, step))
    return scen.replace(grid=type(scen.grid)(altitude_km=alt))


def test_photo_rates_follow_time_like_a_sun_placed_at_that_time():
    """The photo rates of a transient column at time t equal those of a steady sun placed at
    the scenario time + t over the same neutral atmosphere (the transient run holds the
    neutrals at the start time), to 1 % (linear interpolation between 60 s nodes); the zenith
    angle itself is checked against astropy and pvlib in test_geometry."""
    from ionochem.environment.sun import SunColumn
    scen = _coarse(ionochem.load_scenario(SUNSET))
    model = ionochem.Model(scen)
    env = model.environment
    for t in (0.0, 1830.0, 5410.0):
        when = scen.time.utc + dt.timedelta(seconds=t)
        fixed = scen.replace(time=type(scen.time)(utc=when), solve=type(scen.solve)())
        ref = SunColumn(fixed, env, model._needs, env.sun.msis_profile).sources()
        got = env.sources(t)
        assert set(got) == set(ref)
        for key, val in ref.items():
            big = val > 1e-3 * val.max() if val.max() > 0 else np.zeros(val.size, bool)
            np.testing.assert_allclose(got[key][big], val[big], rtol=1e-2, err_msg=key)
    photo = [j for j, r in enumerate(model.reactions) if r.startswith(("PI_", "PE_"))]
    assert photo
    # The sun sets: the zenith angle grows and the production falls.
    chis = [model.environment.solar_zenith_angle(t) for t in (0.0, 3600.0, 7200.0)]
    assert chis[0] < chis[1] < chis[2]
    assert model.rate_coefficients(7200.0)[:, photo].sum() < \
        model.rate_coefficients(0.0)[:, photo].sum()


def test_integration_from_steady_state_stays_there_under_a_fixed_sun():
    """Started at the Newton steady state with a sun that does not move, solve_ivp (BDF)
    keeps the densities to 1e-6 relative over a day of model time (two independent solvers
    agreeing on the same equilibrium)."""
    scen = _coarse(ionochem.load_scenario(SUNSET))
    steady = scen.replace(solve=type(scen.solve)())
    model = ionochem.Model(steady)
    ds = model.solve()
    out = model.integrate([3600.0, 86400.0], initial=ds, rtol=1e-10, atol=1e-8)
    for s in model.species:
        n0 = ds["density"].sel(species=s).values
        n1 = out["density"].sel(species=s).values[-1]
        big = n0 > 1e-6 * n0.max()
        np.testing.assert_allclose(n1[big], n0[big], rtol=1e-6)
