"""Species names: parsing, canonical ground states, masses."""

import math

import pytest
from scipy import constants

from ionochem.cli.options import parse_budget as option_budget
from ionochem.errors import InputError
from ionochem.io.scenario import parse_budget as scenario_budget
from ionochem.species import (
    ATOMIC_MASS_AMU,
    ELECTRON_MASS_AMU,
    format_elements,
    parse_species,
    parse_species_at,
)


def test_electron_mass_matches_codata_in_scipy():
    """Electron mass in u: CODATA recommended value as shipped in scipy.constants."""
    ref = constants.physical_constants["electron mass in u"][0]
    assert ELECTRON_MASS_AMU == pytest.approx(ref, rel=1e-9)


@pytest.mark.parametrize("symbol, weight", [
    ("H", 1.008), ("He", 4.0026), ("C", 12.011), ("N", 14.007), ("O", 15.999),
    ("Ar", 39.95), ("Na", 22.990), ("Mg", 24.305), ("Fe", 55.845), ("Si", 28.085),
])
def test_atomic_weights_match_ciaaw_abridged_values(symbol, weight):
    """Abridged standard atomic weights, CIAAW (Prohaska et al. 2022, Pure Appl. Chem. 94,
    573, table of abridged values), to the 5 significant figures quoted there."""
    assert ATOMIC_MASS_AMU[symbol] == pytest.approx(weight, rel=2e-5)


def test_molecular_ion_mass_is_atoms_minus_one_electron():
    """Mass of NO+ = m(N) + m(O) - m_e (mass conservation; CIAAW weights, CODATA m_e)."""
    sp = parse_species("NO+")
    ref = 14.007 + 15.999 - constants.physical_constants["electron mass in u"][0]
    assert sp.mass_amu == pytest.approx(ref, rel=1e-6)
    assert sp.charge == 1
    assert sp.elements == (("N", 1), ("O", 1))


def test_water_and_carbon_dioxide_elements_are_counted():
    """H2O has two H and one O, CO2 one C and two O (chemical formulas)."""
    assert parse_species("H2O").elements == (("H", 2), ("O", 1))
    assert parse_species("CO2").elements == (("C", 1), ("O", 2))
    assert parse_species("CO2").mass_amu == pytest.approx(12.011 + 2 * 15.999, rel=1e-6)


@pytest.mark.parametrize("written, canonical", [
    ("O+(4S)", "O+"), ("N(4S)", "N"), ("O(3P)", "O"), ("N+(3P)", "N+"),
    ("O+(2D)", "O+(2D)"), ("N(2D)", "N(2D)"), ("O2+(X)", "O2+(X)"),
])
def test_ground_terms_are_written_bare(written, canonical):
    """Ground terms O+ 4S, O 3P, N 4S, N+ 3P (NIST Atomic Spectra Database ground levels)
    are dropped from the canonical name; other terms stay as written."""
    assert parse_species(written).name == canonical


def test_vibrational_and_electronic_state_parts():
    """State 'electronic,v=N': base drops only the vibrational part (docs/internals.md, Species)."""
    sp = parse_species("O2+(a,v=3)")
    assert (sp.electronic, sp.vib, sp.state, sp.base) == ("a", 3, "a,v=3", "O2+(a)")
    n2 = parse_species("N2+(v=1)")
    assert (n2.electronic, n2.vib, n2.base, n2.name) == (None, 1, "N2+", "N2+(v=1)")
    swapped = parse_species("O2+(v=2,b)")
    assert swapped.name == "O2+(b,v=2)"


def test_special_names():
    """e is an electron (charge -1, electron mass), M a third body, hv a photon."""
    e = parse_species("e")
    assert e.charge == -1 and e.elements == () and e.is_electron
    assert e.mass_amu == pytest.approx(constants.physical_constants["electron mass in u"][0])
    m = parse_species("M")
    assert m.is_third_body and m.charge == 0 and math.isnan(m.mass_amu)
    assert parse_species("hv").is_photon


def test_double_charges():
    """N2++ has charge +2, O- charge -1, O-- charge -2."""
    assert parse_species("N2++").charge == 2
    assert parse_species("O-").charge == -1
    assert parse_species("O--").charge == -2


@pytest.mark.parametrize("bad, words", [
    ("Xx+", "unknown element"), ("N2++++", "use +, ++, - or --"),
    ("O+(", "unclosed parenthesis"), ("O+()", "empty state"), ("n2", "element symbol"),
    ("N2+2", "repeated signs"), ("N2+(v=-1)", "whole number"), ("O(v=1)", "atom"),
    ("N2+(v)", "outside a family"), ("N1", "without the number"), ("N2+-", "mixed"),
    ("O+(2D)x", "after the state"), ("", "empty"), ("e-", "write the electron"),
    ("O+(2D,3P)", "two electronic"), ("N2(v=1,v=2)", "two vibrational"),
])
def test_malformed_names_raise_value_error(bad, words):
    """Names outside the documented rules (docs/reaction-list.md, species names) fail."""
    with pytest.raises(ValueError, match=None) as info:
        parse_species(bad)
    assert words in str(info.value)


def test_format_elements_sorts_and_drops_unit_counts():
    """Element totals read like a formula: N2 O (sorted, count 1 omitted)."""
    assert format_elements({"O": 1, "N": 2}) == "N2 O"
    assert format_elements({}) == "nothing"


@pytest.mark.parametrize("text, expected", [
    ("N2+@200", ("N2+", 200.0)), ("O+(4S)@150.5", ("O+", 150.5)),
    (" O+(total) @ 250 ", ("O+(total)", 250.0)), ("N2+(v=1)@2e2", ("N2+(v=1)", 200.0)),
])
def test_species_at_reads_the_canonical_name_and_the_height(text, expected):
    """docs/scenario.md and docs/commands.md: SPECIES@KM, species written as in reaction
    lists (docs/reaction-list.md, 'Species names': O+(4S) is written O+)."""
    assert parse_species_at(text) == expected


@pytest.mark.parametrize("bad, words", [
    ("N2+", "is not SPECIES@KM"), ("N2+@", "is not SPECIES@KM"), ("@200", "names no species"),
    ("Xq@200", "Xq"), ("N2+@high", "is not a number"), ("N2+@1_0", "is not a number"),
    ("N2+@-5", "non-negative"), ("N2+@inf", "is not a number"),
])
def test_species_at_refuses_in_the_same_words_for_option_and_scenario(bad, words):
    """One reader: `--budget` and the scenario's [output] budget give the same message."""
    with pytest.raises(ValueError, match=words) as direct:
        parse_species_at(bad)
    with pytest.raises(ValueError) as scen:
        scenario_budget(bad)
    with pytest.raises(InputError) as opt:
        option_budget(bad)
    assert str(scen.value) == str(direct.value)
    assert opt.value.file == "--budget" and opt.value.message == f"budget {direct.value}"
