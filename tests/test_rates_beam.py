"""Merged-beam rate coefficients for a flattened Maxwellian (ionochem.rates.beam_rate).

References: the isotropic Maxwellian closed forms and ionochem.rates.maxwellian_rate (itself
checked against closed forms); the far-from-threshold limit alpha -> sigma(E_d) sqrt(2E_d/m_e);
sigma v = const giving alpha = const for any distribution (normalisation); a direct
scipy.integrate.dblquad over the 3-D flattened distribution (speed and polar angle, the
azimuth trivially 2 pi) for a step cross section.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import constants, integrate

from ionochem.errors import InputError
from ionochem.rates import beam_rate, maxwellian_rate

M_E = constants.m_e * 1e3          # g
EV = constants.e * 1e7             # erg per eV
K_EV = constants.k / constants.e


def speed(E):
    return np.sqrt(2 * np.asarray(E) * EV / M_E)


@pytest.mark.parametrize("kT", [1e-3, 0.01, 0.1])
def test_isotropic_zero_detuning_equals_maxwellian_rate(kT):
    """kT_perp = kT_par = kT at E_d = 0 is the isotropic Maxwellian at T = kT/k_B."""
    E = np.geomspace(1e-9, 60 * kT, 8000)
    S = np.column_stack([1e-15 / E, np.where(E > kT, 2e-16, 0.0)])
    a = beam_rate(E, S, 0.0, kT, kT)
    m = maxwellian_rate(E, S, kT / K_EV)
    np.testing.assert_allclose(a, m, rtol=5e-5)


def test_far_from_threshold_tends_to_sigma_times_speed():
    """For E_d >> kT the rate tends to sigma(E_d) sqrt(2 E_d / m_e); the deviation shrinks
    like kT_perp/E_d."""
    E = np.geomspace(1e-7, 20.0, 6000)
    C = 1e-15
    Ed = np.array([0.01, 0.1, 1.0, 5.0])
    a = beam_rate(E, C / E, Ed, 1e-3, 1e-4)
    dev = np.abs(a / (C / Ed * speed(Ed)) - 1)
    assert (dev < 1e-3 / Ed).all()          # below kT_perp/E_d
    assert (np.diff(dev) < 0).all()
    assert dev[-1] < 2e-4


def test_constant_sigma_times_speed_gives_constant_rate():
    """sigma = C/sqrt(E) makes sigma v constant, so alpha = C sqrt(2/m_e) at every detuning
    whatever the temperatures."""
    E = np.geomspace(1e-8, 30.0, 8000)
    a = beam_rate(E, 1e-15 / np.sqrt(E), np.linspace(0, 10, 11), 2e-3, 5e-5)
    np.testing.assert_allclose(a, 1e-15 * speed(1.0), rtol=1e-6)


def _direct_3d(Ed, E_th, s0, kperp, kpar):
    """alpha = int sigma v f d3v by scipy dblquad over speed (from threshold) and polar angle."""
    vd = speed(Ed)
    a = M_E / (2 * np.pi * kperp * EV)
    b = np.sqrt(M_E / (2 * np.pi * kpar * EV))

    def f(mu, v):
        return 2 * np.pi * v ** 3 * s0 * a * b * np.exp(
            -M_E * v * v * (1 - mu * mu) / (2 * kperp * EV)
            - M_E * (v * mu - vd) ** 2 / (2 * kpar * EV))
    vmax = vd + 12 * np.sqrt(kperp * EV / M_E) + 12 * np.sqrt(kpar * EV / M_E)
    return integrate.dblquad(f, speed(E_th), vmax, -1, 1, epsabs=0, epsrel=1e-10)[0]


def test_step_cross_section_matches_direct_3d_integration():
    """A step cross section (0 below 20 meV, 3e-16 cm2 above) in a cooler-like beam
    (kT_perp 5 meV, kT_par 0.2 meV) against scipy's direct integration of the distribution."""
    E_th, s0, kperp, kpar = 0.02, 3e-16, 5e-3, 2e-4
    E = np.unique(np.r_[0.0, np.geomspace(1e-6, 2.0, 4000), E_th, E_th * (1 + 1e-9)])
    S = np.where(E > E_th, s0, 0.0)
    Ed = np.array([0.0, 0.005, 0.015, 0.02, 0.03, 0.1])
    a = beam_rate(E, S, Ed, kperp, kpar)
    ref = np.array([_direct_3d(e, E_th, s0, kperp, kpar) for e in Ed])
    np.testing.assert_allclose(a, ref, rtol=5e-5)


def test_anisotropy_matters():
    """The flattened distribution differs from the isotropic one at the same kT_perp (a test
    that the longitudinal temperature is used): at zero detuning a 1/E cross section gives a
    larger rate for a colder longitudinal spread."""
    E = np.geomspace(1e-9, 5.0, 4000)
    cold = beam_rate(E, 1e-15 / E, 0.0, 1e-2, 1e-4)
    warm = beam_rate(E, 1e-15 / E, 0.0, 1e-2, 1e-2)
    assert cold > 1.3 * warm


@pytest.mark.parametrize("args, words", [
    ((np.array([0.0, 1.0]), np.array([1e-16, 1e-16]), 2.0, 1e-3, 1e-4), "beyond"),
    ((np.array([0.0, 1.0]), np.array([1e-16, 1e-16]), 0.5, 0.0, 1e-4), "positive"),
    ((np.array([0.0, 1.0]), np.array([1e-16, 1e-16]), -0.1, 1e-3, 1e-4), "non-negative"),
    ((np.array([0.0, 1.0]), np.array([1e-16, 1e-16]), 0.5, [1e-3, 2e-3], 1e-4), "single"),
])
def test_bad_inputs_are_refused(args, words):
    """Detuning beyond the grid, non-positive temperatures: InputError."""
    with pytest.raises(InputError, match=words):
        beam_rate(*args)


def test_capped_grid_still_conserves_the_distribution(monkeypatch):
    """When the velocity grid has to be capped (a very cold longitudinal spread over a wide
    detuning range) the result is still normalised: sigma v = const still gives that
    constant, with a warning that fine structure is smoothed."""
    import ionochem.rates.beam as beam
    monkeypatch.setattr(beam, "_MAX_GRID", 2000)
    E = np.geomspace(1e-8, 30.0, 4000)
    with pytest.warns(RuntimeWarning, match="capped"):
        a = beam_rate(E, 1e-15 / np.sqrt(E), np.linspace(0, 10, 7), 2e-3, 1e-8)
    np.testing.assert_allclose(a, 1e-15 * speed(1.0), rtol=1e-4)
