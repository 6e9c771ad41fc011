"""What users tripped over on the command line: analyses of a transient scenario, checks
that came after the solve, messages that misled.

Columns are synthetic (invented rates and densities, tests/conftest.py): the one-ion column
n = sqrt(q/α) (Chapman 1931) with O fixed.
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pytest

import ionochem
from ionochem.cli import main

ALT = np.linspace(100.0, 300.0, 11)
Q = 50.0                                           # invented production, cm-3 s-1
ALPHA = 2.0e-7                                     # invented recombination, cm3 s-1

ONE_ION = f"""\
P1: O -> O+ + e | k = prescribed | f = 1.2 | ref = invented test
R1: O+ + e -> O | k = {ALPHA:g} | f = 1.3 | ref = invented test
"""

TRANSIENT = ('[time]\nutc = 2025-03-20T15:30:00Z\n'
             '[solve]\nmode = "transient"\ntimes_s = [0.0, 600.0, 30600.0]\n')


@pytest.fixture
def transient(column, tmp_path):
    return column(ONE_ION, ALT, neutrals={"O": 1e11}, Tn=600.0, production={"P1": Q},
                  extra=TRANSIENT)


@pytest.mark.parametrize("command", [
    ["compare", "--scale", "R1=0.5"], ["rank"], ["uncertainty", "--samples", "4"],
    ["fit", "--free", "R1", "--observed", "OBS"]])
def test_analyses_refuse_a_transient_scenario_without_a_time(transient, tmp_path, capsys,
                                                             command):
    """compare, rank, uncertainty and fit analyse a steady state: on a transient scenario
    they stop (exit 2, before any solve) with one line at ``file: solve.mode`` that says how
    to ask for a moment (``--steady-at``), instead of silently analysing the start time."""
    obs = tmp_path / "obs.csv"
    obs.write_text("altitude_km,species,density_cm3,sigma_cm3\n200,O+,1.5e4,1e3\n")
    argv = [command[0], str(transient), *[str(obs) if a == "OBS" else a for a in command[1:]]]
    assert main(argv) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1
    assert err[0].startswith(f"{transient}: solve.mode: ")
    assert "--steady-at 30600" in err[0] and "transient" in err[0]


def test_steady_at_analyses_the_steady_state_at_that_moment(transient, tmp_path, capsys):
    """``--steady-at 30600`` moves [time] utc by 30600 s (8.5 h: 15:30 → 00:00 UTC) and
    solves the steady state there: the comparison's title names the moment and halving the
    recombination raises n = sqrt(q/α) by sqrt(2) (analytic)."""
    import xarray as xr
    out = tmp_path / "c.nc"
    assert main(["compare", str(transient), "--scale", "R1=0.5", "--steady-at", "30600",
                 "-o", str(out)]) == 0
    with xr.open_dataset(out) as ds:
        assert "steady state at t = 30600 s, 2025-03-21T00:00:00+00:00" in ds.attrs["title"]
        np.testing.assert_allclose(ds["ratio"].sel(species="O+").values, np.sqrt(2.0),
                                   rtol=1e-8)
    from ionochem.cli.steady_at import steady_at
    scen = steady_at(ionochem.load_scenario(transient), 30600.0)
    assert scen.solve.mode == "steady"
    assert scen.time.utc == dt.datetime(2025, 3, 21, tzinfo=dt.UTC)
    capsys.readouterr()


def test_steady_at_is_refused_on_a_steady_scenario(column, capsys):
    """``--steady-at`` on a steady scenario is an error at the option (exit 2)."""
    path = column(ONE_ION, ALT, neutrals={"O": 1e11}, Tn=600.0, production={"P1": Q})
    assert main(["rank", str(path), "--steady-at", "10"]) == 2
    assert capsys.readouterr().err.startswith("--steady-at: ")
