"""EUVAC solar EUV flux (Richards, Fennelly & Torr 1994, J. Geophys. Res. 99, 8981)."""

from __future__ import annotations

import numpy as np
import pytest
from _oracles import euvac_reference_flux, euvac_reference_table

from ionochem.environment.euvac import euvac_flux, euvac_table
from ionochem.errors import InputError

# The published table (Richards, Fennelly & Torr 1994, table 1) is shipped as test reference
# data in tests/reference/euvac_richards1994_table1.csv (transcribed from the independent copy
# in the PyPI package EUVpy 1.0.0; see the file header), read with the csv module.
REF = euvac_reference_table()


def test_packaged_table_equals_published_table_row_by_row():
    """All 37 rows of the packaged table (bin, edges, F74113, A_i) equal Richards et al.
    (1994) table 1 as carried by tests/reference/ (independent copy from EUVpy 1.0.0)."""
    t = euvac_table()
    assert REF["bin"].size == 37
    np.testing.assert_array_equal(t["bin"], REF["bin"].astype(int))
    np.testing.assert_allclose(t["wl_lo_A"], REF["wl_lo_A"], rtol=0, atol=1e-9)
    np.testing.assert_allclose(t["wl_hi_A"], REF["wl_hi_A"], rtol=0, atol=1e-9)
    np.testing.assert_allclose(t["F74113_photons_cm2_s"],
                               REF["F74113_1e9_photons_cm2_s"] * 1e9, rtol=1e-12)
    np.testing.assert_allclose(t["A_i"], REF["A_i"], rtol=1e-12)


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
    """At P = (F10.7 + F10.7A)/2 = 80 the EUVAC factor is 1: flux = F74113 of the published
    table (Richards et al. 1994, eq. 1), whichever F10.7 pair gives P = 80."""
    ref = REF["F74113_1e9_photons_cm2_s"] * 1e9
    np.testing.assert_allclose(euvac_flux(80.0, 80.0).photons_cm2_s, ref, rtol=1e-12)
    np.testing.assert_allclose(euvac_flux(60.0, 100.0).photons_cm2_s, ref, rtol=1e-12)


@pytest.mark.parametrize("f107,f107a", [(60.0, 60.0), (68.0, 72.0), (100.0, 120.0),
                                        (140.0, 160.0), (180.0, 220.0), (300.0, 250.0)])
def test_flux_equals_published_model_at_every_bin(f107, f107a):
    """Every bin of euvac_flux equals Richards et al. (1994) eq. 1 evaluated in the test on the
    published table (tests/reference), floor at 0.8 included, from solar minimum (where the
    284 and 335 angstrom factors hit the floor) to high activity."""
    np.testing.assert_allclose(euvac_flux(f107, f107a).photons_cm2_s,
                               euvac_reference_flux(f107, f107a), rtol=1e-12)


def test_factor_is_floored_at_0_8_for_low_activity():
    """At P = 60 the 284 angstrom line (A = 0.13768, Richards et al. 1994 table 1) would get
    1 - 2.75 < 0: EUVAC floors the factor at 0.8; the 304 angstrom line (A = 3.33e-3) keeps
    1 - 0.0667."""
    flux = euvac_flux(60.0, 60.0).photons_cm2_s
    assert REF["wl_lo_A"][5] == 284.15 and REF["wl_lo_A"][8] == 303.78
    assert flux[5] == pytest.approx(0.8 * REF["F74113_1e9_photons_cm2_s"][5] * 1e9,
                                    rel=1e-12)
    assert flux[8] == pytest.approx(REF["F74113_1e9_photons_cm2_s"][8] * 1e9
                                    * (1 - REF["A_i"][8] * 20), rel=1e-12)
    ref = REF["F74113_1e9_photons_cm2_s"] * 1e9
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
