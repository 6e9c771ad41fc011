"""The mechanism's arithmetic checked from outside (issue 30: survivors of the mutation run
of ``ionochem/mechanism/mechanism.py`` and ``rows.py``).

References: the law of mass action (rate = k Π n^count; Atkins, Physical Chemistry, rate
laws), closed-form steady states of one-species balances (algebra), the Jacobian as the
derivative of the tendency (central finite differences in numpy: exact for a polynomial up
to O(h²) times its third derivative), and charge neutrality Ne = Σ q_i n_i (definition of
the balance ion, docs/scenario.md). All columns and rates are invented test inputs.
"""

from __future__ import annotations

from collections import defaultdict

import numpy as np
import pytest

import ionochem

ALT = np.array([150.0, 200.0, 250.0])

#: Neutral chemistry with reactions of one, two and three reactants, repeated reactants,
#: a third body and a reaction of three solved species (invented rates, large enough that
#: every term counts in the Jacobian at densities of 1e7-1e10 cm-3).
THREE_BODY_LIST = """\
P1: N2 -> N + N | k = 1e-10 | ref = invented test
R2: N + O2 -> NO + O | k = 1e-11 | ref = invented test
R3: N + NO -> N2 + O | k = 3e-11 | ref = invented test
R4: O + O + M -> O2 + M | k = 1e-25 | ref = invented test
R5: N + O + M -> NO + M | k = 2e-25 | ref = invented test
R6: N + O + NO -> N2 + O2 | k = 1e-20 | ref = invented test
R7: O + O + O -> O2 + O | k = 3e-21 | ref = invented test
R8: NO -> N + O | k = 1e-6 | ref = invented test
"""

NEUTRALS = {"N2": np.array([1e12, 2e11, 5e10]), "O2": np.array([1e11, 1.5e10, 3e9])}


def _model(column, text, name="m", **kw):
    path = column(text, ALT, neutrals=NEUTRALS, Tn=800.0, name=name, **kw)
    return ionochem.Model(ionochem.load_scenario(path))


def _mass_action_tendency(model, n):
    """dn/dt of the solved species by mass action over the parsed reactions."""
    dens = {s: n[:, i] for i, s in enumerate(model.species)}
    dens.update({s: np.asarray(v, float) for s, v in NEUTRALS.items()})
    dens["M"] = sum(np.asarray(v, float) for v in NEUTRALS.values())
    k = model.rate_coefficients()
    f = defaultdict(lambda: np.zeros(len(ALT)))
    for j, r in enumerate(model.reaction_objects):
        rate = np.array(k[:, j], float)
        for sp, c in r.reactants:
            rate = rate * dens[sp.name] ** c
        for sp, c in r.products:
            f[sp.name] = f[sp.name] + c * rate
        for sp, c in r.reactants:
            f[sp.name] = f[sp.name] - c * rate
    return np.stack([f[s] for s in model.species], -1)


def _state(model):
    rng = np.random.default_rng(30)
    return 10 ** rng.uniform(7, 10, (len(ALT), len(model.species)))


def test_tendency_with_three_body_and_three_solved_reactants_is_mass_action(column):
    """``Model.tendency`` equals the mass-action sum written out here (three-body with M the
    total neutral density, a reactant repeated two and three times, three solved reactants
    in one reaction) at random positive densities, to 1e-12."""
    model = _model(column, THREE_BODY_LIST)
    assert sorted(model.species) == ["N", "NO", "O"]
    n = _state(model)
    np.testing.assert_allclose(model.tendency(n), _mass_action_tendency(model, n), rtol=1e-12)


def test_jacobian_equals_central_differences_of_the_tendency(column):
    """``Model.jacobian`` equals the central finite-difference derivative of the tendency
    (numpy, step 1e-5 of each density) at random positive densities, to 1e-6 of the largest
    entry of its row."""
    model = _model(column, THREE_BODY_LIST)
    n = _state(model)
    J = model.jacobian(n)
    S = n.shape[1]
    fd = np.empty_like(J)
    for j in range(S):
        h = 1e-5 * n[:, j]
        up, down = n.copy(), n.copy()
        up[:, j] += h
        down[:, j] -= h
        fd[:, :, j] = (model.tendency(up) - model.tendency(down)) / (2 * h[:, None])
    scale = np.abs(fd).max(axis=2, keepdims=True)
    assert np.all(np.abs(J - fd) <= 1e-6 * scale), np.abs(J - fd) / scale


def test_steady_state_of_three_solved_reactants_is_the_cube_root(column):
    """N made by N2 -> N + N (k1) and lost only by N + N + N -> N2 + N (k3, net −2 N per
    event): 2 k1 [N2] = 2 k3 N³, so N = (k1 [N2] / k3)^(1/3) at every level; and with
    N + N + M -> N2 + M instead, N = (k1 [N2] / (k3 [M]))^(1/2), [M] = [N2] + [O2]."""
    k1, k3 = 1e-10, 1e-30
    text = (f"P1: N2 -> N + N | k = {k1} | ref = invented test\n"
            f"L1: N + N + N -> N2 + N | k = {k3} | ref = invented test\n")
    ds = _model(column, text, name="cube").solve()
    np.testing.assert_allclose(ds["density"].sel(species="N").values,
                               (k1 * NEUTRALS["N2"] / k3) ** (1 / 3), rtol=1e-8)
    km = 1e-32
    text = (f"P1: N2 -> N + N | k = {k1} | ref = invented test\n"
            f"L1: N + N + M -> N2 + M | k = {km} | ref = invented test\n")
    ds = _model(column, text, name="square").solve()
    m = NEUTRALS["N2"] + NEUTRALS["O2"]
    np.testing.assert_allclose(ds["density"].sel(species="N").values,
                               np.sqrt(k1 * NEUTRALS["N2"] / (km * m)), rtol=1e-8)
    assert "e" not in list(ds["species"].values)   # no charge anywhere: no electrons


def test_doubly_charged_balance_ion_takes_half_the_missing_charge(column, tmp_path):
    """With Ne given and a doubly charged balance ion, neutrality Ne = O+ + 2 O++ gives
    O++ = (Ne − O+)/2; O+ is made by photoionization (k1) and by O++ + O -> 2 O+ (kx),
    lost by recombination (k2): k1 [O] + 2 kx [O] (Ne − O+)/2 = k2 Ne O+, so
    O+ = (k1 + kx Ne) [O] / (k2 Ne + kx [O]) (the balance ion feeds back into the solve)."""
    ne = np.array([1e6, 2e6, 1.5e6])
    (tmp_path / "ne.csv").write_text("altitude_km,Ne\n" + "\n".join(
        f"{a},{v}" for a, v in zip(ALT, ne)) + "\n")
    text = ("P1: O -> O+ + e | k = 1e-8 | ref = invented test\n"
            "L1: O+ + e -> O | k = 1e-10 | ref = invented test\n"
            "X1: O++ + O -> O+ + O+ | k = 1e-14 | ref = invented test\n")
    o = np.array([1e9, 5e8, 2e8])
    path = column(text, ALT, neutrals={"O": o}, Tn=800.0, name="dbl",
                  extra='[solve]\nelectrons = "table"\nelectron_table = "ne.csv"\n'
                        'balance_ion = "O++"\n')
    ds = ionochem.Model(ionochem.load_scenario(path)).solve()
    k1, k2, kx = 1e-8, 1e-10, 1e-14
    op = (k1 + kx * ne) * o / (k2 * ne + kx * o)
    assert np.all(np.abs(kx * ne) > 0.5 * k1)              # the feedback is not negligible
    np.testing.assert_allclose(ds["density"].sel(species="O+").values, op, rtol=1e-9)
    np.testing.assert_allclose(ds["density"].sel(species="O++").values, (ne - op) / 2,
                               rtol=1e-9)


def test_two_electronic_states_get_their_total(column):
    """Two solved electronic states of one ion (O+ and O+(2D)) are summed into ``O+(total)``
    (docs/outputs.md, derived totals), whose density is their sum and whose production
    leaves out the 2D -> 4S quenching among its members (it makes and destroys O+ ions)."""
    text = ("P1: O -> O+ + e | k = 1e-7 | ref = invented test\n"
            "P2: O -> O+(2D) + e | k = 5e-8 | ref = invented test\n"
            "Q1: O+(2D) + N2 -> O+ + N2 | k = 1e-10 | ref = invented test\n"
            "L1: O+ + e -> O | k = 1e-11 | ref = invented test\n"
            "L2: O+(2D) + e -> O | k = 1e-11 | ref = invented test\n")
    path = column(text, ALT, neutrals={"O": np.full(ALT.size, 1e10), **NEUTRALS},
                  Tn=800.0, name="two")
    ds = ionochem.Model(ionochem.load_scenario(path)).solve()
    d = ds["density"]
    np.testing.assert_allclose(d.sel(species="O+(total)").values,
                               d.sel(species="O+").values + d.sel(species="O+(2D)").values,
                               rtol=1e-12)
    np.testing.assert_allclose(ds["production"].sel(species="O+(total)").values,
                               (1e-7 + 5e-8) * 1e10, rtol=1e-12)


def test_a_reactant_nobody_makes_is_an_error(column):
    """A solved species that reactions consume but none produces would sit at zero and turn
    its reactions off without a word (docs/scenario.md, "Species the list needs"): the model
    refuses it, naming the species and the first reaction that needs it."""
    text = ("P1: N2 -> N + N | k = 1e-10 | ref = invented test\n"
            "L1: N + N + M -> N2 + M | k = 1e-32 | ref = invented test\n"
            "L2: N + O3 -> NO + O2 | k = 1e-11 | ref = invented test\n"
            "L3: NO -> N + O | k = 1e-6 | ref = invented test\n"
            "L4: O + O + M -> O2 + M | k = 1e-32 | ref = invented test\n")
    path = column(text, ALT, neutrals=NEUTRALS, Tn=800.0, name="o3")
    with pytest.raises(ionochem.MechanismError, match="O3.*L2"):
        ionochem.Model(ionochem.load_scenario(path))


def test_steady_solution_zeroes_the_mass_action_tendency(column):
    """The steady densities of the three-body list make the mass-action tendency written out
    here vanish at every level (|f_i| below 1e-8 of the gross production of species i, that
    sum computed here too): the solver's own rate evaluation agrees with mass action."""
    model = _model(column, THREE_BODY_LIST, name="steady3")
    ds = model.solve()
    n = np.stack([ds["density"].sel(species=s).values for s in model.species], -1)
    f = _mass_action_tendency(model, n)
    gross = np.stack([ds["production"].sel(species=s).values for s in model.species], -1)
    assert np.all(gross > 0)
    assert np.all(np.abs(f) <= 1e-8 * gross), np.abs(f) / gross
