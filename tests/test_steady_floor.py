"""Steady-state acceptance rules at the edges: nearly empty levels and twilight columns.

References outside the project: the one-ion balance q = α n² has the analytic steady state
n = sqrt(q/α) (Rishbeth & Garriott 1969, Introduction to Ionospheric Physics, ch. 3, the
α-Chapman layer); the twilight column is the issue-8 example (latitude 0°, longitude 0°,
2025-03-20T19:20Z, F10.7 150, Ap 8, grid 60–1000 km by 10 km), whose zenith angle (~110°)
is checked against the NOAA/Meeus solar position.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

import ionochem
from ionochem.environment.geometry import solar_zenith_angle_deg
from ionochem.errors import SolverError
from ionochem.solve.steady import solve_steady

ROOT = Path(__file__).resolve().parent.parent
ALPHA = 4e-7          # cm3 s-1, a dissociative-recombination size (invented test value)


def _one_ion(q):
    """Callables of dn/dt = q − α n² on rows of q (one species)."""
    q = np.asarray(q, float)

    def tendency(n, rows):
        return q[rows, None] - ALPHA * n ** 2

    def jacobian(n, rows):
        return (-2 * ALPHA * n)[:, :, None]

    def gross(n, rows):
        return np.broadcast_to(q[rows, None], n.shape).copy(), ALPHA * n ** 2

    return tendency, jacobian, gross


def test_nearly_empty_level_is_accepted_by_the_absolute_floor():
    """A level with production 4e-160 cm-3 s-1 beside normal ones converges: its residual
    lies below the absolute floor (1e-30 cm-3 s-1) and the normal levels meet sqrt(q/α)."""
    q = np.array([4e-160, 1e2, 1e4])
    res = solve_steady(np.zeros((3, 1)), *_one_ion(q))
    n = res.n[:, 0]
    assert np.all(np.isfinite(n)) and np.all(n >= 0)
    assert abs(q[0] - ALPHA * n[0] ** 2) <= 1e-30
    np.testing.assert_allclose(n[1:], np.sqrt(q[1:] / ALPHA), rtol=1e-8)


def test_failure_names_the_stalled_species():
    """An unattainable tolerance (below double-precision rounding of q − α n²) fails and
    reports the levels and the species that stalled."""
    q = np.array([1e2, 1e4])
    with pytest.raises(SolverError) as info:
        solve_steady(np.zeros((2, 1)), *_one_ion(q), rtol=1e-300, max_newton=3,
                     max_continuation=3,
                     row_labels=["100 km", "200 km"], species_names=["NO+"])
    assert info.value.levels == ("100 km", "200 km")
    assert info.value.species == ("NO+", "NO+")
    assert "stalled: NO+" in str(info.value)


def test_issue_twilight_column_solves(tmp_path):
    """The issue-8 twilight column (zenith angle ~110°) solves at every level, 400–450 km
    included, with a finite, non-negative result."""
    utc = "2025-03-20T19:20:00Z"
    sza = solar_zenith_angle_deg(np.datetime64(utc[:-1]), 0.0, 0.0)
    assert 100 < sza < 120
    (tmp_path / "t.toml").write_text(f"""title = "issue-8 twilight column (invented test)"
reactions = "{(ROOT / 'reactions' / 'ionosphere.reactions').as_posix()}"
[grid]
altitude_km = {{ start = 60.0, stop = 1000.0, step = 10.0 }}
[location]
latitude_deg = 0.0
longitude_deg = 0.0
[time]
utc = {utc}
[sun]
f107 = 150.0
f107a = 150.0
[geomagnetic]
ap = 8.0
[neutrals]
model = "msis2.1"
[temperatures]
electron = "profile"
ion = "profile"
""")
    ds = ionochem.Model(ionochem.load_scenario(tmp_path / "t.toml")).solve()
    dens = ds["density"].values
    assert np.all(np.isfinite(dens)) and np.all(dens >= 0)
    assert float(ds["residual"].max()) <= 1e-10


def test_model_failure_names_scenario_species_and_what_to_try(tmp_path, monkeypatch):
    """A SolverError from the batch solve reaches the user at the scenario file and key
    `solve`, naming the stalled species and suggesting what to try (issue 8, class 6)."""
    from ionochem.system.column import ColumnSystem

    def stalled(*args, **kwargs):
        raise SolverError("steady state not reached at 1 level(s): 440 km (largest relative "
                          "residual 0.002; stalled: N(2D))", levels=["440 km"],
                          species=["N(2D)"])

    (tmp_path / "c.reactions").write_text(
        "P1: N2 -> N2+ + e | k = prescribed\nR1: N2+ + e -> N + N | k = 2e-7\n")
    (tmp_path / "n.csv").write_text("altitude_km,N2,N,Tn_K\n400,1e8,1e6,900\n500,1e7,1e6,950\n")
    (tmp_path / "p.csv").write_text("altitude_km,P1\n400,1\n500,1\n")
    (tmp_path / "s.toml").write_text(
        'title = "t (invented)"\nreactions = "c.reactions"\n[grid]\naltitude_km = [440.0]\n'
        '[neutrals]\nmodel = "table"\ntable = "n.csv"\n[temperatures]\nelectron = "neutral"\n'
        'ion = "neutral"\n[production]\ntable = "p.csv"\n')
    model = ionochem.Model(ionochem.load_scenario(tmp_path / "s.toml"))
    monkeypatch.setattr(ColumnSystem, "steady", stalled)
    with pytest.raises(SolverError) as info:
        model.solve()
    text = str(info.value)
    assert text.startswith(f"{tmp_path / 's.toml'}: solve: steady state not reached")
    assert "N(2D)" in text and "try:" in text and "transient" in text
    assert info.value.species == ("N(2D)",)
