"""Photoelectron secondary ionization."""

from __future__ import annotations

import numpy as np
import pytest

from ionochem.environment.crosssections import Spectrum, solar_spectrum
from ionochem.environment.photorates import photo_frequencies
from ionochem.environment.secondary import (
    SECONDARY_CHANNELS,
    SecondaryParameters,
    ionization_yield,
    secondary_frequencies,
    secondary_ion_pair_production,
)
from ionochem.errors import InputError

HC = 12398.42  # eV angstrom


def _line(wl_A, absorber, key, sigma=1e-17, flux=1e9):
    """One solar line and one absorber (invented test spectrum)."""
    return Spectrum(np.array([wl_A]), np.array([wl_A]), np.array([flux]),
                    {absorber: np.array([sigma])}, {key: np.array([sigma])}, "test line")


def test_yield_is_zero_below_threshold():
    """*(common practice)*, e.g. Richards & Torr 1988, J. Geophys. Res. 93, 4060: a
    photoelectron below about 15-20 eV makes no further ion pair; the yield is zero up to its
    threshold and positive above."""
    e = np.array([0.0, 5.0, 7.6, 14.99, 15.0])
    assert np.all(ionization_yield(e) == 0)
    assert ionization_yield(20.0) > 0


def test_yield_tends_to_e_over_35_ev_at_high_energy():
    """Rees (1989), Physics and Chemistry of the Upper Atmosphere: W = 35 eV per ion pair for
    electrons of hundreds of eV and more, i.e. Y(E) -> E / 35 eV."""
    for e, tol in ((1e3, 0.02), (1e4, 0.002), (1e6, 2e-5)):
        assert ionization_yield(e) == pytest.approx(e / 35.0, rel=tol)
    assert ionization_yield(1e4) < 1e4 / 35.0  # approaches from below


def test_584_photon_on_o_makes_no_secondaries():
    """Photon energy minus threshold: 584 angstrom (21.2 eV) on O (13.62 eV) frees a 7.6 eV
    electron, which cannot ionize: no secondary ion pairs at all."""
    spec = _line(584.33, "O", "O->O+")
    dens = {"O": np.array([1e9, 1e10]), "N2": np.array([1e9, 1e10]),
            "O2": np.array([1e8, 1e9])}
    cols = {"O": np.array([1e15, 1e16])}
    assert np.all(secondary_ion_pair_production(spec, cols, dens) == 0)
    for key, v in secondary_frequencies(spec, cols, dens).items():
        assert np.all(v == 0), key


def test_secondary_count_of_a_100_angstrom_photon_on_n2():
    """A 100 angstrom photon (124.0 eV) ionizing N2 (15.58 eV) frees a 108.4 eV electron
    that makes (108.4 - 15)/35 = 2.67 ion pairs (Y(E) of the module, W = 35 eV after Rees
    1989); in pure N2 the secondary N2 ionization frequency is that times the primary one,
    20 % of it as N+ (Itikawa 2006, J. Phys. Chem. Ref. Data 35, 31, partial cross sections
    near 100 eV, *(from memory)*)."""
    spec = _line(100.0, "N2", "N2->N2+")
    cols = {"N2": np.array([0.0, 1e16])}
    dens = {"N2": np.array([1e10, 1e10])}
    primary = photo_frequencies(spec, cols)["N2->N2+"]
    sec = secondary_frequencies(spec, cols, dens)
    y = (HC / 100.0 - 15.581 - 15.0) / 35.0
    total = sec["N2->N2+"] + sec["N2->N+"]
    assert np.allclose(total, primary * y, rtol=1e-12)
    assert np.allclose(sec["N2->N+"], 0.2 * total, rtol=1e-12)
    assert np.allclose(sec["N2->N(2D)+N"], 0.5 * total, rtol=1e-12)
    # A trace of O would be ionized per atom in the ratio of the impact cross sections.
    f_o = sec["O->O+"] + sec["O->O+(2D)"] + sec["O->O+(2P)"]
    assert np.allclose(f_o, total * 1.5 / 2.5, rtol=1e-12)


def test_secondaries_are_shared_by_density_times_impact_cross_section():
    """Secondary ionizations are shared in proportion to n_s sigma_s(100 eV) with
    sigma(N2) : sigma(O2) : sigma(O) = 2.5 : 2.4 : 1.5 (x 1e-16 cm2; Itikawa 2006, 2009;
    Thompson et al. 1995, from memory); per molecule the frequencies are then in the ratio
    of the cross sections, and the volume rates add up to P_sec."""
    spec = _line(150.0, "N2", "N2->N2+")
    cols = {"N2": np.array([1e15])}
    dens = {"N2": np.array([3e9]), "O2": np.array([1e9]), "O": np.array([5e9])}
    sec = secondary_frequencies(spec, cols, dens)
    f_n2 = sec["N2->N2+"] + sec["N2->N+"]
    f_o2 = sec["O2->O2+"] + sec["O2->O+"]
    f_o = sec["O->O+"] + sec["O->O+(2D)"] + sec["O->O+(2P)"]
    assert f_o2 / f_n2 == pytest.approx(2.4 / 2.5, rel=1e-12)
    assert f_o / f_n2 == pytest.approx(1.5 / 2.5, rel=1e-12)
    p_sec = secondary_ion_pair_production(spec, cols, dens)
    volume = dens["N2"] * f_n2 + dens["O2"] * f_o2 + dens["O"] * f_o
    assert volume == pytest.approx(p_sec, rel=1e-12)
    assert sec["O->O+(2D)"] / f_o == pytest.approx(0.4)
    assert sec["O->O+(2P)"] / f_o == pytest.approx(0.2)


def test_secondary_to_primary_ratio_in_optically_thin_oxygen():
    """With the full EUVAC spectrum (F10.7 = 150) and optically thin O, the ratio of
    secondary to primary ionization is a few tenths, as in the F-region ratios of Richards &
    Torr (1988), J. Geophys. Res. 93, 4060 (about 0.2-0.5, from memory)."""
    spec = solar_spectrum(150, 150)
    cols = {"O": np.array([0.0])}
    dens = {"O": np.array([1e9])}
    j = photo_frequencies(spec, cols)
    primary = dens["O"] * (j["O->O+"] + j["O->O+(2D)"] + j["O->O+(2P)"])
    ratio = secondary_ion_pair_production(spec, cols, dens) / primary
    assert 0.15 < ratio[0] < 0.6


def test_switch_off_gives_zeros_of_the_right_shape():
    """``enabled=False`` (scenario ``secondary = false``) returns every channel of
    SECONDARY_CHANNELS as zeros shaped (time, altitude)."""
    spec = solar_spectrum(150, 150)
    cols = {"N2": np.full((2, 3), 1e16), "O": np.full((2, 3), 1e16)}
    dens = {"N2": np.full(3, 1e10), "O": np.full(3, 1e10)}
    off = secondary_frequencies(spec, cols, dens, enabled=False)
    assert set(off) == set(SECONDARY_CHANNELS)
    for v in off.values():
        assert v.shape == (2, 3) and np.all(v == 0)
    on = secondary_frequencies(spec, cols, dens)
    assert on["N2->N2+"].shape == (2, 3) and np.all(on["N2->N2+"] > 0)


def test_dark_levels_have_no_secondaries():
    """No photons (slant column inf) means no photoelectrons and no secondaries."""
    spec = solar_spectrum(150, 150)
    cols = {"N2": np.array([1e16, np.inf]), "O": np.array([1e16, np.inf])}
    dens = {"N2": np.array([1e10, 1e11]), "O": np.array([1e10, 1e11])}
    sec = secondary_frequencies(spec, cols, dens)
    assert sec["N2->N2+"][0] > 0
    assert all(v[1] == 0 for v in sec.values())


def test_precomputed_per_bin_frequencies_give_the_same_answer():
    """Passing photo_frequencies(..., per_bin=True) gives the same result as letting the
    module compute the attenuation itself (one definition of J_c,bin)."""
    spec = solar_spectrum(120, 100)
    cols = {"N2": np.array([1e15, 1e17]), "O2": np.array([1e14, 1e16]),
            "O": np.array([1e15, 1e17])}
    dens = {"N2": np.array([1e9, 1e11]), "O2": np.array([1e8, 1e10]),
            "O": np.array([1e9, 1e11])}
    pb = photo_frequencies(spec, cols, per_bin=True)
    a = secondary_frequencies(spec, cols, dens)
    b = secondary_frequencies(spec, cols, dens, per_bin_frequencies=pb)
    for k in a:
        assert np.allclose(a[k], b[k], rtol=1e-12)


def test_bad_parameters_are_rejected():
    """Shares outside [0, 1] or O+ shares not adding to 1 are input errors."""
    with pytest.raises(InputError):
        SecondaryParameters(n2_to_n_plus=1.5)
    with pytest.raises(InputError):
        SecondaryParameters(o_plus_states=(0.5, 0.5, 0.5))
