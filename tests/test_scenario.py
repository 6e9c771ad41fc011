"""Scenario files: strict validation, defaults, paths, times and the bad-input corpus.

References: the scenario specification (docs/scenario.md, which the
checks outside the project rely on), the TOML 1.0.0 specification (https://toml.io/en/v1.0.0,
for date-time values and its offset date-time example), numpy.linspace as the reference for
evenly spaced grids, and hashlib for the file digest. Scenario contents are invented.
"""

from __future__ import annotations

import copy
import csv
import dataclasses
import datetime as dt
import hashlib
import os
import re
import tomllib
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import ionochem
from ionochem.environment.column import build_environment
from ionochem.errors import ScenarioError
from ionochem.io.scenario import (
    Scenario,
    TemperatureProfile,
    load_scenario,
    parse_budget,
    scenario_from_dict,
)

HERE = Path(__file__).parent
CORPUS = HERE / "bad_inputs"
MANIFEST = CORPUS / "scenarios.tsv"
DOCS = HERE.parent / "docs" / "scenario.md"


def _manifest():
    with MANIFEST.open(newline="") as fh:
        return list(csv.DictReader(fh, delimiter="\t"))


@pytest.fixture
def base(tmp_path):
    """A minimal valid tabulated scenario as a dict, with its files in tmp_path."""
    (tmp_path / "tiny.reactions").write_text(
        "P1: O -> O+ + e | k = prescribed | ref = invented test\n")
    (tmp_path / "n.csv").write_text("altitude_km,O,Tn_K\n50,1e12,200\n500,1e8,1000\n")
    return {
        "title": "invented test column",
        "reactions": "tiny.reactions",
        "grid": {"altitude_km": {"start": 100.0, "stop": 300.0, "step": 50.0}},
        "neutrals": {"model": "table", "table": "n.csv"},
        "temperatures": {"electron": "neutral", "ion": "neutral"},
    }


def _err(data, tmp_path) -> ScenarioError:
    with pytest.raises(ScenarioError) as info:
        scenario_from_dict(data, path="s.toml", base_dir=tmp_path)
    return info.value


def _with(data, dotted, value):
    """Copy of ``data`` with one dotted key set (sections created as needed)."""
    out = copy.deepcopy(data)
    *heads, last = dotted.split(".")
    node = out
    for h in heads:
        node = node.setdefault(h, {})
    node[last] = value
    return out


# ------------------------------------------------------------------------ corpus

@pytest.mark.parametrize("row", _manifest(), ids=lambda r: r["file"])
def test_bad_input_corpus_reports_manifest_key_and_text(row):
    """Each malformed scenario of tests/bad_inputs/scenarios.tsv fails with
    ``FILE: KEY: message`` (``FILE:N:`` for TOML syntax) and the listed text, as
    docs/scenario.md requires of the command line. Table errors surface when the tables are
    read, by the environment stage while the model is built."""
    path = str(CORPUS / row["file"])
    with pytest.raises(ScenarioError) as info:
        ionochem.Model(load_scenario(path))
    text = str(info.value)
    key = row["key"]
    prefix = f"{path}:{key[5:]}: " if key.startswith("line:") else f"{path}: {key}: "
    assert text.startswith(prefix), text
    assert row["contains"] in text, text
    assert row["contains"] == row["contains"].lower()


def test_bad_input_corpus_is_complete_and_listed():
    """At least 15 malformed scenarios (one per rule of docs/scenario.md at least); every .toml
    in the corpus folder is in the manifest and every manifest row exists (so none is silently
    skipped)."""
    rows = {r["file"] for r in _manifest()}
    files = {p.name for p in CORPUS.glob("*.toml")}
    assert len(rows) >= 15
    assert rows == files


@pytest.mark.parametrize("name", ["grid_outside_neutral_table", "neutral_table_bad_cell",
                                  "neutral_table_missing_tn",
                                  "temperature_table_missing_te"])
def test_table_errors_appear_only_when_tables_are_read(name):
    """docs/scenario.md: table contents are read when the model is built, not by
    load_scenario, so these corpus files load and then fail when the model is built."""
    scen = load_scenario(CORPUS / f"{name}.toml")
    with pytest.raises(ScenarioError):
        ionochem.Model(scen)


def test_corpus_base_without_the_defect_is_valid():
    """The corpus files differ from a valid scenario by one defect: removing the unknown key
    of unknown_top_key.toml gives a scenario whose tables all read when the model is built."""
    text = (CORPUS / "unknown_top_key.toml").read_text().replace('colour = "blue"\n', "")
    scen = scenario_from_dict(tomllib.loads(text), path="x.toml", base_dir=CORPUS)
    env = ionochem.Model(scen).environment
    assert set(env.prescribed) == {"P1"} and env.prescribed["P1"].shape == (5,)
    assert env.neutrals and np.all(env.Tn > 0)


# ------------------------------------------------------------------------ defaults, paths

def test_minimal_scenario_fills_every_documented_default(base, tmp_path):
    """docs/scenario.md: defaults of solve, photons, temperatures, profile, changes and
    output; optional sections absent are None."""
    s = scenario_from_dict(base, path="s.toml", base_dir=tmp_path)
    assert (s.solve.mode, s.solve.electrons, s.solve.balance_ion, s.solve.rtol,
            s.solve.times_s, s.solve.electron_table) == ("steady", "neutrality", "O+",
                                                         1e-10, None, None)
    assert (s.photons.flux, s.photons.secondary, s.photons.spectrum,
            s.photons.lyman_alpha_photons_cm2_s) == ("euvac", True, None, None)
    t = s.temperatures
    assert (t.vibrational, t.ion_drift_m_s, t.table) == ("neutral", 0.0, None)
    assert t.profile == TemperatureProfile(2800.0, 300.0, 125.0, 85.0)
    assert s.changes.set == {} and s.changes.scale == {} and s.output.budget == ()
    assert s.location is s.time is s.sun is s.geomagnetic is None
    assert s.production.table is None and s.neutrals.no_table is None


def test_documented_profile_defaults_match_the_code():
    """docs/scenario.md states the parametric-profile defaults; the dataclass must agree."""
    text = DOCS.read_text()
    for f in dataclasses.fields(TemperatureProfile):
        m = re.search(rf"\| `{f.name}` \| [^|]+\| `([0-9.]+)` \|", text)
        assert m, f.name
        assert float(m.group(1)) == f.default


def test_profile_defaults_equal_those_of_the_shape_that_uses_them():
    """The environment module's parametric_profile receives these keys as keyword
    arguments; a scenario without [temperatures.profile] must run the shape with its own
    documented defaults (one set of numbers, not two that drift apart)."""
    import inspect

    from ionochem.environment.temperatures import parametric_profile
    params = inspect.signature(parametric_profile).parameters
    for f in dataclasses.fields(TemperatureProfile):
        assert params[f.name].default == f.default, f.name


def test_paths_resolve_against_the_scenario_folder_not_the_cwd(base, tmp_path, monkeypatch):
    """docs/scenario.md, 'Rules': relative paths resolve against the scenario file."""
    sub = tmp_path / "case"
    sub.mkdir()
    for name in ("tiny.reactions", "n.csv"):
        (sub / name).write_bytes((tmp_path / name).read_bytes())
        (tmp_path / name).unlink()
    (sub / "s.toml").write_text(
        'title = "t"\nreactions = "tiny.reactions"\n[grid]\naltitude_km = [100, 200]\n'
        '[neutrals]\nmodel = "table"\ntable = "n.csv"\n'
        '[temperatures]\nelectron = "neutral"\nion = "neutral"\n')
    monkeypatch.chdir(tmp_path)
    s = load_scenario(Path("case") / "s.toml")
    assert s.reactions == (sub / "tiny.reactions").resolve()
    assert s.neutrals.table.is_absolute() and s.neutrals.table.exists()
    assert str(s.path) == os.path.join("case", "s.toml")


def test_sha256_is_that_of_the_file_bytes(tmp_path, base):
    """Provenance (docs/outputs.md): the scenario hash is SHA-256 of the file, checked
    with hashlib."""
    text = ('title = "t"\nreactions = "tiny.reactions"\n[grid]\naltitude_km = [100, 200]\n'
            '[neutrals]\nmodel = "table"\ntable = "n.csv"\n'
            '[temperatures]\nelectron = "neutral"\nion = "neutral"\n')
    (tmp_path / "s.toml").write_text(text)
    s = load_scenario(tmp_path / "s.toml")
    assert s.sha256 == hashlib.sha256(text.encode()).hexdigest()
    assert s.raw["grid"]["altitude_km"] == [100, 200]


def test_scenario_is_frozen_and_replace_makes_a_changed_copy(base, tmp_path):
    """docs/internals.md, 'Scenario': a frozen dataclass with a dataclasses.replace-friendly
    design."""
    s = scenario_from_dict(base, path="s.toml", base_dir=tmp_path)
    with pytest.raises(dataclasses.FrozenInstanceError):
        s.title = "other"
    t = s.replace(title="other")
    assert (t.title, s.title) == ("other", "invented test column")
    assert isinstance(t, Scenario) and t.grid == s.grid


def test_missing_scenario_file_is_a_scenario_error(tmp_path):
    """docs/scenario.md, 'Rules': bad input is an ionochem error, never a traceback."""
    with pytest.raises(ScenarioError, match="not found"):
        load_scenario(tmp_path / "nope.toml")


def test_non_utf8_scenario_names_the_line(tmp_path):
    """Scenario files are UTF-8 (docs/scenario.md); a bad byte is reported at its line."""
    (tmp_path / "s.toml").write_bytes(b'title = "a"\n# caf\xe9\n')
    with pytest.raises(ScenarioError) as info:
        load_scenario(tmp_path / "s.toml")
    assert info.value.line == 2


# ------------------------------------------------------------------------ grid

def test_grid_range_includes_stop_and_matches_linspace(base, tmp_path):
    """docs/scenario.md, '[grid]': { start, stop, step } with stop included; the levels equal
    numpy.linspace(start, stop, n + 1)."""
    s = scenario_from_dict(_with(base, "grid.altitude_km",
                                 {"start": 100, "stop": 100.3, "step": 0.1}),
                           base_dir=tmp_path)
    np.testing.assert_allclose(s.altitude_km, np.linspace(100, 100.3, 4), rtol=1e-15)
    assert s.altitude_km[-1] == 100.3


@settings(max_examples=50, deadline=None)
@given(st.integers(0, 500), st.sampled_from([0.5, 1.0, 2.5, 5.0, 7.3, 10.0]),
       st.integers(1, 250))
def test_any_whole_step_range_gives_n_plus_one_levels(tmp_path_factory, start, step, n):
    """For any start, step and whole n the grid has n + 1 levels equal to numpy.linspace
    to rounding, ending at stop exactly."""
    d = tmp_path_factory.mktemp("g")
    (d / "r.reactions").write_text("")
    (d / "n.csv").write_text("altitude_km,O,Tn_K\n0,1,200\n\n")
    stop = start + n * step
    data = {"title": "t", "reactions": "r.reactions",
            "grid": {"altitude_km": {"start": start, "stop": stop, "step": step}},
            "neutrals": {"model": "table", "table": "n.csv"},
            "temperatures": {"electron": "neutral", "ion": "neutral"}}
    alt = scenario_from_dict(data, base_dir=d).altitude_km
    assert alt.size == n + 1 and alt[-1] == stop
    np.testing.assert_allclose(alt, np.linspace(start, stop, n + 1), rtol=1e-12)


@pytest.mark.parametrize("n_extra, ok", [(1e-11, True), (-1e-11, True), (1e-7, False)])
def test_step_must_divide_the_range_to_relative_1e_9(base, tmp_path, n_extra, ok):
    """docs/scenario.md, '[grid]': (stop - start)/step must be whole to a relative tolerance of
    1e-9."""
    spec = {"start": 100.0, "stop": 100.0 + 3 * (1 + n_extra) * 10.0, "step": 10.0}
    data = _with(base, "grid.altitude_km", spec)
    if ok:
        assert scenario_from_dict(data, base_dir=tmp_path).altitude_km.size == 4
    else:
        assert "whole number" in _err(data, tmp_path).message


@pytest.mark.parametrize("value, key, text", [
    ([], "grid.altitude_km", "is empty"),
    ([100, 100], "grid.altitude_km", "strictly increasing"),
    ([300, 200], "grid.altitude_km", "strictly increasing"),
    ([-5, 100], "grid.altitude_km", "must not be negative"),
    ([100, True], "grid.altitude_km", "must be a number"),
    ({"start": 100, "stop": 300}, "grid.altitude_km.step", "is required"),
    ({"start": 100, "stop": 300, "step": 0}, "grid.altitude_km.step", "must be positive"),
    ({"start": 300, "stop": 100, "step": 10}, "grid.altitude_km", "must be above start"),
    ("100:300", "grid.altitude_km", "must be a list"),
])
def test_bad_grids_are_rejected_at_their_key(base, tmp_path, value, key, text):
    """docs/scenario.md, '[grid]': empty, repeated, decreasing, negative, wrongly
    typed or incomplete grids are errors at the dotted key."""
    err = _err(_with(base, "grid.altitude_km", value), tmp_path)
    assert err.key == key and text in err.message


# ------------------------------------------------------------------------ strictness

@pytest.mark.parametrize("dotted", [
    "typo", "grid.levels", "neutrals.models", "temperatures.electrons",
    "temperatures.profile.te_max_K", "solve.tolerance", "changes.multiply", "photons.fluxes",
    "production.tables", "output.budgets", "grid.altitude_km.stride",
])
def test_unknown_keys_are_errors_at_every_level(base, tmp_path, dotted):
    """docs/scenario.md, 'Rules': unknown keys are errors at every level."""
    data = _with(base, "temperatures.electron", "profile") if "profile" in dotted else base
    err = _err(_with(data, dotted, 1), tmp_path)
    assert err.key == dotted and "unknown key" in err.message


@pytest.mark.parametrize("dotted", [
    "temperatures.ion_drift_m_s", "solve.rtol", "changes.scale.R1", "grid.altitude_km.step",
    "photons.lyman_alpha_photons_cm2_s",
])
def test_boolean_is_not_a_number(base, tmp_path, dotted):
    """TOML 1.0 has a distinct boolean type; Python's bool is an int subclass, so a naive
    check would take true for 1. docs/scenario.md, 'Rules': bool is not a number."""
    err = _err(_with(base, dotted, True), tmp_path)
    assert err.key == dotted and "boolean" in err.message


@pytest.mark.parametrize("dotted, value, text", [
    ("solve.mode", "equilibrium", "must be one of"),
    ("solve.electrons", "given", "must be one of"),
    ("temperatures.ion", "hot", "must be one of"),
    ("temperatures.vibrational", "profile", "must be one of"),
    ("photons.flux", "fism", "must be one of"),
    ("photons.secondary", "yes", "true or false"),
    ("temperatures.ion_drift_m_s", -1.0, "must be between 0 and 10000 m/s"),
    ("solve.rtol", 1.0, "must be between 1e-14 and 0.01"),
    ("solve.rtol", 0.0, "must be between 1e-14 and 0.01"),
    ("solve.rtol", 1e-300, "must be between 1e-14 and 0.01"),
    ("changes.scale.R1", -1.0, "must be between 0 and 1e+06"),
    ("changes.scale.R1", "2", "must be a positive number"),
    ("changes.set.R1", 2e-12, "must be a string"),
    ("changes.set", "R1 = 2e-12", "must be a table"),
    ("title", "  ", "must not be empty"),
    ("reactions", "missing.reactions", "file not found"),
    ("output.budget", ["N2+200"], "species@km"),
    ("output.budget", ["N2+@600"], "outside the grid"),
    ("output.budget", "N2+@200", "must be a list"),
])
def test_wrong_values_are_rejected_at_their_key(base, tmp_path, dotted, value, text):
    """docs/scenario.md: enums, ranges and types of every key."""
    err = _err(_with(base, dotted, value), tmp_path)
    assert err.key == dotted and text in err.message.lower()


@pytest.mark.parametrize("dotted, value, condition", [
    ("solve.times_s", [0.0, 10.0], "mode = 'transient'"),
    ("solve.electron_table", "n.csv", "electrons = 'table'"),
    ("solve.balance_ion", "O+", "electrons = 'table'"),
    ("photons.spectrum", "n.csv", "flux = 'table'"),
    ("neutrals.no_table", "n.csv", "msis2.0"),
    ("temperatures.table", "n.csv", "is 'table'"),
    ("temperatures.profile", {"te_peak_K": 3000.0}, "'profile'"),
])
def test_keys_for_another_setting_are_errors(base, tmp_path, dotted, value, condition):
    """docs/scenario.md: a key that only applies to another setting is an error, so a
    forgotten switch does not pass silently."""
    err = _err(_with(base, dotted, value), tmp_path)
    assert err.key == dotted and "only used when" in err.message and condition in err.message


def test_missing_required_keys(base, tmp_path):
    """docs/scenario.md: title and reactions are required; grid and the
    temperature sources too."""
    for key in ("title", "reactions"):
        data = {k: v for k, v in base.items() if k != key}
        assert _err(data, tmp_path).key == key
    assert _err({k: v for k, v in base.items() if k != "grid"}, tmp_path).key == \
        "grid.altitude_km"
    t = {k: v for k, v in base.items() if k != "temperatures"}
    assert _err(t, tmp_path).key == "temperatures.electron"
    assert _err(_with(base, "temperatures", {"electron": "neutral"}), tmp_path).key == \
        "temperatures.ion"


def test_transient_and_electron_table_settings(base, tmp_path):
    """docs/scenario.md: transient needs times_s (>= 0, strictly increasing); electrons =
    'table' needs electron_table, balance_ion defaults to O+."""
    data = _with(base, "solve", {"mode": "transient", "times_s": [0, 30, 600.5]})
    s = scenario_from_dict(data, base_dir=tmp_path)
    assert s.solve.times_s == (0.0, 30.0, 600.5)
    err = _err(_with(base, "solve", {"mode": "transient", "times_s": [-1, 3]}), tmp_path)
    assert err.key == "solve.times_s" and "negative" in err.message
    (tmp_path / "ne.csv").write_text("altitude_km,Ne\n50,1e3\n500,1e5\n")
    s = scenario_from_dict(_with(base, "solve", {"electrons": "table",
                                                 "electron_table": "ne.csv"}),
                           base_dir=tmp_path)
    assert s.solve.balance_ion == "O+" and s.solve.electron_table == tmp_path / "ne.csv"
    ne = build_environment(s).electron_density
    assert ne[0] == pytest.approx(np.exp(np.interp(100, [50, 500], np.log([1e3, 1e5]))))


def test_temperature_table_columns_follow_the_chosen_sources(base, tmp_path):
    """docs/scenario.md: temperatures.table needs Te_K / Ti_K / Tv_K for the sources set to
    'table' and nothing else."""
    (tmp_path / "t.csv").write_text("altitude_km,Tv_K,Ti_K\n50,300,250\n500,3000,1200\n")
    data = _with(base, "temperatures", {"electron": "profile", "ion": "table",
                                        "vibrational": "table", "table": "t.csv"})
    env = build_environment(scenario_from_dict(data, base_dir=tmp_path))
    # log-linear interpolation of the table onto the 100 km level (docs/scenario.md)
    w = (100.0 - 50.0) / 450.0
    assert env.Ti[0] == pytest.approx(250.0 * (1200.0 / 250.0) ** w)
    assert env.Tv[0] == pytest.approx(300.0 * (3000.0 / 300.0) ** w)
    data = _with(data, "temperatures.electron", "table")
    with pytest.raises(ScenarioError, match="missing column Te_K"):
        build_environment(scenario_from_dict(data, base_dir=tmp_path))


def test_profile_parameters_are_stored_with_defaults_for_the_rest(base, tmp_path):
    """docs/scenario.md: [temperatures.profile] keys, each optional, validated."""
    data = _with(base, "temperatures", {"electron": "profile", "ion": "neutral",
                                        "profile": {"te_peak_K": 3000, "scale_km": 40.0}})
    p = scenario_from_dict(data, base_dir=tmp_path).temperatures.profile
    assert p == TemperatureProfile(te_peak_K=3000.0, ti_offset_K=300.0, base_km=125.0,
                                   scale_km=40.0)
    err = _err(_with(data, "temperatures.profile.scale_km", 0), tmp_path)
    assert err.key == "temperatures.profile.scale_km"


# ------------------------------------------------------------------------ environment keys

def _msis(base):
    data = {k: v for k, v in base.items() if k != "neutrals"}
    data.update(location={"latitude_deg": 35.0, "longitude_deg": -100.0},
                time={"utc": "2024-06-21T18:00:00Z"}, sun={"f107": 150.0, "f107a": 145.0},
                geomagnetic={"ap": 8.0})
    return data


def test_msis21_is_the_default_with_location_and_time(base, tmp_path):
    """docs/scenario.md, '[neutrals]': the neutral model defaults to msis2.1 when location and
    time are given."""
    s = scenario_from_dict(_msis(base), base_dir=tmp_path)
    assert s.neutrals.model == "msis2.1" and s.neutrals.table is None
    assert (s.sun.f107, s.sun.f107a, s.geomagnetic.ap) == (150.0, 145.0, 8.0)
    assert (s.location.latitude_deg, s.location.longitude_deg) == (35.0, -100.0)


@pytest.mark.parametrize("section", ["location", "time", "sun", "geomagnetic"])
def test_msis_needs_every_environment_section(base, tmp_path, section):
    """docs/scenario.md, '[neutrals]': msis models require location, time, sun and geomagnetic;
    the error names the missing section."""
    data = _msis(base)
    data["neutrals"] = {"model": "msis2.0"}
    del data[section]
    err = _err(data, tmp_path)
    assert err.key == section and f"[{section}]" in err.message


def test_no_neutral_source_is_an_error(base, tmp_path):
    """docs/scenario.md, '[neutrals]': without location and time the model must be named
    ('table')."""
    data = {k: v for k, v in base.items() if k != "neutrals"}
    assert _err(data, tmp_path).key == "neutrals.model"
    assert _err(_with(base, "neutrals", {"model": "table"}), tmp_path).key == "neutrals.table"


def test_msis00_accepts_a_no_table(base, tmp_path):
    """NRLMSIS 2.0 and 00 have no NO (Emmert et al. 2022, J. Geophys. Res. Space Phys.: NO is
    new in 2.1); a NO table may be given."""
    (tmp_path / "no.csv").write_text("altitude_km,NO\n50,1e8\n500,1e5\n")
    data = _msis(base)
    data["neutrals"] = {"model": "msis00", "no_table": "no.csv"}
    s = scenario_from_dict(data, base_dir=tmp_path)
    assert s.neutrals.no_table == tmp_path / "no.csv"


def test_toml_offset_datetime_is_converted_to_utc(tmp_path, base):
    """TOML 1.0.0 spec example: 1979-05-27T00:32:00-07:00 is 1979-05-27T07:32:00Z; the
    ISO string form gives the same instant."""
    for text in ("utc = 1979-05-27T00:32:00-07:00", 'utc = "1979-05-27T00:32:00-07:00"'):
        (tmp_path / "s.toml").write_text(
            'title = "t"\nreactions = "tiny.reactions"\n[grid]\naltitude_km = [100]\n'
            '[neutrals]\nmodel = "table"\ntable = "n.csv"\n'
            '[temperatures]\nelectron = "neutral"\nion = "neutral"\n[time]\n' + text + "\n")
        utc = load_scenario(tmp_path / "s.toml").time.utc
        assert utc == dt.datetime(1979, 5, 27, 7, 32, tzinfo=dt.timezone.utc)
        assert utc.utcoffset() == dt.timedelta(0)


@pytest.mark.parametrize("value, text", [
    (dt.datetime(2024, 6, 21, 18), "no time zone"),
    ("2024-06-21T18:00:00", "no time zone"),
    (dt.date(2024, 6, 21), "bare date"),
    (dt.time(18, 0), "bare time"),
    ("21 June 2024", "not an iso 8601"),
    (1718992800, "must be a date and time"),
])
def test_times_without_zone_or_not_times_are_rejected(base, tmp_path, value, text):
    """TOML 1.0.0 distinguishes offset from local date-times; docs/scenario.md, '[time]'
    requires an offset or Z."""
    err = _err(_with(base, "time", {"utc": value}), tmp_path)
    assert err.key == "time.utc" and text in err.message.lower()


@pytest.mark.parametrize("dotted, value", [
    ("location.latitude_deg", 90.5), ("location.latitude_deg", -91.0),
    ("location.longitude_deg", 361.0), ("sun.f107", 0.0), ("sun.f107a", -3.0),
    ("geomagnetic.ap", 401.0), ("geomagnetic.ap", -1.0),
    ("photons.lyman_alpha_photons_cm2_s", -1.0),
])
def test_environment_values_out_of_range(base, tmp_path, dotted, value):
    """docs/scenario.md ranges: latitude within +-90, F10.7 > 0, ap on its 0..400 scale
    (Mayaud 1980), Lyman-alpha flux >= 0."""
    data = _msis(base)
    data = _with(data, dotted, value)
    assert _err(data, tmp_path).key == dotted


def test_require_names_the_missing_section(base, tmp_path):
    """docs/scenario.md, 'Rules': sun and place are needed only for photo reactions; the model
    asks with require(), which raises at the missing section's key."""
    s = scenario_from_dict(base, path="s.toml", base_dir=tmp_path)
    with pytest.raises(ScenarioError) as info:
        s.require("location", "time", reason="photoionization (k = photo reactions)")
    assert str(info.value).startswith("s.toml: location: ")
    scenario_from_dict(_msis(base), base_dir=tmp_path).require("sun", "time", reason="x")


def test_parse_budget():
    """docs/scenario.md: budgets are SPECIES@KM."""
    assert parse_budget("N2+(v=1)@212.5") == ("N2+(v=1)", 212.5)
    for bad in ("N2+", "@200", "N2+@", "N2+@high", "N2+@-5"):
        with pytest.raises(ValueError):
            parse_budget(bad)


# ------------------------------------------------------------------------ syntax, docs

@pytest.mark.parametrize("text, line", [
    ('title = "a"\nreactions "r"\n', 2),
    ('title = "a"\n\n\n[grid\n', 4),
    ('title = "a"\ntitle = "b"\n', 2),
    ('title = "a"\nx = [1,\n', 2),
])
def test_toml_syntax_errors_report_the_line(tmp_path, text, line):
    """TOML syntax errors become file:line: message at the line tomllib reports (the end of
    the file for an unterminated value)."""
    (tmp_path / "s.toml").write_text(text)
    with pytest.raises(ScenarioError) as info:
        load_scenario(tmp_path / "s.toml")
    assert info.value.line == line and info.value.key is None
    assert str(info.value).startswith(f"{tmp_path / 's.toml'}:{line}: not valid TOML: ")


def test_full_example_in_the_docs_loads(tmp_path):
    """docs/scenario.md's full example is a valid scenario (its reaction list replaced by a
    file in a temporary folder) and gives the values it shows."""
    text = DOCS.read_text().split("## Full example", 1)[1]
    block = re.search(r"```toml\n(.*?)```", text, re.S).group(1)
    data = tomllib.loads(block)
    (tmp_path / "r.reactions").write_text("")
    data["reactions"] = "r.reactions"
    s = scenario_from_dict(data, base_dir=tmp_path)
    assert s.neutrals.model == "msis2.1" and s.altitude_km.size == 61
    assert s.time.utc == dt.datetime(2024, 6, 21, 18, tzinfo=dt.timezone.utc)
    assert s.output.budget == ("N2+@200", "O+@300")
    assert s.changes.scale == {"DRO2": 0.8}
