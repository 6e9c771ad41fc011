"""The N2 vibrational temperature Tv as a scenario input (docs/scenario.md, temperatures).

Reference: the documented link Tv = Tn + c max(Te - Tn, 0) (analytic) and the
St.-Maurice & Torr polynomial with the Schmeltekopf et al. (1968) vibrational factor
of the default list (O+ + N2 rises with Tv).
"""

from __future__ import annotations

import numpy as np
import pytest

import ionochem
from ionochem import ScenarioError

ALT = np.linspace(150.0, 300.0, 4)
TN = np.full(ALT.size, 900.0)
TE = np.array([900.0, 1500.0, 2500.0, 3000.0])
LIST = ("P: O -> O+ + e | k = prescribed | ref = invented\n"
        "R: O+ + N2 -> NO+ + N | k = 1e-12*(Tv/300)^0.5 | ref = invented\n"
        "D: NO+ + e -> N + O | k = 4e-7 | ref = invented\n")


def _scenario(column, extra):
    return column(LIST, ALT, neutrals={"O": np.full(ALT.size, 1e9),
                                       "N2": np.full(ALT.size, 1e9),
                                       "N": np.full(ALT.size, 1e6)},
                  Tn=TN, Te=TE, production={"P": np.full(ALT.size, 100.0)}, extra=extra)


@pytest.mark.parametrize("c", [0.0, 0.3, 1.0])
def test_electron_link_gives_the_documented_tv(column, c):
    """Tv = Tn + c (Te - Tn) on the grid, written to the dataset, and used by rate laws in
    Tv (k = 1e-12 (Tv/300)^0.5, analytic)."""
    path = _scenario(column, "")
    text = path.read_text().replace('table = "s_temps.csv"',
                                    'table = "s_temps.csv"\nvibrational = "electron"\n'
                                    f'vibrational_coupling = {c}')
    path.write_text(text)
    model = ionochem.Model(ionochem.load_scenario(path))
    tv = TN + c * (TE - TN)
    np.testing.assert_allclose(model.environment.Tv, tv, rtol=1e-12)
    j = model.reactions.index("R")
    np.testing.assert_allclose(model.rate_coefficients()[:, j], 1e-12 * (tv / 300) ** 0.5,
                               rtol=1e-12)
    np.testing.assert_allclose(model.solve()["Tv"].values, tv, rtol=1e-12)


@pytest.mark.parametrize("lines, words", [
    ('vibrational = "electron"\nvibrational_coupling = 1.5', "vibrational_coupling"),
    ('vibrational_coupling = 0.5', "only used when vibrational is 'electron'"),
    ('vibrational = "hot"', "vibrational"),
])
def test_bad_tv_settings_are_refused_with_their_key(column, lines, words):
    """Out-of-range coupling, a coupling without the Te link and an unknown source are
    ScenarioErrors naming the key (docs/scenario.md, 'Rules')."""
    path = _scenario(column, "")
    path.write_text(path.read_text().replace('table = "s_temps.csv"',
                                             f'table = "s_temps.csv"\n{lines}'))
    with pytest.raises(ScenarioError) as info:
        ionochem.load_scenario(path)
    assert words in str(info.value)
