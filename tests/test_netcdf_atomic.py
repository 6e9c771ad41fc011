"""Outputs are written atomically: an interrupted write leaves the previous file intact."""

from __future__ import annotations

import numpy as np
import pytest
import xarray as xr

from ionochem.io import netcdf


def test_interrupted_write_keeps_the_old_file(tmp_path, monkeypatch):
    """A failure in the middle of writing leaves the good file and no temporary file."""
    target = tmp_path / "out.nc"
    good = xr.Dataset({"x": ("a", np.arange(3.0))})
    netcdf.write_netcdf(good, target)
    before = target.read_bytes()

    def boom(self, *a, **k):
        raise KeyboardInterrupt

    monkeypatch.setattr(xr.Dataset, "to_netcdf", boom)
    with pytest.raises(KeyboardInterrupt):
        netcdf.write_netcdf(xr.Dataset({"x": ("a", np.zeros(5))}), target)
    assert target.read_bytes() == before
    assert [p.name for p in tmp_path.iterdir()] == ["out.nc"]


def test_round_trip_keeps_strings_units_and_values(tmp_path):
    ds = xr.Dataset({"density": (("species",), np.array([1.0, 2.0]), {"units": "cm-3"})},
                    coords={"species": np.array(["O+", "e"], dtype=object)})
    netcdf.write_netcdf(ds, tmp_path / "r.nc")
    back = xr.open_dataset(tmp_path / "r.nc")
    assert list(back["species"].values) == ["O+", "e"]
    assert back["density"].attrs["units"] == "cm-3"
    np.testing.assert_array_equal(back["density"].values, [1.0, 2.0])
