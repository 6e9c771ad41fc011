"""Sweeps over conditions: points equal single runs, derived time keys place the sun where
independent solar-position codes put it, resumed sweeps equal uninterrupted ones, bad
``--vary`` is refused before any column is built."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
import warnings
from pathlib import Path

import numpy as np
import pytest
import xarray as xr

import ionochem
from ionochem.analysis.sweep import check_axes, make_spec, point_dataset, run_sweep
from ionochem.analysis.sweep_axes import parse_values, parse_vary
from ionochem.cli import main
from ionochem.errors import InputError

ROOT = Path(__file__).resolve().parents[1]
REACTIONS = ROOT / "reactions" / "ionosphere.reactions"

# An invented site and date; three levels keep each column cheap.
SCENARIO = """\
# invented test site and date
title = "sweep test column (invented site)"
reactions = "{reactions}"
[grid]
altitude_km = {{ start = 120.0, stop = 280.0, step = 80.0 }}
[location]
latitude_deg = {lat}
longitude_deg = {lon}
[time]
utc = {utc}
[sun]
f107 = {f107}
f107a = 145.0
[geomagnetic]
ap = 8
[neutrals]
model = "msis2.1"
[temperatures]
electron = "profile"
ion = "profile"
"""

COMPARED = ("density", "production", "loss", "rate_coefficient", "reaction_rate", "Te",
            "Tn", "lifetime", "solar_zenith_angle")


def write_scenario(folder, name="base.toml", *, lat=40.0, lon=15.0,
                   utc="2025-03-20T11:00:00Z", f107=150.0):
    path = Path(folder) / name
    path.write_text(SCENARIO.format(reactions=REACTIONS.as_posix(), lat=lat, lon=lon,
                                    utc=utc, f107=f107))
    return path


def spec_for(path, *vary, **kw):
    return make_spec(ionochem.load_scenario(path), parse_vary(list(vary)), **kw)


# ----------------------------------------------------------------------------- values
def test_range_values_include_stop_like_numpy_linspace():
    """``start:stop:step`` with the stop included equals numpy.linspace over the same
    count (the reference), also for steps not exact in binary."""
    assert parse_values("0:1:0.1", "k") == tuple(np.round(np.linspace(0, 1, 11), 12))
    assert parse_values("250:70:-60", "k") == (250.0, 190.0, 130.0, 70.0)
    assert parse_values("70, 150 ,250", "k") == (70.0, 150.0, 250.0)
    assert parse_values("msis2.0,msis2.1", "k") == ("msis2.0", "msis2.1")


@pytest.mark.parametrize("item, words", [
    ("sun.f107=10:5:1", "empty"),
    ("sun.f107=1:5:0", "step"),
    ("sun.f107=1:5:3", "whole number"),
    ("sun.f107=", "no values"),
    ("sun.f107=1,,2", "empty value"),
    ("sun.f107=70,70", "repeated"),
    ("f107=70", "section.key"),
    ("grid.altitude_km=1,2", "cannot be swept"),
    ("sun.f107", "KEY=VALUES"),
])
def test_malformed_vary_is_refused(item, words):
    """Form errors of --vary name the option and say what is wrong."""
    with pytest.raises(InputError, match=words) as exc:
        parse_vary([item])
    assert str(exc.value).startswith("--vary")


# ----------------------------------------------------------------------------- points
def test_three_by_two_sweep_equals_six_single_runs(tmp_path):
    """A 3 x 2 sweep (sun.f107 x location.latitude_deg) against six independent single
    runs, each from its own scenario file with the values written in (the reference path
    of ``ionochem run``): every compared variable within 1e-10 relative."""
    base = write_scenario(tmp_path)
    spec = spec_for(base, "sun.f107=70,150,250", "location.latitude_deg=-30,60")
    check_axes(spec)
    ds = run_sweep(spec).dataset
    assert ds["density"].dims[:2] == ("f107", "latitude_deg")
    assert ds.sizes["f107"] == 3 and ds.sizes["latitude_deg"] == 2
    for f107 in (70.0, 150.0, 250.0):
        for lat in (-30.0, 60.0):
            single = ionochem.Model(ionochem.load_scenario(write_scenario(
                tmp_path, f"p_{f107:g}_{lat:g}.toml", lat=lat, f107=f107))).solve()
            point = ds.sel(f107=f107, latitude_deg=lat)
            for name in COMPARED:
                a, b = point[name].values, single[name].values
                np.testing.assert_allclose(a, b, rtol=1e-10, atol=0, equal_nan=True,
                                           err_msg=f"{name} at f107={f107}, lat={lat}")


def test_sweep_changes_apply_like_run_scale(tmp_path):
    """--scale at every point equals Model.with_changes on the single run (1e-10)."""
    base = write_scenario(tmp_path)
    model = ionochem.Model(ionochem.load_scenario(base))
    rid = model.reactions[-1]
    spec = spec_for(base, "sun.f107=100,200", scales={rid: 0.5}, set_dir=tmp_path)
    ds = run_sweep(spec).dataset
    single = ionochem.Model(ionochem.load_scenario(
        write_scenario(tmp_path, "p.toml", f107=200.0))).with_changes({}, scale={rid: 0.5})
    np.testing.assert_allclose(ds["density"].sel(f107=200.0).values,
                               single.solve()["density"].values, rtol=1e-10)


def test_sensitivity_sweep_equals_model_sensitivity(tmp_path):
    """--sensitivity stores Model.sensitivity() of each point (same numbers, 1e-10)."""
    base = write_scenario(tmp_path)
    spec = spec_for(base, "sun.f107=90,210", sensitivity=True)
    ds = run_sweep(spec).dataset
    assert ds["sensitivity"].dims == ("f107", "species", "reaction", "altitude")
    ref = ionochem.Model(ionochem.load_scenario(
        write_scenario(tmp_path, "p.toml", f107=210.0))).sensitivity()
    np.testing.assert_allclose(ds["sensitivity"].sel(f107=210.0).values,
                               ref["sensitivity"].values, rtol=1e-10, atol=1e-14)


def test_sensitivity_sweep_solves_each_point_once(tmp_path, monkeypatch):
    """--sensitivity reuses the point's steady solution: one Model.solve per point (issue
    25; the sensitivities themselves are checked against Model.sensitivity() above)."""
    from ionochem.model import Model
    calls = []
    solve = Model.solve

    def counted(self):
        calls.append(1)
        return solve(self)
    monkeypatch.setattr(Model, "solve", counted)
    spec = spec_for(write_scenario(tmp_path), "sun.f107=90,210", sensitivity=True)
    ds = point_dataset(spec, 1)
    assert "sensitivity" in ds
    assert len(calls) == 1


# ----------------------------------------------------------------------------- geometry
@pytest.fixture
def astropy_offline():
    """astropy with its bundled IERS data only, never a download."""
    from astropy.utils import data, iers
    with iers.conf.set_temp("auto_download", False), \
            iers.conf.set_temp("auto_max_age", None), \
            iers.conf.set_temp("iers_degraded_accuracy", "warn"), \
            data.conf.set_temp("allow_internet", False):
        yield


@pytest.mark.parametrize("lon", [-120.0, 15.0, 170.0])
def test_local_noon_is_solar_transit_of_pvlib(tmp_path, lon):
    """time.local_hour = 12 puts the point at the Sun's transit over the longitude: the UTC
    of the point against pvlib's NREL SPA transit time (Reda & Andreas 2004,
    ``sun_rise_set_transit_spa``) within 20 s; and the zenith angle at local hours 6, 12,
    18 against geometry's own function at that UTC (exact) and astropy's AltAz of get_sun
    without refraction (0.05°)."""
    import pandas as pd
    import pvlib
    base = write_scenario(tmp_path, lon=lon, utc="2025-06-10T12:00:00Z")
    spec = spec_for(base, "time.local_hour=6,12,18")
    check_axes(spec)
    ds = run_sweep(spec).dataset
    utc = ds["time_utc"].values
    local_date = ds["time_utc"].sel(local_hour=12.0).values.astype("datetime64[D]")
    day = pd.DatetimeIndex([pd.Timestamp(str(local_date))]).tz_localize("UTC")
    transit = pvlib.solarposition.sun_rise_set_transit_spa(
        day + pd.Timedelta(hours=12 - lon / 15), 40.0, lon)["transit"].iloc[0]
    ours = pd.Timestamp(utc[1]).tz_localize("UTC")
    assert abs((ours - transit).total_seconds()) < 20.0
    from ionochem.environment.geometry import solar_zenith_angle_deg
    chi = ds["solar_zenith_angle"].values
    np.testing.assert_allclose(chi, solar_zenith_angle_deg(utc, 40.0, lon), atol=1e-6)
    import astropy.units as u
    from astropy.coordinates import AltAz, EarthLocation, get_sun
    from astropy.time import Time
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        t = Time(utc.astype("datetime64[us]").astype(str), scale="utc")
        loc = EarthLocation.from_geodetic(lon * u.deg, 40.0 * u.deg, 0 * u.m)
        alt = get_sun(t).transform_to(AltAz(obstime=t, location=loc, pressure=0 * u.hPa)).alt
    np.testing.assert_allclose(chi, 90.0 - alt.to_value(u.deg), atol=0.05)
    assert chi[1] < chi[0] and chi[1] < chi[2]


def test_day_of_year_sets_the_date_and_keeps_local_time(tmp_path):
    """time.day_of_year = 1 and 172 of 2025: the point's local apparent solar time stays
    the scenario's (geometry's true solar time, checked against the equation-of-time-free
    offset lon/15 within 17 min, Meeus 1998 ch. 28) and its date is the day's."""
    from ionochem.environment.geometry import local_solar_time_h
    base = write_scenario(tmp_path, lon=15.0, utc="2025-03-20T11:00:00Z")
    spec = spec_for(base, "time.day_of_year=1,172")
    ds = run_sweep(spec).dataset
    t = ds["time_utc"].values
    assert str(t[0].astype("datetime64[D]")) == "2025-01-01"
    assert str(t[1].astype("datetime64[D]")) == "2025-06-21"
    base_lst = local_solar_time_h(np.datetime64("2025-03-20T11:00:00"), 15.0)
    np.testing.assert_allclose(local_solar_time_h(t.astype("datetime64[us]"), 15.0),
                               base_lst, atol=1e-6)
    assert abs(base_lst - (11.0 + 1.0)) < 17 / 60


# ----------------------------------------------------------------------------- bad input
@pytest.mark.parametrize("vary, words", [
    ("sun.f10=70,150", "f10"),                      # unknown key: the loader's message
    ("sun.f107=10:5:1", "empty"),
    ("sun.f107=1:5:0", "zero"),
    ("sun.f107=-5,150", "sun.f107"),                # a value the scenario refuses
    ("location.latitude_deg=95", "latitude_deg"),
    ("time.local_hour=25", "time.local_hour"),
    ("time.day_of_year=400", "time.day_of_year"),
    ("time.day_of_year=1.5", "whole day"),
])
def test_bad_vary_exits_2_before_any_column(tmp_path, monkeypatch, capsys, vary, words):
    """Bad --vary: exit 2, one line naming the problem, no column built (Model is
    replaced by a trap), no output or store left behind."""
    base = write_scenario(tmp_path)

    def trap(*a, **k):
        raise AssertionError("a column was built")
    monkeypatch.setattr(ionochem.model.Model, "__init__", trap)
    out = tmp_path / "out.nc"
    code = main(["sweep", str(base), "--vary", vary, "-o", str(out), "--no-progress"])
    err = capsys.readouterr().err
    assert code == 2
    assert words in err and "Traceback" not in err
    assert not out.exists() and not Path(str(out) + ".points").exists()


def test_rejected_value_has_the_file_message(tmp_path):
    """A value the scenario refuses gets the message a file with that value gets."""
    bad = write_scenario(tmp_path, "bad.toml", f107=-5.0)
    with pytest.raises(InputError) as in_file:
        ionochem.load_scenario(bad)
    spec = spec_for(write_scenario(tmp_path), "sun.f107=-5")
    with pytest.raises(InputError) as in_sweep:
        check_axes(spec)
    assert in_file.value.message in in_sweep.value.message
    assert in_sweep.value.key == in_file.value.key == "sun.f107"


# ----------------------------------------------------------------------------- files
def test_netcdf_file_equals_memory_and_resume_recomputes_nothing(tmp_path):
    """Interrupted after two stored batches (KeyboardInterrupt from the batch hook), the
    resumed sweep computes only the missing points, and its netCDF file equals the
    uninterrupted in-memory sweep exactly."""
    base = write_scenario(tmp_path)
    spec = spec_for(base, "sun.f107=70:250:60", "geomagnetic.ap=4,40")
    whole = run_sweep(spec).dataset
    out = tmp_path / "sweep.nc"

    def stop(a, b, done, total):
        if done >= 3:
            raise KeyboardInterrupt
    with pytest.raises(KeyboardInterrupt):
        run_sweep(spec, output=out, on_batch=stop)
    store = Path(str(out) + ".points")
    stored = sorted(p.name for p in store.glob("batch_*.npz"))
    assert len(stored) == 3 and not out.exists()
    with pytest.raises(InputError, match="--resume"):
        run_sweep(spec, output=out)
    run = run_sweep(spec, output=out, resume=True)
    assert run.computed == 8 - 3 and run.reused == 3
    with run.dataset as ds:
        for name in whole.data_vars:
            np.testing.assert_array_equal(ds[name].values, whole[name].values, err_msg=name)
    assert not store.exists()


def test_resume_refuses_a_different_sweep(tmp_path):
    """A store made for other values is refused on --resume, naming what differs."""
    base = write_scenario(tmp_path)
    out = tmp_path / "s.nc"

    def stop(a, b, done, total):
        raise KeyboardInterrupt
    with pytest.raises(KeyboardInterrupt):
        run_sweep(spec_for(base, "sun.f107=70,150"), output=out, on_batch=stop)
    with pytest.raises(InputError, match="axes"):
        run_sweep(spec_for(base, "sun.f107=70,160"), output=out, resume=True)


def _cli(*args, cwd):
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    return subprocess.Popen([sys.executable, "-m", "ionochem.cli", *args], cwd=cwd, env=env,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)


@pytest.mark.slow
@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGKILL])
def test_cli_sweep_interrupted_by_signal_resumes_to_the_same_file(tmp_path, sig):
    """A CLI sweep stopped by SIGINT or SIGKILL once some points are stored, then run with
    --resume: the finished batch files are not rewritten (same inode and mtime), the
    command reports computing only the rest, and the file equals an uninterrupted run."""
    base = write_scenario(tmp_path)
    vary = ["--vary", "sun.f107=70:250:20", "--no-progress"]
    ref = tmp_path / "ref.nc"
    p = _cli("sweep", str(base), *vary, "-o", str(ref), cwd=tmp_path)
    assert p.wait(timeout=600) == 0, p.stderr.read()
    out = tmp_path / "cut.nc"
    store = Path(str(out) + ".points")
    p = _cli("sweep", str(base), *vary, "-o", str(out), cwd=tmp_path)
    deadline = time.time() + 300
    while time.time() < deadline and len(list(store.glob("batch_*.npz"))) < 3:
        time.sleep(0.02)
    p.send_signal(sig)
    code = p.wait(timeout=120)
    assert code == (130 if sig == signal.SIGINT else -signal.SIGKILL)
    before = {f.name: (f.stat().st_ino, f.stat().st_mtime_ns) for f in
              store.glob("batch_*.npz")}
    assert 3 <= len(before) < 10 and not out.exists()
    p = _cli("sweep", str(base), *vary, "-o", str(out), "--resume", "--keep-points",
             cwd=tmp_path)
    stdout, stderr = p.communicate(timeout=600)
    assert p.returncode == 0, stderr
    assert f"computed {10 - len(before)} column(s), {len(before)} taken from" in stdout
    for name, stamp in before.items():
        f = store / name
        assert (f.stat().st_ino, f.stat().st_mtime_ns) == stamp
    with xr.open_dataset(ref) as a, xr.open_dataset(out) as b:
        for name in a.data_vars:
            np.testing.assert_array_equal(a[name].values, b[name].values, err_msg=name)


@pytest.mark.slow
def test_two_workers_equal_serial(tmp_path):
    """The same sweep on two local worker processes and in this process: equal to
    1e-13 (every point computed by the same code; another process may round the last bit
    differently — OpenBLAS picks its kernels by thread count and size, and a full-suite run
    once differed by 2e-16 — while any mix-up of points or inputs differs by far more)."""
    base = write_scenario(tmp_path)
    spec = spec_for(base, "sun.f107=80,160", "location.latitude_deg=0,50")
    serial = run_sweep(spec).dataset
    out = tmp_path / "dask.nc"
    run = run_sweep(spec, output=out, workers=2)
    with run.dataset as ds:
        for name in serial.data_vars:
            # The file stores a swept latitude after altitude (CF §2.4): compare by name.
            a, b = ds[name].transpose(*serial[name].dims).values, serial[name].values
            if a.dtype.kind == "f":
                np.testing.assert_allclose(a, b, rtol=1e-13, atol=0, err_msg=name)
            else:
                np.testing.assert_array_equal(a, b, err_msg=name)


def test_cli_sweep_writes_file_and_map(tmp_path, capsys):
    """The command writes the netCDF with the contract dimension names and a map figure
    (a PNG by its signature)."""
    base = write_scenario(tmp_path)
    out, fig = tmp_path / "s.nc", tmp_path / "m.png"
    code = main(["sweep", str(base), "--vary", "time.local_hour=8,12,16", "--sensitivity",
                 "-o", str(out), "--plot", str(fig), "--map-species", "O2+",
                 "--map-reaction", "O2D_N2",
                 "--no-progress"])
    assert code == 0, capsys.readouterr().err
    with xr.open_dataset(out) as ds:
        assert ds["density"].dims == ("local_hour", "species", "altitude")
        assert ds["sensitivity"].dims == ("local_hour", "species", "reaction", "altitude")
        assert ds["local_hour"].attrs["units"] == "h"
    assert fig.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert not Path(str(out) + ".points").exists()


def test_zarr_output_equals_netcdf(tmp_path):
    """With the zarr package installed, a .zarr sweep holds the same numbers."""
    pytest.importorskip("zarr")
    base = write_scenario(tmp_path)
    spec = spec_for(base, "sun.f107=80,160", "geomagnetic.ap=4,20,40")
    whole = run_sweep(spec).dataset
    run = run_sweep(spec, output=tmp_path / "s.zarr", batch=4)
    with run.dataset as ds:
        for name in whole.data_vars:
            np.testing.assert_array_equal(ds[name].values, whole[name].values, err_msg=name)


# ----------------------------------------------------------------------------- diurnal
@pytest.mark.slow
def test_diurnal_column_on_local_time(tmp_path):
    """--diurnal over one day: a local_hour axis 0..24; the zenith angle least at 12 h
    (against geometry at each output time); at 200 km electrons at least 100 times fewer
    at local midnight than at noon (night-time sources, scattered light, are orders of
    magnitude weaker than direct EUV *(common practice)*)."""
    base = write_scenario(tmp_path)
    spec = spec_for(base, diurnal=(1, 3 * 3600.0))
    ds = point_dataset(spec, 0)
    hours = ds["local_hour"].values
    np.testing.assert_allclose(hours, np.arange(0, 25, 3.0))
    chi = ds["solar_zenith_angle"].values
    assert int(np.argmin(chi)) == 4
    e = ds["density"].sel(species="e", altitude=200.0).values
    assert e[4] > 100 * max(e[0], 1.0)


def test_file_assembly_memory_is_bounded_by_a_batch(tmp_path):
    """Columns streamed into netCDF from batches of 10: the peak of Python-side allocations
    (tracemalloc) for 10^4 columns (80 MB of data) is no larger than for 10^3 columns
    (within 1 MB) and far below the data's size; values land at their C-order grid
    positions (numpy.unravel_index as the reference)."""
    import tracemalloc

    from ionochem.io.sweep_file import Entry, skeleton, write_sweep
    layout = (Entry("density", ("species", "altitude"), (20, 50), "float64"),)
    template = xr.Dataset(coords={"species": [f"s{i}" for i in range(20)],
                                  "altitude": np.arange(50.0)})

    def write(n_a, name):
        coords = {"a": (np.arange(float(n_a)), {}), "b": (np.arange(100.0), {})}
        skel = skeleton(template, layout, coords, {"sweep_dimensions": "a b"})

        def batches():
            for start in range(0, n_a * 100, 10):
                idx = np.arange(start, start + 10, dtype=float)
                yield start, start + 10, np.repeat(idx[:, None], 1000, axis=1)
        tracemalloc.start()
        write_sweep(tmp_path / name, skel, layout, batches(), var_attrs={})
        _, peak = tracemalloc.get_traced_memory()
        tracemalloc.stop()
        return peak
    write(1, "warm.nc")                         # imports and first-use caches
    small = write(10, "small.nc")
    big = write(100, "big.nc")
    assert big < small + 1e6
    assert big < 8e7 / 10
    with xr.open_dataset(tmp_path / "big.nc") as ds:
        for flat in (0, 99, 100, 4567, 9999):
            i, j = np.unravel_index(flat, (100, 100))
            assert float(ds["density"][i, j, 3, 7]) == flat


def test_point_warnings_are_counted_once_each(tmp_path):
    """The tabulated demo (tables resolved against its own folder) with a drift its table's
    Ti is too cold for: each point's warning is the single run's model warning, reported
    once with its count of points."""
    path = ROOT / "scenarios" / "tabulated_column.toml"
    spec = spec_for(path, "temperatures.ion_drift_m_s=500,1000")
    run = run_sweep(spec)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        base = ionochem.load_scenario(path)
        single = ionochem.Model(base.replace(temperatures=base.temperatures.__class__(
            **{**vars(base.temperatures), "ion_drift_m_s": 1000.0})))
    assert any("1000 m/s" in str(w) for w in single.warnings)
    for w in single.warnings:
        assert run.warnings.get(str(w)) == 1
    assert len(run.warnings) == 2
