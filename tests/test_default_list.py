"""The default reaction list ``reactions/ionosphere.reactions``: structure and cited values.

The structural checks hold the list to its own contract (docs/reaction-list.md; the reaction
classes and solved species of reactions/README.md). The value checks evaluate rate laws
through the parser's compiled expressions and compare them with the published forms named
in each docstring; those forms are quoted from memory, as the list itself says, so a
mismatch means either a typing error in the list or in this test: check the source.
"""

from __future__ import annotations

from collections import Counter
from pathlib import Path

import numpy as np
import pytest

from ionochem.cli import main as cli_main
from ionochem.mechanism.mechanism import Mechanism
from ionochem.mechanism.parser import parse_reaction_list

LIST_PATH = Path(__file__).resolve().parents[1] / "reactions" / "ionosphere.reactions"

FIXED_NEUTRALS = {"N2", "O2", "O", "N", "NO", "He", "H", "Ar"}
SOLVED = {"O+", "O+(2D)", "O+(2P)", "N2+(v=0)", "N2+(v=1)", "N2+(v=2)", "N2+(v=3)",
          "N2+(v=4)", "N2+(v=5)", "O2+", "NO+", "N+", "N(2D)"}
N2PLUS_LEVELS = range(0, 6)
T_GRID = np.array([200.0, 300.0, 500.0, 1000.0, 1500.0, 2000.0, 3000.0])


@pytest.fixture(scope="module")
def rl():
    return parse_reaction_list(LIST_PATH)


@pytest.fixture(scope="module")
def by_id(rl):
    return {r.id: r for r in rl.reactions}


def _eval(expr, reaction, temps):
    """Evaluate ``expr`` (a rate law or f of ``reaction``) at ``temps`` (name -> K)."""
    env = {name: np.atleast_1d(np.asarray(val, float)) for name, val in temps.items()}
    if reaction.level is not None:
        env["v"] = float(reaction.level)
    return np.asarray(expr.evaluate(env), float)


def _k(reaction, **temps):
    """Rate coefficient of ``reaction`` at the given temperatures (scalars, K)."""
    return _eval(reaction.k, reaction, temps)


def _net(reaction):
    net = Counter()
    for sp, c in reaction.reactants:
        net[sp.name] -= c
    for sp, c in reaction.products:
        net[sp.name] += c
    return net


# ----------------------------------------------------------------------------- structure

def test_default_list_parses_and_every_line_conserves_atoms_and_charge(rl):
    """Each reaction conserves every element and the charge (docs/reaction-list.md, 'Balance':
    the parser refuses unbalanced lines; recounted here from the species' own element
    counts)."""
    assert len(rl.reactions) > 50
    assert not rl.warnings
    for r in rl.reactions:
        sides = []
        for terms in (r.reactants, r.products):
            elements, charge = Counter(), 0
            for sp, c in terms:
                for sym, n in sp.elements:
                    elements[sym] += n * c
                charge += sp.charge * c
            sides.append((elements, charge))
        assert sides[0] == sides[1], r.id


def test_every_reaction_has_a_ref_and_its_own_uncertainty_factor(rl):
    """`check --strict` requirement (docs/reaction-list.md): a ref on every line; the default
    list also gives its own f on every line, 1 <= f <= 4 at 200-3000 K (a one-sigma factor;
    the widest are O+(2P) + O, whose published values spread by a factor 10, and NO+ + e at
    high Te, where the published Te exponents differ)."""
    assert rl.default_f is not None
    for r in rl.reactions:
        assert r.ref and len(r.ref) > 10, r.id
        assert r.f is not None, r.id
        temps = {name: T_GRID for name in ("Te", "Ti", "Tn", "Teff", "Tv")}
        f = np.broadcast_to(_eval(r.f, r, temps), T_GRID.shape)
        assert np.all(f >= 1.0), r.id
        assert np.all(f <= 4.0), r.id


def test_ids_of_the_varied_reaction_and_refs_marked_from_memory(by_id):
    """O+(2D) + N2 -> N2+ + O carries the memorable id O2D_N2 with its alternative named in
    the ref (its rate differs between evaluations, so it must be easy to vary:
    reactions/README.md)."""
    r = by_id["O2D_N2(v=0)"]
    assert r.family == "O2D_N2(v)"
    assert [sp.name for sp, _ in r.reactants] == ["O+(2D)", "N2"]
    assert "Li, Huang, Flesch & Ng 1997" in r.ref and "Johnsen & Biondi 1980" in r.ref
    assert "from memory" in r.ref


def test_every_solved_species_is_produced_and_lost(rl):
    """Closure (reactions/README.md, 'Species'): O+, O+(2D), O+(2P), N2+(v=0..5), O2+, NO+, N+ and
    N(2D) each have at least one net source and one net sink in the list; nothing else is
    left unsolved besides the fixed neutrals and the electrons."""
    produced, lost = set(), set()
    for r in rl.reactions:
        for name, n in _net(r).items():
            (produced if n > 0 else lost if n < 0 else set()).add(name)
    present = produced | lost
    solved = present - FIXED_NEUTRALS - {"e"}
    assert solved == SOLVED
    for name in SOLVED:
        assert name in produced, f"{name} is never produced"
        assert name in lost, f"{name} is never lost"
    mech = Mechanism(rl, fixed=sorted(present & FIXED_NEUTRALS))
    assert set(mech.solved) == SOLVED
    assert mech.structural_problems() == []


def test_n2plus_families_have_the_expected_members(rl):
    """N2+ is resolved into v = 0..5 (v = 5 standing for 5 and above; the six levels of the
    MQDT electron-collision data of Abdoulanziz et al., arXiv:2202.12096); production, every
    loss and DR cover all six levels, relaxation by N2 the five excited ones, and electron
    collisions every Delta v = 1 and 2 pair, each family labelled by its upper level
    (docs/reaction-list.md, 'Families')."""
    fam = rl.families
    five = ["PI_N2(v)", "PE_N2(v)", "DR_N2plus(v)", "DR_N2plus_2D2D(v)", "N2plus_O_NOplus(v)",
            "N2plus_O_Oplus(v)", "N2plus_O2(v)", "N2plus_NO(v)", "O2D_N2(v)", "O2P_N2(v)"]
    for name in five:
        base = name[:-3]
        assert list(fam[name]) == [f"{base}(v={v})" for v in N2PLUS_LEVELS], name
    assert list(fam["N2plus_N2_relax(v)"]) == [f"N2plus_N2_relax(v={v})" for v in range(1, 6)]
    for name, lo in (("VdE1_N2plus", 1), ("VE1_N2plus", 1), ("VdE2_N2plus", 2),
                     ("VE2_N2plus", 2)):
        assert list(fam[name + "(v)"]) == [f"{name}(v={v})" for v in range(lo, 6)], name
    assert len(fam) == 15


def test_photo_channels_have_the_shapes_the_environment_expects(rl):
    """Photo and photoelectron channels are named by their neutral reactant and products
    (DEVELOPERS.md, Environment.sources); the default list uses exactly these shapes."""
    def shapes(source):
        out = set()
        for r in rl.reactions:
            if r.k.source == source:
                out.add((" + ".join(sp.name for sp, _ in r.reactants),
                         " + ".join(sorted(sp.name for sp, _ in r.products))))
        return out

    photo = {("O", "O+ + e"), ("O", "O+(2D) + e"), ("O", "O+(2P) + e"),
             ("N2", "N + N+ + e"), ("O2", "O2+ + e"), ("O2", "O + O+ + e"),
             ("NO", "NO+ + e"), ("N2", "N + N(2D)"), ("N", "N+ + e")}
    photo |= {("N2", f"N2+(v={v}) + e") for v in N2PLUS_LEVELS}
    assert shapes("photo") == photo
    pe = {("O", "O+ + e"), ("O", "O+(2D) + e"), ("O", "O+(2P) + e"), ("N2", "N + N+ + e"),
          ("O2", "O2+ + e"), ("O2", "O + O+ + e"), ("N2", "N + N(2D)")}
    pe |= {("N2", f"N2+(v={v}) + e") for v in N2PLUS_LEVELS}
    assert shapes("photoelectron") == pe


def test_rate_laws_use_the_temperature_of_their_collision(rl):
    """Ion-neutral rates depend on Teff (St.-Maurice & Torr 1978, JGR 83, 969), electron
    reactions on Te, neutral-neutral reactions on Tn; no rate law reads Ti directly."""
    for r in rl.reactions:
        if r.k.source is not None:
            continue
        temps = r.k.variables & {"Te", "Ti", "Tn", "Teff", "Tv"}
        names = [sp for sp, _ in r.reactants]
        if "Ti" in temps:
            pytest.fail(f"{r.id} reads Ti")
        if any(sp.name == "e" for sp in names):
            assert temps <= {"Te"}, r.id
        elif any(sp.charge for sp in names):
            assert temps <= {"Teff", "Tv"}, r.id
        else:
            assert temps <= {"Tn"}, r.id


def test_n2plus_levels_share_the_total_rates(rl, by_id):
    """Without level-resolved data every N2+ level takes the total rate, so the summed N2+
    equals the unresolved scheme's (docs/reaction-list.md, 'Families'); recombination is per
    level."""
    for fam in ("N2plus_O_NOplus(v)", "N2plus_O_Oplus(v)", "N2plus_O2(v)",
                "N2plus_NO(v)"):
        members = [by_id[m] for m in rl.families[fam]]
        ks = [np.broadcast_to(_k(m, Te=T_GRID, Teff=T_GRID), T_GRID.shape) for m in members]
        for k in ks[1:]:
            np.testing.assert_array_equal(k, ks[0], err_msg=fam)


# ----------------------------------------------------------------------------- values

def test_o_plus_n2_matches_st_maurice_torr_polynomial_at_300_and_1000_k(by_id):
    """St.-Maurice & Torr (1978), JGR 83, 969, as tabulated in Schunk & Nagy (2009,
    Ionospheres, ch. 8) *(from memory)*: k = 1.533e-12 - 5.92e-13 x + 8.60e-14 x^2,
    x = Teff/300, so 1.027e-12 cm3 s-1 at 300 K and 5.15e-13 at 1000 K (cold N2, Tv = 300 K)."""
    r = by_id["Oplus_N2"]
    np.testing.assert_allclose(_k(r, Teff=300.0, Tv=300.0), 1.027e-12, rtol=1e-3)
    np.testing.assert_allclose(_k(r, Teff=1000.0, Tv=300.0), 5.150e-13, rtol=2e-3)


def test_o_plus_n2_vibrational_factor_is_the_boltzmann_average_of_level_ratios(by_id):
    """k(Teff, Tv)/k(Teff, cold) equals sum_v p_v(Tv) k_v/k_0 with Boltzmann populations of
    harmonic N2 levels (quantum 3353 K) and the ratios 1, 1, 38, 85, 220 derived from
    Schmeltekopf et al. (1968), J. Chem. Phys. 48, 2966 *(from memory)*."""
    r = by_id["Oplus_N2"]
    ratios = np.array([1.0, 1.0, 38.0, 85.0, 220.0])
    cold = _k(r, Teff=1000.0, Tv=200.0)
    for tv in (1000.0, 2000.0, 3000.0):
        q = np.exp(-3353.0 / tv)
        pops = (1 - q) * q ** np.arange(5)
        np.testing.assert_allclose(_k(r, Teff=1000.0, Tv=tv) / cold, pops @ ratios, rtol=1e-9)
    # The rate rises steeply with Tv (Schmeltekopf et al. 1968).
    assert _k(r, Teff=1000.0, Tv=3000.0) > 5 * cold


def test_o2_plus_dr_is_the_v0_value_with_the_afterglow_exponents(by_id):
    """O2+ + e: 2.4e-7 (300/Te)^0.70 below 1200 K for v = 0 (Peverall et al. 2001, J. Chem.
    Phys. 114, 6679, as in Sheehan & St.-Maurice 2004) *(from memory)*, the Te^-0.56 law above
    1200 K of Mehr & Biondi (1969), Phys. Rev. 181, 264 (abstract); the pieces meet at 1200 K
    to 0.1 %, and f reaches the afterglow value 1.95e-7 at 300 K (Mehr & Biondi 1969)."""
    r = by_id["DR_O2plus"]
    np.testing.assert_allclose(_k(r, Te=300.0), 2.4e-7, rtol=1e-12)
    np.testing.assert_allclose(_k(r, Te=1000.0), 2.4e-7 * 0.3 ** 0.70, rtol=1e-12)
    np.testing.assert_allclose(_k(r, Te=3000.0), 2.4e-7 * 0.25 ** 0.70 * (1200 / 3000) ** 0.56,
                               rtol=1e-3)
    below, above = _k(r, Te=1199.999), _k(r, Te=1200.0)
    np.testing.assert_allclose(below, above, rtol=1e-3)
    f = float(_eval(r.f, r, {"Te": 300.0})[0])
    assert _k(r, Te=300.0) / f <= 1.95e-7


def test_no_plus_dr_uncertainty_covers_the_steeper_published_law(by_id):
    """The one-sigma range k/f .. k f of the NO+ + e total contains 4.2e-7 (300/Te)^0.85 of
    Torr, St.-Maurice & Torr (1977), JGR 82, 3287 (abstract) at every Te from 300 to 3000 K,
    where that law is up to a factor 2.3 below the default 4.0e-7 (300/Te)^0.5."""
    te = np.array([300.0, 500.0, 1000.0, 1500.0, 2000.0, 3000.0])
    alt = 4.2e-7 * (300 / te) ** 0.85
    for rid in ("DR_NOplus_N2D", "DR_NOplus_N4S"):
        r = by_id[rid]
        share = 0.85 if rid.endswith("N2D") else 0.15
        k = _k(r, Te=te) / share
        f = np.broadcast_to(_eval(r.f, r, {"Te": te}), te.shape)
        assert np.all(k / f <= alt * (1 + 1e-12)) and np.all(alt <= k * f), rid
    assert 4.0e-7 * (0.1) ** 0.5 / (4.2e-7 * 0.1 ** 0.85) > 2.1


def test_n2_plus_o2_falls_to_a_minimum_near_1000_k_and_rises_above(by_id):
    """N2+ + O2 (Schunk & Nagy 2009, ch. 8, after McFarland et al. 1973) *(from memory)*:
    5.1e-11 (300/Teff)^1.16 to 1000 K, 1.26e-11 (Teff/1000)^0.67 above; continuous at
    1000 K (0.2 %), with its minimum there, at every level."""
    for v in N2PLUS_LEVELS:
        r = by_id[f"N2plus_O2(v={v})"]
        np.testing.assert_allclose(_k(r, Teff=300.0), 5.1e-11, rtol=1e-12)
        np.testing.assert_allclose(_k(r, Teff=2000.0), 1.26e-11 * 2 ** 0.67, rtol=1e-12)
        np.testing.assert_allclose(_k(r, Teff=1000.0), _k(r, Teff=1000.001), rtol=2e-3)
        t = np.linspace(300.0, 3000.0, 271)
        k = np.broadcast_to(_k(r, Teff=t), t.shape)
        assert abs(t[np.argmin(k)] - 1000.0) <= 10.0
        assert k[-1] > 2 * k[np.argmin(k)]


def test_o_plus_2p_n2_has_the_n_plus_channel_and_o_quenching_spans_a_decade(by_id):
    """O+(2P) + N2 -> N+ + NO at 1.0e-10 (Li et al. 1997, J. Chem. Phys. 106, 1373, value as
    in Schunk & Nagy 2009) *(from memory)* beside the N2+ channel; O+(2P) + O has f with
    f^2 >= 10, the spread of published values (about a factor 10) *(from memory)*."""
    r = by_id["O2P_N2_Nplus"]
    assert sorted(sp.name for sp, _ in r.reactants) == ["N2", "O+(2P)"]
    assert sorted(sp.name for sp, _ in r.products) == ["N+", "NO"]
    np.testing.assert_allclose(_k(r), 1.0e-10, rtol=1e-12)
    f = float(np.ravel(_eval(by_id["O2P_O"].f, by_id["O2P_O"], {}))[0])
    assert f ** 2 >= 10.0


def test_no_plus_and_n2_plus_dr_totals_at_300_and_1000_k(rl, by_id):
    """NO+ + e total 4.0e-7 (300/Te)^0.5 (Walls & Dunn 1974, JGR 79, 1911, as in Schunk &
    Nagy 2009) *(from memory)*; NO+ goes 85 % to N(2D) (Kley et al. 1977) *(from memory)*.
    N2+(v=0) + e: 2.2e-7 (Te/300)^-0.40, the fit to the MQDT rate constant of Guberman 2012,
    J. Chem. Phys. 137, 074309 (abstract read)."""
    for te in (300.0, 1000.0):
        total = _k(by_id["DR_NOplus_N2D"], Te=te) + _k(by_id["DR_NOplus_N4S"], Te=te)
        np.testing.assert_allclose(total, 4.0e-7 * (300 / te) ** 0.5, rtol=1e-12)
        np.testing.assert_allclose(_k(by_id["DR_NOplus_N2D"], Te=te) / total, 0.85, rtol=1e-12)
        n2 = _k(by_id["DR_N2plus(v=0)"], Te=te) + _k(by_id["DR_N2plus_2D2D(v=0)"], Te=te)
        np.testing.assert_allclose(n2, 2.2e-7 * (te / 300) ** -0.40, rtol=1e-3)


def test_ion_neutral_values_at_300_k(by_id):
    """At Teff = 300 K (Schunk & Nagy 2009, ch. 8 tables, *from memory*): O+ + O2 2.15e-11
    (St.-Maurice & Torr polynomial), N2+ + O -> NO+ + N 1.33e-10 (McFarland et al. 1974),
    N2+ + O2 5.1e-11; O+(2D) + N2 1.5e-10 (Li, Huang, Flesch & Ng 1997, value *from memory*)."""
    np.testing.assert_allclose(_k(by_id["Oplus_O2"], Teff=300.0), 2.148e-11, rtol=1e-3)
    np.testing.assert_allclose(_k(by_id["N2plus_O_NOplus(v=0)"], Teff=300.0), 1.33e-10,
                               rtol=1e-12)
    np.testing.assert_allclose(_k(by_id["N2plus_O2(v=0)"], Teff=300.0), 5.1e-11, rtol=1e-12)
    total = sum(_k(by_id[f"O2D_N2(v={v})"]) for v in N2PLUS_LEVELS)
    np.testing.assert_allclose(total, 1.5e-10, rtol=1e-12)


def test_metastable_radiative_rates_match_cited_einstein_coefficients(by_id):
    """Einstein A values (s-1), Wiese, Fuhr & Deters (1996), J. Phys. Chem. Ref. Data
    Monograph 7 *(from memory)*: O+(2D) -> O+ 7.7e-5, O+(2P) -> O+(2D) 0.17 (to 1 %),
    O+(2P) -> O+ 0.047, N(2D) -> N 1.07e-5."""
    np.testing.assert_allclose(_k(by_id["O2D_decay"]), 7.7e-5, rtol=1e-12)
    np.testing.assert_allclose(_k(by_id["O2P_decay_2D"]), 0.17, rtol=0.01)
    np.testing.assert_allclose(_k(by_id["O2P_decay_4S"]), 0.047, rtol=1e-12)
    np.testing.assert_allclose(_k(by_id["N2D_decay"]), 1.07e-5, rtol=1e-12)


def test_rates_are_positive_and_finite_over_ionospheric_temperatures(rl):
    """Every rate law is positive and finite for 200-3000 K in Te, Teff, Tn and Tv (a rate
    coefficient is a positive number; St.-Maurice & Torr polynomials stay positive there)."""
    temps = {name: T_GRID for name in ("Te", "Ti", "Tn", "Teff", "Tv")}
    for r in rl.reactions:
        if r.k.source is not None:
            continue
        k = np.broadcast_to(_eval(r.k, r, temps), T_GRID.shape)
        assert np.all(np.isfinite(k)) and np.all(k > 0), r.id


def test_check_strict_accepts_the_default_list(capsys):
    """`ionochem check --strict` exits 0 on the default list (README.md, 'What it does')."""
    assert cli_main(["check", "--strict", str(LIST_PATH)]) == 0
    err = capsys.readouterr().err
    assert "warning" not in err
