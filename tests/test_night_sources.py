"""Scattered night-time photon sources: intensities, diffuse attenuation, secondaries."""

from __future__ import annotations

import dataclasses
from pathlib import Path

import numpy as np
import pytest
from scipy.integrate import quad

import ionochem
from ionochem.environment.crosssections import HC_EV_A, euvac_cross_sections
from ionochem.environment.euvac import euvac_table
from ionochem.environment.night_sources import (
    HEMISPHERE_PHOTONS_PER_R,
    NIGHT_LINES,
    night_frequencies,
    night_rates,
    night_spectrum,
)

ROOT = Path(__file__).resolve().parents[1]
MID = ROOT / "scenarios" / "midlatitude_equinox.toml"
ZERO = {"O": np.zeros(1), "N2": np.zeros(1), "O2": np.zeros(1), "NO": np.zeros(1)}


def test_a_rayleigh_over_a_hemisphere_is_half_a_million_photons():
    """1 R = 1e6/(4π) photons cm-2 s-1 sr-1 (Hunten, Roach & Chamberlain 1956); over the
    upper hemisphere, isotropic, the flux arriving from all directions is 2π I = 5e5 per R."""
    assert HEMISPHERE_PHOTONS_PER_R == pytest.approx(2 * np.pi * 1e6 / (4 * np.pi))
    spec = night_spectrum()
    np.testing.assert_allclose(spec.photons_cm2_s,
                               [ln.intensity_R * 5e5 for ln in NIGHT_LINES], rtol=1e-12)


def test_intensities_are_the_cited_ones():
    """Lyman β 10 R at 227 km, and the helium signal split evenly between 584 Å (12 R if
    alone) and 304 Å (4.8 R if alone) (Science 160, 990, 1968); Lyman α 'several kR'
    (Young et al. 1975, Radio Sci. 10, 297)."""
    by = {round(ln.wavelength_A): ln.intensity_R for ln in NIGHT_LINES}
    assert by[1026] == 10.0 and by[584] == 6.0 and by[304] == 2.4
    assert 2000.0 <= by[1216] <= 5000.0


def test_unattenuated_frequencies_are_sigma_times_flux():
    """With no absorber above, J_c = Σ_lines σ_c 2πI; NO by Lyman α alone (2e-18 cm2,
    Watanabe 1954), O2 → O2+ by Lyman β and the helium lines, O by the helium lines only;
    each line's cross sections equal the EUVAC table's at the same line."""
    j = night_frequencies(ZERO)
    assert j["NO->NO+"][0] == pytest.approx(2e-18 * 3000 * 5e5, rel=1e-12)
    _, chan = euvac_cross_sections()
    t = euvac_table()
    idx = {w: int(np.flatnonzero((t["wl_lo_A"] == w) & (t["wl_hi_A"] == w))[0])
           for w in (1025.72, 584.33, 303.78)}
    expect_o2 = (chan["O2->O2+"][idx[1025.72]] * 10 + chan["O2->O2+"][idx[584.33]] * 6
                 + chan["O2->O2+"][idx[303.78]] * 2.4) * 5e5
    assert j["O2->O2+"][0] == pytest.approx(expect_o2, rel=1e-12)
    expect_o = (chan["O->O+"][idx[584.33]] * 6 + chan["O->O+"][idx[303.78]] * 2.4) * 5e5
    assert j["O->O+"][0] == pytest.approx(expect_o, rel=1e-12)
    assert chan["O->O+"][idx[1025.72]] == 0.0


@pytest.mark.parametrize("column", [1e15, 1e17, 1e18, 3e18])
def test_diffuse_attenuation_matches_an_integral_over_directions(column):
    """An isotropic sky seen through a plane-parallel absorbing layer: the flux at a level
    is ∫ I exp(−τ/μ) dΩ over the upper hemisphere = 2π I E₂(τ) (Chandrasekhar 1960);
    checked against scipy.integrate.quad over μ for the O2 column absorbing Lyman β."""
    cols = dict(ZERO, O2=np.array([column]))
    j = night_frequencies(cols)["O2->O2+"][0]
    spec = night_spectrum()
    expect = 0.0
    for i in range(spec.n_bins):
        tau = spec.sigma_abs_cm2["O2"][i] * column
        ang = quad(lambda mu, t=tau: np.exp(-t / mu), 0.0, 1.0)[0]
        expect += spec.sigma_channel_cm2["O2->O2+"][i] * spec.photons_cm2_s[i] * ang
    assert j == pytest.approx(expect, rel=1e-8)


def test_only_he_ii_304_makes_secondaries():
    """Photoelectron energies hν − threshold: He II 304 Å on O gives 40.8 − 13.6 = 27.2 eV,
    (27.2 − 15)/35 = 0.35 secondary pairs (Rees 1989, common practice); He I 584 Å on O
    gives 7.6 eV and Lyman α and β too little: no secondaries (photon energy minus threshold)."""
    dens = {"O": np.array([1e9]), "N2": np.zeros(1), "O2": np.zeros(1)}
    photo, pe = night_rates(ZERO, dens)
    spec = night_spectrum()
    i304 = int(np.argmin(np.abs(spec.wl_lo_A - 303.78)))
    e = HC_EV_A / 303.78 - 13.618
    primary_304 = 2.4 * 5e5 * spec.sigma_abs_cm2["O"][i304]
    expect = primary_304 * (e - 15.0) / 35.0
    got = pe["O->O+"][0] + pe["O->O+(2D)"][0] + pe["O->O+(2P)"][0]
    assert got == pytest.approx(expect, rel=1e-9)
    _, off = night_rates(ZERO, dens, secondary=False)
    assert all(np.all(v == 0) for v in off.values())


def test_the_result_says_which_sources_act_and_the_switch_removes_them():
    """The dataset attribute ``photon_sources`` names the solar parts and each night line;
    ``[photons] night_sources = false`` removes them (docs/scenario.md) and the top-level
    NO ionization falls by exactly the scattered Lyman α term, σ 2πI = 3e-9 s-1."""
    scen = ionochem.load_scenario(MID)
    on = ionochem.Model(scen)
    ds = on.solve()
    src = ds.attrs["photon_sources"]
    for ln in NIGHT_LINES:
        assert ln.name in src
    assert "soft X-rays" in src and "EUVAC" in src
    off = ionochem.Model(scen.replace(
        photons=dataclasses.replace(scen.photons, night_sources=False)))
    j_on = on.environment.sources()["photo:NO->NO+"][-1]
    j_off = off.environment.sources()["photo:NO->NO+"][-1]
    assert j_on - j_off == pytest.approx(2e-18 * 3000 * 5e5, rel=1e-6)
    assert "night" not in off.solve().attrs["photon_sources"]


@pytest.mark.parametrize("f107", [60.0, 300.0])
def test_dawn_terminator_columns_solve(f107):
    """Equator, 05:00 local time (χ ≈ 107°), F10.7 = 60 and 300: before the night-time
    sources (and the soft X-rays) the steady solver refused the levels near 385–405 km,
    reached only by grazing rays almost wholly absorbed (photo rates from 0 to ~1e-47 s-1);
    with the scattered sources every level has a floor of production and the column solves,
    positive everywhere, with night-like Ne (< 1e4 cm-3) in the shadowed levels (Strobel,
    Opal & Meier 1980)."""
    import datetime as dt

    scen = ionochem.load_scenario(MID)
    scen = scen.replace(
        location=type(scen.location)(latitude_deg=0.0, longitude_deg=15.0),
        time=type(scen.time)(utc=dt.datetime(2025, 3, 20, 4, 0, tzinfo=dt.UTC)),
        sun=type(scen.sun)(f107=f107, f107a=f107))
    ds = ionochem.Model(scen).solve()
    assert 105 < float(ds["solar_zenith_angle"]) < 109
    e = ds["density"].sel(species="e").values
    dark = ds["dark"].values.astype(bool)
    assert dark.any() and np.all(e > 0)
    assert np.all(e[dark] < 1e4)
    assert np.all(ds["residual"].values < 1e-8)


def test_night_rates_do_not_depend_on_the_solar_spectrum(tmp_path):
    """At midnight, a user solar spectrum (invented; zero O2 absorption) gives the same
    night-time O2 → O2+ rates as EUVAC: the scattered lines are attenuated with their own
    cross sections (O2 for Lyman β), whatever the solar spectrum carries."""
    text = MID.read_text().replace('"../reactions/', f'"{ROOT}/reactions/')
    text = text.replace("2025-03-20T11:00:00Z", "2025-03-20T23:00:00Z")
    chans = ["O->O+", "O->O+(2D)", "O->O+(2P)", "N2->N2+", "N2->N+", "O2->O2+", "O2->O+",
             "NO->NO+", "N->N+"]
    cols = ["sigma_abs_O", "sigma_abs_N2", "sigma_abs_O2", "sigma_abs_NO", "sigma_abs_N",
            *(f"sigma_ion_{c}" for c in chans), "sigma_dis_N2->N(2D)+N"]
    values = [8.0 if c in ("sigma_abs_O", "sigma_ion_O->O+") else 0.0 for c in cols]
    (tmp_path / "sun.csv").write_text(
        "# invented one-bin spectrum for a test: only O absorbs\n"
        + ",".join(["wl_lo_A", "wl_hi_A", "photons_cm2_s", *cols]) + "\n"
        + ",".join(["300", "350", "1e9", *map(str, values)]) + "\n")
    (tmp_path / "euvac.toml").write_text(text)
    (tmp_path / "table.toml").write_text(
        text.replace('flux = "euvac"', 'flux = "table"\nspectrum = "sun.csv"'))
    a = ionochem.Model(ionochem.load_scenario(tmp_path / "euvac.toml"))
    b = ionochem.Model(ionochem.load_scenario(tmp_path / "table.toml"))
    ja = a.environment.sources()["photo:O2->O2+"]
    jb = b.environment.sources()["photo:O2->O2+"]
    assert ja[0] < 0.5 * ja[-1]                     # absorbed low down
    np.testing.assert_allclose(jb, ja, rtol=1e-9)


def test_night_n2plus_levels_add_up_to_the_night_total():
    """At midnight the per-level N2+ photo and photoelectron rates (split line by line and by
    the impact split, ``n2plus_levels``) add up to the channel totals of the night sources
    (the levels of a channel add up to its total, DEVELOPERS.md), and v = 0 leads."""
    scen = ionochem.load_scenario(ROOT / "scenarios" / "midlatitude_midnight.toml")
    src = ionochem.Model(scen).environment.sources()
    for base in ("photo:N2->N2+", "photoelectron:N2->N2+"):
        levels = [v for k, v in sorted(src.items()) if k.startswith(base + "(v=")]
        if not levels:
            pytest.skip("the default list asks for no per-level N2+ channels")
        assert np.all(src[base] > 0)
        np.testing.assert_allclose(sum(levels), src[base], rtol=1e-12)
        assert np.all(src[base + "(v=0)"] > 0.3 * src[base])


def test_transient_results_name_their_photon_sources_too():
    """The transient dataset carries the same ``photon_sources`` attribute (docs/outputs.md),
    soft X-rays and night lines included."""
    scen = ionochem.load_scenario(MID)
    scen = scen.replace(grid=type(scen.grid)(altitude_km=(100.0, 150.0, 200.0)),
                        solve=dataclasses.replace(scen.solve, mode="transient",
                                                  times_s=(0.0, 60.0)))
    ds = ionochem.Model(scen).integrate(np.array([0.0, 60.0]))
    assert "He I 584 A" in ds.attrs["photon_sources"]
    assert "soft X-rays" in ds.attrs["photon_sources"]


def test_exponential_integral_e2_equals_scipy_and_the_tables():
    """E_2 written out (no scipy.special at start-up) equals ``scipy.special.expn(2, x)``
    (Cephes) to 1e-13 relative from 1e-12 to 800, and the tabulated E_2(0.5) =
    0.326643862 and E_2(1) = 0.148495507 (Abramowitz & Stegun 1964, Table 5.1); E_2(0) = 1,
    E_2(inf) = 0."""
    from scipy.special import expn

    from ionochem.environment.night_sources import exponential_integral_e2
    x = np.concatenate([np.logspace(-12, np.log10(800.0), 3000), [0.9999999, 1.0, 1.0000001]])
    ref = expn(2, x)
    got = exponential_integral_e2(x)
    keep = ref > 0
    np.testing.assert_allclose(got[keep], ref[keep], rtol=1e-13)
    np.testing.assert_allclose(exponential_integral_e2(np.array([0.5, 1.0])),
                               [0.326643862, 0.148495507], atol=6e-10)
    assert exponential_integral_e2(np.array([0.0]))[0] == 1.0
    assert exponential_integral_e2(np.array([np.inf]))[0] == 0.0
