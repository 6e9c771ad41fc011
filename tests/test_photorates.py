"""Photoabsorption cross sections, spectra and photo frequencies."""

from __future__ import annotations

import numpy as np
import pytest
from _oracles import (
    PACKAGE_DATA,
    euvac_reference_flux,
    huebner_1992,
    o2_to_o2plus_mb,
    raw_cross_sections,
    read_csv,
)

from ionochem.environment.crosssections import (
    CHANNELS,
    O2_DISSOCIATIVE_SHARE_50_100A,
    Spectrum,
    euvac_cross_sections,
    solar_spectrum,
    verner_cross_section_cm2,
)
from ionochem.environment.n2plus_levels import (
    franck_condon_factors,
    n2plus_level_fractions,
    radiative_branching,
    vibrational_levels,
)
from ionochem.environment.photorates import (
    attenuated_flux,
    photo_frequencies,
    photoelectron_energies_eV,
    unattenuated_frequencies,
)
from ionochem.environment.user_spectrum import load_user_spectrum
from ionochem.errors import InputError, ScenarioError

HC = 12398.42  # eV angstrom

# --------------------------------------------------------------------------------------
# (a) Chapman layer


def _chapman_setup(chi_deg, *, H_km=40.0, step_km=2.0, sigma_abs=1e-17, eta=0.8):
    """Isothermal single-absorber plane-parallel atmosphere, monochromatic sun."""
    z_km = np.arange(0.0, 800.0 + step_km / 2, step_km)
    H_cm = H_km * 1e5
    n0 = 1e13
    n = n0 * np.exp(-z_km / H_km)
    column = n * H_cm / np.cos(np.radians(chi_deg))  # sec chi * n0 H exp(-z/H), analytic
    spec = Spectrum(np.array([500.0]), np.array([500.0]), np.array([1e10]),
                    {"X": np.array([sigma_abs])}, {"X->X+": np.array([eta * sigma_abs])},
                    "monochromatic test sun (invented)")
    return z_km, n, column, spec, H_cm, n0


@pytest.mark.parametrize("chi_deg", [0.0, 30.0, 60.0])
def test_chapman_peak_matches_analytic_layer(chi_deg):
    """Chapman (1931), Proc. Phys. Soc. 43, 26: for an isothermal absorber the production
    q = n eta sigma I exp(-tau) peaks where tau = 1, at z_m = H ln(n0 sigma H sec chi), with
    q_max = eta I_inf / (e H sec chi). Grid step H/20."""
    H_km, sigma, eta, flux = 40.0, 1e-17, 0.8, 1e10
    z, n, col, spec, H_cm, n0 = _chapman_setup(chi_deg, H_km=H_km, step_km=H_km / 20,
                                               sigma_abs=sigma, eta=eta)
    q = n * photo_frequencies(spec, {"X": col})["X->X+"]
    sec = 1.0 / np.cos(np.radians(chi_deg))
    q_max = eta * flux / (np.e * H_cm * sec)
    z_m = H_km * np.log(n0 * sigma * H_cm * sec)
    i = int(np.argmax(q))
    assert q[i] == pytest.approx(q_max, rel=0.01)
    assert abs(z[i] - z_m) <= H_km / 20
    tau = sigma * col[i]
    assert abs(np.log(tau)) <= 1.0 / 20 + 1e-12  # tau = 1 within one grid step


def test_chapman_profile_shape_over_the_whole_column():
    """Chapman (1931): q(z)/q_max = exp(1 - y - exp(-y)), y = (z - z_m)/H, at every level of
    a plane-parallel isothermal atmosphere (chi = 45 degrees)."""
    H_km, sigma = 40.0, 1e-17
    z, n, col, spec, H_cm, n0 = _chapman_setup(45.0, H_km=H_km, step_km=2.0, sigma_abs=sigma)
    sec = np.sqrt(2.0)
    q = n * photo_frequencies(spec, {"X": col})["X->X+"]
    z_m = H_km * np.log(n0 * sigma * H_cm * sec)
    y = (z - z_m) / H_km
    expected = 0.8 * 1e10 / (np.e * H_cm * sec) * np.exp(1 - y - np.exp(-y))
    assert np.allclose(q, expected, rtol=1e-9, atol=1e-300)


# --------------------------------------------------------------------------------------
# (b) unattenuated frequencies against Huebner, Keady & Lyon (1992)

# Huebner, Keady & Lyon (1992), Astrophys. Space Sci. 195, 1: quiet/active Sun at 1 AU, the
# values shipped in tests/reference/huebner1992_photorates.csv (*(from memory)*: see its header).
HUEBNER_1992 = huebner_1992()
#: F10.7 = F10.7A used here for "quiet" (solar minimum) and "active" (solar maximum).
F107_QUIET, F107_ACTIVE = 70.0, 200.0


def _ion_totals(j):
    return {"O": j["O->O+"] + j["O->O+(2D)"] + j["O->O+(2P)"], "N2": j["N2->N2+"],
            "O2": j["O2->O2+"]}


@pytest.mark.parametrize("f107,f107a", [(70.0, 70.0), (150.0, 145.0), (200.0, 200.0)])
def test_unattenuated_frequencies_equal_sum_of_published_flux_times_cross_section(f107, f107a):
    """J = sum_i F_i sigma_i (definition of the photo frequency), written out in the test with
    F from Richards et al. (1994) eq. 1 on their table 1 (tests/reference) and sigma the
    plain columns of the packaged Fennelly & Torr (1992) table: O (all O+ states) = O_abs,
    N2 -> N2+, N2 -> N+, O2 -> O2+; to 1e-12."""
    raw = raw_cross_sections()
    flux = euvac_reference_flux(f107, f107a)
    j = unattenuated_frequencies(solar_spectrum(f107, f107a))
    expect = {"O": raw["O_abs"], "N2->N2+": raw["N2+_ion"], "N2->N+": raw["N+_from_N2"],
              "O2->O2+": o2_to_o2plus_mb(raw)}
    got = {"O": _ion_totals(j)["O"], "N2->N2+": j["N2->N2+"], "N2->N+": j["N2->N+"],
           "O2->O2+": j["O2->O2+"]}
    for key, sigma_mb in expect.items():
        assert float(got[key]) == pytest.approx(float(flux @ sigma_mb) * 1e-18, rel=1e-12), key


@pytest.mark.parametrize("species", ["O", "N2", "O2"])
def test_unattenuated_ionization_frequencies_match_huebner_1992(species):
    """EUVAC with F10.7 = F10.7A = 70 (quiet) and 200 (active) gives photoionization
    frequencies of O, N2 and O2 of the order of Huebner, Keady & Lyon (1992) (quiet/active Sun
    at 1 AU; values *(from memory)*, tests/reference/huebner1992_photorates.csv): within a
    factor 1.5 (different flux models and a remembered table), and an active/quiet ratio
    within 25 % (the ratio depends on the flux model's activity scaling only)."""
    spec = solar_spectrum([F107_QUIET, F107_ACTIVE], [F107_QUIET, F107_ACTIVE])
    j = _ion_totals(unattenuated_frequencies(spec))[species]
    quiet, active = HUEBNER_1992[species]
    assert 1 / 1.5 < j[0] / quiet < 1.5
    assert 1 / 1.5 < j[1] / active < 1.5
    assert j[1] / j[0] == pytest.approx(active / quiet, rel=0.25)


def test_no_ionization_by_lyman_alpha_is_sigma_times_flux():
    """NO -> NO+ at the top of the atmosphere is sigma(1216) * F(Ly alpha) (Watanabe 1954,
    from memory); the default flux follows activity: 3.5e11 at P = 70 (Woods et al. 2000,
    from memory) and 1.9 times that at P = 200, the cycle-21 maximum/minimum ratio of Lean &
    Skumanich 1983 (JGR 88, 5751); a given flux replaces the relation."""
    j70 = float(unattenuated_frequencies(solar_spectrum(70.0, 70.0))["NO->NO+"])
    j200 = float(unattenuated_frequencies(solar_spectrum(200.0, 200.0))["NO->NO+"])
    assert j70 == pytest.approx(2.0e-18 * 3.5e11, rel=1e-12)
    assert j200 / j70 == pytest.approx(1.9, rel=1e-12)
    j = unattenuated_frequencies(solar_spectrum(100, 100, lyman_alpha_photons_cm2_s=6e11))
    assert float(j["NO->NO+"]) == pytest.approx(2.0e-18 * 6e11, rel=1e-12)


def test_lyman_alpha_flux_stays_within_the_measured_solar_cycle_range():
    """Over P = 60..300 the default Lyman alpha flux stays within 2.5e11..1.1e12 photons
    cm-2 s-1 and rises with activity (measured cycle range 3.5e11 to ~6-7e11, Woods et al.
    2000 from memory; Lean & Skumanich 1983 ratio 1.9), and is floored at 0.8 of the
    solar-minimum value as EUVAC's factor is (Richards et al. 1994)."""
    from ionochem.environment.lyman_alpha import lyman_alpha_flux

    p = np.linspace(60.0, 300.0, 25)
    flux = lyman_alpha_flux(p, p)
    assert np.all(np.diff(flux) > 0)
    assert flux.min() >= 0.8 * 3.5e11 and flux.max() < 1.1e12
    assert float(lyman_alpha_flux(1.0, 1.0)) == pytest.approx(0.8 * 3.5e11)
    with pytest.raises(InputError):
        lyman_alpha_flux(-1.0, 70.0)


def test_lyman_alpha_is_attenuated_by_o2_only():
    """Beer-Lambert: an O2 slant column of 1e20 cm-2 with sigma(O2, 1216) = 1e-20 cm2
    (Watanabe 1958, from memory) leaves exp(-1) of the Lyman alpha flux; N2 and O columns do
    not absorb it."""
    spec = solar_spectrum(100, 100)
    top = float(unattenuated_frequencies(spec)["NO->NO+"])
    j = photo_frequencies(spec, {"O2": np.array([1e20]), "N2": np.array([1e25]),
                                 "O": np.array([1e25])})["NO->NO+"]
    assert j[0] == pytest.approx(top * np.exp(-1.0), rel=1e-12)


# --------------------------------------------------------------------------------------
# (c) thresholds

# Ionization thresholds, eV: NIST ionization energies *(from memory)*, as listed in the
# docstring of ionochem/environment/crosssections.py.
THRESHOLDS_EV = {
    "O->O+": 13.62, "O->O+(2D)": 16.94, "O->O+(2P)": 18.64, "N2->N2+": 15.58,
    "N2->N+": 24.3, "O2->O2+": 12.07, "O2->O+": 18.7, "NO->NO+": 9.26, "N->N+": 14.53,
    "He->He+": 24.59,
}


def test_no_cross_section_longward_of_channel_threshold():
    """NIST thresholds *(from memory)*: every channel of the default spectrum is zero
    in every bin wholly longward of its threshold (a line beyond it, or a range bin whose
    short edge is beyond it); a small tolerance of 2 angstrom covers the rounding of the
    thresholds quoted there."""
    spec = solar_spectrum(150, 150)
    checked = 0
    for key, e_th in THRESHOLDS_EV.items():
        lam = HC / e_th + 2.0
        beyond = spec.wl_lo_A > lam
        sigma = spec.sigma_channel_cm2[key]
        assert np.all(sigma[beyond] == 0), key
        assert np.any(sigma[~beyond] > 0), key  # the channel is not empty
        checked += beyond.sum()
    assert checked > 50


def test_channel_thresholds_agree_with_science_md():
    """The channel thresholds used in code equal the NIST ionization energies above
    *(from memory)* to 0.05 eV."""
    for key, e_th in THRESHOLDS_EV.items():
        assert CHANNELS[key].threshold_eV == pytest.approx(e_th, abs=0.051), key


def test_user_spectrum_with_partial_ionization_below_threshold_is_rejected(tmp_path):
    """A user spectrum giving O -> O+(2D) (threshold 16.94 eV, 732 angstrom) at 800
    angstrom breaks the threshold rule (docs/scenario.md, 'User photon spectra') and must be an
    input error naming the column."""
    p = tmp_path / "s.csv"
    p.write_text("wl_lo_A,wl_hi_A,photons_cm2_s,sigma_abs_O,sigma_ion_O->O+(2D)\n"
                 "800,850,1e9,4,1\n")
    with pytest.raises(InputError, match=r"O->O\+\(2D\)"):
        load_user_spectrum(p)


# --------------------------------------------------------------------------------------
# cross-section table properties


def test_o_plus_state_channels_equal_the_published_partial_cross_sections():
    """Longward of 250 angstrom, where Fennelly & Torr (1992) give the five O+ states in full
    (they add up to the O total there), each folded channel equals its published partials
    exactly: O+(4S) = 4S + 4P, O+(2D) = 2D + 2P*/2, O+(2P) = 2P + 2P*/2 (docs/validation.md,
    O+ state folding); shortward, every channel keeps its published share of the sum."""
    raw = raw_cross_sections()
    _, sigma = euvac_cross_sections()
    parts = {"O->O+": raw["O+_4S"] + raw["O+_4P"],
             "O->O+(2D)": raw["O+_2D"] + 0.5 * raw["O+_2Pstar"],
             "O->O+(2P)": raw["O+_2P"] + 0.5 * raw["O+_2Pstar"]}
    total = sum(parts.values())
    full = (raw["wl_lo_A"] >= 250.0) & (np.abs(total - raw["O_abs"]) < 2e-3)
    assert full.sum() >= 25
    for key, mb in parts.items():
        np.testing.assert_allclose(sigma[key][:37][full], mb[full] * 1e-18, rtol=1e-12,
                                   err_msg=key)
        lit = raw["O_abs"] > 0
        np.testing.assert_allclose(sigma[key][:37][lit] / (raw["O_abs"][lit] * 1e-18),
                                   mb[lit] / total[lit], rtol=1e-12, err_msg=key)
        assert np.all(sigma[key][:37][~lit] == 0), key


def test_n2_channels_add_up_to_n2_absorption():
    """N2 absorption = N2+ + N+ + neutral dissociation: the published ionization cross sections
    (Fennelly & Torr 1992, read as plain numbers) never exceed the absorption, so the
    dissociation the code derives as the remainder is never clipped and equals absorption
    minus ionization in every bin; longward of the N2 ionization threshold (796 angstrom)
    every absorbed photon dissociates."""
    raw = raw_cross_sections()
    assert np.all(raw["N2+_ion"] + raw["N+_from_N2"] <= raw["N2_abs"] * (1 + 1e-12))
    sigma_abs, sigma = euvac_cross_sections()
    dis = sigma["N2->N(2D)+N"][:37]
    np.testing.assert_allclose(dis, (raw["N2_abs"] - raw["N2+_ion"] - raw["N+_from_N2"])
                               * 1e-18, rtol=1e-12, atol=1e-30)
    longward = (raw["wl_lo_A"] >= 800.0) & (raw["wl_hi_A"] <= 1000.0)
    assert longward.sum() >= 5
    assert np.all(dis[longward] == sigma_abs["N2"][:37][longward])
    assert np.all(dis[longward] > 0)


def test_o2_channels_do_not_exceed_absorption():
    """O2+ + O+ (dissociative) never exceed O2 absorption (Fennelly & Torr 1992)."""
    sigma_abs, sigma = euvac_cross_sections()
    assert np.all(sigma["O2->O2+"] + sigma["O2->O+"] <= sigma_abs["O2"] * (1 + 1e-12))


def test_o2_dissociative_ionization_in_the_50_100_angstrom_bin():
    """The 50-100 A bin gives O+ + O from O2 with the share of the 100-150 A bin,
    (3.806 - 2.346)/3.806 = 38.4 % of the 1.316 Mb absorption (Fennelly & Torr 1992 via
    Richards et al. 1994 table 2, from memory), and O2+ the rest; the 100-250 A bins keep
    their own 38-45 % shares."""
    sigma_abs, sigma = euvac_cross_sections()
    assert O2_DISSOCIATIVE_SHARE_50_100A == pytest.approx(0.3836, abs=1e-4)
    assert sigma["O2->O+"][0] == pytest.approx(0.3836 * 1.316e-18, rel=1e-3)
    assert sigma["O2->O2+"][0] + sigma["O2->O+"][0] == pytest.approx(1.316e-18, rel=1e-12)
    share = sigma["O2->O+"][:4] / sigma_abs["O2"][:4]
    assert np.all((share > 0.37) & (share < 0.46)), share


def test_verner_fit_reproduces_helium_threshold_cross_section():
    """Verner et al. (1996), Astrophys. J. 465, 487: He photoionization is about 7.4 Mb at
    its 24.59 eV threshold (Samson et al. 1994, J. Phys. B 27, 887, from memory) and falls
    roughly as E^-2 to E^-3 above."""
    from ionochem.environment.crosssections import VERNER_1996

    s_th = verner_cross_section_cm2(24.6, VERNER_1996["He->He+"])
    assert s_th == pytest.approx(7.4e-18, rel=0.05)
    assert verner_cross_section_cm2(24.5, VERNER_1996["He->He+"]) == 0.0
    assert verner_cross_section_cm2(50.0, VERNER_1996["He->He+"]) < s_th / 3


# --------------------------------------------------------------------------------------
# attenuation, dark levels, broadcasting


def test_dark_levels_have_no_photo_rates_in_any_bin():
    """A ray that meets the Earth (slant column = inf) carries no photons at all, even in a
    bin no absorber of the spectrum absorbs (Beer-Lambert with infinite path)."""
    spec = solar_spectrum(120, 120)
    cols = {"N2": np.array([1e17, np.inf]), "O": np.array([1e16, np.inf]),
            "O2": np.array([1e16, np.inf])}
    j = photo_frequencies(spec, cols)
    for key, v in j.items():
        assert v[1] == 0.0, key
        assert np.isfinite(v[0])
    assert np.all(attenuated_flux(spec, cols)[1] == 0)


def test_frequencies_broadcast_over_a_leading_time_axis():
    """Columns shaped (time, altitude) and fluxes shaped (time, bin) give (time, altitude)
    frequencies equal to separate single-time calls (the sum over bins is per time)."""
    spec2 = solar_spectrum([80.0, 180.0], [90.0, 170.0])
    cols = {"N2": np.array([[1e15, 1e17, 1e18], [1e16, 1e17, np.inf]]),
            "O2": np.array([[1e14, 1e16, 1e17], [1e15, 1e16, np.inf]]),
            "O": np.array([[1e15, 1e16, 1e17], [1e15, 1e16, np.inf]])}
    j = photo_frequencies(spec2, cols)
    for t, (f, fa) in enumerate(((80.0, 90.0), (180.0, 170.0))):
        one = photo_frequencies(solar_spectrum(f, fa), {k: v[t] for k, v in cols.items()})
        for key in j:
            assert j[key].shape == (2, 3)
            assert np.allclose(j[key][t], one[key], rtol=1e-12, atol=0)


def test_thin_atmosphere_gives_unattenuated_frequencies_and_per_bin_sums():
    """With zero columns exp(-tau) = 1: photo frequencies equal the unattenuated ones, and
    the per-bin contributions add up to the total (definition J = sum sigma I)."""
    spec = solar_spectrum(150, 150)
    zero = {"N2": np.zeros(2), "O2": np.zeros(2), "O": np.zeros(2)}
    j = photo_frequencies(spec, zero)
    jb = photo_frequencies(spec, zero, per_bin=True)
    top = unattenuated_frequencies(spec)
    for key in top:
        assert np.allclose(j[key], top[key], rtol=1e-12)
        assert np.allclose(jb[key].sum(axis=-1), j[key], rtol=1e-12)


def test_photoelectron_energy_of_584_photon_on_o_is_7_6_ev():
    """h nu - threshold: 584.33 angstrom (21.22 eV) on O -> O+(4S) (13.62 eV) gives a
    7.6 eV photoelectron (photon energy minus threshold)."""
    spec = solar_spectrum(100, 100)
    e = photoelectron_energies_eV(spec)
    i = int(np.flatnonzero(spec.wl_lo_A == 584.33)[0])
    assert e["O->O+"][i] == pytest.approx(HC / 584.33 - 13.62, abs=0.01)
    assert e["O->O+"][i] == pytest.approx(7.6, abs=0.05)
    for key, energies in e.items():
        assert np.all(energies >= 0), key
    assert "N2->N(2D)+N" not in e


# --------------------------------------------------------------------------------------
# user spectrum file


def test_user_spectrum_round_trip_and_derived_n2_dissociation(tmp_path):
    """A soft X-ray user file (invented test numbers) is read with Mb -> cm2 conversion; the
    N2 dissociation cross section is derived as absorption minus ionization; added to EUVAC
    it contributes sigma * F to the frequencies."""
    p = tmp_path / "xray.csv"
    p.write_text("# invented soft X-ray bins for a test\n"
                 "wl_lo_A,wl_hi_A,photons_cm2_s,sigma_abs_N2,sigma_ion_N2->N2+,"
                 "sigma_ion_N2->N+,sigma_abs_O,sigma_ion_O->O+\n"
                 "18,30,2e8,0.6,0.4,0.1,0.3,0.3\n"
                 "30,50,5e8,1.2,0.8,0.4,0.5,0.5\n")
    user = load_user_spectrum(p)
    assert user.n_bins == 2
    assert np.allclose(user.sigma_abs_cm2["N2"], [0.6e-18, 1.2e-18])
    assert np.allclose(user.sigma_channel_cm2["N2->N(2D)+N"], [0.1e-18, 0.0], atol=1e-33)
    combined = solar_spectrum(100, 100).concatenate(user)
    assert combined.n_bins == 40
    j_all = unattenuated_frequencies(combined)["N2->N2+"]
    j_euv = unattenuated_frequencies(solar_spectrum(100, 100))["N2->N2+"]
    assert float(j_all - j_euv) == pytest.approx(0.4e-18 * 2e8 + 0.8e-18 * 5e8, rel=1e-10)


@pytest.mark.parametrize("header,row,match", [
    ("wl_lo_A,photons_cm2_s", "10,1e8", "wl_hi_A"),
    ("wl_lo_A,wl_hi_A,photons_cm2_s,sigma_total_O", "10,20,1e8,1", "unknown column"),
    ("wl_lo_A,wl_hi_A,photons_cm2_s,sigma_ion_O->O+", "10,20,1e8,1", "sigma_abs_O"),
    ("wl_lo_A,wl_hi_A,photons_cm2_s,sigma_abs_O,sigma_ion_O->O+", "10,20,1e8,1,2",
     "more than its absorption"),
    ("wl_lo_A,wl_hi_A,photons_cm2_s", "20,10,1e8", "wl_lo_A <= wl_hi_A"),
    ("wl_lo_A,wl_hi_A,photons_cm2_s,sigma_abs_O", "10,20,-1e8,1", "negative"),
])
def test_user_spectrum_errors_are_reported_with_the_scenario_key(tmp_path, header, row, match):
    """Malformed spectrum files are scenario errors at the key that names them
    (docs/internals.md, errors), never silently accepted."""
    p = tmp_path / "bad.csv"
    p.write_text(header + "\n" + row + "\n")
    with pytest.raises(ScenarioError, match=match) as info:
        load_user_spectrum(p, where="photons.spectrum", scenario_file=tmp_path / "s.toml")
    assert info.value.key == "photons.spectrum"


# --------------------------------------------------------------------------------------
# N2+ vibrational levels made by photoionization


def test_morse_levels_reproduce_measured_fundamental_spacings():
    """G(1) - G(0) = we - 2 wexe for a Morse oscillator: 2329.9 cm-1 for N2 X, 2174.8 for
    N2+ X, 1873.7 for N2+ A and 2373.5 for N2+ B (Huber & Herzberg 1979, from memory);
    the finite-difference solution must give them to 1 cm-1."""
    for state, dg in (("N2(X)", 2329.9), ("N2+(X)", 2174.8), ("N2+(A)", 1873.7),
                      ("N2+(B)", 2373.5)):
        e, _ = vibrational_levels(state, 3)
        assert e[1] - e[0] == pytest.approx(dg, abs=1.0), state


def test_franck_condon_factors_match_gilmore_1992():
    """Gilmore, Laher & Espy (1992), J. Phys. Chem. Ref. Data 21, 1005 (values from memory):
    N2 X(0) -> N2+ X(0, 1) = 0.916, 0.080; N2 X(0) -> N2+ B(0, 1) = 0.886, 0.107;
    N2 X(0) -> N2+ A(0, 1, 2) = 0.29, 0.33, 0.21; N2+ B(0) -> X(0, 1) = 0.66, 0.26."""
    qx = franck_condon_factors("N2(X)", "N2+(X)")[0]
    qb = franck_condon_factors("N2(X)", "N2+(B)")[0]
    qa = franck_condon_factors("N2(X)", "N2+(A)")[0]
    qbx = franck_condon_factors("N2+(B)", "N2+(X)")[0]
    assert qx[:2] == pytest.approx([0.916, 0.080], abs=0.01)
    assert qb[:2] == pytest.approx([0.886, 0.107], abs=0.015)
    assert qa[:3] == pytest.approx([0.29, 0.33, 0.21], abs=0.03)
    assert qbx[:2] == pytest.approx([0.66, 0.26], abs=0.02)
    for q in (qx, qb, qa):
        assert q.sum() == pytest.approx(1.0, abs=1e-4)  # completeness of the upper levels


def test_first_negative_band_branching_follows_nu_cubed_times_franck_condon():
    """B(0) -> X(0) over B(0) -> X(1) of the first negative system: with a constant transition
    moment the branching ratio is (lambda_01 / lambda_00)^3 q00 / q01, with the band heads at
    3914 and 4278 angstrom (the well-known first negative bands) and q00 = 0.66, q01 = 0.26
    (Gilmore, Laher & Espy 1992, *(from memory)*): about 3.3, to 10 %. The rows are
    probabilities (non-negative, sum 1)."""
    b = radiative_branching("N2+(B)")
    ratio = (4278.0 / 3914.0) ** 3 * 0.66 / 0.26
    assert b[0, 0] / b[0, 1] == pytest.approx(ratio, rel=0.10)
    for upper in ("N2+(A)", "N2+(B)"):
        w = radiative_branching(upper)
        assert np.all(w >= 0) and np.allclose(w.sum(axis=1), 1.0)


def test_level_fractions_sum_to_one_non_negative_and_v0_dominant():
    """The packaged X(v) fractions are a probability distribution (sum 1, >= 0) with v = 0
    dominant: the N2 X(0) -> N2+ X(0) Franck-Condon factor is 0.92 and the B -> X cascade
    returns most B ions to v = 0 (Gilmore et al. 1992)."""
    for levels in ([0], [0, 1], [0, 1, 2, 3, 4], list(range(12))):
        f = n2plus_level_fractions(levels)
        assert f.shape == (len(levels),)
        assert f.sum() == pytest.approx(1.0, abs=1e-12)
        assert np.all(f >= 0)
    f = n2plus_level_fractions([0, 1, 2, 3, 4])
    assert f[0] > 0.5 and np.all(np.diff(f) < 0)


def test_top_level_collects_all_higher_levels():
    """"v = top and above": the top entry is the sum of the table's fractions from top up,
    and a gap [0, 2, 5] collects v = 2..4 in the middle entry."""
    full = n2plus_level_fractions(list(range(9)))
    f4 = n2plus_level_fractions([0, 1, 2, 3, 4])
    assert np.allclose(f4[:4], full[:4])
    assert f4[4] == pytest.approx(full[4:].sum(), rel=1e-12)
    g = n2plus_level_fractions([0, 2, 5])
    assert g == pytest.approx([full[:2].sum(), full[2:5].sum(), full[5:].sum()])
    assert np.all(n2plus_level_fractions(list(range(12)))[9:] == 0)


def test_packaged_level_table_against_published_franck_condon_factors():
    """The packaged X(v) table (read as plain numbers, not recomputed by the code that wrote
    it) against outside values: its direct-X part is the X-state share times the N2 X(0) ->
    N2+ X(v) Franck-Condon factors 0.916, 0.080 of Gilmore, Laher & Espy (1992), J. Phys.
    Chem. Ref. Data 21, 1005 *(from memory)*, to 0.01 of the share; the direct-X, via-A and
    via-B parts add up to the documented state shares X : A : B = 0.40 : 0.45 : 0.15 and the
    fractions to 1; the B -> X cascade puts most of B in v = 0 (B(0) -> X(0) factor 0.66 and
    N2 X(0) -> B(0) 0.886, Gilmore et al. 1992), so via_B(0) > 0.55 of the B share."""
    t = read_csv(PACKAGE_DATA / "n2plus_level_fractions.csv")
    assert t["v"].tolist() == list(range(9))
    np.testing.assert_allclose(t["fraction"], t["direct_X"] + t["via_A"] + t["via_B"],
                               atol=2e-6)
    assert t["fraction"].sum() == pytest.approx(1.0, abs=1e-5)
    for part, share in (("direct_X", 0.40), ("via_A", 0.45), ("via_B", 0.15)):
        assert t[part].sum() == pytest.approx(share, abs=1e-5), part
    assert t["direct_X"][:2] / 0.40 == pytest.approx([0.916, 0.080], abs=0.01)
    assert t["via_B"][0] / 0.15 > 0.55
    # and the package folds this same table onto the resolved levels
    f = t["fraction"] / t["fraction"].sum()
    np.testing.assert_allclose(n2plus_level_fractions([0, 1, 2, 3, 4]),
                               np.append(f[:4], f[4:].sum()), rtol=1e-12)


@pytest.mark.parametrize("levels", [[], [1, 2], [0, 2, 2], [0, 3, 1]])
def test_bad_level_lists_are_rejected(levels):
    """Levels must start at 0 and increase strictly, else the folding is undefined."""
    with pytest.raises(InputError):
        n2plus_level_fractions(levels)
