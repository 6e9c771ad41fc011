"""NRLMSIS neutrals through pymsis: units, versions, NaN handling, no index download."""

from __future__ import annotations

import socket

import numpy as np
import pymsis.msis
import pymsis.utils
import pytest

from ionochem.environment.neutrals import (
    SPECIES,
    extended_grid_km,
    msis_neutrals,
    msis_neutrals_extended,
)

UTC = np.datetime64("2015-06-21T14:30")  # invented test case
LAT, LON = 42.0, -71.0
IDX = dict(f107=150.0, f107a=140.0, ap=12.0)
ALT = np.array([0.0, 30.0, 60.0, 80.0, 95.0, 100.0, 150.0, 200.0, 300.0, 500.0, 800.0])

# pymsis.msis.Variable indices (pymsis documentation).
PYMSIS_COLUMN = {"N2": 1, "O2": 2, "O": 3, "He": 4, "H": 5, "Ar": 6, "N": 7, "NO": 9}


@pytest.fixture(autouse=True)
def no_downloads(monkeypatch):
    """pymsis must never fetch indices: its index lookup, its downloader and any socket
    connection fail the test."""

    def refuse(*args, **kwargs):
        raise AssertionError("pymsis tried to look up or download indices / the network")

    monkeypatch.setattr(pymsis.msis, "get_f107_ap", refuse)
    monkeypatch.setattr(pymsis.utils, "get_f107_ap", refuse)
    monkeypatch.setattr(pymsis.utils, "download_f107_ap", refuse)
    monkeypatch.setattr(socket.socket, "connect", refuse)


def _direct(version, alt=ALT):
    """The reference: pymsis called directly (m-3, K), shape (altitude, 11)."""
    out = pymsis.msis.calculate(UTC, LON, LAT, alt, [IDX["f107"]], [IDX["f107a"]],
                                [[IDX["ap"]] * 7], version=version)
    return np.asarray(out, dtype=float).reshape(-1, 11)


@pytest.mark.parametrize("version,pymsis_version", [("2.1", 2.1), ("2.0", 2.0), ("00", 0)])
def test_densities_equal_direct_pymsis_call_times_1e_minus_6(version, pymsis_version):
    """Each density equals pymsis.msis.calculate (m-3) × 1e-6 = cm-3, and Tn its
    temperature, wherever pymsis defines the species (reference: pymsis/NRLMSIS)."""
    ref = _direct(pymsis_version)
    prof = msis_neutrals(UTC, LAT, LON, ALT, version=version, **IDX)
    for name in prof:
        if name == "Tn":
            np.testing.assert_allclose(prof["Tn"], ref[:, 10], rtol=1e-12)
            continue
        r = ref[:, PYMSIS_COLUMN[name]]
        ok = np.isfinite(r)
        np.testing.assert_allclose(prof[name][ok], r[ok] * 1e-6, rtol=1e-12)
        assert prof[name].dtype == np.float64


def test_n2_near_ground_is_a_loschmidt_like_number_in_cm3():
    """Unit check against physics: at 0 km N2 is about 78 % of n = p/(k T) ≈ 2.5e19 cm-3
    (sea-level air, ideal gas), so the conversion is to cm-3, not m-3."""
    prof = msis_neutrals(UTC, LAT, LON, [0.0], **IDX)
    total = sum(prof[s][0] for s in SPECIES if s in prof)
    assert 1.8e19 < total < 2.9e19
    assert prof["N2"][0] / total == pytest.approx(0.781, abs=0.01)


def test_no_nan_ever_and_undefined_levels_are_exactly_where_pymsis_gives_nan():
    """NaN from pymsis (species NRLMSIS does not model below its lower boundary) become 0
    and are flagged in ``undefined``; no NaN leaves the function (pymsis reference)."""
    alt = np.arange(0.0, 130.0, 1.0)
    ref = _direct(2.1, alt)
    prof = msis_neutrals(UTC, LAT, LON, alt, **IDX)
    for name in SPECIES:
        assert np.all(np.isfinite(prof[name]))
        nan = ~np.isfinite(ref[:, PYMSIS_COLUMN[name]])
        np.testing.assert_array_equal(prof.undefined[name], nan)
        assert np.all(prof[name][nan] == 0.0)
    # O, H, N and NO are the species with a lower boundary; N2 and O2 are defined to 0 km.
    assert prof.undefined["O"].any() and prof.undefined["N"].any()
    assert not prof.undefined["N2"].any() and not prof.undefined["O2"].any()
    assert np.all(prof["N"][alt >= 100] > 0) and np.all(prof["NO"][alt >= 80] > 0)


@pytest.mark.parametrize("version", ["2.0", "00"])
def test_versions_without_no_have_no_no_entry(version):
    """Only NRLMSIS 2.1 models NO (Emmert et al. 2022): with 2.0 and 00 the key is absent,
    never a NaN or zero array; 2.1 has it."""
    prof = msis_neutrals(UTC, LAT, LON, ALT, version=version, **IDX)
    assert "NO" not in prof
    assert set(prof) == (set(SPECIES) - {"NO"}) | {"Tn"}
    assert "NO" in msis_neutrals(UTC, LAT, LON, ALT, version="2.1", **IDX)


def test_atomic_oxygen_excludes_anomalous_oxygen():
    """At 800 km NRLMSIS 2.1 has a sizeable anomalous-O component (pymsis column 8); the O
    returned is pymsis's O column alone, not O plus anomalous O."""
    ref = _direct(2.1, np.array([800.0]))
    prof = msis_neutrals(UTC, LAT, LON, [800.0], **IDX)
    assert ref[0, 8] > 1e-3 * ref[0, 3]  # the hot component is there to be excluded
    assert prof["O"][0] == pytest.approx(ref[0, 3] * 1e-6, rel=1e-12)
    assert "anomalous_O" not in prof and len(prof) == len(SPECIES) + 1


def test_indices_change_the_answer_so_they_are_really_used():
    """F10.7 passed explicitly is used: the 400 km density grows with solar activity
    (NRLMSIS thermospheric heating)."""
    lo = msis_neutrals(UTC, LAT, LON, [400.0], f107=70, f107a=70, ap=4)
    hi = msis_neutrals(UTC, LAT, LON, [400.0], f107=220, f107a=220, ap=4)
    assert hi["O"][0] > 1.5 * lo["O"][0]
    assert hi["Tn"][0] > lo["Tn"][0] + 200


def test_bad_inputs_are_refused():
    """Unknown version, several times at once, negative altitude, non-finite index."""
    with pytest.raises(ValueError, match="version"):
        msis_neutrals(UTC, LAT, LON, ALT, version="2.2", **IDX)
    with pytest.raises(ValueError):
        msis_neutrals(np.array([UTC, UTC]), LAT, LON, ALT, **IDX)
    with pytest.raises(ValueError):
        msis_neutrals(UTC, LAT, LON, [-1.0, 100.0], **IDX)
    with pytest.raises(ValueError):
        msis_neutrals(UTC, LAT, LON, ALT, f107=np.nan, f107a=100, ap=4)


def test_extended_profile_contains_model_levels_and_reaches_ground_and_top():
    """The extended grid holds every model level, starts at 0 km, reaches at least
    1000 km, increases strictly, and NRLMSIS on it equals NRLMSIS on the model grid at
    the shared levels."""
    grid = np.arange(90.0, 600.1, 3.0)
    g = extended_grid_km(grid)
    assert g[0] == 0.0 and g[-1] >= 1000.0
    assert np.all(np.diff(g) > 0)
    assert np.all(np.isin(grid, g))
    ext = msis_neutrals_extended(UTC, LAT, LON, altitude_km=grid, **IDX)
    base = msis_neutrals(UTC, LAT, LON, grid, **IDX)
    at = np.searchsorted(ext.altitude_km, grid)
    for name in base:
        np.testing.assert_allclose(ext[name][at], base[name], rtol=1e-12)
    assert all(np.all(np.isfinite(v)) for v in ext.values())
