"""Maxwellian rate coefficients from cross sections (ionochem.rates.maxwellian_rate).

References: the closed forms of the Maxwellian integral
k = sqrt(8/(pi m_e)) (kT)^-3/2 int sigma E exp(-E/kT) dE for sigma = C/E (k = C sqrt(8/(pi m_e
kT))), sigma = const (k = sigma sqrt(8kT/(pi m_e)), the mean speed) and sigma linear in E
(int x^2 e^-x dx = 2); scipy.integrate.quad for a smooth cross section; physical
constants from scipy.constants (CODATA 2018).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import constants, integrate

from ionochem.errors import InputError
from ionochem.rates import maxwellian_rate

M_E = constants.m_e * 1e3          # g
EV = constants.e * 1e7             # erg
T = np.array([100.0, 300.0, 1000.0, 3000.0, 10000.0])
KT_ERG = constants.k * 1e7 * T


def test_inverse_energy_cross_section_gives_T_to_the_minus_half_with_exact_prefactor():
    """sigma = C/E gives k = C sqrt(8/(pi m_e kT)) (closed form, C in cm2 eV)."""
    E = np.geomspace(1e-9, 60.0, 20000)
    C = 1e-15
    k = maxwellian_rate(E, C / E, T)
    exact = C * EV * np.sqrt(8.0 / (np.pi * M_E * KT_ERG))
    np.testing.assert_allclose(k, exact, rtol=2e-6)


def test_constant_cross_section_gives_sigma_times_mean_speed():
    """sigma = const gives k = sigma sqrt(8kT/(pi m_e)), on a coarse irregular grid
    (the piecewise-linear interpolant of a constant is exact)."""
    rng = np.random.default_rng(1)
    E = np.r_[0.0, np.sort(rng.uniform(0, 60.0, 37)), 60.0]
    k = maxwellian_rate(E, np.full(E.size, 2e-16), T)
    np.testing.assert_allclose(k, 2e-16 * np.sqrt(8 * KT_ERG / (np.pi * M_E)), rtol=1e-12)


def test_linear_cross_section_is_exact_on_any_grid():
    """sigma = a + b E gives k = sqrt(8kT/(pi m_e)) (a + 2 b kT) (int x^2 e^-x = 2), exactly
    on a random 12-point grid: the integration has no quadrature error."""
    rng = np.random.default_rng(2)
    E = np.r_[0.0, np.sort(rng.uniform(0, 80.0, 10)), 80.0]
    a, b = 1e-16, 3e-16                 # cm2, cm2 per eV
    kT_eV = T * constants.k / constants.e
    k = maxwellian_rate(E, a + b * E, T)
    np.testing.assert_allclose(k, np.sqrt(8 * KT_ERG / (np.pi * M_E)) * (a + 2 * b * kT_eV),
                               rtol=1e-11)


def test_smooth_cross_section_matches_scipy_quad():
    """A smooth threshold cross section on a log grid against scipy.integrate.quad of the
    Maxwellian integral written directly."""
    def sigma(E):
        return 1e-16 * np.clip(E - 0.1, 0, None) * np.exp(-E / 2.0)
    E = np.r_[0.0, np.geomspace(1e-4, 80.0, 4000)]
    E = np.unique(np.r_[E, 0.1])
    k = maxwellian_rate(E, sigma(E), 3000.0)
    kT = constants.k * 3000.0 / constants.e

    def f(e):
        return sigma(e) * e * np.exp(-e / kT)
    ref = integrate.quad(f, 0.1, 12.0, epsrel=1e-12, limit=200)[0]   # e^-44 beyond
    ref *= np.sqrt(8 / (np.pi * M_E)) * (kT * EV) ** -1.5 * EV * EV
    assert k == pytest.approx(ref, rel=1e-5)


def test_columns_are_independent_and_shapes_follow_temperature():
    """Several columns (levels and bands) give the same as one at a time."""
    E = np.geomspace(1e-7, 30.0, 500)
    cols = np.column_stack([1e-15 / E, np.full(E.size, 1e-16), 2e-15 / E])
    k = maxwellian_rate(E, cols, T.reshape(5, 1))
    assert k.shape == (5, 1, 3)
    for j in range(3):
        np.testing.assert_allclose(k[:, 0, j], maxwellian_rate(E, cols[:, j], T), rtol=1e-14)


def test_grid_that_misses_the_distribution_is_refused_or_flagged():
    """A grid ending at 0.5 eV cannot give k at 10000 K (kT = 0.86 eV): error by default;
    with uncovered='warn' a warning and the missing share per temperature."""
    E = np.geomspace(1e-6, 0.5, 100)
    with pytest.raises(InputError, match="misses"):
        maxwellian_rate(E, 1e-15 / E, [300.0, 10000.0])
    with pytest.warns(RuntimeWarning, match="misses"):
        k, miss = maxwellian_rate(E, 1e-15 / E, [300.0, 10000.0], uncovered="warn",
                                  return_coverage=True)
    assert miss[0] < 1e-3 < miss[1]
    assert np.isfinite(k).all()


@pytest.mark.parametrize("E, S, T, words", [
    ([0.0, 1.0, 0.5], [1, 1, 1], 300.0, "increasing"),
    ([0.0, 1.0], [1, -1], 300.0, "non-negative"),
    ([0.0, 1.0], [1, np.nan], 300.0, "finite"),
    ([0.0, 1.0], [1, 1, 1], 300.0, "shaped"),
    ([0.0, 1.0], [1, 1], -5.0, "positive"),
    ([1.0], [1], 300.0, "two points"),
])
def test_bad_inputs_are_refused(E, S, T, words):
    """Malformed grids, cross sections and temperatures raise InputError (ionochem.Error)."""
    with pytest.raises(InputError, match=words):
        maxwellian_rate(np.asarray(E, float), np.asarray(S, float) * 1e-16, T)


def test_threshold_at_the_first_point_misses_nothing():
    """An excitation-like cross section that starts at zero at its 15 eV threshold and is zero
    again at the end of its grid is fully covered at 1000 K (k is then essentially zero, as
    exp(-15 eV/kT) says), while the same values starting above zero are refused."""
    E = np.linspace(15.0, 60.0, 50)
    S = 1e-17 * (E - 15.0) * (60.0 - E)
    k, miss = maxwellian_rate(E, S, 1000.0, return_coverage=True)
    assert miss == 0.0 and k < 1e-60
    with pytest.raises(InputError, match="misses"):
        maxwellian_rate(E, S + 1e-18, 1000.0)
