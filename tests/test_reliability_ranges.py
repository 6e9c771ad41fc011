"""Scenario values within and beyond their documented ranges (issue 8, class 3).

References outside the code under test: the range table of docs/scenario.md (parsed here and
compared with ``ionochem.io.scenario.ranges.RANGES``), and the ranges' own sources named
there (F10.7 record, ap scale, Lyman-alpha flux). The property tests draw values with
hypothesis on both sides of each hard and soft bound.
"""

from __future__ import annotations

import copy
import math
import re
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from ionochem.errors import ScenarioError
from ionochem.io.scenario import RANGES, load_scenario, scenario_from_dict

DOCS = Path(__file__).resolve().parent.parent / "docs" / "scenario.md"


def _base(folder):
    (folder / "r.reactions").write_text("R1: O -> O+ + e | k = 1e-7\nR2: O+ + e -> O "
                                        "| k = 1e-12\n")
    return {"title": "range test (invented)", "reactions": "r.reactions",
            "grid": {"altitude_km": {"start": 100.0, "stop": 400.0, "step": 10.0}},
            "location": {"latitude_deg": 40.0, "longitude_deg": 15.0},
            "time": {"utc": "2025-03-20T11:00:00Z"},
            "sun": {"f107": 150.0, "f107a": 150.0}, "geomagnetic": {"ap": 8.0},
            "neutrals": {"model": "msis2.1"},
            "temperatures": {"electron": "profile", "ion": "profile",
                             "ion_drift_m_s": 0.0,
                             "profile": {"te_peak_K": 2800.0, "ti_offset_K": 300.0,
                                         "base_km": 110.0, "scale_km": 60.0}},
            "photons": {"lyman_alpha_photons_cm2_s": 4e11},
            "solve": {"rtol": 1e-10},
            "changes": {"scale": {"R1": 1.0}}}


def _set(data, key, value):
    data = copy.deepcopy(data)
    if key == "grid.altitude_km":
        data["grid"]["altitude_km"] = [value] if value < 400 else [100.0, value]
        return data
    if key == "changes.scale":
        data["changes"]["scale"]["R1"] = value
        return data
    parts = key.split(".")
    d = data
    for p in parts[:-1]:
        d = d.setdefault(p, {})        # an optional section ([transport]) made for the key
    d[parts[-1]] = value
    return data


def test_docs_table_equals_the_ranges_in_code():
    """docs/scenario.md "Plausible ranges" lists every key of RANGES with the same bounds."""
    text = DOCS.read_text()
    rows = {}
    for m in re.finditer(r"^\| `([a-z_.0-9A-Z]+)` \| ([^|]+) \| ([\[(])([^,]+), ([^\]]+)\] \| "
                         r"([^|]+) \|", text, re.M):
        soft = m.group(6).strip()
        rows[m.group(1)] = (float(m.group(4)), float(m.group(5)), m.group(3) == "(",
                            None if soft == "–" else
                            tuple(float(x) for x in soft.strip("[]").split(", ")))
    assert set(rows) == set(RANGES)
    for key, r in RANGES.items():
        assert rows[key] == (r.hard[0], r.hard[1], r.low_open, r.soft), key


def _inside(r):
    lo, hi = r.hard
    return st.floats(lo, hi, allow_nan=False, exclude_min=r.low_open)


def _outside(r):
    lo, hi = r.hard
    span = max(hi - lo, 1.0)
    return st.one_of(st.floats(hi, hi + 1e3 * span, exclude_min=True, allow_nan=False,
                               allow_infinity=False),
                     st.floats(lo - 1e3 * span, lo, exclude_max=not r.low_open,
                               allow_nan=False, allow_infinity=False))


@pytest.mark.parametrize("key", sorted(RANGES))
@settings(max_examples=25, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(data=st.data())
def test_values_inside_load_and_warn_only_outside_the_usual_range(tmp_path, key, data):
    """Inside the hard range a value loads; a warning names the key iff outside the soft one."""
    r = RANGES[key]
    value = data.draw(_inside(r))
    if key == "grid.altitude_km" and not 0 <= value:
        return
    if key == "grid.altitude_km" and value == 400.0:
        value = 400.5
    scen = scenario_from_dict(_set(_base(tmp_path), key, value), base_dir=tmp_path)
    usual = r.soft is None or r.soft[0] <= value <= r.soft[1] or (r.quiet_zero and value == 0)
    if key == "grid.altitude_km":
        usual = usual and 100.0 >= r.soft[0]
    warned = any(key in w for w in scen.warnings)
    assert warned == (not usual), (value, scen.warnings)


@pytest.mark.parametrize("key", sorted(RANGES))
@settings(max_examples=25, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(data=st.data())
def test_values_outside_are_refused_at_their_key_with_the_range(tmp_path, key, data):
    """Outside the hard range: ScenarioError at the key, the message states the range."""
    r = RANGES[key]
    value = data.draw(_outside(r))
    with pytest.raises(ScenarioError) as info:
        scenario_from_dict(_set(_base(tmp_path), key, value), base_dir=tmp_path)
    err = info.value
    assert err.key.startswith(key.split(".")[0])
    if key not in ("grid.altitude_km",) or value >= 0:
        assert f"{r.hard[1]:g}" in err.message, err.message


@pytest.mark.parametrize("utc", ["0001-01-01T00:30:00+02:00", "9999-12-31T23:30:00-05:00",
                                 "1850-06-21T12:00:00Z", "2150-06-21T12:00:00Z"])
def test_times_outside_the_solar_formulas_years_are_refused(tmp_path, utc):
    """Years outside 1901–2099 (and offsets that leave the calendar) are refused at time.utc,
    not an OverflowError."""
    with pytest.raises(ScenarioError) as info:
        scenario_from_dict(_set(_base(tmp_path), "time.utc", utc), base_dir=tmp_path)
    assert info.value.key == "time.utc" and "1901–2099" in info.value.message


@pytest.mark.parametrize("depth", [20, 1000, 5000])
def test_deeply_nested_toml_is_a_clean_error(tmp_path, depth):
    """A TOML nested far deeper than the schema (arrays or tables) is one ScenarioError."""
    base = (tmp_path / "s.toml")
    text = (f'title = "t"\nreactions = "r.reactions"\nx = {"[" * depth}1{"]" * depth}\n')
    (tmp_path / "r.reactions").write_text("")
    base.write_text(text)
    with pytest.raises(ScenarioError) as info:
        load_scenario(base)
    assert len(str(info.value)) < 300
    text = 'title = "t"\n[' + ".".join(["a"] * depth) + "]\nb = 1\n"
    base.write_text(text)
    with pytest.raises(ScenarioError):
        load_scenario(base)


def test_f107_huge_is_refused_before_the_neutral_model(tmp_path):
    """The issue's f107 = 1e6 is refused at sun.f107 with the range, not a NaN from NRLMSIS."""
    with pytest.raises(ScenarioError) as info:
        scenario_from_dict(_set(_base(tmp_path), "sun.f107", 1e6), base_dir=tmp_path)
    assert info.value.key == "sun.f107" and "between 30 and 600 sfu" in info.value.message
    assert math.isfinite(RANGES["sun.f107"].hard[1])
