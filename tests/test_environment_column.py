"""The environment a scenario builds: NO with older NRLMSIS versions, ion drift and the
effective temperature, tabulated Ti against friction."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

import ionochem
from ionochem.environment.temperatures import AMU_KG, K_B

ROOT = Path(__file__).resolve().parents[1]
MID = ROOT / "scenarios" / "midlatitude_equinox.toml"
AURORAL = ROOT / "scenarios" / "auroral_ion_drift.toml"


def _copy(tmp_path, src, replace=()):
    text = src.read_text().replace('"../reactions/', f'"{ROOT}/reactions/')
    for old, new in replace:
        assert old in text
        text = text.replace(old, new)
    path = tmp_path / src.name
    path.write_text(text)
    return path


def test_msis20_without_no_table_is_refused(tmp_path):
    """NRLMSIS 2.0 has no NO (Emmert et al. 2022): a list with NO reactions is refused at
    neutrals.model rather than silently dropping them."""
    path = _copy(tmp_path, MID, [('model = "msis2.1"', 'model = "msis2.0"')])
    with pytest.raises(ionochem.ScenarioError, match="NO") as err:
        ionochem.Model(ionochem.load_scenario(path))
    assert err.value.key == "neutrals.model"


def test_msis20_with_a_no_table_uses_it(tmp_path):
    """With no_table the NO profile comes from the table (log-linear interpolation, exact
    for an exponential profile)."""
    alt = np.arange(80.0, 621.0, 10.0)
    no = 1e8 * np.exp(-(alt - 80.0) / 40.0)
    (tmp_path / "no.csv").write_text("altitude_km,NO\n" + "\n".join(
        f"{a},{v:.17g}" for a, v in zip(alt, no)) + "\n")
    path = _copy(tmp_path, MID, [('model = "msis2.1"', 'model = "msis2.0"\nno_table = "no.csv"')])
    model = ionochem.Model(ionochem.load_scenario(path))
    z = model.altitude_km
    np.testing.assert_allclose(model.environment.neutrals["NO"],
                               1e8 * np.exp(-(z - 80.0) / 40.0), rtol=1e-9)
    assert np.all(model.solve()["density"].sel(species="NO+").values > 0)


def test_drift_heats_modelled_ions_once_and_raises_teff():
    """Where ions are magnetised (above ~150 km, ν_in ≪ Ω_i), a modelled Ti is heated by
    m_n v²/(3 k_B) (St.-Maurice & Torr 1978; mean neutral mass), and the O+ + N2 rate,
    through Teff, is faster than without drift."""
    scen = ionochem.load_scenario(AURORAL)
    drift = ionochem.Model(scen)
    still = ionochem.Model(scen.replace(temperatures=type(scen.temperatures)(
        **{**vars(scen.temperatures), "ion_drift_m_s": 0.0})))
    from ionochem.environment.temperatures import mean_neutral_mass_amu
    m = mean_neutral_mass_amu(drift.environment.neutrals)
    heat = m * AMU_KG * 1000.0 ** 2 / (3 * K_B)
    high = drift.altitude_km >= 200.0
    np.testing.assert_allclose((drift.environment.Ti - still.environment.Ti)[high],
                               heat[high], rtol=2e-3)
    j = drift.reactions.index("Oplus_N2")
    a = drift.altitude_km
    k_d, k_s = drift.rate_coefficients()[:, j], still.rate_coefficients()[:, j]
    assert np.all(k_d[(a > 150) & (a < 400)] > k_s[(a > 150) & (a < 400)])


def test_tabulated_ti_colder_than_friction_warns(column):
    """A tabulated Ti at Tn with a 1 km/s drift is colder than friction implies: a warning
    naming the table key (the Ti is kept as given)."""
    alt = np.linspace(150.0, 300.0, 7)
    text = ("P1: O -> O+ + e | k = prescribed | ref = invented test\n"
            "R1: O+ + N2 -> NO+ + N | k = 1.2e-12*(300/Teff) | ref = invented test\n"
            "R2: NO+ + e -> N + O | k = 4e-7*(300/Te)^0.5 | ref = invented test\n")
    path = column(text, alt, neutrals={"O": 1e10 * np.ones(7), "N2": 1e9 * np.ones(7),
                                       "N": 1e7 * np.ones(7)},
                  Tn=800.0, Ti=800.0, Te=1500.0, production={"P1": 100 * np.ones(7)})
    path.write_text(path.read_text().replace('table = "s_temps.csv"',
                                             'table = "s_temps.csv"\nion_drift_m_s = 1000.0'))
    with pytest.warns(UserWarning, match="colder than frictional heating"):
        model = ionochem.Model(ionochem.load_scenario(path))
    assert any("temperatures.table" in w for w in model.warnings)
    np.testing.assert_allclose(model.environment.Ti, 800.0)
