"""Slant and vertical columns against analytic and independent results."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import integrate
from scipy.special import erfcx, k1e

from ionochem.environment.slant import slant_columns, vertical_columns

R_E = 6371.0
N0 = 1.0e13  # cm-3 at 0 km, invented isothermal atmosphere
H = 8.0  # km
ZP = np.arange(0.0, 1500.01, 2.0)
ISO = {"A": N0 * np.exp(-ZP / H)}
LEVELS = np.array([90.0, 120.0, 150.0, 200.0, 300.0])


def _vertical_analytic(z, h=H):
    return N0 * h * np.exp(-z / h) * 1e5  # cm-2


def _smith_smith_chapman(X, chi_deg):
    """Grazing-incidence approximation of the Chapman function for an isothermal
    atmosphere, Smith & Smith (1972), JGR 77, 3592 *(from memory)*:
    Ch(X, χ) ≈ sqrt(πX/2) exp(y²) erfc(y), y = sqrt(X/2) |cos χ| for χ ≤ 90°, and
    Ch(X, χ) ≈ 2 sqrt(πX/2) sqrt(sin χ) exp(X (1 − sin χ)) − Ch(X, 180° − χ) above 90°."""
    c = np.radians(chi_deg)
    y = np.sqrt(X / 2.0) * np.abs(np.cos(c))
    ch_low = np.sqrt(np.pi * X / 2.0) * erfcx(y)
    if chi_deg <= 90.0:
        return ch_low
    s = np.sin(c)
    return 2.0 * np.sqrt(np.pi * X / 2.0) * np.sqrt(s) * np.exp(X * (1.0 - s)) - ch_low


def test_vertical_column_of_isothermal_atmosphere_is_n0_h_exp():
    """Analytic: ∫_z^∞ n0 exp(−z'/H) dz' = n0 H exp(−z/H), for vertical_columns and for
    the slant column at χ = 0 (a radial ray in spherical shells)."""
    ref = _vertical_analytic(LEVELS)
    np.testing.assert_allclose(vertical_columns(LEVELS, ZP, ISO)["A"], ref, rtol=1e-12)
    np.testing.assert_allclose(slant_columns(LEVELS, 0.0, ZP, ISO)["A"], ref, rtol=1e-9)


def test_levels_between_nodes_and_exponential_continuation_above_the_top():
    """Analytic n0 H exp(−z/H) also for levels between profile nodes and for a profile
    cut at 400 km, whose continuation with the top scale height is exact for an isothermal
    layer (vertical and 80° slant unchanged by the cut)."""
    z = np.array([101.3, 157.9, 399.0])
    cut = ZP <= 400.0
    iso_cut = {"A": ISO["A"][cut]}
    np.testing.assert_allclose(vertical_columns(z, ZP[cut], iso_cut)["A"],
                               _vertical_analytic(z), rtol=1e-12)
    full = slant_columns(z, 80.0, ZP, ISO)["A"]
    np.testing.assert_allclose(slant_columns(z, 80.0, ZP[cut], iso_cut)["A"], full, rtol=1e-9)


@pytest.mark.parametrize("chi", [10.0, 30.0, 45.0, 60.0])
def test_plane_parallel_limit_is_sec_chi(chi):
    """Plane-parallel limit (Chapman 1931, Proc. Phys. Soc. 43, 26): for a planet radius
    much larger than H, slant/vertical → sec χ for χ ≤ 60°."""
    big = 1.0e7  # km: X = R/H ~ 1e6
    s = slant_columns(LEVELS, chi, ZP, ISO, planet_radius_km=big)["A"]
    v = vertical_columns(LEVELS, ZP, ISO)["A"]
    np.testing.assert_allclose(s / v, 1.0 / np.cos(np.radians(chi)), rtol=1e-4)


def test_ninety_degrees_tends_to_sqrt_pi_x_over_2_and_equals_bessel_form():
    """χ = 90°: Ch(X, 90°) → sqrt(πX/2) for large X (Chapman 1931; Rishbeth & Garriott
    1969, Introduction to Ionospheric Physics), within 0.1 % at X ≈ 800. Exactly, with
    r = p cosh w along the ray, Ch(X, 90°) = X e^X K1(X) (analytic, modified Bessel
    function K1; scipy.special.k1e): to 1e-7."""
    h = 8.0
    z = np.array([29.0, 100.0, 200.0])  # X = (R + z)/H ≈ 800, 809, 821
    X = (R_E + z) / h
    s = slant_columns(z, 90.0, ZP, ISO)["A"]
    v = _vertical_analytic(z)
    assert np.all(np.abs(s / v / np.sqrt(np.pi * X / 2) - 1) < 1e-3)
    np.testing.assert_allclose(s / v, X * k1e(X), rtol=1e-7)


@pytest.mark.parametrize("chi", [70.0, 80.0, 85.0, 88.0, 89.0, 91.0, 93.0, 95.0])
def test_grazing_incidence_agrees_with_smith_and_smith_chapman_function(chi):
    """Isothermal atmosphere, 70–95°: slant/vertical agrees with the Smith & Smith (1972,
    JGR 77, 3592) grazing-incidence approximation of Ch(X, χ) to 0.5 %."""
    z = LEVELS
    X = (R_E + z) / H
    s = slant_columns(z, chi, ZP, ISO)["A"]
    v = _vertical_analytic(z)
    ref = np.array([_smith_smith_chapman(x, chi) for x in X])
    np.testing.assert_allclose(s / v, ref, rtol=5e-3)


def _quad_along_ray(z0, chi_deg, density, R=R_E, s_max=6000.0):
    """Brute-force ∫ n ds along the straight ray from the level (scipy.integrate.quad)."""
    r0 = R + z0
    c = np.cos(np.radians(chi_deg))
    s_t = max(-r0 * c, 0.0)  # distance to the tangent point

    def f(s):
        r = np.sqrt(r0 * r0 + s * s + 2.0 * r0 * s * c)
        return density(r - R)

    a, _ = integrate.quad(f, 0.0, s_t, epsabs=0, epsrel=1e-12, limit=500) if s_t > 0 else (0, 0)
    b, _ = integrate.quad(f, s_t, s_t + s_max, epsabs=0, epsrel=1e-12, limit=500)
    return (a + b) * 1e5


def test_ninety_five_degrees_matches_brute_force_quadrature_along_the_ray():
    """χ = 95° (the ray descends to its tangent point below the level and rises again):
    equal to scipy.integrate.quad along the straight ray (independent integrator) to 1e-7,
    for an isothermal layer."""
    iso = lambda zz: N0 * np.exp(-zz / H)  # noqa: E731
    z = np.array([100.0, 200.0])
    s = slant_columns(z, 95.0, ZP, ISO)["A"]
    ref = np.array([_quad_along_ray(zz, 95.0, iso) for zz in z])
    np.testing.assert_allclose(s, ref, rtol=1e-7)


def test_non_isothermal_profile_matches_brute_force_quadrature():
    """A scale height growing with height, H(z) = 5 km + 0.05 z, sampled every 1 km:
    slant columns at 60°, 88° and 97° agree with scipy.integrate.quad of the smooth
    analytic profile to 3e-4 (the log-linear interpolation between nodes is the only
    approximation)."""
    def dens(zz):
        # n = n0 (H(z)/H(0))^(-1/0.05) is the hydrostatic-like solution of d ln n/dz = −1/H.
        return N0 * ((5.0 + 0.05 * zz) / 5.0) ** (-20.0)

    zp = np.arange(0.0, 1500.01, 1.0)
    prof = {"B": dens(zp)}
    z = np.array([110.0, 250.0])
    for chi in (60.0, 88.0, 97.0):
        s = slant_columns(z, chi, zp, prof)["B"]
        ref = np.array([_quad_along_ray(zz, chi, dens, s_max=20000.0) for zz in z])
        np.testing.assert_allclose(s, ref, rtol=3e-4)


def test_ray_that_meets_the_ground_has_infinite_column():
    """χ > 90° with tangent altitude (R + z) sin χ − R below 0 km: the Earth blocks the
    Sun; the column is inf and exp(−τ) is exactly 0. Geometry: at 100 km the ray grazes
    the ground at χ = 180° − asin(R/(R + 100)) ≈ 100.1°."""
    chi_graze = 180.0 - np.degrees(np.arcsin(R_E / (R_E + 100.0)))
    out = slant_columns([100.0], np.array([chi_graze - 0.2, chi_graze + 0.2]), ZP, ISO)["A"]
    assert out.shape == (2, 1)
    assert np.isfinite(out[0, 0]) and out[0, 0] > 0
    assert np.isinf(out[1, 0]) and np.exp(-out[1, 0] * 1e-20) == 0.0


def test_tangent_point_below_the_profile_bottom_is_refused():
    """A profile starting at 80 km cannot serve a 100 km level at 95° (tangent point near
    75 km: (R_E + 100 km) sin 95° − R_E, the geometry of a straight ray): refused with a
    message, never extrapolated silently."""
    cut = ZP >= 80.0
    with pytest.raises(ValueError, match="extend the profile downward"):
        slant_columns([100.0], 95.0, ZP[cut], {"A": ISO["A"][cut]})


def test_planet_radius_is_a_parameter():
    """A Mars-sized body (R = 3390 km, H = 8 km): the 90° column still equals the exact
    X e^X K1(X) with X = (R + z)/H, so nothing in the geometry is tied to the Earth."""
    R = 3390.0
    z = np.array([100.0, 150.0])
    X = (R + z) / H
    s = slant_columns(z, 90.0, ZP, ISO, planet_radius_km=R)["A"]
    np.testing.assert_allclose(s / _vertical_analytic(z), X * k1e(X), rtol=1e-7)


def test_species_are_integrated_independently_and_shapes_follow_zenith():
    """Two species with different scale heights each match their own analytic vertical
    column; a zero profile gives zero; scalar zenith → (altitude,), array → (zenith,
    altitude); a species with zeros at the bottom (as NRLMSIS O below 50 km) stays
    finite and non-negative."""
    prof = {"A": ISO["A"], "C": 1e11 * np.exp(-ZP / 40.0), "Z": np.zeros_like(ZP),
            "L": np.where(ZP < 50, 0.0, 1e11 * np.exp(-ZP / 20.0))}
    v = slant_columns(LEVELS, 0.0, ZP, prof)
    assert v["A"].shape == LEVELS.shape
    np.testing.assert_allclose(v["C"], 1e11 * 40.0 * np.exp(-LEVELS / 40.0) * 1e5, rtol=1e-9)
    assert np.all(v["Z"] == 0.0)
    many = slant_columns(LEVELS, np.array([0.0, 50.0, 96.0]), ZP, prof)
    assert many["A"].shape == (3, LEVELS.size)
    np.testing.assert_allclose(many["A"][0], v["A"], rtol=1e-14)
    assert np.all(np.isfinite(many["L"])) and np.all(many["L"] > 0)


def test_bad_inputs_are_refused():
    """Levels outside the profile, non-increasing profile, negative density, zenith out
    of range."""
    with pytest.raises(ValueError):
        slant_columns([2000.0], 10.0, ZP, ISO)
    with pytest.raises(ValueError):
        slant_columns([100.0], 10.0, ZP[::-1], ISO)
    with pytest.raises(ValueError):
        slant_columns([100.0], 10.0, ZP, {"A": -ISO["A"]})
    with pytest.raises(ValueError):
        slant_columns([100.0], 190.0, ZP, ISO)
