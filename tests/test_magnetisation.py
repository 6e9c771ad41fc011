"""Where ions are magnetised (drift heating), the field model, and the default Te at 150 km."""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import numpy as np
import pytest

import ionochem
from ionochem.environment.magnetic import FieldModelRangeError, geomagnetic_field
from ionochem.environment.magnetisation import (
    ion_gyrofrequency_s,
    magnetisation_height_km,
    magnetised_drift,
)
from ionochem.environment.temperatures import parametric_profile

ROOT = Path(__file__).resolve().parents[1]
AURORAL = ROOT / "scenarios" / "auroral_ion_drift.toml"


def test_ion_gyrofrequency_of_no_plus():
    """Ω = eB/m: NO+ (30.006 amu) in 5e-5 T turns at 160.8 rad/s (CODATA e and u)."""
    assert ion_gyrofrequency_s(5e-5) == pytest.approx(
        1.602176634e-19 * 5e-5 / (30.006 * 1.66053906660e-27), rel=1e-12)
    assert ion_gyrofrequency_s(5e-5) == pytest.approx(160.8, rel=1e-3)


def test_drift_is_the_mobility_magnitude_across_the_transition():
    """|v_i − u_n| = v_E κ/√(1+κ²) (Pedersen and Hall mobilities, Schunk & Nagy 2009 §5.9):
    half the square (heating) at κ = 1, all of it for κ ≫ 1, none for κ ≪ 1."""
    B = 5e-5
    omega = ion_gyrofrequency_s(B)
    nu_per_n2 = 4.34e-10
    n2 = omega / nu_per_n2 * np.array([100.0, 1.0, 0.01])      # κ = 0.01, 1, 100
    v, kappa = magnetised_drift(1000.0, {"N2": n2}, B)
    np.testing.assert_allclose(kappa, [0.01, 1.0, 100.0], rtol=1e-12)
    np.testing.assert_allclose(v, 1000.0 * kappa / np.sqrt(1 + kappa ** 2), rtol=1e-12)
    assert v[1] ** 2 == pytest.approx(0.5e6)


def test_auroral_demo_heats_ions_only_above_the_magnetisation_height():
    """In the high-latitude demo (1 km/s) the ions are magnetised above ~120–130 km
    (ν_in = Ω_i; docs/physics.md §4a; Kelley 2009, *The Earth's Ionosphere*, ch. 2, *from
    memory*): Ti is barely heated at 100 km and fully (m_n v²/3k, St.-Maurice & Torr 1978)
    above 200 km, and O+ at 100–106 km no longer reacts to the drift."""
    scen = ionochem.load_scenario(AURORAL)
    drift = ionochem.Model(scen)
    env = drift.environment
    h = env.info["magnetisation_height_km"]
    assert 115.0 <= h <= 140.0
    still = ionochem.Model(scen.replace(temperatures=type(scen.temperatures)(
        **{**vars(scen.temperatures), "ion_drift_m_s": 0.0})))
    from ionochem.environment.temperatures import AMU_KG, K_B, mean_neutral_mass_amu
    full = mean_neutral_mass_amu(env.neutrals) * AMU_KG * 1e6 / (3 * K_B)
    heat = env.Ti - still.environment.Ti
    z = drift.altitude_km
    assert np.all(heat[z <= 100] < 0.05 * full[z <= 100])
    np.testing.assert_allclose(heat[z >= 200], full[z >= 200], rtol=2e-3)
    a = drift.solve()
    b = still.solve()
    ratio = a["density"].sel(species="O+").values / b["density"].sel(species="O+").values
    assert np.all(np.abs(ratio[(z >= 100) & (z <= 106)] - 1) < 0.05)
    assert np.all(ratio[(z >= 100) & (z <= 120)] < 2.0)       # it used to triple there


def test_magnetisation_height_interpolates_log_kappa():
    """κ = 0.1 at 100 km and 10 at 140 km: κ = 1 at 120 km (log-linear)."""
    assert magnetisation_height_km([100.0, 140.0], [0.1, 10.0]) == pytest.approx(120.0)
    assert np.isnan(magnetisation_height_km([100.0, 140.0], [0.1, 0.5]))


def test_igrf_dip_is_close_to_the_dipole_value_at_mid_latitude():
    """The IGRF inclination at 40° N, 15° E, 300 km in 2025 is within 5° of the centred
    dipole's tan I = 2 tan λ_m (Kivelson & Russell 1995, *Introduction to Space Physics*,
    ch. 2; geomagnetic latitude from the IGRF-13 dipole pole at 80.7° N, 72.7° W, *from
    memory*), and the field is 3–5e-5 T."""
    B, dip = geomagnetic_field(40.0, 15.0, [300.0], dt.datetime(2025, 3, 20))
    pole_lat, pole_lon = np.radians(80.7), np.radians(-72.7)
    lat, lon = np.radians(40.0), np.radians(15.0)
    sin_lm = (np.sin(lat) * np.sin(pole_lat)
              + np.cos(lat) * np.cos(pole_lat) * np.cos(lon - pole_lon))
    lm = np.arcsin(sin_lm)
    dipole = np.degrees(np.arctan(2 * np.tan(lm)))
    assert abs(dip[0] - dipole) < 5.0
    assert 3e-5 < B[0] < 5e-5
    # the southern hemisphere has the field pointing up: negative dip
    _, dip_s = geomagnetic_field(-40.0, 15.0, [300.0], dt.datetime(2025, 3, 20))
    assert dip_s[0] < -40.0


def test_field_model_refuses_dates_it_does_not_cover():
    with pytest.raises(FieldModelRangeError):
        geomagnetic_field(40.0, 15.0, [300.0], dt.datetime(1850, 1, 1))


def test_default_te_at_150_km_is_within_incoherent_scatter_climatology():
    """Midday Te near 150 km at mid latitudes is about 1000–1300 K in incoherent-scatter
    climatologies (Zhang & Holt 2004, Adv. Space Res. 33, 963; Zhang et al. 2004, JGR 109;
    *from memory*): the default parametric shape stays below 1300 K there for the
    NRLMSIS Tn of quiet and active days (600–750 K), and still reaches 2500 K by 300 km."""
    z = np.array([120.0, 150.0, 300.0])
    for tn150 in (600.0, 750.0):
        tn = np.array([380.0, tn150, 1000.0])
        te, _ = parametric_profile(z, tn, daytime=True)
        assert te[0] == tn[0]
        assert te[1] <= 1300.0
        assert te[2] >= 2500.0
