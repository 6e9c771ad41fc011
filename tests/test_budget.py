"""The production and loss budget (``ionochem run --budget SPECIES@KM``) of an invented
column whose rates are known in closed form.

Oracle: a single ion with prescribed production q and recombination alpha n^2 (and a
charge-transfer loss k [N2] n) is in balance q = alpha n^2 + k [N2] n; its budget must list
q as the production and the two losses with their closed-form rates and shares
(definition of a chemical budget, e.g. Schunk & Nagy 2009, Ionospheres, 2nd ed., ch. 8).
"""

from __future__ import annotations

import numpy as np
import pytest

import ionochem
from ionochem.analysis.budget import budget_table, format_budget

ALT = np.array([150.0, 200.0, 250.0])
Q = np.array([800.0, 400.0, 100.0])            # invented production, cm-3 s-1
N2 = np.array([3e10, 4e9, 8e8])                # invented N2, cm-3
ALPHA, KCT = 2.0e-7, 1.0e-12

TEXT = f"""\
P1: O -> O+ + e | k = prescribed | ref = invented test
R1: O+ + e -> O | k = {ALPHA} | ref = invented test
C1: O+ + N2 -> NO+ + N | k = {KCT} | ref = invented test
D1: NO+ + e -> N + O | k = 4e-7 | ref = invented test
"""


@pytest.fixture
def solved(column):
    path = column(TEXT, ALT, neutrals={"O": np.full(3, 1e10), "N2": N2, "N": np.full(3, 1e7)},
                  Tn=800.0, production={"P1": Q})
    scen = ionochem.load_scenario(path)
    return path, ionochem.Model(scen).solve()


def test_budget_lists_production_and_losses_with_their_closed_form_rates(solved):
    """O+ at 200 km: production = P1 with rate q (100 %), losses R1 = alpha n_e n and
    C1 = k [N2] n, with shares that add up to 100 % and gross loss = gross production
    (steady state). Production and loss are not swapped."""
    _, ds = solved
    b = budget_table(ds, "O+", 200.0)
    n = float(ds["density"].sel(species="O+", altitude=200.0))
    ne = float(ds["density"].sel(species="e", altitude=200.0))
    assert b.altitude_km == 200.0 and b.density == pytest.approx(n, rel=1e-12)
    assert [r[0] for r in b.production] == ["P1"]
    assert b.production[0][2] == pytest.approx(Q[1], rel=1e-10)
    assert b.production[0][3] == pytest.approx(100.0)
    loss = {r[0]: r[2] for r in b.loss}
    assert set(loss) == {"R1", "C1"}
    assert loss["R1"] == pytest.approx(ALPHA * ne * n, rel=1e-10)
    assert loss["C1"] == pytest.approx(KCT * N2[1] * n, rel=1e-10)
    assert sum(loss.values()) == pytest.approx(Q[1], rel=1e-8)
    assert sum(r[3] for r in b.loss) == pytest.approx(100.0)
    # ranked: the larger loss first
    assert b.loss[0][2] >= b.loss[1][2]


def test_budget_of_a_product_ion_counts_its_source_reaction_as_production(solved):
    """NO+ is made by C1 and lost by D1: C1 is its production, D1 its loss, both equal to
    k [N2] n(O+) at steady state."""
    _, ds = solved
    b = budget_table(ds, "NO+", 150.0)
    assert [r[0] for r in b.production] == ["C1"] and [r[0] for r in b.loss] == ["D1"]
    n_o = float(ds["density"].sel(species="O+", altitude=150.0))
    assert b.production[0][2] == pytest.approx(KCT * N2[0] * n_o, rel=1e-10)
    assert b.loss[0][2] == pytest.approx(b.production[0][2], rel=1e-8)


def test_run_budget_option_prints_production_then_loss(solved, capsys):
    """`ionochem run S --budget O+@200` prints the budget: a production section whose total is
    q and a loss section with R1 and C1 (the command-line contract of docs/scenario.md)."""
    from ionochem.cli import main

    path, ds = solved
    code = main(["run", str(path), "--budget", "O+@200", "-o", str(path.with_suffix(".nc"))])
    out = capsys.readouterr().out
    assert code == 0
    text = out[out.index("budget of O+"):]
    prod, loss = text.split("  loss:")
    assert f"production: {Q[1]:.3e}" in prod and "P1" in prod
    assert "R1" in loss and "C1" in loss and "P1" not in loss
    assert format_budget(budget_table(ds, "O+", 200.0)) in out
