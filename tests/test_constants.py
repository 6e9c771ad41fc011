"""ionochem/constants.py against scipy.constants (CODATA 2018 in scipy >= 1.4), the
reference the project does not write itself."""

from __future__ import annotations

import pytest
from scipy import constants as sc

from ionochem import constants


@pytest.mark.parametrize("name, reference", [
    ("K_B", sc.k),
    ("AMU_KG", sc.physical_constants["atomic mass constant"][0]),
    ("E_CHARGE_C", sc.e),
    ("PLANCK_J_S", sc.h),
    ("SPEED_OF_LIGHT_CM_S", sc.c * 100.0),
    ("AVOGADRO", sc.N_A),
    ("G0_M_S2", sc.g),
    ("HC_EV_A", sc.h * sc.c / sc.e * 1e10),
    ("HC_EV_CM", sc.h * sc.c / sc.e * 100.0),
])
def test_constants_match_codata_in_scipy(name, reference):
    """Each constant equals scipy's CODATA value (h c / e derived from scipy's h, c, e)."""
    assert getattr(constants, name) == pytest.approx(reference, rel=1e-9)
