"""Every bundled demo scenario runs through the command line and writes a dataset and a figure
that explain themselves (title, units, provenance)."""

from __future__ import annotations

from pathlib import Path

import pytest
import xarray as xr

from ionochem.cli import main

SCENARIOS = sorted((Path(__file__).resolve().parents[1] / "scenarios").glob("*.toml"))
QUICK = [s for s in SCENARIOS if "sunset" not in s.name]
SLOW = [s for s in SCENARIOS if "sunset" in s.name]


def _run(path, tmp_path, capsys):
    out, fig = tmp_path / "out.nc", tmp_path / "fig.png"
    assert main(["run", str(path), "-o", str(out), "--plot", str(fig)]) == 0
    printed = capsys.readouterr().out
    assert fig.stat().st_size > 20_000                 # a real figure, not an empty canvas
    ds = xr.open_dataset(out)
    assert ds.attrs["title"] in printed
    assert ds["density"].attrs["units"] == "cm-3"
    assert ds.attrs["scenario_sha256"] and ds.attrs["reaction_list_sha256"]
    assert float(ds["density"].min()) >= 0.0
    return ds


def test_there_are_the_promised_demo_scenarios():
    names = {s.stem for s in SCENARIOS}
    assert {"midlatitude_equinox", "midlatitude_solar_minimum", "auroral_ion_drift",
            "midlatitude_sunset"} <= names


@pytest.mark.parametrize("path", QUICK, ids=[s.stem for s in QUICK])
def test_demo_scenario_runs(path, tmp_path, capsys):
    ds = _run(path, tmp_path, capsys)
    assert "time" not in ds.dims


@pytest.mark.slow
@pytest.mark.parametrize("path", SLOW, ids=[s.stem for s in SLOW])
def test_transient_demo_scenario_runs_and_ions_decay_after_sunset(path, tmp_path, capsys):
    """After sunset the molecular ions at 150 km disappear within tens of minutes
    (lifetimes of seconds to a minute once production stops; *(common practice)*)."""
    ds = _run(path, tmp_path, capsys)
    n = ds["density"].sel(species="O2+", altitude=150.0).values
    assert n[-1] < 1e-3 * n[0]
    chi = ds["solar_zenith_angle"].values
    assert chi[0] < 90 < chi[-1]
