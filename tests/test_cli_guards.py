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
    err = [line for line in capsys.readouterr().err.strip().splitlines()
           if not line.startswith("warning:")]      # plausibility warnings may precede it
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


@pytest.fixture
def one_ion(column):
    return column(ONE_ION, ALT, neutrals={"O": 1e11}, Tn=600.0, production={"P1": Q})


@pytest.fixture
def no_solve(monkeypatch):
    """A solve is a failure of the test: every check below must come before one."""
    def refuse(*_a, **_k):
        raise AssertionError("solved before checking the input")
    monkeypatch.setattr(ionochem.Model, "solve", refuse)
    monkeypatch.setattr(ionochem.Model, "sensitivity", refuse)


@pytest.mark.parametrize("argv_tail, where, words", [
    (["--budget", "@200"], "--budget", "names no species"),
    (["--budget", "NO+@200"], "--budget", "no species 'NO+'"),
    (["--budget", "O+@450"], "--budget", "450 km is outside the grid 100-300 km"),
    (["--observed", "OBS_HIGH"], "obs.csv:2", "outside the model grid"),
    (["--observed", "OBS_SPECIES"], "obs.csv:2", "species 'NO+' is not in the model"),
])
def test_budget_and_observed_checks_come_before_the_solve(one_ion, tmp_path, capsys,
                                                          no_solve, argv_tail, where, words):
    """``run --budget @200`` (no species), a budget species or height the result will not
    have, and observations off the grid or of an unknown species stop with exit 2 and one
    line at the option or file line, before any solve (the solve is made to fail here)."""
    obs = tmp_path / "obs.csv"
    row = "450,O+,1e4,1e3" if argv_tail[-1] == "OBS_HIGH" else "200,NO+,1e4,1e3"
    obs.write_text(f"altitude_km,species,density_cm3,sigma_cm3\n{row}\n")
    argv = ["run", str(one_ion), *[str(obs) if a.startswith("OBS") else a for a in argv_tail]]
    assert main(argv) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and where in err[0] and words in err[0], err


def test_compare_checks_observations_before_solving(one_ion, tmp_path, capsys, no_solve):
    """compare refuses observations off the grid before solving either model."""
    obs = tmp_path / "obs.csv"
    obs.write_text("altitude_km,species,density_cm3,sigma_cm3\n450,O+,1e4,1e3\n")
    assert main(["compare", str(one_ion), "--scale", "R1=0.5", "--observed", str(obs)]) == 2
    assert "outside the model grid" in capsys.readouterr().err


def test_rank_of_a_fixed_neutral_is_refused(one_ion, capsys, no_solve):
    """A fixed neutral's density is given, so every sensitivity to a rate is 0: ``rank
    --species O`` says so (exit 2, at --species) instead of printing a table of zeros."""
    assert main(["rank", str(one_ion), "--species", "O"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("--species: O is a fixed neutral") and "O+" in err


def test_a_given_electron_density_gets_no_night_layer_warning_and_no_balance(tmp_path,
                                                                             capsys):
    """The midnight demo with a given (invented) electron density: the F layer is the given
    one, so the warning that photochemistry alone cannot keep a night F layer does not
    apply, and the imposed Ne recombines far more than the night sources ionize (some 160
    times here), which is no check of the solution: no ``column_balance`` is reported and
    the terminal says why, instead of printing a balance of about -1.6e2."""
    from pathlib import Path
    root = Path(__file__).resolve().parents[1]
    alt = np.arange(90.0, 602.0, 2.0)
    ne = 1e3 + 3e5 * np.exp(-((alt - 300.0) / 60.0) ** 2)   # invented night F layer
    (tmp_path / "ne.csv").write_text("altitude_km,Ne\n" + "".join(
        f"{a:g},{n:.6g}\n" for a, n in zip(alt, ne, strict=True)))
    text = (root / "scenarios" / "midlatitude_midnight.toml").read_text()
    text = text.replace('"../reactions/', f'"{root.as_posix()}/reactions/')
    # The balance ion (O+) of a given Ne cannot also be transported: a photochemical column.
    text = text.split("[transport]")[0]
    scen = tmp_path / "midnight_ne.toml"
    scen.write_text(text + '\n[solve]\nelectrons = "table"\nelectron_table = "ne.csv"\n')
    out = tmp_path / "m.nc"
    assert main(["run", str(scen), "-o", str(out)]) == 0
    captured = capsys.readouterr()
    assert "night F layer" not in captured.err
    assert "balance -" not in captured.out and "no balance expected" in captured.out
    import xarray as xr
    with xr.open_dataset(out) as ds:
        assert "column_balance" not in ds.attrs
        assert ds.attrs["column_recombination_cm2_s"] > 100 * ds.attrs["column_ionization_cm2_s"]
