"""EUVAC solar EUV flux (Richards, Fennelly & Torr 1994, J. Geophys. Res. 99, 8981)."""

from __future__ import annotations

import numpy as np
import pytest

from ionochem.environment.euvac import euvac_flux, euvac_table
from ionochem.errors import InputError

# A few rows of Richards, Fennelly & Torr (1994) table 1, as reprinted in Schunk & Nagy
# (2009), Ionospheres, 2nd ed., table 9.2 *(typed from memory)*:
# bin: (wl_lo_A, wl_hi_A, F74113 in 1e9 photons cm-2 s-1, A_i)
PUBLISHED_ROWS = {
    1: (50.0, 100.0, 1.200, 1.0017e-2),
    6: (284.15, 284.15, 0.210, 1.3768e-1),
    9: (303.78, 303.78, 6.900, 3.3333e-3),
    18: (584.33, 584.33, 1.270, 5.1583e-3),
    31: (850.0, 900.0, 3.537, 5.6750e-3),
    37: (1000.0, 1050.0, 2.467, 4.3750e-3),
}


def test_table_rows_match_published_values():
    """Selected rows equal Richards et al. (1994) table 1 (Schunk & Nagy 2009 reprint)."""
    t = euvac_table()
    for b, (lo, hi, f, a) in PUBLISHED_ROWS.items():
        i = b - 1
        assert t["bin"][i] == b
        assert (t["wl_lo_A"][i], t["wl_hi_A"][i]) == (lo, hi)
        assert t["F74113_photons_cm2_s"][i] == pytest.approx(f * 1e9, rel=1e-12)
        assert t["A_i"][i] == pytest.approx(a, rel=1e-12)


def test_table_has_37_bins_covering_50_to_1050_angstrom():
    """EUVAC has 37 bins: 20 ranges of 50 angstrom from 50 to 1050 and 17 lines
    (Richards et al. 1994, table 1)."""
    t = euvac_table()
    assert t["bin"].tolist() == list(range(1, 38))
    ranges = t["wl_lo_A"] < t["wl_hi_A"]
    assert ranges.sum() == 20 and (~ranges).sum() == 17
    assert np.array_equal(np.sort(t["wl_lo_A"][ranges]), np.arange(50.0, 1001.0, 50.0))
    assert np.all(t["wl_hi_A"][ranges] - t["wl_lo_A"][ranges] == 50.0)
    assert np.all((t["wl_lo_A"] >= 50) & (t["wl_hi_A"] <= 1050))


def test_flux_at_p_80_equals_reference_spectrum_exactly():
    """At P = (F10.7 + F10.7A)/2 = 80 the EUVAC factor is 1: flux = F74113 (Richards et al.
    1994, eq. 1), whichever F10.7 pair gives P = 80."""
    ref = euvac_table()["F74113_photons_cm2_s"]
    assert np.array_equal(euvac_flux(80.0, 80.0).photons_cm2_s, ref)
    assert np.array_equal(euvac_flux(60.0, 100.0).photons_cm2_s, ref)


def test_flux_scaling_at_p_150_follows_linear_law():
    """flux_i = F74113_i (1 + A_i (P - 80)) at P = 150, with the published rows typed above
    (Richards et al. 1994, eq. 1 and table 1)."""
    flux = euvac_flux(140.0, 160.0).photons_cm2_s
    for b, (_, _, f, a) in PUBLISHED_ROWS.items():
        assert flux[b - 1] == pytest.approx(f * 1e9 * (1 + a * 70.0), rel=1e-12)


def test_factor_is_floored_at_0_8_for_low_activity():
    """At P = 60 the 284 angstrom line (A = 0.13768) would get 1 - 2.75 < 0: EUVAC floors
    the factor at 0.8 (Richards et al. 1994); the 304 angstrom line (A = 3.33e-3) keeps
    1 - 0.0667."""
    flux = euvac_flux(60.0, 60.0).photons_cm2_s
    assert flux[5] == pytest.approx(0.8 * 0.210e9, rel=1e-12)
    assert flux[8] == pytest.approx(6.900e9 * (1 - 3.3333e-3 * 20), rel=1e-12)
    ref = euvac_table()["F74113_photons_cm2_s"]
    assert np.all(flux >= 0.8 * ref * (1 - 1e-12))


def test_total_flux_magnitude():
    """Total EUVAC flux at P = 80 is about 5e10 photons cm-2 s-1 and the 50-1050 angstrom
    energy flux 2-3.5 mW m-2, rising by a factor of about 2-3 to P = 200; solar EUV
    irradiance below 105 nm runs from about 2-3 mW m-2 at solar minimum to 5-7 mW m-2 at
    maximum (Solomon & Qian 2005, J. Geophys. Res. 110, A10306, *(from memory)*)."""
    b = euvac_flux([80.0, 200.0], [80.0, 200.0])
    photons = b.photons_cm2_s.sum(axis=-1)
    energy_mw_m2 = (b.photons_cm2_s * 1e4 * 6.62607015e-34 * 2.99792458e18
                    / b.wl_center_A).sum(axis=-1) * 1e3
    assert 4e10 < photons[0] < 7e10
    assert 2.0 < energy_mw_m2[0] < 3.5
    assert 4.5 < energy_mw_m2[1] < 8.0
    assert 1.7 < photons[1] / photons[0] < 3.0


def test_flux_broadcasts_over_activity_arrays():
    """Array inputs give one spectrum per element: shape (..., 37), each equal to the
    scalar call (the EUVAC formula is elementwise)."""
    f107 = np.array([[70.0, 150.0, 250.0]])
    flux = euvac_flux(f107, 120.0).photons_cm2_s
    assert flux.shape == (1, 3, 37)
    for k in range(3):
        assert np.array_equal(flux[0, k], euvac_flux(f107[0, k], 120.0).photons_cm2_s)


@pytest.mark.parametrize("bad", [0.0, -5.0, np.nan, np.inf])
def test_rejects_non_physical_indices(bad):
    """F10.7 is a positive radio flux: anything else is an input error."""
    with pytest.raises(InputError):
        euvac_flux(bad, 100.0)


def test_table_matches_independent_euvpy_copy():
    """The packaged table equals the independent EUVAC table of the PyPI package EUVpy
    (module EUVpy.empiricalModels.models.EUVAC.euvac, array euvacTable: bin, lo, hi,
    F74113 in 1e9 photons cm-2 s-1, A_i)."""
    mod = pytest.importorskip("EUVpy.empiricalModels.models.EUVAC.euvac")
    ref = np.asarray(mod.euvacTable, dtype=float)
    t = euvac_table()
    assert ref.shape == (37, 5)
    assert np.array_equal(t["bin"], ref[:, 0].astype(int))
    assert np.allclose(t["wl_lo_A"], ref[:, 1], rtol=0, atol=1e-9)
    assert np.allclose(t["wl_hi_A"], ref[:, 2], rtol=0, atol=1e-9)
    assert np.allclose(t["F74113_photons_cm2_s"], ref[:, 3] * 1e9, rtol=1e-12)
    assert np.allclose(t["A_i"], ref[:, 4], rtol=1e-12)


def test_flux_matches_euvpy_model_where_no_floor_applies():
    """EUVpy's euvac() returns photons m-2 s-1 without the 0.8 floor (it is commented out
    there); at P = 150 and 200 no factor is below 0.8, so both must agree."""
    mod = pytest.importorskip("EUVpy.empiricalModels.models.EUVAC.euvac")
    for f107, f107a in ((150.0, 150.0), (180.0, 220.0)):
        ref = np.asarray(mod.euvac(f107, f107a)[0])[0] * 1e-4
        assert np.allclose(euvac_flux(f107, f107a).photons_cm2_s, ref, rtol=1e-10)
