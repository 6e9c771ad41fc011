"""Every output file of the command line explains itself in CF terms.

Each variable and coordinate of the netCDF files written by ``run`` (steady and transient),
``compare``, ``rank`` and ``uncertainty`` carries a ``units`` string that a UDUNITS-style
parser reads (cf_xarray's pint registry, an outside reference) and a ``long_name``; the
transient time axis is CF time ("seconds since <scenario time>", decoded by xarray); the
``history`` attribute names the command that wrote the file (CF conventions 1.10, §2.6.2).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import xarray as xr
from cf_xarray.units import units as cf_units  # in the test extra: a missing one fails here

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
