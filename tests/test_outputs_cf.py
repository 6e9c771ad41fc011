"""Every output file of the command line explains itself in CF terms.

Each variable and coordinate of the netCDF files written by ``run`` (steady and transient),
``compare``, ``rank`` and ``uncertainty`` carries a ``units`` string that a UDUNITS-style
parser reads (cf_xarray's pint registry, an outside reference) and a ``long_name``; the
transient time axis is CF time ("seconds since <scenario time>", decoded by xarray); the
``history`` attribute names the command that wrote the file (CF conventions 1.10, §2.6.2).
Every kind of output, ``fit`` and ``sweep`` included, passes the IOOS compliance checker's
CF-1.8 suite (the ``compliance-checker`` package, an outside reference; it runs offline on
its packaged standard-name table) with no error, no warning and no checker exception.
"""

from __future__ import annotations

import json
import socket
from pathlib import Path

import numpy as np
import pytest
import xarray as xr
from cf_xarray.units import units as cf_units  # in the test extra: a missing one fails here
from compliance_checker.runner import CheckSuite, ComplianceChecker

from ionochem.cli import main

SCEN = Path(__file__).resolve().parents[1] / "scenarios"

FLAG_OR_LABEL = {"flag_values", "flag_meanings"}


def _check_cf(path):
    with xr.open_dataset(path, decode_times=False) as ds:
        for name, var in {**ds.data_vars, **ds.coords}.items():
            if var.dtype.kind in "OSU" or FLAG_OR_LABEL & set(var.attrs):
                continue            # labels and flags carry no unit
            assert "units" in var.attrs, f"{path.name}: {name} has no units"
            assert "long_name" in var.attrs or "standard_name" in var.attrs, (
                f"{path.name}: {name} has no long_name")
            u = var.attrs["units"]
            if " since " in u:
                continue
            cf_units.Unit(u)      # raises if the unit string is not UDUNITS-parsable
        return dict(ds.attrs)


def _cf18_issues(path, tmp_path):
    """Messages of every CF-1.8 check that ``path`` fails (strict: high, medium and low
    priority), plus any exception the checker met; [] when the file is clean."""
    CheckSuite.load_all_available_checkers()
    report = tmp_path / f"{path.name}.json"
    passed, exceptions = ComplianceChecker.run_checker(
        str(path), ["cf:1.8"], 0, "strict", output_filename=str(report),
        output_format="json")
    result = json.loads(report.read_text())["cf:1.8"]
    issues = [f"{item['name']}: {m}" for item in result["all_priorities"]
              for m in item["msgs"] if item["value"][0] < item["value"][1]]
    if exceptions:
        issues.append("the checker raised an exception (see its report)")
    if not passed and not issues:
        issues.append("not passed")
    return issues


@pytest.fixture
def offline(monkeypatch):
    """No network: the checker must run on its packaged tables."""
    def refuse(*args, **kwargs):
        raise OSError("network use in a test")
    monkeypatch.setattr(socket.socket, "connect", refuse)


SWEEP_ARGS = ["--vary", "location.latitude_deg=30,50", "--vary", "sun.f107=100,150",
              "--sensitivity"]


@pytest.mark.slow
def test_every_kind_of_output_passes_the_cf18_compliance_checker(tmp_path, capsys, offline):
    """run (steady, transient), compare, rank, uncertainty (Monte Carlo, Morris), fit and
    sweep (a swept latitude: a CF Y axis) files: no error, warning or exception from the
    IOOS compliance checker, cf:1.8, strict."""
    steady = str(SCEN / "midlatitude_equinox.toml")
    runs = {
        "run.nc": ["run", steady],
        "sunset.nc": ["run", str(SCEN / "midlatitude_sunset.toml")],
        "compare.nc": ["compare", steady, "--scale", "O2D_N2=0.5"],
        "rank.nc": ["rank", steady, "--top", "3"],
        "mc.nc": ["uncertainty", steady, "--samples", "8", "--no-progress"],
        "morris.nc": ["uncertainty", steady, "--samples", "8", "--method", "morris",
                      "--top", "2", "--no-progress"],
        "fit.nc": ["fit", str(SCEN / "tabulated_column.toml"), "--observed",
                   str(SCEN / "observations" / "brackenfold_n2plus_ne.csv"), "--free",
                   "PI_N2", "--free", "DR_N2plus", "--constrain-electrons"],
        "sweep.nc": ["sweep", steady, *SWEEP_ARGS],
    }
    problems = {}
    for name, argv in runs.items():
        out = tmp_path / name
        assert main([*argv, "-o", str(out)]) == 0, name
        issues = _cf18_issues(out, tmp_path)
        if issues:
            problems[name] = issues
    assert not problems, problems
    with xr.open_dataset(tmp_path / "sweep.nc") as ds:
        # The sweep's points carry where and when they are as coordinates with units.
        assert ds["latitude_deg"].attrs["units"] == "degree_north"
        assert float(ds["longitude"]) == pytest.approx(15.0)
        assert ds["longitude"].attrs["units"] == "degree_east"
        assert "time_utc" in ds.coords and set(ds["time_utc"].dims) == {"latitude_deg", "f107"}
        assert ds["f107"].attrs["units"] == "1e-22 W m-2 Hz-1"    # sfu, UDUNITS-readable
    capsys.readouterr()


@pytest.mark.slow
def test_every_output_file_has_parsable_units_and_names_its_command(tmp_path, capsys):
    """run (steady, transient), compare, rank and uncertainty outputs: units parse, names
    present, ``history`` ends with the command line that wrote the file."""
    steady = str(SCEN / "midlatitude_equinox.toml")
    runs = {
        "run.nc": ["run", steady],
        "sunset.nc": ["run", str(SCEN / "midlatitude_sunset.toml")],
        "compare.nc": ["compare", steady, "--scale", "O2D_N2=0.5"],
        "rank.nc": ["rank", steady, "--top", "3"],
        "mc.nc": ["uncertainty", steady, "--samples", "8", "--no-progress"],
    }
    for name, argv in runs.items():
        out = tmp_path / name
        assert main([*argv, "-o", str(out)]) == 0, name
        attrs = _check_cf(out)
        assert attrs["history"].endswith(" ".join([*argv, "-o", str(out)])), name
        assert attrs["history"].split(" ", 2)[1] == "ionochem"
    with xr.open_dataset(tmp_path / "sunset.nc") as ds:
        # CF time decodes to the scenario's UTC time plus the output seconds.
        t = ds["time"].values
        assert np.issubdtype(t.dtype, np.datetime64)
        np.testing.assert_allclose((t - t[0]) / np.timedelta64(1, "s"), ds["time_s"].values)
    capsys.readouterr()


def test_rate_coefficients_are_split_by_order_with_one_unit_each(column):
    """A first-order (prescribed source) and a two-body reaction land in variables of
    their own unit; each holds NaN for the other order (CF: one unit per variable)."""
    import ionochem
    alt = np.linspace(100.0, 200.0, 5)
    path = column("P1: O -> O+ + e | k = prescribed | ref = invented test\n"
                  "R1: O+ + e -> O | k = 2e-7 | ref = invented test\n", alt,
                  neutrals={"O": 1e11}, Tn=500.0, production={"P1": 10.0})
    ds = ionochem.Model(ionochem.load_scenario(path)).solve()
    assert ds["rate_coefficient"].attrs["units"] == "cm3 s-1"
    assert ds["rate_coefficient_first_order"].attrs["units"] == "s-1"
    np.testing.assert_allclose(ds["rate_coefficient"].sel(reaction="R1"), 2e-7)
    assert np.isnan(ds["rate_coefficient"].sel(reaction="P1")).all()
    assert np.isnan(ds["rate_coefficient_first_order"].sel(reaction="R1")).all()
    assert list(ds["reaction_order"].values) == [1, 2]


def test_cf_dimension_order_in_files_and_kept_for_files_read_back(tmp_path):
    """CF §2.4: in a written file a transient variable is stored (species, time, altitude),
    labels left of time and altitude; a file the program reads back by position (a sweep's
    stored template column, ``reorder=False``) keeps the dataset's own order, so batches
    packed before a resume unpack the same way after it."""
    from ionochem.io.netcdf import write_netcdf
    t = np.array(["2025-03-20T18:00", "2025-03-20T19:00"], dtype="datetime64[ns]")
    ds = xr.Dataset(
        {"density": (("time", "species", "altitude"), np.arange(12.0).reshape(2, 2, 3),
                     {"units": "cm-3", "long_name": "number density"})},
        coords={"time": ("time", t), "species": ["e", "NO+"],
                "altitude": ("altitude", [100.0, 200.0, 300.0],
                             {"units": "km", "standard_name": "altitude", "positive": "up"})})
    write_netcdf(ds, tmp_path / "cf.nc")
    write_netcdf(ds, tmp_path / "back.nc", reorder=False)
    with xr.open_dataset(tmp_path / "cf.nc") as cf, xr.open_dataset(tmp_path / "back.nc") as b:
        assert cf["density"].dims == ("species", "time", "altitude")
        assert b["density"].dims == ("time", "species", "altitude")
        np.testing.assert_array_equal(b["density"].values, ds["density"].values)
        xr.testing.assert_equal(cf["density"].transpose(*ds["density"].dims).load(),
                                ds["density"])
