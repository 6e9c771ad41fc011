"""``ionochem.run``: the library runs a scenario in its own solve mode, as the command does.

References: scipy's ``solve_ivp`` integrating the model's own tendency (the transient
result), the command line's netCDF output (the same run through the other entry point), and
pvlib's solar transit (NREL SPA, Reda & Andreas 2004) for the local apparent midnight that
starts a diurnal run.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
from pathlib import Path

import numpy as np
import pytest
import xarray as xr
from scipy.integrate import solve_ivp

import ionochem
from ionochem.analysis.diurnal import diurnal_start_utc
from ionochem.cli import main
from ionochem.io.scenario import Grid

ROOT = Path(__file__).resolve().parents[1]
SUNSET = ROOT / "scenarios" / "midlatitude_sunset.toml"
MIDNIGHT = ROOT / "scenarios" / "midlatitude_midnight.toml"
DEMOS = sorted((ROOT / "scenarios").glob("*.toml"))


def _small(path, **solve):
    """A demo scenario on 12 rows (110–400 km), with ``solve`` fields replaced."""
    scen = ionochem.load_scenario(path)
    scen = scen.replace(grid=Grid(tuple(np.linspace(110.0, 400.0, 12))))
    if solve:
        scen = scen.replace(solve=dataclasses.replace(scen.solve, **solve))
    return scen


def test_run_of_a_transient_scenario_is_the_transient_result():
    """A transient scenario gives densities on its output times (not a steady state), equal
    to scipy's solve_ivp (Radau, rtol 1e-11) on the model's own tendency to 1e-5."""
    times = (0.0, 600.0, 1800.0)
    scen = _small(SUNSET, times_s=times, start="zero")
    ds = ionochem.run(scen)
    assert ds["density"].dims[0] == "time"
    assert ds.sizes["time"] == len(times)
    model = ionochem.Model(scen)
    A, S = model.altitude_km.size, len(model.species)
    sol = solve_ivp(lambda t, y: model.tendency(y.reshape(A, S), t).ravel(), (0.0, times[-1]),
                    np.zeros(A * S), method="Radau", t_eval=times, rtol=1e-11, atol=1e-8,
                    jac=lambda t, y: model.column_jacobian(y.reshape(A, S), t))
    assert sol.success
    ref = sol.y.T.reshape(len(times), A, S)
    got = np.stack([ds["density"].sel(species=s).values for s in model.species], -1)
    big = ref > 1e-3 * ref.max(axis=(1, 2), keepdims=True)
    np.testing.assert_allclose(got[big], ref[big], rtol=1e-5)


def test_run_takes_a_path_and_rate_changes():
    """``run(path, scale=...)`` reads the file and applies the change: with both N2+
    recombination families halved, N2+ at the row nearest 200 km rises (its loss is
    recombination there), by less than the factor √2·√2 = 2 of a pure recombination balance
    (charge transfer to O also removes it)."""
    path = ROOT / "scenarios" / "midlatitude_solar_minimum.toml"
    base = ionochem.run(path)
    changed = ionochem.run(path, scale={"DR_N2plus": 0.5, "DR_N2plus_2D2D": 0.5})
    n0 = base["density"].sel(species="N2+").sel(altitude=200.0, method="nearest")
    n1 = changed["density"].sel(species="N2+").sel(altitude=200.0, method="nearest")
    assert 1.0 < float(n1 / n0) < 2.0


@pytest.mark.parametrize("path", DEMOS, ids=lambda p: p.stem)
def test_run_equals_the_command_lines_output(path, tmp_path, capsys):
    """Every demo: ``ionochem.run(path)`` equals what ``ionochem run path -o out.nc``
    writes (densities, production, loss), to 1e-12 (netCDF round trip of float64)."""
    if path == SUNSET:
        pytest.skip("covered by the slow variant below")
    _compare_with_cli(path, tmp_path, capsys)


@pytest.mark.slow
def test_run_equals_the_command_lines_output_on_the_sunset_transient(tmp_path, capsys):
    """As above, for the transient demo (19 output times; ~10 s)."""
    _compare_with_cli(SUNSET, tmp_path, capsys)


def _compare_with_cli(path, tmp_path, capsys):
    out = tmp_path / "out.nc"
    assert main(["run", str(path), "-o", str(out)]) == 0
    capsys.readouterr()
    lib = ionochem.run(path)
    with xr.open_dataset(out) as cli:
        for name in ("density", "production", "loss"):
            np.testing.assert_allclose(cli[name].transpose(*lib[name].dims).values,
                                       lib[name].values, rtol=1e-12, atol=0)


def test_diurnal_run_starts_at_local_apparent_midnight():
    """The start of a diurnal run is 12 h before the sun's transit of the scenario's local
    day minus (days − 1) days (pvlib's NREL SPA transit), within 60 s."""
    pvlib = pytest.importorskip("pvlib")
    import pandas as pd
    scen = ionochem.load_scenario(MIDNIGHT)
    lat, lon = scen.location.latitude_deg, scen.location.longitude_deg
    for days in (1, 2):
        start = diurnal_start_utc(scen, days)
        noon_guess = pd.DatetimeIndex([start + dt.timedelta(hours=12)])
        transit = pvlib.solarposition.sun_rise_set_transit_spa(
            noon_guess.floor("D"), lat, lon)["transit"].iloc[0]
        delta = abs((transit.to_pydatetime() - start).total_seconds() - 43200.0)
        assert delta < 60.0
    # The scenario's own local day is the last one: 23:00 UTC on 20 March at 15° E is
    # 23:52 local apparent time (equation of time −7.5 min), still 20 March, whose local
    # midnight is 23:07 UTC on the 19th.
    start = diurnal_start_utc(scen, 1)
    assert (start.date(), start.hour) == (dt.date(2025, 3, 19), 23)


@pytest.mark.slow  # a day through sunrise and sunset, ~10 s
def test_diurnal_run_reports_its_last_day_on_local_hours():
    """``[solve] mode = "diurnal"`` gives the last day on ``local_hour`` 0…24 with the step,
    and the sun highest (zenith angle least) at local noon."""
    scen = _small(MIDNIGHT, mode="diurnal", days=1, step_minutes=120.0)
    ds = ionochem.run(scen)
    hours = ds["local_hour"].values
    np.testing.assert_allclose(hours, np.arange(0.0, 24.1, 2.0))
    chi = ds["solar_zenith_angle"].values
    assert int(np.argmin(chi)) == 6


@pytest.mark.parametrize("extra, key", [
    ("days = 0", "solve.days"), ("days = 1.5", "solve.days"), ("days = 400", "solve.days"),
    ("step_minutes = 7", "solve.step_minutes"), ("step_minutes = 0", "solve.step_minutes"),
    ("times_s = [0.0, 60.0]", "solve.times_s"), ("compare_days = 1", "solve.compare_days"),
])
def test_diurnal_keys_are_checked_at_their_key(tmp_path, extra, key):
    """Bad ``days`` / ``step_minutes`` (and ``times_s``, which a diurnal run makes itself)
    are refused at ``file: key`` before any work."""
    text = MIDNIGHT.read_text().replace('"../reactions/', f'"{ROOT}/reactions/')
    path = tmp_path / "d.toml"
    path.write_text(text + f'\n[solve]\nmode = "diurnal"\n{extra}\n')
    with pytest.raises(ionochem.ScenarioError) as info:
        ionochem.load_scenario(path)
    assert str(info.value).startswith(f"{path}: {key}:")


def test_compare_days_is_refused_outside_a_diurnal_run(tmp_path):
    """``compare_days`` belongs to diurnal runs: a steady scenario that gives it is refused
    at its key."""
    text = MIDNIGHT.read_text().replace('"../reactions/', f'"{ROOT}/reactions/')
    path = tmp_path / "s.toml"
    path.write_text(text + '\n[solve]\ncompare_days = true\n')
    with pytest.raises(ionochem.ScenarioError) as info:
        ionochem.load_scenario(path)
    assert str(info.value).startswith(f"{path}: solve.compare_days:")


def test_periodicity_is_reported_always_and_the_day_before_only_when_asked():
    """The day-to-day change of a diurnal result, on two invented days of three species ×
    four altitudes × five local times: ``periodicity`` is the largest
    |ln((n + 1)/(n_prev + 1))| of each species (numpy, here), at ``periodicity_altitude``;
    ``diurnal_change`` and ``previous_day_density`` appear only with ``compare_days``."""
    from ionochem.analysis.diurnal import _add_periodicity
    rng = np.random.default_rng(3)
    dims = ("time", "species", "altitude")
    coords = {"species": ["O+", "NO+", "O2+"], "altitude": [150.0, 200.0, 250.0, 300.0]}
    prev = xr.DataArray(rng.uniform(0, 1e5, (5, 3, 4)), dims=dims, coords=coords)
    now = prev * np.exp(rng.normal(0, 0.1, (5, 3, 4)))
    change = np.abs(np.log((now.values + 1) / (prev.values + 1))).max(axis=0)
    for compare in (False, True):
        out = xr.Dataset({"density": now.rename(time="local_hour")})
        _add_periodicity(out, prev, now, compare)
        np.testing.assert_allclose(out["periodicity"], change.max(axis=1), rtol=1e-14)
        np.testing.assert_array_equal(out["periodicity_altitude"],
                                      np.array(coords["altitude"])[change.argmax(axis=1)])
        assert ("diurnal_change" in out) is compare
        assert ("previous_day_density" in out) is compare
    np.testing.assert_allclose(out["diurnal_change"], change, rtol=1e-14)
    np.testing.assert_array_equal(out["previous_day_density"].values, prev.values)


@pytest.mark.parametrize("command", [["rank", "--species", "N2+"], ["sweep", "--vary",
                                                                    "sun.f107=100,150"]])
def test_analyses_refuse_a_diurnal_scenario_at_solve_mode(tmp_path, capsys, command):
    """rank (a steady analysis) and sweep without --diurnal refuse a diurnal scenario with
    exit 2 at ``file: solve.mode`` instead of solving it as a steady column."""
    text = MIDNIGHT.read_text().replace('"../reactions/', f'"{ROOT}/reactions/')
    path = tmp_path / "d.toml"
    path.write_text(text + '\n[solve]\nmode = "diurnal"\n')
    code = main([command[0], str(path), *command[1:]])
    err = capsys.readouterr().err
    assert code == 2
    assert f"{path}: solve.mode: is 'diurnal'" in err


@pytest.mark.slow  # two simulated days, ~25 s
def test_diurnal_command_says_what_periodicity_it_reached(tmp_path, capsys):
    """``ionochem run`` of a two-day diurnal scenario with ``compare_days`` prints the
    largest day-to-day change of ln(n + 1); the dataset's day-to-day change is recomputed
    here with numpy from the reported day and the day before it carries, and its largest
    value per species is ``periodicity``."""
    text = MIDNIGHT.read_text().replace('"../reactions/', f'"{ROOT}/reactions/')
    text = text.replace("stop = 600.0, step = 2.0", "stop = 415.0, step = 25.0")
    path = tmp_path / "d.toml"
    path.write_text(text + '\n[solve]\nmode = "diurnal"\ndays = 2\nstep_minutes = 120\n'
                    'compare_days = true\n')
    out = tmp_path / "d.nc"
    assert main(["run", str(path), "-o", str(out)]) == 0
    line = [ln for ln in capsys.readouterr().out.splitlines()
            if ln.startswith("periodicity:")]
    assert len(line) == 1
    with xr.open_dataset(out) as ds:
        now = ds["density"].transpose("species", "altitude", "local_hour").values
        before = ds["previous_day_density"].transpose("species", "altitude",
                                                      "local_hour").values
        change = np.abs(np.log((now + 1.0) / (before + 1.0))).max(axis=2)
        np.testing.assert_allclose(ds["diurnal_change"].transpose("species", "altitude"),
                                   change, rtol=1e-12)
        np.testing.assert_allclose(ds["periodicity"], change.max(axis=1), rtol=1e-12)
        worst = float(ds["periodicity"].max())
    assert f"{worst:.2g}" in line[0]
