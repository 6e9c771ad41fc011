"""Level outputs of vibrational families and the checks of the vibrational-kinetics issue.

References: closed-form steady state of a two-level family with production, loss and
relaxation (linear algebra, written out in the docstrings); finite differences of
independent Newton solves for the sensitivities; docs/outputs.md for the output names.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

import ionochem
from ionochem.io.scenario import Grid

ALT = np.linspace(150.0, 300.0, 7)
Q0 = 40.0 * np.exp((ALT - 150) / 60)       # invented production into v = 0, cm-3 s-1
Q1 = 15.0 * np.exp((ALT - 150) / 60)       # invented production into v = 1
N_O = 1e10 * np.exp(-(ALT - 150) / 50)     # invented O, cm-3
N_N2 = 5e10 * np.exp(-(ALT - 150) / 30)    # invented N2, cm-3
K0, K1, KR = 1.2e-10, 3.0e-10, 5e-10       # invented rate coefficients, cm3 s-1

TWO_LEVEL = """\
P(v): N2 -> N2+(v) + e | k = prescribed | levels v = 0..1 | ref = invented test
L(v): N2+(v) + O -> NO+ + N | k = {k0} if v < 0.5 else {k1} | levels v = 0..1 | ref = invented
X(v): N2+(v) + N2 -> N2+(v=0) + N2 | k = {kr} | levels v = 1..1 | ref = invented test
D: NO+ + e -> N + O | k = 4e-7 | ref = invented test
"""


def _two_level(column, kr=KR, name="two"):
    text = TWO_LEVEL.format(k0=K0, k1=K1, kr=kr)
    path = column(text, ALT, neutrals={"N2": N_N2, "O": N_O, "N": np.full(ALT.size, 1e7)},
                  Tn=np.full(ALT.size, 800.0), production={"P(v=0)": Q0, "P(v=1)": Q1},
                  name=name)
    return ionochem.Model(ionochem.load_scenario(path))


def test_two_level_family_matches_the_closed_form(column):
    """Steady state of q0, q1 into v = 0, 1, loss k_v [O] n_v, relaxation k_r [N2] n_1 to
    v = 0: n1 = q1/(k1 [O] + k_r [N2]), n0 = (q0 + k_r [N2] n1)/(k0 [O]) (linear algebra);
    level_fraction = n_v/(n0 + n1) and the effective loss rate (k0 n0 + k1 n1)/(n0 + n1);
    the relaxation family's effective rate is k_r n1/(n0 + n1). To 1e-9."""
    ds = _two_level(column).solve()
    n1 = Q1 / (K1 * N_O + KR * N_N2)
    n0 = (Q0 + KR * N_N2 * n1) / (K0 * N_O)
    dens = ds["density"]
    np.testing.assert_allclose(dens.sel(species="N2+(v=0)").values, n0, rtol=1e-9)
    np.testing.assert_allclose(dens.sel(species="N2+(v=1)").values, n1, rtol=1e-9)
    frac = ds["level_fraction"]
    np.testing.assert_allclose(frac.sel(species="N2+(v=1)").values, n1 / (n0 + n1), rtol=1e-9)
    assert np.all(np.isnan(frac.sel(species="NO+").values))
    eff = ds["effective_rate_coefficient"]
    np.testing.assert_allclose(eff.sel(family_reaction="L(v)").values,
                               (K0 * n0 + K1 * n1) / (n0 + n1), rtol=1e-9)
    np.testing.assert_allclose(eff.sel(family_reaction="X(v)").values,
                               KR * n1 / (n0 + n1), rtol=1e-9)
    assert "P(v)" not in list(eff["family_reaction"].values)
    assert eff.attrs["units"] == "cm3 s-1"


def test_loss_shares_and_vibrational_temperature_match_the_closed_form(column):
    """level_loss_share of the two-level family: v = 1 loses k1 [O] n1 to L and k_r [N2] n1
    to X, so the shares are k1 [O]/(k1 [O] + k_r [N2]) and the rest; v = 0 loses only to L
    (share 1, X NaN: it does not act on v = 0); classes ion_neutral and relaxation.
    n2plus_vibrational_temperature = theta/ln(n0/n1) with theta = (E1 - E0) h c/k_B =
    2174.8 cm-1 x 1.438776877 cm K (Huber & Herzberg 1979 constants omega_e 2207.00,
    omega_e x_e 16.10 *(from memory)*; CODATA 2018). To 1e-9."""
    ds = _two_level(column, name="share").solve()
    n1 = Q1 / (K1 * N_O + KR * N_N2)
    n0 = (Q0 + KR * N_N2 * n1) / (K0 * N_O)
    sh = ds["level_loss_share"]
    np.testing.assert_allclose(sh.sel(species="N2+(v=1)", loss_process="L(v)"),
                               K1 * N_O / (K1 * N_O + KR * N_N2), rtol=1e-9)
    np.testing.assert_allclose(sh.sel(species="N2+(v=1)", loss_process="X(v)"),
                               KR * N_N2 / (K1 * N_O + KR * N_N2), rtol=1e-9)
    np.testing.assert_allclose(sh.sel(species="N2+(v=0)", loss_process="L(v)"), 1.0,
                               rtol=1e-12)
    assert np.all(np.isnan(sh.sel(species="N2+(v=0)", loss_process="X(v)").values))
    assert np.all(np.isnan(sh.sel(species="NO+").values))
    flags = ds["loss_process_class"]
    meaning = dict(zip(flags.attrs["flag_values"], flags.attrs["flag_meanings"].split(),
                       strict=True))
    classes = {p: meaning[f] for p, f in zip(ds["loss_process"].values, flags.values,
                                              strict=True)}
    assert classes == {"L(v)": "ion_neutral", "X(v)": "relaxation"}
    theta = (2207.00 - 2 * 16.10) * 1.438776877
    np.testing.assert_allclose(ds["n2plus_vibrational_temperature"].values,
                               theta / np.log(n0 / n1), rtol=1e-9)
    assert ds["n2plus_vibrational_temperature"].attrs["units"] == "K"


def test_infinite_relaxation_recovers_the_ground_level_rates(column):
    """With relaxation far faster than any loss (k_r [N2] / (k1 [O]) > 1e6), every ion is
    in v = 0: the effective loss rate is k0 and the summed N2+ is the unresolved
    q/(k0 [O]) (limit of the closed form), to 1e-6."""
    ds = _two_level(column, kr=1e-2, name="fast").solve()
    total = ds["density"].sel(species="N2+").values
    np.testing.assert_allclose(total, (Q0 + Q1) / (K0 * N_O), rtol=1e-6)
    np.testing.assert_allclose(ds["effective_rate_coefficient"].sel(family_reaction="L(v)"),
                               K0, rtol=1e-6)
    assert np.all(ds["level_fraction"].sel(species="N2+(v=1)").values < 1e-6)


def test_transient_datasets_carry_level_outputs_with_time(column):
    """Transient results have level_fraction(time, species, altitude) and
    effective_rate_coefficient(time, family_reaction, altitude); after many lifetimes they
    equal the steady closed form (to 1e-6)."""
    model = _two_level(column, name="tr")
    ds = model.integrate([0.0, 1e3, 1e5])
    assert ds["level_fraction"].dims == ("time", "species", "altitude")
    assert ds["effective_rate_coefficient"].dims == ("time", "family_reaction", "altitude")
    n1 = Q1 / (K1 * N_O + KR * N_N2)
    n0 = (Q0 + KR * N_N2 * n1) / (K0 * N_O)
    np.testing.assert_allclose(ds["level_fraction"].sel(species="N2+(v=1)").values[-1],
                               n1 / (n0 + n1), rtol=1e-5)


def test_level_figure_and_cli_option(column, tmp_path, capsys):
    """`ionochem run --plot-levels` writes the level-distribution figure (a PNG file that
    starts with the PNG signature, ISO/IEC 15948); a transient scenario is refused with
    exit status 2."""
    from ionochem.cli import main
    model = _two_level(column, name="fig")
    out = tmp_path / "levels.png"
    code = main(["run", str(model.scenario.source), "--plot-levels", str(out)])
    assert code == 0
    assert out.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    path = Path(model.scenario.source)
    path.write_text(path.read_text() + '\n[solve]\nmode = "transient"\ntimes_s = [0.0, 10.0]\n')
    capsys.readouterr()
    code = main(["run", str(path), "--plot-levels", str(tmp_path / "t.png")])
    assert code == 2
    assert "--plot-levels" in capsys.readouterr().err


def test_compare_reports_the_change_of_the_effective_rate(column):
    """compare of a changed v = 1 loss: effective_rate_change(L(v)) equals the ratio of the
    closed-form effective rates with k1 and 2 k1 (linear algebra), to 1e-8."""
    from ionochem.analysis.compare import compare
    model = _two_level(column, name="cmp")
    ds = compare(model, model.with_changes(scale={"L(v=1)": 2.0}))

    def eff(k1):
        n1 = Q1 / (k1 * N_O + KR * N_N2)
        n0 = (Q0 + KR * N_N2 * n1) / (K0 * N_O)
        return (K0 * n0 + k1 * n1) / (n0 + n1)
    np.testing.assert_allclose(ds["effective_rate_change"].sel(family_reaction="L(v)"),
                               eff(2 * K1) / eff(K1), rtol=1e-8)


# ----------------------------------------------------------------- the default list
ROOT = Path(__file__).resolve().parents[1]
STEP = 3e-4


@pytest.fixture(scope="module")
def demo():
    scen = ionochem.load_scenario(ROOT / "scenarios" / "midlatitude_equinox.toml")
    grid = tuple(float(a) for a in np.linspace(150.0, 300.0, 6))
    model = ionochem.Model(scen.replace(grid=Grid(altitude_km=grid)))
    return model, model.sensitivity()


@pytest.mark.parametrize("v", range(6))
def test_sensitivity_to_each_levels_recombination_is_exact(demo, v):
    """S = d ln n / d ln k of N2+(v=0..5) and of summed N2+ to the recombination of level v
    (both product channels scaled together: the sum of the two exact columns) equals the
    central difference of re-solved columns with both scaled by exp(+-h), h = 3e-4
    (independent Newton solves), to 1e-5."""
    model, sens = demo
    ids = [f"DR_N2plus(v={v})", f"DR_N2plus_2D2D(v={v})"]
    up = model.with_changes(scale={i: np.exp(STEP) for i in ids}).solve()
    dn = model.with_changes(scale={i: np.exp(-STEP) for i in ids}).solve()
    for s in ["N2+", *[f"N2+(v={w})" for w in range(6)]]:
        fd = (np.log(up["density"].sel(species=s).values)
              - np.log(dn["density"].sel(species=s).values)) / (2 * STEP)
        exact = sens["sensitivity"].sel(species=s, reaction=ids).sum("reaction").values
        np.testing.assert_allclose(exact, fd, rtol=0, atol=1e-5, err_msg=s)
    own = sens["sensitivity"].sel(species=f"N2+(v={v})", reaction=ids).sum("reaction")
    assert np.all(own.values < 0)


def test_rank_lists_every_levels_recombination(demo):
    """rank for N2+(v=1) lists the recombination of v = 1 among its controlling reactions,
    with a negative signed sensitivity (more loss, fewer ions), and rank over all
    reactions has a row for the recombination of every level."""
    from ionochem.analysis.rank import rank_reactions
    _, sens = demo
    rows = rank_reactions(sens, "N2+(v=1)", top=None, min_share=0, members=True)
    by_id = {r.reaction: r for r in rows}
    for v in range(6):
        assert f"DR_N2plus(v={v})" in by_id
    assert by_id["DR_N2plus(v=1)"].signed_at_max < 0
    assert by_id["DR_N2plus(v=1)"].max_abs > by_id["DR_N2plus(v=3)"].max_abs


def test_effective_rate_sensitivity_is_exact(demo):
    """d ln k_eff / d ln k_j of the recombination family (from the exact density
    sensitivities, no re-solve) equals the central difference of effective_rate_coefficient
    of re-solved columns with the v = 1 recombination scaled by exp(+-h) (independent Newton
    solves), to 1e-5; likewise for scaling the relaxation of v = 1."""
    from ionochem.analysis.levels import effective_rate_sensitivity
    model, sens = demo
    eff = effective_rate_sensitivity(model, sens)["effective_rate_sensitivity"]
    for rid in ("DR_N2plus(v=1)", "N2plus_N2_relax(v=1)"):
        up = model.with_changes(scale={rid: np.exp(STEP)}).solve()
        dn = model.with_changes(scale={rid: np.exp(-STEP)}).solve()
        for fam in ("DR_N2plus(v)", "DR_N2plus_2D2D(v)", "N2plus_O_NOplus(v)"):
            fd = (np.log(up["effective_rate_coefficient"].sel(family_reaction=fam).values)
                  - np.log(dn["effective_rate_coefficient"].sel(family_reaction=fam).values)
                  ) / (2 * STEP)
            exact = eff.sel(family_reaction=fam, reaction=rid).values
            np.testing.assert_allclose(exact, fd, rtol=0, atol=1e-5, err_msg=f"{fam} {rid}")
