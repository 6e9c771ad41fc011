"""Temperatures: effective temperature, frictional heating, parametric shape, mean mass."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.constants as sc

from ionochem.environment.temperatures import (
    AMU_KG,
    K_B,
    check_tabulated_ti,
    effective_temperature,
    frictional_ion_temperature,
    mean_neutral_mass_amu,
    neutral_mass_amu,
    parametric_profile,
)

M_O, M_N2, M_O2 = 15.999, 28.014, 31.998  # amu


def test_constants_agree_with_scipy_codata():
    """k_B and the atomic mass constant agree with scipy.constants (CODATA) to 1e-8
    relative (k_B is exact since the 2019 SI; m_u moved 1.4e-9 from CODATA 2018 to 2022)."""
    assert K_B == pytest.approx(sc.k, rel=1e-12)
    assert AMU_KG == pytest.approx(sc.physical_constants["atomic mass constant"][0], rel=1e-8)


def test_teff_is_ti_for_equal_masses_and_equal_temperatures():
    """Analytic: with m_i = m_n and Ti = Tn, no drift, Teff = Ti (St.-Maurice & Torr 1978
    formula, weighted mean of equal values)."""
    T = np.array([300.0, 900.0, 1500.0])
    out = effective_temperature(16.0, 16.0, T, T, 0.0, ti_includes_drift=True)
    np.testing.assert_allclose(out, T, rtol=1e-15)


def test_teff_without_drift_is_the_mass_weighted_mean():
    """Analytic (St.-Maurice & Torr 1978): Teff = (m_i Tn + m_n Ti)/(m_i + m_n) at zero
    drift: O+ + N2 with Tn = 1000 K, Ti = 1300 K gives (16·1000 + 28·1300)/44."""
    out = effective_temperature(16.0, 28.0, 1300.0, 1000.0, 0.0, ti_includes_drift=False)
    assert out == pytest.approx((16 * 1000 + 28 * 1300) / 44, rel=1e-14)


def test_drift_term_for_o_plus_n2_at_1_km_s_is_408_kelvin():
    """Hand computation: μ = 15.999·28.014/44.013 = 10.18326 amu;
    μ v²/(3 k_B) = 10.18326 × 1.66053906660e-27 kg × 1e6 m²/s² / (3 × 1.380649e-23 J/K)
    = 408.255 K (St.-Maurice & Torr 1978 drift term, CODATA 2018 constants)."""
    t0 = effective_temperature(M_O, M_N2, 1000.0, 1000.0, 0.0, ti_includes_drift=True)
    t1 = effective_temperature(M_O, M_N2, 1000.0, 1000.0, 1000.0, ti_includes_drift=True)
    assert t1 - t0 == pytest.approx(408.255, abs=0.01)


def test_frictional_heating_of_ions_on_n2_at_1_km_s():
    """Hand computation: m_n v²/(3 k_B) = 28.014 × 1.66053906660e-27 × 1e6 /
    (3 × 1.380649e-23) = 1123.10 K."""
    assert frictional_ion_temperature(800.0, 1000.0, M_N2) == pytest.approx(1923.10, abs=0.01)


@pytest.mark.parametrize("m_ion", [M_O, 30.006, M_O2])
@pytest.mark.parametrize("v", [300.0, 1000.0, 2500.0])
def test_drift_is_counted_exactly_once(m_ion, v):
    """St.-Maurice & Torr (1978), J. Geophys. Res. 83, 969, algebra: with Ti heated by friction,
    Ti = Tn + m_n v²/(3k), the effective temperature is exactly Tn + m_n v²/(3k) — the
    same whether the caller heats Ti first (ti_includes_drift=True) or lets the function
    heat an unheated Ti (False); heating twice would give more."""
    tn = np.array([700.0, 1000.0, 1200.0])
    heat = M_N2 * AMU_KG * v * v / (3 * K_B)
    ti_heated = frictional_ion_temperature(tn, v, M_N2)
    a = effective_temperature(m_ion, M_N2, ti_heated, tn, v, ti_includes_drift=True)
    b = effective_temperature(m_ion, M_N2, tn, tn, v, ti_includes_drift=False,
                              mean_neutral_mass_amu=M_N2)
    np.testing.assert_allclose(a, tn + heat, rtol=1e-12)
    np.testing.assert_allclose(b, tn + heat, rtol=1e-12)
    twice = effective_temperature(m_ion, M_N2, ti_heated, tn, v, ti_includes_drift=False,
                                  mean_neutral_mass_amu=M_N2)
    assert np.all(twice > a + 0.1 * heat)


def test_unheated_ti_with_drift_needs_the_mean_neutral_mass():
    """Heating Ti needs the mean neutral mass; without it the call is refused, not
    silently left cold."""
    with pytest.raises(ValueError, match="mean_neutral_mass_amu"):
        effective_temperature(M_O, M_N2, 1000.0, 1000.0, 500.0, ti_includes_drift=False)


def test_check_tabulated_ti_reports_levels_colder_than_friction():
    """With a 1 km/s drift on N2 (heating 1123.1 K, hand-computed), a table Ti of
    Tn + 500 K is too cold and one of Tn + 1200 K is not; no drift, nothing reported."""
    alt = np.array([150.0, 200.0, 250.0])
    tn = np.full(3, 1000.0)
    ti = tn + np.array([500.0, 1200.0, 1100.0])
    assert check_tabulated_ti(ti, tn, 1000.0, M_N2, altitude_km=alt) == [150.0, 250.0]
    assert check_tabulated_ti(ti, tn, 1000.0, M_N2) == [0, 2]
    assert check_tabulated_ti(ti, tn, 1000.0, M_N2, tolerance_K=50.0) == [0]
    assert check_tabulated_ti(tn - 5, tn, 0.0, M_N2) == []


def test_mean_neutral_mass_matches_pymsis_mass_density():
    """Independent check: NRLMSIS 2.1 (pymsis) total mass density divided by the summed
    number density is the mean mass. NRLMSIS leaves NO out of its mass density and adds
    anomalous oxygen to it, so the comparison omits NO and stays at 100–400 km, where
    anomalous O is negligible; agreement to 1e-4 (the atomic weights differ slightly)."""
    import pymsis.msis

    from ionochem.environment.neutrals import msis_neutrals

    alt = np.array([100.0, 200.0, 300.0, 400.0])
    utc = np.datetime64("2019-03-01T10:00")
    out = np.asarray(pymsis.msis.calculate(utc, 20.0, -30.0, alt, [120.0], [110.0],
                                           [[10.0] * 7], version=2.1),
                     dtype=float).reshape(-1, 11)
    n_total = np.nansum(out[:, 1:8], axis=1)  # N2 O2 O He H Ar N, m-3
    ref = out[:, 0] / (n_total * AMU_KG)
    prof = msis_neutrals(utc, -30.0, 20.0, alt, f107=120.0, f107a=110.0, ap=10.0)
    no_no = {k: v for k, v in prof.items() if k != "NO"}
    np.testing.assert_allclose(mean_neutral_mass_amu(no_no), ref, rtol=1e-4)
    # With NO (heavier than the mean above 150 km) the mean mass rises a little.
    assert np.all(mean_neutral_mass_amu(prof)[1:] > mean_neutral_mass_amu(no_no)[1:])


def test_neutral_masses_from_formulas():
    """Standard atomic weights (IUPAC): N2 = 2 × 14.007, NO = 14.007 + 15.999, an
    excitation label does not change the mass; unknown element refused."""
    assert neutral_mass_amu("N2") == pytest.approx(28.014)
    assert neutral_mass_amu("NO") == pytest.approx(30.006)
    assert neutral_mass_amu("N(2D)") == pytest.approx(14.007)
    with pytest.raises(ValueError):
        neutral_mass_amu("Xx2")
    assert mean_neutral_mass_amu({"N2": [1.0], "O": [1.0], "Tn": [900.0]})[0] == \
        pytest.approx((28.014 + 15.999) / 2)


def test_parametric_profile_shape_and_ordering():
    """The parametric shape (common practice, not a model): Te = Ti = Tn below the base,
    Tn <= Ti <= Te everywhere, daytime Te 2500–3000 K above 300 km, night Te ≈ 1000 K,
    Ti within a few K of Tn below 300 km."""
    z = np.arange(90.0, 600.1, 5.0)
    tn = 1000.0 - 800.0 * np.exp(-(z - 90.0) / 50.0)
    te, ti = parametric_profile(z, tn, daytime=True)
    assert np.all(te[z <= 110] == tn[z <= 110]) and np.all(ti[z <= 300] == tn[z <= 300])
    assert np.all(tn <= ti) and np.all(ti <= te)
    assert np.all((te[z >= 300] > 2500) & (te[z >= 300] < 3000))
    te_n, ti_n = parametric_profile(z, tn, daytime=False)
    assert np.all(np.abs(te_n[z >= 400] - 1000.0) < 30)
    np.testing.assert_allclose(ti_n, tn)
    te_half, _ = parametric_profile(z, tn, daytime=0.5)
    assert np.all((te_half >= te_n) & (te_half <= te))
    with pytest.raises(ValueError):
        parametric_profile(z, tn, daytime=1.5)
