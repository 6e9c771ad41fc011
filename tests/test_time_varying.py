"""Transient runs whose neutral atmosphere and temperatures follow time (issue 28, item 3).

Reference: pymsis (NRLMSIS 2.1) called directly at each output time, the outside source of
the neutral atmosphere; and the same run with ``[solve] freeze_environment = true``.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
from pathlib import Path

import numpy as np
import pymsis.msis
import pytest

import ionochem
from ionochem.io.scenario import Grid
from ionochem.system.timeline import NODE_STEP_S

ROOT = Path(__file__).resolve().parents[1]
SUNSET = ROOT / "scenarios" / "midlatitude_sunset.toml"
#: pymsis.msis.Variable columns (pymsis documentation): N2, O2, O, temperature.
COLUMNS = {"N2": 1, "O2": 2, "O": 3}


def _scenario(times, freeze=False):
    scen = ionochem.load_scenario(SUNSET)
    return scen.replace(grid=Grid(tuple(np.linspace(120.0, 400.0, 15))),
                        solve=dataclasses.replace(scen.solve, times_s=tuple(times),
                                                  start="steady", freeze_environment=freeze))


def _pymsis(scen, seconds):
    """Densities (cm-3) and Tn of pymsis at the scenario's place, at utc + seconds."""
    utc = np.datetime64((scen.time.utc + dt.timedelta(seconds=seconds)).replace(tzinfo=None),
                        "us")
    out = pymsis.msis.calculate(np.atleast_1d(utc), scen.location.longitude_deg,
                                scen.location.latitude_deg, np.asarray(scen.grid.altitude_km),
                                f107s=[scen.sun.f107], f107as=[scen.sun.f107a],
                                aps=[[scen.geomagnetic.ap] * 7], version=2.1)
    out = np.asarray(out, float).reshape(-1, out.shape[-1])
    return {name: out[:, col] * 1e-6 for name, col in COLUMNS.items()}, out[:, 10]


def test_neutrals_and_tn_in_the_result_equal_pymsis_at_each_node_time():
    """At output times on the environment's nodes (every NODE_STEP_S) the result's N2, O2,
    O densities and Tn equal pymsis at that moment (1e-9); at a mid-node time they are
    within 1e-2 of it (linear interpolation between nodes over a sunset)."""
    times = (0.0, NODE_STEP_S, 2 * NODE_STEP_S, 2.5 * NODE_STEP_S)
    scen = _scenario(times)
    ds = ionochem.run(scen)
    assert ds["Tn"].dims == ("time", "altitude")
    for i, t in enumerate(times):
        ref, tn = _pymsis(scen, t)
        tol = 1e-9 if t % NODE_STEP_S == 0 else 1e-2
        np.testing.assert_allclose(ds["Tn"].values[i], tn, rtol=tol)
        for name, val in ref.items():
            np.testing.assert_allclose(ds["density"].sel(species=name).values[i], val,
                                       rtol=tol)
    # The atmosphere really moved over 30 minutes of sunset (else the check is empty).
    assert not np.allclose(ds["Tn"].values[0], ds["Tn"].values[2], rtol=1e-3)


def test_frozen_run_keeps_the_start_and_differs_from_the_moving_one():
    """``freeze_environment = true`` keeps every neutral density at its start value; the
    run that follows time differs in O+ at 250 km after 2 h of sunset (reported in
    docs/scenario.md), by more than 1 %."""
    times = (0.0, 3600.0, 7200.0)
    frozen = ionochem.run(_scenario(times, freeze=True))
    moving = ionochem.run(_scenario(times))
    n2 = frozen["density"].sel(species="N2").values
    np.testing.assert_array_equal(n2[0], n2[-1])
    assert frozen.attrs["environment"].startswith("frozen")
    assert moving.attrs["environment"].startswith("follows time")
    a = moving["density"].sel(species="O+").sel(altitude=250.0, method="nearest").values[-1]
    b = frozen["density"].sel(species="O+").sel(altitude=250.0, method="nearest").values[-1]
    assert abs(a / b - 1) > 0.01


def test_freeze_environment_is_refused_in_a_steady_scenario(tmp_path):
    """The key only applies to runs through time: a steady scenario with it is an error at
    ``file: solve.freeze_environment``."""
    text = SUNSET.read_text().replace('"../reactions/', f'"{ROOT}/reactions/')
    text = text.replace('mode = "transient"', 'mode = "steady"')
    lines = [ln for ln in text.splitlines() if not ln.startswith(("times_s", "start"))]
    path = tmp_path / "s.toml"
    path.write_text("\n".join(lines).replace("[solve]", "[solve]\nfreeze_environment = true"))
    with pytest.raises(ionochem.ScenarioError) as info:
        ionochem.load_scenario(path)
    assert str(info.value).startswith(f"{path}: solve.freeze_environment:")
