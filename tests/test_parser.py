"""Reaction lists: the format of docs/reaction-list.md and the bad-input corpus."""

import csv
import hashlib
from pathlib import Path

import numpy as np
import pytest

from ionochem import Error, ReactionListError
from ionochem.mechanism.parser import parse_reaction_list, parse_reaction_text

BAD = Path(__file__).parent / "bad_inputs"
MANIFEST = list(csv.DictReader((BAD / "reactions.tsv").open(encoding="utf-8"), delimiter="\t"))

GOOD = """\
# invented demonstration list (values invented for the test)
@default f = 1.3
P1: O -> O+ + e | k = photo
P2: N2 -> N2+(v=0) + e | k = 0.5*photoelectron   # half of the channel
R1: O+(4S) + N2 -> NO+ + N(4S) | k = 1.2e-12*(300/Teff)^0.45 \\
    | f = 1.2*exp(100*abs(1/Ti - 1/298)) | ref = invented for the test
DR(v): N2+(v) + e -> 2 N | k = 2.2e-7*(300/Te)^0.39*(1 + 0.1*v) | levels v = 0..2
REL(v): N2+(v) + N2 -> N2+(v-1) + N2 | k = 1e-11 | levels v = 1..2
R3: O + O + M -> O2 + M | k = 4.7e-33*(300/Tn)^2
R4: O(1S) -> O(1D) + hv | k = 1.26
R5: O(1D) -> O | k = 6.8e-3
"""


def test_manifest_lists_every_reaction_file_in_the_corpus():
    """Every tests/bad_inputs/*.reactions file has one manifest row and there are >= 30."""
    files = sorted(p.name for p in BAD.glob("*.reactions"))
    assert sorted(r["file"] for r in MANIFEST) == files
    assert len(files) >= 30


@pytest.mark.parametrize("row", MANIFEST, ids=[r["file"] for r in MANIFEST])
def test_bad_input_is_refused_at_the_expected_line(row):
    """Each malformed list is a ReactionListError at the line the manifest gives, with the
    manifest's words in the message, printed as 'FILE:LINE: ...' (docs/reaction-list.md, 'Error
    messages')."""
    path = str(BAD / row["file"])
    with pytest.raises(ReactionListError) as info:
        parse_reaction_list(path)
    err = info.value
    assert err.line == int(row["line"])
    assert row["contains"] in err.message.lower()
    assert str(err).startswith(f"{path}:{row['line']}: ")


def test_good_list_parses_with_canonical_species_and_units():
    """The documented example: ground states bare, hv dropped, units by molecularity
    (s-1, cm3 s-1, cm6 s-1, docs/reaction-list.md, 'Units of k by molecularity'), continuation
    keeps the first line."""
    rl = parse_reaction_text(GOOD, path="demo.reactions")
    ids = [r.id for r in rl.reactions]
    assert ids == ["P1", "P2", "R1", "DR(v=0)", "DR(v=1)", "DR(v=2)", "REL(v=1)",
                   "REL(v=2)", "R3", "R4", "R5"]
    r1 = rl["R1"]
    assert r1.equation == "O+ + N2 -> NO+ + N" and r1.line == 5
    assert r1.ref == "invented for the test"
    assert r1.k_units == "cm3 s-1" and r1.f is not None
    assert rl["P1"].k_units == "s-1" and rl["P1"].source == "photo"
    assert rl["R3"].k_units == "cm6 s-1" and rl["R3"].termolecular
    assert [(s.name, n) for s, n in rl["R3"].reactants] == [("O", 2), ("M", 1)]
    assert [s.name for s, _ in rl["R4"].products] == ["O(1D)"]
    assert rl.default_f.value == pytest.approx(1.3)
    assert rl["R5"].f is None


def test_families_expand_over_levels_with_level_bound():
    """levels v = 0..2 gives DR(v=0..2); N2+(v-1) becomes the next lower level; v in k is
    the level, so k(v=2) = 1.2 k(v=0) by the expression's own arithmetic."""
    rl = parse_reaction_text(GOOD)
    assert rl.families == {"DR(v)": ("DR(v=0)", "DR(v=1)", "DR(v=2)"),
                           "REL(v)": ("REL(v=1)", "REL(v=2)")}
    rel = rl["REL(v=2)"]
    assert [s.name for s, _ in rel.products] == ["N2+(v=1)", "N2"]
    assert rel.family == "REL(v)" and rel.level == 2
    env = {"Te": np.array([300.0, 1000.0])}
    k0 = rl["DR(v=0)"].k.evaluate(env)
    k2 = rl["DR(v=2)"].k.evaluate(env)
    np.testing.assert_allclose(k2, 1.2 * k0, rtol=1e-14)
    np.testing.assert_allclose(k0, 2.2e-7 * (300 / env["Te"]) ** 0.39, rtol=1e-14)


def test_sha256_is_of_the_file_bytes(tmp_path):
    """ReactionList.sha256 equals hashlib's SHA-256 of the bytes on disk."""
    path = tmp_path / "a.reactions"
    path.write_bytes(GOOD.encode())
    rl = parse_reaction_list(path)
    assert rl.sha256 == hashlib.sha256(GOOD.encode()).hexdigest()
    assert rl.path == str(path)


def test_table_paths_resolve_against_the_reaction_file_folder(tmp_path):
    """table("rates/dr.csv", ...) is read from the reaction file's folder, not the cwd."""
    (tmp_path / "rates").mkdir()
    (tmp_path / "rates" / "dr.csv").write_text("# invented\nTe,k\n300,3e-7\n3000,1e-7\n")
    (tmp_path / "a.reactions").write_text(
        'DR: O2+ + e -> O + O | k = table("rates/dr.csv", "k")  # a comment\n')
    rl = parse_reaction_list(tmp_path / "a.reactions")
    assert rl["DR"].k.evaluate({"Te": np.array([300.0])}) == pytest.approx(3e-7)


def test_hash_inside_a_quoted_table_name_is_not_a_comment(tmp_path):
    """A '#' inside double quotes belongs to the string (docs/reaction-list.md)."""
    (tmp_path / "a#1.csv").write_text("Te,k\n300,3e-7\n3000,1e-7\n")
    rl = parse_reaction_text('DR: O2+ + e -> O + O | k = table("a#1.csv", "k") # note\n',
                             base_dir=tmp_path)
    assert rl["DR"].k.variables == {"Te"}


def test_warning_for_species_produced_but_never_lost():
    """N(2D) produced and never a reactant gives a warning at the producing line."""
    rl = parse_reaction_text("R1: NO+ + e -> N(2D) + O | k = 4e-7\n"
                             "R2: O + e -> O + e | k = 1e-12\n", path="w.reactions")
    assert any("N(2D)" in w and w.line == 1 and w.startswith("w.reactions:1:")
               for w in rl.warnings)
    assert not any("'O'" in w or w.message.startswith("O ") for w in rl.warnings)


@pytest.mark.parametrize("text, words", [
    ("R1: O+ + N2 -> NO+ + N | k = 1e-12 | f = photo", "only be used in k"),
    ("R1: O+ + e -> O | k = 1e-12*v", "not a family"),
    ("R1: O + O + O + O -> O2 + O2 | k = 1", "4 reactants"),
    ("R1: O + M -> O + M + M | k = 1", "only once"),
    ("R1: O -> O + M | k = 1", "M (third body) on the right"),
    ("R1: O+ + e -> O -> O | k = 1", "more than one '->'"),
    ("R1: O+ + e -> O | k = 1 | levels w = 0..1", "levels v = A..B"),
    ("DR(v): N2+(v) + e -> N + N | k = 1 | levels v = 0..1000", "at most"),
    ("@default f = 1.2*v\nR1: O+ + e -> O | k = 1", "cannot use the family level"),
    ("@default f = 1.2\n@default f = 1.3", "second"),
    ("R1: O+ + e -> O | k = 1\nR1(v): N2+(v) + e -> N + N | k = 1 | levels v = 0..1",
     "duplicate id"),
    ("R1: O+ + e -> O | k = 1 | ref =", "field 'ref' is empty"),
    ("R1: O+ + e -> O | k 1", "expected '='"),
    ("R1: O+ + e -> O | 3", "expected a field"),
    ("R1: O+ + e -> O | k = 1 |", "empty field"),
    ("O+ + e -> O | k = 1", "missing reaction id"),
    ("R1: 0 O+ + e -> O | k = 1", "whole number"),
    ("R1: O+ + e -> O\r| k = 1", "carriage return"),
    ("R1: O+ + e -> O | k = 1\u2028", "control character U+2028"),
])
def test_more_malformed_entries(text, words):
    """Further rules of docs/reaction-list.md, each refused with a readable message."""
    with pytest.raises(ReactionListError) as info:
        parse_reaction_text(text, path="m.reactions")
    assert words in info.value.message
    assert info.value.file == "m.reactions" and info.value.line >= 1


def test_blank_line_ends_a_continued_entry_and_crlf_is_accepted():
    """Windows line ends are plain line ends; a blank line after '\\' ends the entry."""
    rl = parse_reaction_text("R1: O+ + e -> O | k = 1 \\\r\n\r\nR2: O2+ + e -> O + O | k = 2\r\n")
    assert [r.line for r in rl.reactions] == [1, 3]


def test_missing_file_is_a_project_error(tmp_path):
    """A reaction list that does not exist is an ionochem.Error naming the file."""
    with pytest.raises(Error, match="file not found") as info:
        parse_reaction_list(tmp_path / "none.reactions")
    assert info.value.file.endswith("none.reactions")
