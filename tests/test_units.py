"""Units of analysis: a family of levels, or reactions tied with ``@unit``, analysed as one
process (sensitivity, budget, rank, Monte Carlo, Sobol, fit).

External references: the derivative's definition (central finite differences of re-solved
columns), closed forms of a synthetic one-ion column n = sqrt(q / Σ k_v) (invented rates),
the variance of a sum of correlated normals, and SALib's own grouped Sobol analysis with the
analytic group indices of Y = X1 + X2 + X1·X3 for standard normal X.
"""

from __future__ import annotations

import numpy as np
import pytest

import ionochem
from ionochem.analysis import uncertainty as U
from ionochem.analysis.budget import budget_table
from ionochem.analysis.fit import default_priors, resolve_parameters
from ionochem.analysis.rank import rank_reactions
from ionochem.errors import InputError, ReactionListError
from ionochem.mechanism.parser import parse_reaction_text

DEMO = "scenarios/midlatitude_equinox.toml"
STEP = 1e-4

ALT = np.linspace(100.0, 300.0, 9)
Q = 50.0 * np.exp((ALT - 100.0) / 80.0)                # invented production, cm-3 s-1
O_DENS = 1e10 * np.exp(-(ALT - 100) / 50)

# One ion, production q, lost by a two-level "family" of recombinations with k_v = k0 (1 + v):
# n = sqrt(q / (3 k0)) (invented rates; a family need not name a vibrational species).
FAMILY = """\
P1: O -> O+ + e | k = prescribed | f = {fq} | ref = invented test
R(v): O+ + e -> O | k = 1.0e-7*(1+v) | f = {fr} | levels v = 0..1 | ref = invented test
"""


@pytest.fixture(scope="module")
def demo():
    model = ionochem.Model(ionochem.load_scenario(DEMO))
    return model, model.solve(), model.sensitivity()


def _family_column(column, fq=1.2, fr="1.3"):
    path = column(FAMILY.format(fq=fq, fr=fr), ALT, neutrals={"O": O_DENS}, Tn=800.0,
                  Te=1500.0, production={"P1": Q}, name="fam")
    return ionochem.Model(ionochem.load_scenario(path))


# ----------------------------------------------------------------------------- the list
def test_ties_are_read_and_checked_at_their_line():
    """``@unit`` lines join families and reactions; every malformed tie is refused at its
    own line (a missing member, a single level, a member tied twice, a reused name, a tie of
    one member)."""
    base = ("A: O+ + e -> O | k = 1e-12\n"
            "B(v): N2+(v) + e -> N + N | k = 1e-7 | levels v = 0..2\n"
            "C(v): N2+(v) + e -> N(2D) + N | k = 1e-7 | levels v = 0..2\n")
    rl = parse_reaction_text(base + "@unit DR = B(v), C(v)\n")
    units = {u.name: u for u in rl.units}
    assert units["DR"].kind == "tied" and len(units["DR"].members) == 6
    assert units["A"].kind == "reaction"
    bad = {"@unit DR = B(v), X": "no reaction or family 'X'",
           "@unit DR = B(v=0), C(v)": "one level of a family",
           "@unit DR = B(v)": "has one member",
           "@unit A = B(v), C(v)": "already a reaction or family id",
           "@unit DR = B(v), C(v)\n@unit E = A, B(v)": "already in unit 'DR'",
           "@unit = A, B(v)": "write a tie as"}
    for text, words in bad.items():
        with pytest.raises(ReactionListError) as err:
            parse_reaction_text(base + text + "\n")
        assert words in str(err.value)
        assert err.value.line == 4 + text.count("\n")


def test_default_list_ties_the_branches_of_n2plus_recombination():
    """The default list's tie joins both N2+ recombination families (12 levels, v = 0..5)."""
    model_units = ionochem.load_mechanism("reactions/ionosphere.reactions").units
    dr = [u for u in model_units if u.name == "DR_N2plus_branches"][0]
    assert dr.parts == ("DR_N2plus(v)", "DR_N2plus_2D2D(v)") and len(dr.members) == 12


# ----------------------------------------------------------------------------- sensitivity
def test_unit_sensitivity_is_the_derivative_of_one_common_multiplier(demo):
    """S of a family (O2D_N2(v)) and of a tie (DR_N2plus_branches) equal the central finite
    difference of re-solved columns with all members scaled together by 1 ± 1e-4 (the
    derivative's definition), to 1e-5 relative where |S| > 1e-3; the tie's S equals the sum
    of its two families' member sensitivities."""
    model, _, sens = demo
    for unit in ("O2D_N2(v)", "DR_N2plus_branches"):
        up = model.with_changes(scale={unit: 1 + STEP}).solve()
        dn = model.with_changes(scale={unit: 1 - STEP}).solve()
        for sp in ("N2+", "O+", "e"):
            fd = (np.log(up["density"].sel(species=sp).values)
                  - np.log(dn["density"].sel(species=sp).values)) / (
                np.log(1 + STEP) - np.log(1 - STEP))
            exact = sens["sensitivity_unit"].sel(species=sp, unit=unit).values
            big = np.abs(exact) > 1e-3
            assert big.any()
            np.testing.assert_allclose(exact[big], fd[big], rtol=1e-5, atol=1e-8,
                                       err_msg=f"{unit} {sp}")
    S = sens["sensitivity"].sel(species="N2+")
    fams = sum(S.sel(reaction=[r for r in S["reaction"].values if str(r).startswith(f + "(v=")])
               .sum("reaction").values for f in ("DR_N2plus", "DR_N2plus_2D2D"))
    np.testing.assert_allclose(
        sens["sensitivity_unit"].sel(species="N2+", unit="DR_N2plus_branches").values, fams,
        rtol=1e-12)


def test_rank_lists_whole_processes_above_their_levels(demo):
    """On the demo column over 250–300 km, N2+ ranked by unit: the N2+ recombination (a tie
    of two families) and O+(2D) + N2 (a family) are among the first eight processes
    (environment factors set aside), and no family level appears; --members ranks levels."""
    _, _, sens = demo
    rows = rank_reactions(sens, "N2+", (250.0, 300.0), top=None)
    units = [r.reaction for r in rows
             if r.reaction not in set(sens["factor"].values.astype(str))]
    assert "DR_N2plus_branches" in units[:8] and "O2D_N2(v)" in units[:8]
    assert not any("(v=" in u for u in units)
    members = rank_reactions(sens, "N2+", (250.0, 300.0), top=None, members=True)
    assert any(r.reaction == "DR_N2plus(v=0)" for r in members)


def test_budget_has_one_line_per_process_equal_to_the_sum_of_its_levels(demo):
    """The N2+ budget at 250 km has one O+(2D) + N2 line whose rate is Σ_v of the level
    reactions' rates (each makes one N2+: an independent sum over reaction_rate)."""
    _, ds, _ = demo
    b = budget_table(ds, "N2+", 250.0)
    ids = [r[0] for r in b.production]
    assert ids.count("O2D_N2(v)") == 1 and not any("(v=" in i for i in ids)
    a = int(np.argmin(np.abs(ds["altitude"].values - 250.0)))
    levels = [f"O2D_N2(v={v})" for v in range(6)]
    expected = ds["reaction_rate"].sel(reaction=levels).values[:, a].sum()
    got = [r[2] for r in b.production if r[0] == "O2D_N2(v)"][0]
    assert got == pytest.approx(expected, rel=1e-12)
    apart = budget_table(ds, "N2+", 250.0, members=True)
    assert sum(r[2] for r in apart.production if r[0] in levels) == pytest.approx(expected)


# ----------------------------------------------------------------------------- Monte Carlo
@pytest.mark.parametrize("rho", [1.0, 0.0, 0.5])
def test_monte_carlo_variance_of_a_family_follows_its_correlation(column, rho):
    """n = sqrt(q / Σ_v k_v) with k_v = k0 (1 + v), f_q = 1.2, f = 1.3 per level. To first
    order ln n = ½ ε_q ln f_q − ½ Σ_v w_v ε_v ln f, w_v = k_v / Σ k = (1/3, 2/3), with
    corr(ε_0, ε_1) = ρ: var(ln n) = ¼ [ln² f_q + ln² f (w_0² + w_1² + 2ρ w_0 w_1)]
    (variance of a sum of correlated normals; exact for ρ = 1). The sample variance of
    4000 draws agrees within 4 standard errors (σ² √(2/(N−1))) plus 1 % for the
    second-order terms; the linear unit share agrees with the same formula to 1e-10."""
    model = _family_column(column)
    N = 4000
    ds = U.monte_carlo(model, N, seed=5, member_correlation=rho)
    lf, lq = np.log(1.3), np.log(1.2)
    w = np.array([1.0, 2.0]) / 3.0
    fam = lf ** 2 * (w @ w + 2 * rho * w[0] * w[1])
    var = 0.25 * (lq ** 2 + fam)
    got = ds["log_density_std"].sel(species="O+").values ** 2
    assert np.all(np.abs(got - var) < 4 * var * np.sqrt(2.0 / (N - 1)) + 0.01 * var)
    share = ds["variance_share_linear_unit"].sel(species="O+", unit="R(v)").values
    np.testing.assert_allclose(share, 0.25 * fam / var, rtol=1e-10)
    assert ds.attrs["member_correlation"] == rho
    smp = ds["variance_share_unit"].sel(species="O+", unit="R(v)").values
    assert np.all(np.abs(smp - 0.25 * fam / var) < 0.05)


def test_one_draw_per_unit_moves_every_level_together(column):
    """With member correlation 1 the members' ε are equal in every sample; with 0 they are
    the reactions' own independent normals (their sample correlation below 0.1)."""
    model = _family_column(column)
    z = U.draw_normals(0, 0, 500, U.SampleKernel(model).width)
    eps = U.SampleKernel(model).member_draws(z)
    np.testing.assert_array_equal(eps[:, 1], eps[:, 2])
    k0 = U.SampleKernel(model, member_correlation=0.0)
    eps0 = k0.member_draws(U.draw_normals(0, 0, 500, k0.width))
    assert abs(np.corrcoef(eps0[:, 1], eps0[:, 2])[0, 1]) < 0.1
    with pytest.raises(InputError):
        U.SampleKernel(model, member_correlation=1.5)


# ----------------------------------------------------------------------------- Sobol groups
def test_sobol_groups_match_salibs_group_analysis_and_the_analytic_indices():
    """Y = X1 + X2 + X1·X3 with X standard normal: var Y = 3, and the group {X1, X3} has
    first-order index var(X1 (1 + X3)) / 3 = 2/3, the group {X2} 1/3 (analytic). The design
    of ionochem.analysis.globalsens with groups, analysed as the command does, equals
    SALib's own grouped analysis and the analytic values within 0.05."""
    from SALib.analyze import sobol as salib_sobol

    from ionochem.analysis.globalsens import _analyze, design
    names = ["x1", "x2", "x3"]
    groups = ["A", "B", "A"]
    problem, X = design(names, 4096, "sobol", 7, groups)
    y = X[:, 0] + X[:, 1] + X[:, 0] * X[:, 2]
    ours = _analyze(problem, X, y, "sobol", 7, 100)
    ref = salib_sobol.analyze({"num_vars": 3, "names": names, "groups": groups,
                               "bounds": [[0.0, 1.0]] * 3, "dists": ["norm"] * 3}, y,
                              calc_second_order=False, num_resamples=100, seed=7)
    np.testing.assert_allclose(ours["S1"], ref["S1"], rtol=1e-12)
    np.testing.assert_allclose(ours["S1"], [2 / 3, 1 / 3], atol=0.05)
    np.testing.assert_allclose(ours["ST"], [2 / 3, 1 / 3], atol=0.05)


def test_sobol_on_units_of_the_demo_list(column):
    """global_sensitivity names units as its factors (R(v), not R(v=0)); with --members it
    needs independent members."""
    from ionochem.analysis.globalsens import global_sensitivity
    model = _family_column(column)
    ds = global_sensitivity(model, 8, method="sobol", top=2, species=["O+"],
                            altitudes_km=[200.0])
    assert set(ds["factor"].values) == {"R(v)", "P1"}
    with pytest.raises(InputError, match="`member_correlation` 0"):
        global_sensitivity(model, 8, method="sobol", top=2, members=True)


# ----------------------------------------------------------------------------- fit
def test_fit_prior_of_a_family_is_its_rate_weighted_f(column):
    """R(v) with f = 1.2 at v = 0 and 2 at v = 1 and rates in the ratio 1 : 2 (same
    reactants, k_v = k0 (1 + v)): the family's prior is exp((ln 1.2 + 2 ln 2) / 3), not the
    median of its levels' f."""
    model = _family_column(column, fr="1.2 if v < 0.5 else 2")
    params = resolve_parameters(model, ["R(v)", "P1"])
    prior = default_priors(model, params, ALT)
    assert prior["R(v)"] == pytest.approx((np.log(1.2) + 2 * np.log(2.0)) / 3, rel=1e-9)
    assert prior["P1"] == pytest.approx(np.log(1.2), rel=1e-12)


def test_fit_frees_a_tie_as_one_multiplier():
    """--free on a tie of the default list takes every member of both families."""
    model = ionochem.Model(ionochem.load_scenario(DEMO))
    (p,) = resolve_parameters(model, ["DR_N2plus_branches"])
    names = {model.reactions[j] for j in p.indices}
    assert names == {f"DR_N2plus(v={v})" for v in range(6)} | {
        f"DR_N2plus_2D2D(v={v})" for v in range(6)}
