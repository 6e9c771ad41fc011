"""Slant columns of many levels interpolated from a lattice (issue 25) against the exact
shell integrals of every level (the quadrature of ionochem/environment/slant.py, itself
checked against the analytic Chapman and isothermal columns in tests/test_slant.py).

Profile: NRLMSIS 2.1 of the mid-latitude demo scenario (invented site and date) on the
fixed node grid the model uses; the EUVAC spectrum of that scenario for the photo rates.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

import ionochem
from ionochem.environment import slant
from ionochem.environment.photorates import photo_frequencies

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def sun():
    model = ionochem.Model(ionochem.load_scenario(ROOT / "scenarios" /
                                                  "midlatitude_equinox.toml"))
    return model.environment.sun


def _exact(z, chi, sun):
    names = list(sun.profile)
    n = np.stack([sun.profile[k] for k in names], -1)
    nodes, weights = np.polynomial.legendre.leggauss(6)
    col = slant._columns(z, np.array([chi]), sun.profile_alt, n, slant.EARTH_RADIUS_KM,
                         nodes, weights)[0]
    return {k: col[:, j] for j, k in enumerate(names)}


@pytest.mark.parametrize("chi", [0.0, 60.0, 85.0, 88.0])
def test_interpolated_columns_give_the_exact_photo_rates_to_1e_4(sun, chi):
    """3,000 levels from 90 to 600 km: every photo rate within 1e-4 relative of the one
    from the exact columns (stated: 1e-5) where it exceeds 1e-12 of its column maximum,
    and ln N within 1e-5."""
    z = np.linspace(90.0, 600.0, 3000)
    assert z.size > 3 * slant._lattice(z, sun.profile_alt).size      # interpolated
    got = slant.slant_columns(z, chi, sun.profile_alt, sun.profile)
    ref = _exact(z, chi, sun)
    for k in ref:
        np.testing.assert_allclose(np.log(got[k]), np.log(ref[k]), rtol=0, atol=1e-5,
                                   err_msg=k)
    J_got = photo_frequencies(sun.spectrum, got)
    J_ref = photo_frequencies(sun.spectrum, ref)
    for k, ref_k in J_ref.items():
        keep = ref_k > 1e-12 * ref_k.max()
        np.testing.assert_allclose(J_got[k][keep], ref_k[keep], rtol=1e-4, err_msg=k)


def test_near_the_horizon_and_beyond_columns_stay_exact(sun):
    """Above 88° (the ray lingers near its lowest point) every level is integrated: the
    result is the exact one, shadowed levels infinite."""
    z = np.linspace(90.0, 600.0, 3000)
    for chi in (89.0, 100.0):
        got = slant.slant_columns(z, chi, sun.profile_alt, sun.profile)
        ref = _exact(z, chi, sun)
        for k in ref:
            np.testing.assert_array_equal(got[k], ref[k])
    assert np.isinf(got["N2"][0]) and np.isfinite(got["N2"][-1])


def test_one_continuation_for_species_of_very_different_scale_heights():
    """Two isothermal species (H = 8 and 64 km) on a profile cut at 200 km share the shells
    of the continuation above it: vertical columns equal n0 H exp(−z/H) (analytic) to
    1e-9, and the 80° columns those through the uncut profile to 1e-8."""
    zp = np.arange(0.0, 1001.0, 1.0)
    prof = {"A": 1e19 * np.exp(-zp / 8.0), "B": 1e13 * np.exp(-zp / 64.0)}
    cut = zp <= 200.0
    short = {k: v[cut] for k, v in prof.items()}
    z = np.array([120.0, 170.0, 199.0])
    up = slant.slant_columns(z, 0.0, zp[cut], short)
    for k, H, n0 in (("A", 8.0, 1e19), ("B", 64.0, 1e13)):
        np.testing.assert_allclose(up[k], n0 * H * np.exp(-z / H) * 1e5, rtol=1e-9)
    tilted = slant.slant_columns(z, 80.0, zp[cut], short)
    full = slant.slant_columns(z, 80.0, zp, prof)
    for k in prof:
        np.testing.assert_allclose(tilted[k], full[k], rtol=1e-8)
