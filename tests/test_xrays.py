"""Soft X-rays below 50 Å: fluxes, cross sections, secondaries and their switch."""

from __future__ import annotations

import dataclasses
from pathlib import Path

import numpy as np
import pytest
import xraydb

import ionochem
from ionochem.cli import main
from ionochem.environment.crosssections import HC_EV_A, euvac_cross_sections, solar_spectrum
from ionochem.environment.photorates import photo_frequencies
from ionochem.environment.secondary import secondary_ion_pair_production
from ionochem.environment.xrays import (
    atomic_cross_section_cm2,
    soft_xray_flux,
    soft_xray_spectrum,
    soft_xray_table,
)
from ionochem.errors import InputError

ROOT = Path(__file__).resolve().parents[1]
MID = ROOT / "scenarios" / "midlatitude_equinox.toml"
SOLMIN = ROOT / "scenarios" / "midlatitude_solar_minimum.toml"


def test_table_holds_the_published_bins_below_50_angstrom():
    """Solomon & Qian (2005) table A1 bins 0.05–0.4, 0.4–0.8, 0.8–1.8, 1.8–3.2 nm and the
    part of 3.2–7.0 nm below EUVAC's first bin (50 Å): contiguous, ending at 50 Å; the
    32–50 Å flux is 18/38 of the published 32–70 Å one (flat in wavelength)."""
    t = soft_xray_table()
    np.testing.assert_array_equal(t["wl_lo_A"], [0.5, 4.0, 8.0, 18.0, 32.0])
    np.testing.assert_array_equal(t["wl_hi_A"], [4.0, 8.0, 18.0, 32.0, 50.0])
    assert t["F"][-1] == pytest.approx(5.326e8 * 18 / 38, rel=1e-3)
    # Harder bins vary more with activity (coronal emission; Solomon & Qian 2005).
    assert np.all(np.diff(t["A_i"]) < 0)


def test_table_matches_the_independent_euvpy_copy():
    """The packaged F and A_i equal Solomon & Qian (2005) table A1, bins 1-5, as carried by
    the PyPI package EUVpy 1.0.0 and shipped in tests/reference/solomon_qian2005_tableA1.csv
    (edges in nm there), the fifth bin cut to 32-50 Å (18/38 of its flux)."""
    from _oracles import REFERENCE, read_csv

    ref = read_csv(REFERENCE / "solomon_qian2005_tableA1.csv")
    t = soft_xray_table()
    np.testing.assert_allclose(t["wl_lo_A"], ref["lambda1_nm"] * 10, rtol=1e-12)
    np.testing.assert_allclose(t["wl_hi_A"][:4], ref["lambda2_nm"][:4] * 10, rtol=1e-12)
    np.testing.assert_allclose(t["F"][:4], ref["F_photons_cm2_s"][:4], rtol=1e-12)
    assert t["F"][4] == pytest.approx(ref["F_photons_cm2_s"][4] * 18 / 38, rel=1e-3)
    np.testing.assert_allclose(t["A_i"], ref["A_i"], rtol=1e-12)


def test_flux_follows_the_euvac_type_scaling_with_its_floor():
    """flux_i = F_i max(0.8, 1 + A_i (P − 80)), P = (F10.7 + F10.7A)/2 (Solomon & Qian 2005
    table A1 columns; EUVAC's floor, Richards et al. 1994): exact at P = 80, at P = 150, and
    floored at solar minimum, where the bare factor of the hard bins is negative."""
    t = soft_xray_table()
    np.testing.assert_allclose(soft_xray_flux(80.0, 80.0), t["F"], rtol=1e-12)
    np.testing.assert_allclose(soft_xray_flux(160.0, 140.0), t["F"] * (1 + t["A_i"] * 70),
                               rtol=1e-12)
    np.testing.assert_allclose(soft_xray_flux(70.0, 70.0)[:4], 0.8 * t["F"][:4], rtol=1e-12)
    assert soft_xray_flux(70.0, 70.0)[4] == pytest.approx(t["F"][4] * (1 - 0.1343),
                                                          rel=1e-12)
    assert soft_xray_flux([70.0, 150.0], 100.0).shape == (2, 5)
    with pytest.raises(InputError):
        soft_xray_flux(np.nan, 100.0)


def test_sub_bins_keep_each_published_bin_flux():
    """Splitting a published bin into sub-bins (flat in wavelength) keeps its photons: the
    sub-bin fluxes add up to the bin flux, and the N and O K edges (409.9 and 543.1 eV,
    xraydb.xray_edges) are sub-bin edges."""
    spec = soft_xray_spectrum(150.0, 140.0)
    t = soft_xray_table()
    flux = soft_xray_flux(150.0, 140.0)
    for i in range(5):
        inside = (spec.wl_lo_A >= t["wl_lo_A"][i]) & (spec.wl_hi_A <= t["wl_hi_A"][i])
        assert spec.photons_cm2_s[inside].sum() == pytest.approx(flux[i], rel=1e-12)
    for el in ("N", "O"):
        edge_A = HC_EV_A / xraydb.xray_edges(el)["K"].energy
        assert np.min(np.abs(spec.wl_lo_A - edge_A)) < 1e-9
    assert np.all(spec.wl_hi_A / spec.wl_lo_A <= 1.1 + 1e-9)


def test_sub_bins_are_fine_enough_for_the_e_region():
    """Attenuation with sub-bin-averaged cross sections against 20 times finer sub-bins
    (the limit of exact spectral integration): the soft X-ray ionization rate (primary +
    secondary) of the demo column (χ = 40°) agrees within 1 % above 96 km and within 8 % at
    90 km, where the hardest photons end."""
    from ionochem.environment import xrays
    from ionochem.environment.slant import slant_columns

    model = ionochem.Model(ionochem.load_scenario(MID))
    sun = model.environment.sun
    cols = slant_columns(sun.grid, 40.0, sun.profile_alt, sun.profile)

    def ionization(spec):
        j = photo_frequencies(spec, cols)
        primary = sum(v * sun.local[k.split("->")[0]] for k, v in j.items())
        return primary + secondary_ion_pair_production(spec, cols, sun.local)

    coarse = ionization(soft_xray_spectrum(150.0, 145.0))
    try:
        xrays.SUB_BIN_REL = 0.005
        xrays._sub_bins.cache_clear()
        xrays._cross_sections.cache_clear()
        fine = ionization(soft_xray_spectrum(150.0, 145.0))
    finally:
        xrays.SUB_BIN_REL = 0.1
        xrays._sub_bins.cache_clear()
        xrays._cross_sections.cache_clear()
    a = sun.grid
    dev = coarse / fine - 1
    assert np.all(np.abs(dev[a >= 96]) < 0.01), dev[a >= 96].max()
    assert np.all(np.abs(dev[a >= 90]) < 0.08)


def test_atomic_cross_sections_agree_with_the_chantler_tables():
    """The Elam et al. (2002) photoabsorption cross sections used here agree with the
    independent Chantler (2000, FFAST) tables, also in xraydb, within 20 % from 250 eV to
    10 keV away from the K edges."""
    energy = np.array([250.0, 300.0, 350.0, 450.0, 500.0, 700.0, 1000.0, 2000.0, 5000.0,
                       1e4])
    for el in ("N", "O"):
        edge = xraydb.xray_edges(el)["K"].energy
        e = energy[np.abs(energy - edge) > 30.0]
        elam = atomic_cross_section_cm2(el, e)
        mass = xraydb.atomic_mass(el) / 6.02214076e23
        chantler = np.asarray(xraydb.mu_chantler(el, e, photo=True)) * mass
        np.testing.assert_allclose(elam, chantler, rtol=0.2)


def test_packaged_cross_sections_equal_xraydb_live():
    """ionochem/data/soft_xray_cross_sections.csv (kept to spare the run the import of
    xraydb) holds exactly what xraydb's Elam tables give on the current sub-bins (1e-8), and
    the spectrum uses it."""
    from ionochem.environment import xrays

    header, data, _ = xrays.read_csv_columns(xrays.CROSS_SECTION_TABLE_PATH)
    t = dict(zip(header, data.T, strict=True))
    lo, hi, _ = xrays._sub_bins()
    np.testing.assert_allclose(t["wl_lo_A"], lo, rtol=1e-9)
    np.testing.assert_allclose(t["wl_hi_A"], hi, rtol=1e-9)
    live = xrays.sub_bin_atomic_cross_sections(lo, hi)
    np.testing.assert_allclose(t["sigma_N_Mb"] * 1e-18, live["N"], rtol=1e-8)
    np.testing.assert_allclose(t["sigma_O_Mb"] * 1e-18, live["O"], rtol=1e-8)
    spec = soft_xray_spectrum(100.0, 100.0)
    np.testing.assert_allclose(spec.sigma_abs_cm2["O2"], 2 * live["O"], rtol=1e-8)


def test_molecules_absorb_as_the_sum_of_their_atoms_and_join_euvac():
    """σ(N2) = 2σ(N), σ(O2) = 2σ(O), σ(O) = σ(O) (a molecule absorbs as the sum of its atoms
    well above the edges, *(common practice)*); continued over EUVAC's 50–100 Å bin the
    atomic sums come within 30 % of the Fennelly & Torr (1992) values there (0.72, 1.316 and
    0.73 Mb), so the X-ray and EUV parts join."""
    spec = soft_xray_spectrum(100.0, 100.0)
    lo, hi = spec.wl_lo_A, spec.wl_hi_A
    mid = HC_EV_A / (0.5 * (lo + hi))
    sig = spec.sigma_abs_cm2
    # Away from the edges a sub-bin average is close to the value at its centre.
    np.testing.assert_allclose(sig["O2"], 2 * sig["O"], rtol=1e-12)
    ok = lo > 32.0
    np.testing.assert_allclose(sig["N2"][ok], 2 * atomic_cross_section_cm2("N", mid[ok]),
                               rtol=0.1)
    wl = np.linspace(50.0, 100.0, 401)
    euv_abs, _ = euvac_cross_sections()
    for mol, el, n in (("N2", "N", 2), ("O2", "O", 2), ("O", "O", 1)):
        xr = n * atomic_cross_section_cm2(el, HC_EV_A / wl).mean()
        assert xr == pytest.approx(euv_abs[mol][0], rel=0.3), mol


def test_every_absorbed_photon_ionizes_with_euvac_first_bin_branching():
    """The channels of each absorber add up to its absorption (every absorbed X-ray
    photon ionizes) and keep the product shares of EUVAC's 50–100 Å bin."""
    spec = soft_xray_spectrum(100.0, 100.0)
    _, euv = euvac_cross_sections()
    for absorber in ("N2", "O2", "O"):
        keys = [k for k in spec.channels if k.split("->")[0] == absorber]
        total = sum(spec.sigma_channel_cm2[k] for k in keys)
        np.testing.assert_allclose(total, spec.sigma_abs_cm2[absorber], rtol=1e-12)
    share = spec.sigma_channel_cm2["N2->N+"] / spec.sigma_abs_cm2["N2"]
    assert share[5] == pytest.approx(euv["N2->N+"][0] / (euv["N2->N+"][0]
                                                         + euv["N2->N2+"][0]), rel=1e-12)
    assert np.all(spec.sigma_channel_cm2["O2->O+"] > 0)


def test_ion_pairs_per_absorbed_photon_approach_h_nu_over_w():
    """Unattenuated, each absorbed X-ray photon makes one primary ion and (E − 15 eV)/35 eV
    secondaries, E = hν − threshold (Rees 1989, W = 35 eV, common practice): for the
    20–50 Å sub-bins the total ion pairs per absorbed photon lie within 10 % of hν/35 eV."""
    spec = soft_xray_spectrum(100.0, 100.0)
    cols = {"O": np.array([0.0])}
    dens = {"O": np.array([1.0])}
    sel = (spec.wl_lo_A >= 20.0)
    for i in np.flatnonzero(sel):
        one = spec.with_flux(np.where(np.arange(spec.n_bins) == i, 1.0, 0.0))
        primary = sum(v[0] for k, v in photo_frequencies(one, cols).items()
                      if k.startswith("O->"))
        secondary = secondary_ion_pair_production(one, cols, dens)[0]
        absorbed = one.sigma_abs_cm2["O"][i]
        pairs = (primary + secondary) / absorbed
        assert pairs == pytest.approx(one.photon_energy_eV[i] / 35.0, rel=0.1)


def test_switch_and_scenario_key(tmp_path):
    """``[photons] soft_xrays`` (default true) adds the X-ray bins to EUVAC in the model's
    spectrum and says so in the result; false leaves EUVAC and Lyman α alone; it is refused
    with a user spectrum (flux = "table"), which holds all its own bins, and must be a
    boolean (docs/scenario.md)."""
    scen = ionochem.load_scenario(MID)
    assert scen.photons.soft_xrays is True
    model = ionochem.Model(scen)
    assert model.environment.sun.spectrum.n_bins == (solar_spectrum(150, 145).n_bins
                                                     + soft_xray_spectrum(150, 145).n_bins)
    off = scen.replace(photons=dataclasses.replace(scen.photons, soft_xrays=False))
    assert ionochem.Model(off).environment.sun.spectrum.n_bins == 38

    text = MID.read_text().replace('"../reactions/', f'"{ROOT}/reactions/')
    for extra, msg in (('soft_xrays = "yes"', "true or false"),
                       ('flux = "table"\nspectrum = "x.csv"\nsoft_xrays = true',
                        "applies only with flux = 'euvac'")):
        (tmp_path / "x.csv").write_text("wl_lo_A,wl_hi_A,photons_cm2_s\n10,20,1e6\n")
        path = tmp_path / "s.toml"
        path.write_text(text.replace('flux = "euvac"', extra))
        with pytest.raises(ionochem.Error) as info:
            ionochem.load_scenario(path)
        assert "photons.soft_xrays" in str(info.value) and msg in str(info.value)


def test_bad_switch_is_refused_by_the_command_line(tmp_path, capsys):
    """Through ``ionochem run``: exit 2 and one line ``file: photons.soft_xrays: …``, no
    traceback (docs/scenario.md, 'Rules')."""
    text = MID.read_text().replace('"../reactions/', f'"{ROOT}/reactions/')
    path = tmp_path / "s.toml"
    path.write_text(text.replace('flux = "euvac"', 'flux = "euvac"\nsoft_xrays = 1'))
    assert main(["run", str(path)]) == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith(f"{path}: photons.soft_xrays:") and "\n" not in err, err


def _ne110_over_davies(scen):
    """Ne(110 km) / NmE of Davies (1990, from memory): NmE = 1.24e4 foE², foE = 0.9
    [(180 + 1.44 R12) cos χ]^(1/4) MHz, R12 from F10.7 = 63.7 + 0.728 R + 8.9e-4 R²."""
    model = ionochem.Model(scen)
    ds = model.solve()
    p = 0.5 * (scen.sun.f107 + scen.sun.f107a)
    a, b, c = 8.9e-4, 0.728, 63.7 - p
    r12 = (-b + np.sqrt(b * b - 4 * a * c)) / (2 * a)
    chi = float(ds["solar_zenith_angle"])
    nme = 1.24e4 * (0.9 * ((180 + 1.44 * r12) * np.cos(np.radians(chi))) ** 0.25) ** 2
    return float(ds["density"].sel(species="e", altitude=110.0)) / nme


@pytest.mark.parametrize("which", ["minimum", "maximum"])
def test_e_region_meets_the_foe_formula_across_the_solar_cycle(which):
    """Beyond the moderate-activity check (test_default_ionosphere): with the soft X-rays,
    Ne(110 km) is within ±25 % of the Davies (1990, from memory) NmE at solar minimum
    (F10.7 = 70) and maximum (F10.7 = F10.7A = 220), χ = 40°; the X-rays raise it at both."""
    if which == "minimum":
        scen = ionochem.load_scenario(SOLMIN)
    else:
        scen = ionochem.load_scenario(MID)
        scen = scen.replace(sun=type(scen.sun)(f107=220.0, f107a=220.0))
    ratio = _ne110_over_davies(scen)
    assert 0.75 < ratio < 1.25, ratio
    off = scen.replace(photons=dataclasses.replace(scen.photons, soft_xrays=False))
    assert _ne110_over_davies(off) < ratio


def test_user_xray_bins_beside_the_packaged_ones_are_flagged(tmp_path):
    """An ``extra_spectrum`` with bins below 50 Å while ``soft_xrays`` is on would count the
    soft X-rays twice: the model warns, naming the key (docs/scenario.md)."""
    (tmp_path / "x.csv").write_text(
        "# invented bins for a test\n"
        "wl_lo_A,wl_hi_A,photons_cm2_s,sigma_abs_N2,sigma_ion_N2->N2+\n18,32,1e8,0.5,0.5\n")
    text = MID.read_text().replace('"../reactions/', f'"{ROOT}/reactions/')
    path = tmp_path / "s.toml"
    path.write_text(text.replace('flux = "euvac"', 'flux = "euvac"\nextra_spectrum = "x.csv"'))
    with pytest.warns(UserWarning, match="counted twice"):
        model = ionochem.Model(ionochem.load_scenario(path))
    assert any("photons.extra_spectrum" in w and "counted twice" in w for w in model.warnings)
    path.write_text(text.replace('flux = "euvac"', 'flux = "euvac"\nsoft_xrays = false\n'
                                 'extra_spectrum = "x.csv"'))
    model = ionochem.Model(ionochem.load_scenario(path))
    assert not any("counted twice" in w for w in model.warnings)
