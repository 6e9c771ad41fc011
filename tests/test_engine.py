"""The engine against analytic solutions and independent solvers (scipy).

All columns here are synthetic, with invented rates and densities.
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.optimize
from scipy.integrate import solve_ivp

import ionochem

ALT = np.linspace(100.0, 300.0, 21)
Q = 50.0 * np.exp((ALT - 100.0) / 80.0)          # invented production, cm-3 s-1
TE = np.linspace(250.0, 2500.0, ALT.size)


ONE_ION = """\
P1: O -> O+ + e | k = prescribed | ref = invented test
R1: O+ + e -> O | k = 2.0e-7*(300/Te)^0.7 | ref = invented test
"""


def _one_ion(column):
    return column(ONE_ION, ALT, neutrals={"O": 1e10 * np.exp(-(ALT - 100) / 50)},
                  Tn=np.linspace(200, 1000, ALT.size), Te=TE, production={"P1": Q})


def test_one_ion_steady_state_is_sqrt_q_over_alpha(column):
    """n = sqrt(q/α(Te)) at every level to 1e-8 (analytic balance q = α n²)."""
    ds = ionochem.Model(ionochem.load_scenario(_one_ion(column))).solve()
    alpha = 2.0e-7 * (300 / TE) ** 0.7
    n = ds["density"].sel(species="O+").values
    np.testing.assert_allclose(n, np.sqrt(Q / alpha), rtol=1e-8)
    np.testing.assert_array_equal(ds["density"].sel(species="e").values, n)


def test_one_ion_start_is_exact_and_newton_needs_at_most_two_iterations(column):
    """The geometric-mean start n <- sqrt(n P / (L/n)) of the steady solver (docs/validation.md,
    steady state) lands on sqrt(q/alpha) for one ion, so Newton confirms it in at most two
    iterations at every level, and the result's gross production and loss are q and
    alpha n^2 (analytic balance; a solver fed loss for production would start from zero and
    need many more iterations)."""
    ds = ionochem.Model(ionochem.load_scenario(_one_ion(column))).solve()
    assert ds["iterations"].values.max() <= 2
    assert np.all(ds["solver_method"].values == 1)          # Newton, no continuation
    alpha = 2.0e-7 * (300 / TE) ** 0.7
    n = ds["density"].sel(species="O+").values
    np.testing.assert_allclose(ds["production"].sel(species="O+").values, Q, rtol=1e-10)
    np.testing.assert_allclose(ds["loss"].sel(species="O+").values, alpha * n * n, rtol=1e-10)


def test_one_ion_transient_follows_tanh(column):
    """From zero, n(t) = sqrt(q/α) tanh(sqrt(qα) t) to 1e-5 (analytic solution of
    dn/dt = q − α n²)."""
    model = ionochem.Model(ionochem.load_scenario(_one_ion(column)))
    alpha = 2.0e-7 * (300 / TE) ** 0.7
    times = np.array([0.5, 2.0, 10.0, 60.0, 300.0])
    ds = model.integrate(times, rtol=1e-10, atol=1e-8)
    n = ds["density"].sel(species="O+").values            # (time, altitude)
    exact = np.sqrt(Q / alpha)[None] * np.tanh(np.sqrt(Q * alpha)[None] * times[:, None])
    np.testing.assert_allclose(n, exact, rtol=1e-5)


CHAIN = """\
# a chain of six ions: production of A+, charge transfer down the chain, recombination
P1: N2 -> N2+ + e | k = prescribed | ref = invented test
C1: N2+ + O -> O+ + N2 | k = 1.0e-10 | ref = invented test
C2: O+ + O2 -> O2+ + O | k = 2.0e-11*(300/Teff)^0.5 | ref = invented test
C3: O+ + N2 -> NO+ + N | k = 1.2e-12 | ref = invented test
C4: N2+ + O2 -> O2+ + N2 | k = 5.0e-11*(300/Teff) | ref = invented test
C5: O2+ + NO -> NO+ + O2 | k = 4.4e-10 | ref = invented test
C6: O2+ + N -> NO+ + O | k = 1.2e-10 | ref = invented test
C7: O+ + H -> H+ + O | k = 6.0e-10 | ref = invented test
C8: H+ + O -> O+ + H | k = 5.3e-10 | ref = invented test
D1: N2+ + e -> N + N | k = 2.2e-7*(300/Te)^0.39 | ref = invented test
D2: O2+ + e -> O + O | k = 1.95e-7*(300/Te)^0.7 | ref = invented test
D3: NO+ + e -> N + O | k = 4.0e-7*(300/Te)^0.5 | ref = invented test
D4: O+ + e -> O | k = 3.7e-12*(250/Te)^0.7 | ref = invented test
D5: H+ + e -> H | k = 4.0e-12*(250/Te)^0.7 | ref = invented test
"""


def _chain_model(column):
    h = np.exp(-(ALT - 100) / 40)
    neutrals = {"N2": 1e13 * h, "O2": 2e12 * h ** 1.2, "O": 5e11 * np.exp(-(ALT - 100) / 60),
                "NO": 1e8 * h, "N": 1e9 * h, "H": 1e6 * np.ones_like(ALT)}
    path = column(CHAIN, ALT, neutrals=neutrals, Tn=np.linspace(200, 1000, ALT.size), Te=TE,
                  Ti=np.linspace(200, 1200, ALT.size), production={"P1": 10 * Q})
    return ionochem.Model(ionochem.load_scenario(path))


def test_chain_newton_equals_scipy_root_and_long_integration(column):
    """Newton's steady state equals scipy.optimize.root (hybr, same equations) and
    scipy.integrate.solve_ivp (Radau) run to 1e7 s, to 1e-7 relative (independent solvers)."""
    model = _chain_model(column)
    ds = model.solve()
    n = np.stack([ds["density"].sel(species=s).values for s in model.species], -1)
    assert len(model.species) >= 5
    for a in range(0, ALT.size, 5):
        def f(x, a=a):
            return model.tendency(_row(n, a, x))[a]

        root = scipy.optimize.root(f, n[a] * 1.3, method="hybr", options={"xtol": 1e-13})
        assert root.success
        np.testing.assert_allclose(root.x, n[a], rtol=1e-7)

        def rhs(t, y, a=a):
            return model.tendency(_row(n, a, y))[a]

        sol = solve_ivp(rhs, (0, 1e7), np.zeros(n.shape[1]), method="Radau", rtol=1e-11,
                        atol=1e-10, jac=lambda t, y, a=a: model.jacobian(_row(n, a, y))[a])
        np.testing.assert_allclose(sol.y[:, -1], n[a], rtol=1e-7)


# Fast charge exchange back and forth (invented rates): the gross rates of O+ and O2+ are
# ~1e3 times their net loss, so a residual below rtol alone allows errors of ~1e-7; the step
# tests must do the rest.
CYCLE = """\
P1: O -> O+ + e | k = prescribed | ref = invented test
C1: O+ + O2 -> O2+ + O | k = 1e-8 | ref = invented test
C2: O2+ + O -> O+ + O2 | k = 1e-9 | ref = invented test
D1: O2+ + e -> O + O | k = 2e-7*(300/Te)^0.7 | ref = invented test
R1: O+ + e -> O | k = 3.7e-12*(250/Te)^0.7 | ref = invented test
"""


def _cycle_root(q, te):
    """Steady O+ (x) and O2+ (y) of CYCLE at one level: for a given Ne the balance is
    linear, x = q / (a + βNe − ab/(b + αNe)), y = a x/(b + αNe); Ne = x + y is then found
    by scipy.optimize.brentq (xtol 1e-30, rtol 1e-15)."""
    a, b = 1e-8 * 1e11, 1e-9 * 1e11
    alpha, beta = 2e-7 * (300 / te) ** 0.7, 3.7e-12 * (250 / te) ** 0.7

    def xy(e):
        x = q / (a + beta * e - a * b / (b + alpha * e))
        return x, a * x / (b + alpha * e)

    e = scipy.optimize.brentq(lambda e: sum(xy(e)) - e, 1.0, 1e9, xtol=1e-30, rtol=1e-15)
    return xy(e)


def test_newton_stops_a_step_early_only_inside_its_quadratic_regime(column):
    """The early stop of solve/steady.py (last step ≤ sqrt(rtol) and a tenth of the one
    before, residual met) leaves densities within 1e-9 of the root — the error a step below
    sqrt(1e-10) = 1e-5 leaves in Newton's quadratic regime is about its square (Deuflhard
    2004, ch. 2): on the six-ion chain against scipy.optimize.root (hybr, xtol 1e-13,
    started 0.1 % away), on an ill-conditioned fast exchange cycle against its closed form
    with brentq; and saves an iteration: most levels of the chain stop after three."""
    chain = _chain_model(column)
    res = chain.steady_densities()
    assert np.mean(res.iterations <= 3) > 0.5
    for a in range(ALT.size):
        def f(x, a=a):
            return chain.tendency(_row(res.n, a, x))[a]

        root = scipy.optimize.root(f, res.n[a] * 1.001, method="hybr",
                                   options={"xtol": 1e-13})
        assert root.success
        np.testing.assert_allclose(res.n[a], root.x, rtol=1e-9)
    cycle = ionochem.Model(ionochem.load_scenario(column(
        CYCLE, ALT, neutrals={"O": 1e11 * np.ones_like(ALT), "O2": 1e11 * np.ones_like(ALT)},
        Tn=600.0, Te=TE, production={"P1": Q}, name="cycle")))
    n = cycle.steady_densities().n
    ref = np.array([_cycle_root(q, te) for q, te in zip(Q, TE)])
    order = [cycle.species.index(s) for s in ("O+", "O2+")]
    np.testing.assert_allclose(n[:, order], ref, rtol=1e-9)


def _row(n, a, x):
    full = n.copy()
    full[a] = x
    return full


def test_analytic_jacobian_equals_central_differences(column):
    """J = ∂f/∂n against central finite differences of the tendency, to 1e-6 relative to
    the Jacobian's scale (numerical differentiation, independent of the analytic form)."""
    model = _chain_model(column)
    rng = np.random.default_rng(1)
    n = 10 ** rng.uniform(1, 5, size=(ALT.size, len(model.species)))
    J = model.jacobian(n)
    fd = np.zeros_like(J)
    for j in range(n.shape[1]):
        h = 1e-6 * n[:, j]
        up, dn = n.copy(), n.copy()
        up[:, j] += h
        dn[:, j] -= h
        fd[:, :, j] = (model.tendency(up) - model.tendency(dn)) / (2 * h[:, None])
    scale = np.abs(J).max(axis=(1, 2), keepdims=True)
    np.testing.assert_allclose(J / scale, fd / scale, atol=1e-6)


def test_electrons_equal_charge_weighted_ion_sum(column):
    """Ne = Σ q_i n_i to 1e-12 (charge neutrality; docs/outputs.md)."""
    model = _chain_model(column)
    ds = model.solve()
    ions = [s for s in model.species if s.endswith("+")]
    total = sum(ds["density"].sel(species=s).values for s in ions)
    np.testing.assert_allclose(ds["density"].sel(species="e").values, total, rtol=1e-12)


FAMILY = """\
P1(v): N2 -> N2+(v) + e | k = prescribed | levels v = 0..2 | ref = invented test
C1(v): N2+(v) + O -> NO+ + N | k = 1.4e-10*(300/Teff)^0.44 | levels v = 0..2 | ref = invented
D1(v): N2+(v) + e -> N + N | k = 2.2e-7*(300/Te)^0.39 | levels v = 0..2 | ref = invented test
D2: NO+ + e -> N + O | k = 4.0e-7*(300/Te)^0.5 | ref = invented test
"""

UNRESOLVED = """\
P1: N2 -> N2+ + e | k = prescribed | ref = invented test
C1: N2+ + O -> NO+ + N | k = 1.4e-10*(300/Teff)^0.44 | ref = invented test
D1: N2+ + e -> N + N | k = 2.2e-7*(300/Te)^0.39 | ref = invented test
D2: NO+ + e -> N + O | k = 4.0e-7*(300/Te)^0.5 | ref = invented test
"""


def test_family_with_identical_rates_sums_to_unresolved_species(column):
    """Σ_v N2+(v) equals the unresolved N2+ to 1e-10 when every level has the total rates
    (exact: the summed equations are the unresolved ones)."""
    neutrals = {"N2": 1e12 * np.exp(-(ALT - 100) / 40), "O": 1e11 * np.ones_like(ALT),
                "N": 1e8 * np.ones_like(ALT)}
    common = dict(neutrals=neutrals, Tn=np.linspace(200, 1000, ALT.size), Te=TE)
    fam = column(FAMILY, ALT, production={"P1(v=0)": 0.5 * Q, "P1(v=1)": 0.3 * Q,
                                          "P1(v=2)": 0.2 * Q},
                 name="fam", **common)
    unr = column(UNRESOLVED, ALT, production={"P1": Q}, name="unr", **common)
    ds_f = ionochem.Model(ionochem.load_scenario(fam)).solve()
    ds_u = ionochem.Model(ionochem.load_scenario(unr)).solve()
    assert ds_f["role"].sel(species="N2+").item() == "derived"
    np.testing.assert_allclose(ds_f["density"].sel(species="N2+").values,
                               ds_u["density"].sel(species="N2+").values, rtol=1e-10)
    np.testing.assert_allclose(ds_f["density"].sel(species="NO+").values,
                               ds_u["density"].sel(species="NO+").values, rtol=1e-10)


def test_dark_levels_solve_to_zero(column):
    """Levels with no production at all give zero ion densities without error."""
    q = np.where(ALT < 150, 0.0, Q)
    path = column(ONE_ION, ALT, neutrals={"O": 1e10 * np.ones_like(ALT)}, Tn=500.0, Te=TE,
                  production={"P1": q})
    ds = ionochem.Model(ionochem.load_scenario(path)).solve()
    n = ds["density"].sel(species="O+").values
    assert np.all(n[ALT < 150] == 0.0)
    alpha = 2.0e-7 * (300 / TE) ** 0.7
    np.testing.assert_allclose(n[ALT >= 150], np.sqrt(q / alpha)[ALT >= 150], rtol=1e-8)


def test_produced_but_never_lost_species_is_refused(column):
    """A solved species with production and no loss is an error telling the user to fix it."""
    text = ONE_ION + "X1: O+ + e -> O | k = 1e-12 | ref = invented\n" \
        "X2: O+ + N2 -> NO+ + N | k = 1e-12 | ref = invented\n"
    path = column(text, ALT, neutrals={"O": 1e10 * np.ones_like(ALT),
                                       "N2": 1e10 * np.ones_like(ALT)},
                  Tn=500.0, production={"P1": Q})
    with pytest.raises(ionochem.MechanismError, match="never lost.*fixed"):
        ionochem.Model(ionochem.load_scenario(path))


def test_electron_table_mode_balances_ion(column, tmp_path):
    """With Ne given, O+ = Ne − other ions and the others are in equilibrium at that Ne
    (checked against the closed-form N2+ balance q = (k_C[O] + α Ne) n, and the NO+
    balance k_C[O] N2+ + k_9[N2] (Ne − N2+ − NO+) = α_2 Ne NO+, through which the balance
    ion's dependence on the given Ne enters the solve)."""
    ne = 1e5 * np.ones_like(ALT)
    (tmp_path / "ne.csv").write_text("altitude_km,Ne\n" + "\n".join(
        f"{a},{v}" for a, v in zip(ALT, ne)) + "\n")
    text = UNRESOLVED + "D4: O+ + e -> O | k = 3.7e-12 | ref = invented\n" \
        "C9: O+ + N2 -> NO+ + N | k = 1e-12 | ref = invented\n"
    neutrals = {"N2": 1e12 * np.exp(-(ALT - 100) / 40), "O": 1e11 * np.ones_like(ALT),
                "N": 1e8 * np.ones_like(ALT)}
    path = column(text, ALT, neutrals=neutrals, Tn=600.0, Te=TE, production={"P1": Q},
                  extra='[solve]\nelectrons = "table"\nelectron_table = "ne.csv"\n')
    model = ionochem.Model(ionochem.load_scenario(path))
    ds = model.solve()
    d = ds["density"]
    kc = 1.4e-10 * (300 / 600.0) ** 0.44
    alpha = 2.2e-7 * (300 / TE) ** 0.39
    np.testing.assert_allclose(d.sel(species="N2+").values,
                               Q / (kc * neutrals["O"] + alpha * ne), rtol=1e-9)
    n2p = d.sel(species="N2+").values
    k9 = 1e-12
    alpha2 = 4.0e-7 * (300 / TE) ** 0.5
    nop = (kc * neutrals["O"] * n2p + k9 * neutrals["N2"] * (ne - n2p)) / (
        alpha2 * ne + k9 * neutrals["N2"])
    np.testing.assert_allclose(d.sel(species="NO+").values, nop, rtol=1e-9)
    others = d.sel(species="N2+").values + d.sel(species="NO+").values
    np.testing.assert_allclose(d.sel(species="O+").values, ne - others, rtol=1e-12)
    assert ds["role"].sel(species="O+").item() == "balance"


def test_three_body_association_against_its_closed_form(column):
    """A three-body reaction in the steady solve: O+ made at q and lost only by
    O+ + O + M (k3 [O][M], M the total neutral density), O2+ made by it and lost by
    recombination with Ne = O+ + O2+. Closed forms: O+ = q / (k3 [O][M]) and
    α x (O+ + x) = q for x = O2+ (all rates invented)."""
    text = ("P1: O -> O+ + e | k = prescribed | ref = invented test\n"
            "T1: O+ + O + M -> O2+ + M | k = 3.0e-29*(300/Tn)^2 | ref = invented test\n"
            "R2: O2+ + e -> O + O | k = 2.0e-7*(300/Te)^0.7 | ref = invented test\n")
    o = 1e11 * np.exp(-(ALT - 100) / 60)
    o2 = 1e12 * np.exp(-(ALT - 100) / 30)
    tn = np.linspace(200.0, 900.0, ALT.size)
    model = ionochem.Model(ionochem.load_scenario(column(
        text, ALT, neutrals={"O": o, "O2": o2}, Tn=tn, Te=TE, production={"P1": Q})))
    d = model.solve()["density"]
    oplus = Q / (3.0e-29 * (300 / tn) ** 2 * o * (o + o2))
    alpha = 2.0e-7 * (300 / TE) ** 0.7
    # The root of x² + a x − q/α in the form without cancellation (a ≫ x up high).
    o2plus = 2 * (Q / alpha) / (oplus + np.sqrt(oplus ** 2 + 4 * Q / alpha))
    np.testing.assert_allclose(d.sel(species="O+").values, oplus, rtol=1e-9)
    np.testing.assert_allclose(d.sel(species="O2+").values, o2plus, rtol=1e-9)


def test_with_changes_scales_and_replaces_rates(column):
    """Halving recombination raises n by sqrt(2) (analytic n = sqrt(q/α)); a replaced
    expression is used as written."""
    model = ionochem.Model(ionochem.load_scenario(_one_ion(column)))
    base = model.solve()["density"].sel(species="O+").values
    half = model.with_changes(scale={"R1": 0.5}).solve()["density"].sel(species="O+").values
    np.testing.assert_allclose(half / base, np.sqrt(2.0), rtol=1e-8)
    const = model.with_changes({"R1": "1e-7"}).solve()["density"].sel(species="O+").values
    np.testing.assert_allclose(const, np.sqrt(Q / 1e-7), rtol=1e-8)
    with pytest.raises(ionochem.InputError):
        model.with_changes(scale={"NOPE": 2.0})


def test_negative_balance_ion_is_flagged_not_hidden(column, tmp_path):
    """A given Ne below the molecular ions makes O+ = Ne − others negative there: those
    levels are flagged in the dataset and named in its warnings (docs/scenario.md, '[solve]')."""
    ne = np.where(ALT < 200, 10.0, 1e5)
    (tmp_path / "ne.csv").write_text("altitude_km,Ne\n" + "\n".join(
        f"{a},{v}" for a, v in zip(ALT, ne)) + "\n")
    text = UNRESOLVED + "D4: O+ + e -> O | k = 3.7e-12 | ref = invented\n"
    neutrals = {"N2": 1e12 * np.exp(-(ALT - 100) / 40), "O": 1e11 * np.ones_like(ALT),
                "N": 1e8 * np.ones_like(ALT)}
    path = column(text, ALT, neutrals=neutrals, Tn=600.0, Te=TE, production={"P1": Q},
                  extra='[solve]\nelectrons = "table"\nelectron_table = "ne.csv"\n')
    ds = ionochem.Model(ionochem.load_scenario(path)).solve()
    flag = ds["balance_negative"].values.astype(bool)
    np.testing.assert_array_equal(flag, ds["density"].sel(species="O+").values < 0)
    assert flag[ALT < 200].all() and not flag[ALT >= 200].any()
    assert "negative at" in ds.attrs["warnings"]


def test_solver_raises_naming_the_levels_it_cannot_solve():
    """A system with no steady state (dn/dt = q + 0.1 n > 0 for every n ≥ 0) is not returned
    as an answer: SolverError names the failing levels, the solvable ones would converge."""
    from ionochem.solve.steady import solve_steady
    q = np.array([1.0, 2.0, 3.0])
    growth = np.array([0.1, -1.0, 0.1])       # the middle level has the root n = 2

    def tendency(n, rows):
        return q[rows, None] + growth[rows, None] * n

    def jacobian(n, rows):
        return growth[rows, None, None] * np.ones((len(rows), 1, 1))

    def gross(n, rows):
        return (q[rows, None] + np.clip(growth[rows, None], 0, None) * n,
                np.clip(-growth[rows, None], 0, None) * n)

    with pytest.raises(ionochem.SolverError) as err:
        solve_steady(np.zeros((3, 1)), tendency, jacobian, gross, max_continuation=50,
                     row_labels=["100 km", "200 km", "300 km"])
    assert list(err.value.levels) == ["100 km", "300 km"]
    assert "100 km" in str(err.value) and "200 km" not in str(err.value)


def test_cli_assignments_accept_family_member_ids():
    """`--set "DR(v=2)=EXPR"` splits at the first '=' outside parentheses."""
    from ionochem.cli.options import parse_assignments as _parse_assignments
    got = _parse_assignments(["DR(v=2)=2.2e-7*(300/Te)^0.39", "X = 1e-10"], "set")
    assert got == {"DR(v=2)": "2.2e-7*(300/Te)^0.39", "X": "1e-10"}
    with pytest.raises(ionochem.InputError):
        _parse_assignments(["DR(v=2)"], "set")


# --------------------------------------------------------------------------- hand-written chain
# The tendency of a small chain written out from the law of mass action (e.g. Schunk & Nagy
# 2009, Ionospheres, 2nd ed., ch. 8: continuity equations dn_i/dt = P_i - L_i n_i), without
# the Mechanism: the oracle for Model.tendency, Model.jacobian and the solved steady state.

HAND = """\
P1: O -> O+ + e | k = prescribed | ref = invented test
C1: O+ + N2 -> NO+ + N | k = 1.2e-12*(300/Tn)^0.5 | ref = invented test
C2: O+ + O2 -> O2+ + O | k = 2.0e-11 | ref = invented test
D1: NO+ + e -> N + O | k = 4.0e-7*(300/Te)^0.5 | ref = invented test
D2: O2+ + e -> O + O | k = 1.95e-7*(300/Te)^0.7 | ref = invented test
R1: O+ + e -> O | k = 3.7e-12*(250/Te)^0.7 | ref = invented test
"""
H_N2 = 1e12 * np.exp(-(ALT - 100) / 40)
H_O2 = 2e11 * np.exp(-(ALT - 100) / 35)
H_TN = np.linspace(200, 1000, ALT.size)


def _hand_rates():
    k1 = 1.2e-12 * (300 / H_TN) ** 0.5 * H_N2
    k2 = 2.0e-11 * H_O2
    a1 = 4.0e-7 * (300 / TE) ** 0.5
    a2 = 1.95e-7 * (300 / TE) ** 0.7
    b = 3.7e-12 * (250 / TE) ** 0.7
    return k1, k2, a1, a2, b


def _hand_tendency(x, y, z):
    """O+ (x), NO+ (y), O2+ (z); electrons e = x + y + z (neutrality)."""
    k1, k2, a1, a2, b = _hand_rates()
    e = x + y + z
    return (Q - (k1 + k2 + b * e) * x,
            k1 * x - a1 * e * y,
            k2 * x - a2 * e * z)


def _hand_jacobian(x, y, z):
    k1, k2, a1, a2, b = _hand_rates()
    e = x + y + z
    return np.stack([
        np.stack([-(k1 + k2 + b * e) - b * x, -b * x, -b * x], -1),
        np.stack([k1 - a1 * y, -a1 * e - a1 * y, -a1 * y], -1),
        np.stack([k2 - a2 * z, -a2 * z, -a2 * e - a2 * z], -1)], -2)


def _hand_model(column):
    path = column(HAND, ALT, neutrals={"O": 1e11 * np.ones_like(ALT), "N2": H_N2, "O2": H_O2,
                                       "N": 1e8 * np.ones_like(ALT)},
                  Tn=H_TN, Te=TE, production={"P1": Q}, name="hand")
    return ionochem.Model(ionochem.load_scenario(path))


def test_tendency_and_jacobian_equal_the_hand_written_chain(column):
    """Model.tendency and Model.jacobian at random densities equal the continuity equations
    of the chain written out by hand in this test (O+ made by q and lost to N2, O2 and
    radiative recombination; NO+ and O2+ made from O+ and lost by dissociative recombination;
    Ne the ion sum), to 1e-12 relative to the largest term."""
    model = _hand_model(column)
    order = [model.species.index(s) for s in ("O+", "NO+", "O2+")]
    assert sorted(model.species) == ["NO+", "O+", "O2+"]
    rng = np.random.default_rng(7)
    for _ in range(5):
        x, y, z = 10 ** rng.uniform(1, 6, size=(3, ALT.size))
        n = np.zeros((ALT.size, 3))
        n[:, order] = np.stack([x, y, z], -1)
        f = model.tendency(n)[:, order]
        ref = np.stack(_hand_tendency(x, y, z), -1)
        scale = np.abs(np.stack([Q + 0 * x, *(np.abs(r) for r in _hand_tendency(x, y, z))],
                                -1)).max(axis=1, keepdims=True)
        np.testing.assert_allclose(f / scale, ref / scale, rtol=0, atol=1e-12)
        J = model.jacobian(n)[:, order][:, :, order]
        Jr = _hand_jacobian(x, y, z)
        js = np.abs(Jr).max(axis=(1, 2), keepdims=True)
        np.testing.assert_allclose(J / js, Jr / js, rtol=0, atol=1e-12)


def test_bound_rows_equal_the_hand_written_chain(column):
    """The steady solvers' rows-last evaluation (mechanism/rows.py: BoundRows) gives the
    hand-written continuity equations and Jacobian of this test, on all rows and on a
    subset (to 1e-12 of the largest term), and its gross production minus loss is the
    tendency."""
    from ionochem.mechanism.rows import BoundRows
    model = _hand_model(column)
    order = [model.species.index(s) for s in ("O+", "NO+", "O2+")]
    bound = BoundRows(model.mechanism, model.rate_coefficients(), model.given)
    rng = np.random.default_rng(11)
    x, y, z = 10 ** rng.uniform(1, 6, size=(3, ALT.size))
    n = np.zeros((ALT.size, 3))
    n[:, order] = np.stack([x, y, z], -1)
    ref = np.stack(_hand_tendency(x, y, z), -1)
    Jr = _hand_jacobian(x, y, z)
    for rows in (np.arange(ALT.size), np.array([0, 3, 4, 17])):
        f, P, L = bound.both(n[rows], rows)
        scale = np.abs(ref[rows]).max(axis=1, keepdims=True) + Q[rows, None]
        np.testing.assert_allclose(f[:, order] / scale, ref[rows] / scale, rtol=0,
                                   atol=1e-12)
        np.testing.assert_allclose((P - L) / scale, f / scale, rtol=0, atol=1e-12)
        np.testing.assert_array_equal(bound.tendency(n[rows], rows), f)
        np.testing.assert_array_equal(np.stack(bound.gross(n[rows], rows)), np.stack([P, L]))
        J = bound.jacobian(n[rows], rows)[:, order][:, :, order]
        js = np.abs(Jr[rows]).max(axis=(1, 2), keepdims=True)
        np.testing.assert_allclose(J / js, Jr[rows] / js, rtol=0, atol=1e-12)


def test_steady_state_solves_the_hand_written_chain(column):
    """The solved steady state zeroes the hand-written tendency (residual below 1e-9 of q)
    and equals scipy.optimize.fsolve on the hand-written equations from a start 30 % off, to
    1e-8 (an oracle that shares no code with the Mechanism or the solver)."""
    model = _hand_model(column)
    ds = model.solve()
    d = {s: ds["density"].sel(species=s).values for s in ("O+", "NO+", "O2+", "e")}
    res = np.stack(_hand_tendency(d["O+"], d["NO+"], d["O2+"]), -1)
    assert np.all(np.abs(res) < 1e-9 * Q[:, None])
    np.testing.assert_allclose(d["e"], d["O+"] + d["NO+"] + d["O2+"], rtol=1e-12)
    for a in range(ALT.size):
        def f(v, a=a):
            t = _hand_tendency(*(np.full(ALT.size, c) for c in v))
            return [t[0][a], t[1][a], t[2][a]]

        start = 1.3 * np.array([d["O+"][a], d["NO+"][a], d["O2+"][a]])
        sol = scipy.optimize.fsolve(f, start, xtol=1e-13, full_output=True)
        assert sol[2] == 1, sol[3]
        np.testing.assert_allclose(sol[0], [d["O+"][a], d["NO+"][a], d["O2+"][a]],
                                   rtol=1e-8)


# --------------------------------------------------------------------------- continuation path
# The fallback of the steady solver (pseudo-transient continuation with switched evolution
# relaxation: Mulder & van Leer 1985, J. Comput. Phys. 59, 232; Kelley & Keyes 1998, SIAM J.
# Numer. Anal. 35, 508, *(from memory)*) is rarely reached by the columns above, so it is
# driven directly here on a system with a known root.

Q3 = np.array([1.0, 50.0, 3e3])                  # invented productions, cm-3 s-1
A3 = np.array([3e-7, 1e-7, 2e-8])                # invented recombination, cm3 s-1
K3 = np.array([1e-3, 1e-2, 1e-1])                # invented X+ -> Y+ conversion, s-1


def _two_ion_system():
    """dX/dt = q - k X - a X (X + Y), dY/dt = k X - a Y (X + Y) (electrons = X + Y): the
    total n = X + Y obeys q = a n^2, and X = q / (k + a n)."""
    def tendency(n, rows):
        x, y = n[:, 0], n[:, 1]
        e = x + y
        return np.stack([Q3[rows] - K3[rows] * x - A3[rows] * x * e,
                         K3[rows] * x - A3[rows] * y * e], -1)

    def jacobian(n, rows):
        x, y = n[:, 0], n[:, 1]
        e, a, k = x + y, A3[rows], K3[rows]
        return np.stack([np.stack([-k - a * e - a * x, -a * x], -1),
                         np.stack([k - a * y, -a * e - a * y], -1)], -2)

    def gross(n, rows):
        x, y = n[:, 0], n[:, 1]
        e = x + y
        P = np.stack([Q3[rows] + 0 * x, K3[rows] * x], -1)
        L = np.stack([K3[rows] * x + A3[rows] * x * e, A3[rows] * y * e], -1)
        return P, L

    total = np.sqrt(Q3 / A3)
    x = Q3 / (K3 + A3 * total)
    return tendency, jacobian, gross, np.stack([x, total - x], -1)


@pytest.mark.parametrize("start", [0.0, 0.3, 3.0])
def test_continuation_alone_relaxes_to_the_root(start):
    """Pseudo-transient continuation started from zero, 0.3 and 3 times the root reaches its
    stopping residual (1e-3 relative) within 2500 iterations, never with a negative density,
    and lands within 2e-3 of the closed-form root of the two-ion system (X + Y = sqrt(q/a),
    X = q/(k + a n))."""
    from ionochem.solve.steady import continuation

    tendency, jacobian, gross, exact = _two_ion_system()
    rows = np.arange(3)
    it = np.zeros(3, int)
    n = continuation(start * exact, tendency, jacobian, gross, rtol=1e-10, atol=1e-30,
                     max_iter=2500, iterations=it)
    assert np.all(n >= 0) and np.all(it < 2500)
    P, L = gross(n, rows)
    assert np.all(np.abs(tendency(n, rows)) <= 1e-3 * (P + L) + 1e-30)
    np.testing.assert_allclose(n, exact, rtol=2e-3)


@pytest.mark.xfail(strict=True, reason="known weakness, reported in issue 9: from dt0 = 0.01 of "
                   "the fastest chemical time, the SER growth ||f_old||/||f_new|| is about 1 % "
                   "per step, so continuation needs ~900 iterations here while solve_steady "
                   "allows 400 (max_continuation)")
def test_continuation_converges_within_the_solvers_default_limit():
    """From 0.3 times the root, continuation should reach its stopping residual within the
    400 iterations solve_steady gives it by default."""
    from ionochem.solve.steady import continuation

    tendency, jacobian, gross, exact = _two_ion_system()
    it = np.zeros(3, int)
    continuation(0.3 * exact, tendency, jacobian, gross, rtol=1e-10, atol=1e-30,
                 max_iter=400, iterations=it)
    assert np.all(it < 400)


def test_repeated_solves_share_no_data(column):
    """What a model keeps between solves (``Model.structural``: the O+ diffusion time,
    reaction tables, coordinates) reaches each result as a copy: overwriting every value of
    one result leaves the next solve's result identical to the one before (a shared array
    would carry the edit into every later result)."""
    import xarray as xr
    model = ionochem.Model(ionochem.load_scenario(_one_ion(column)))
    first = model.solve()
    reference = model.solve()
    assert "diffusion_time" in first
    for var in first.data_vars.values():
        if var.dtype.kind == "f" and var.ndim:
            var.values[...] = -1.0
    xr.testing.assert_identical(model.solve(), reference)
