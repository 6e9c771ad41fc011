"""A user spectrum added to EUVAC (soft X-ray bins) raises the lower E region, and a bad one is
refused at its scenario key. The bin fluxes and cross sections here are invented test values
of realistic size, not a published spectrum."""

from __future__ import annotations

from pathlib import Path

import numpy as np

import ionochem
from ionochem.cli import main

ROOT = Path(__file__).resolve().parents[1]
MID = ROOT / "scenarios" / "midlatitude_equinox.toml"

XRAYS = """\
# invented soft X-ray bins for a test (not a published spectrum)
wl_lo_A,wl_hi_A,photons_cm2_s,sigma_abs_O,sigma_abs_N2,sigma_abs_O2,sigma_ion_O->O+,sigma_ion_N2->N2+,sigma_ion_O2->O2+
18,32,2.0e8,0.35,0.50,0.70,0.35,0.50,0.70
32,50,5.0e8,0.90,1.50,1.80,0.90,1.50,1.80
"""


def _scenario(tmp_path, extra):
    text = MID.read_text().replace('"../reactions/', f'"{ROOT}/reactions/')
    text = text.replace('flux = "euvac"', f'flux = "euvac"\n{extra}')
    path = tmp_path / "s.toml"
    path.write_text(text)
    return path


def test_soft_xray_bins_raise_the_lower_e_region(tmp_path):
    """Soft X-rays are absorbed low down (soft X-ray cross sections are small, so the photons
    reach the E region; *(common practice)*): adding them raises Ne most near 100–110 km and
    leaves the F region nearly unchanged. The packaged soft X-rays are switched off in both
    runs (``soft_xrays = false``) so the user bins act alone."""
    (tmp_path / "xrays.csv").write_text(XRAYS)
    base = ionochem.Model(ionochem.load_scenario(_scenario(tmp_path, "soft_xrays = false"))
                          ).solve()
    path = _scenario(tmp_path, 'soft_xrays = false\nextra_spectrum = "xrays.csv"')
    more = ionochem.Model(ionochem.load_scenario(path)).solve()
    ratio = (more["density"].sel(species="e") / base["density"].sel(species="e")).values
    a = base["altitude"].values
    assert ratio[(a >= 100) & (a <= 110)].min() > 1.03
    assert ratio[a >= 250].max() < 1.02
    assert np.all(ratio >= 1 - 1e-9)


def test_bad_extra_spectrum_is_refused_at_its_key(tmp_path, capsys):
    """A channel cross section larger than its absorber's absorption is refused (exit 2,
    one line naming the scenario key)."""
    (tmp_path / "bad.csv").write_text(XRAYS.replace("0.35,0.50,0.70,0.35", "0.35,0.50,0.70,9.0"))
    path = _scenario(tmp_path, 'extra_spectrum = "bad.csv"')
    assert main(["run", str(path)]) == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith(f"{path}: photons.extra_spectrum:"), err
