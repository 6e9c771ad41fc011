"""One reader of the commented-CSV table format (ionochem/io/csvtable.py).

The format (docs/scenario.md "Profile tables", docs/reaction-list.md "Rate tables",
docs/observations.md, docs/rates.md): UTF-8, ``#`` comment lines and blank lines anywhere,
one header row, then one row per line. The reference for the line numbers is the file as a
text editor counts it (1-based, comments included), written out by hand in each test.
"""

from __future__ import annotations

import pytest

from ionochem.errors import InputError, ReactionListError, ScenarioError
from ionochem.io.csvtable import TableProblem, number_cell, parse_number, split_table
from ionochem.io.observations import load_observations
from ionochem.io.tables import read_csv_columns, read_profile_table
from ionochem.mechanism.ratetables import clear_cache, load_rate_table
from ionochem.rates.tables import read_numeric_csv


def test_comments_and_blank_lines_anywhere_keep_the_file_lines():
    """Line 1 comment, 2 blank, 3 header, 4 row, 5 comment, 6 row: the rows are lines 4
    and 6 and the header line 3, counted as an editor counts them."""
    t = split_table("# source: invented\n\n a , b\n1, 2\n  # note\n3,4\n")
    assert t.header == ("a", "b") and t.header_line == 3
    assert t.rows == (("1", "2"), ("3", "4")) and t.lines == (4, 6)


@pytest.mark.parametrize("text, line, words", [
    ("", None, "no header row"),
    ("# only\n\n", None, "no header row"),
    ("a,,b\n1,2,3\n", 1, "column 2 of the header has no name"),
    ("#\na,a\n1,2\n", 2, "column 'a' appears twice in the header"),
    ("a,b\n1,2\n\n3\n", 4, "1 cells but the header has 2 columns"),
    ("a,b\n1,2,3\n", 2, "3 cells but the header has 2 columns"),
    ("a,b\n" + "9" * 200_000 + ",1\n", 2, "the row is not CSV (field larger than field limit"),
])
def test_problems_carry_their_line(text, line, words):
    """Each problem is a TableProblem at the line a reader of the file would point to."""
    with pytest.raises(TableProblem) as info:
        split_table(text)
    assert info.value.line == line and words in info.value.message


def test_too_many_rows_are_refused_before_parsing():
    with pytest.raises(TableProblem, match="3 rows, more than the 2 observations"):
        split_table("a\n1\n2\n3\n", max_rows=2, row_word="observations")


@pytest.mark.parametrize("cell, value", [("1.5e6", 1.5e6), ("-.5", -0.5), ("+3", 3.0),
                                         (" 7 ", 7.0)])
def test_ascii_numbers_are_read(cell, value):
    assert parse_number(cell) == value


@pytest.mark.parametrize("cell", ["", "nan", "inf", "1_000", "\u0661", "1,5", "0x10", "e5"])
def test_other_cells_are_not_numbers(cell):
    """Python's float() takes 'nan', 'inf', '1_000' and the Arabic-Indic digit one; a table
    cell may not."""
    assert parse_number(cell) is None
    with pytest.raises(ValueError, match="is not a number"):
        number_cell(cell, "k")


def test_overflow_is_too_large():
    with pytest.raises(ValueError, match="too large"):
        number_cell("1e999", "k")


BAD_ROW = "4 cells but the header has 3 columns"


def test_every_table_kind_reports_the_same_problem_at_the_same_line(tmp_path):
    """A row with one cell too many on line 4 (after a comment line and the header): the
    profile reader, the packaged-table reader, the laboratory toolkit's reader, the rate
    table reader and the observation reader all name line 4 with the same words."""
    def write(name, header, row_ok, row_bad):
        path = tmp_path / name
        path.write_text(f"# invented\n{header}\n{row_ok}\n{row_bad}\n")
        return path

    p = write("profile.csv", "altitude_km,Te_K,Ti_K", "100,300,300", "200,900,800,1")
    with pytest.raises(InputError) as e1:
        read_csv_columns(p)
    assert (e1.value.line, e1.value.message) == (4, BAD_ROW)
    with pytest.raises(ScenarioError) as e2:
        read_profile_table(p, [150.0], where="temperatures.table", scenario_file="s.toml")
    assert f"profile.csv line 4: {BAD_ROW}" in e2.value.message
    with pytest.raises(InputError) as e3:
        read_numeric_csv(p)
    assert (e3.value.line, e3.value.message) == (4, BAD_ROW)
    r = write("rates.csv", "Te,k,x", "300,1e-7,1", "400,1e-7,1,2")
    clear_cache()
    with pytest.raises(ReactionListError) as e4:
        load_rate_table(r, "k", file="list.reactions", line=9, name="rates.csv")
    assert e4.value.line == 9 and f"line 4: {BAD_ROW}" in e4.value.message
    o = write("obs.csv", "altitude_km,species,density_cm3,sigma_cm3", "150,e,1e5,1e4",
              "200,e,2e5,1e4,9")
    with pytest.raises(InputError) as e5:
        load_observations(o)
    assert e5.value.line == 4 and "5 cells but the header has 4 columns" in e5.value.message
