"""CSV reading and level-row rate tables of the laboratory toolkit (ionochem.rates.tables).

References: Python's csv module reading back what is written; the rate-table format of
docs/reaction-list.md (temperature column first, ``_low``/``_high`` bands, integer ``v``).
"""

from __future__ import annotations

import csv

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from ionochem.errors import InputError
from ionochem.rates.tables import (
    family_entry,
    level_of_column,
    read_numeric_csv,
    write_level_table,
)


def test_level_table_round_trip(tmp_path):
    """Rows grouped by level, v first then the temperature, bands beside k; 6 digits."""
    T = np.array([300.0, 1000.0, 3000.0])
    k = {0: T * 1e-10, 1: T * 2e-10}
    lo = {v: 0.9 * k[v] for v in k}
    hi = {v: 1.1 * k[v] for v in k}
    path = write_level_table(tmp_path / "dr.csv", T, k, low=lo, high=hi,
                             comments=["invented test table"])
    with open(path, newline="") as fh:
        rows = [r for r in csv.reader(fh) if not r[0].startswith("#")]
    assert rows[0] == ["v", "Te_K", "k", "k_low", "k_high"]
    assert [r[0] for r in rows[1:]] == ["0", "0", "0", "1", "1", "1"]
    back = read_numeric_csv(path, required=("Te_K", "k"), first="v")
    np.testing.assert_allclose(back["k"], np.r_[k[0], k[1]], rtol=1e-6)
    assert back.lines[0] == 3            # comment, header, first row


def test_family_entry_text():
    """The printed entry reads the table inside a family over the fitted levels."""
    text = family_entry("DR_N2p", "N2+(v) + e -> N + N", "dr.csv", [0, 1, 2],
                        ref="invented")
    assert text == ('DR_N2p(v): N2+(v) + e -> N + N | k = table("dr.csv", "k") | '
                    "levels v = 0..2 | ref = invented")


@pytest.mark.parametrize("name, level", [("v0", 0), ("v=3", 3), ("sigma_v12", 12),
                                         ("sigma_cm2", None), ("energy_eV", None)])
def test_level_of_column(name, level):
    """Level numbers are read from v0, v=3, sigma_v12; other names carry none."""
    assert level_of_column(name) == level


@pytest.mark.parametrize("text, line, words", [
    ("energy_eV,sigma\n0,1\n1,x\n", 3, "is not a number"),
    ("energy_eV,sigma\n0,1\n1\n", 3, "the header has"),
    ("# c\nenergy_eV,energy_eV\n0,1\n", 2, "twice"),
    ("sigma,energy_eV\n0,1\n", 1, "first column"),
    ("energy_eV,sigma\n", 1, "at least"),
    ("energy_eV,sigma\n0,1e999\n", 2, "too large"),
    ("energy_eV,k\n0,1\n", 1, "no column 'sigma'"),
])
def test_bad_csv_is_refused_at_its_line(tmp_path, text, line, words):
    """Each malformed file raises InputError naming the file and the line."""
    path = tmp_path / "bad.csv"
    path.write_text(text)
    with pytest.raises(InputError, match=words) as err:
        read_numeric_csv(path, required=("sigma",), first="energy_eV")
    assert err.value.file == str(path)
    assert err.value.line == line
    assert str(err.value).startswith(f"{path}:{line}: ")


def test_not_utf8_and_missing_file(tmp_path):
    """Latin-1 bytes and a missing file are refused with the file named."""
    path = tmp_path / "latin.csv"
    path.write_bytes("energy_eV,sigma\n0,1 \xe9\n".encode("latin-1"))
    with pytest.raises(InputError, match="UTF-8"):
        read_numeric_csv(path)
    with pytest.raises(InputError, match="not found"):
        read_numeric_csv(tmp_path / "nope.csv")


@settings(max_examples=150, deadline=None,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])
@given(st.text(alphabet=st.sampled_from(list("0123456789.,-+eE#\n\r\t \"abv_xé\x00")),
               max_size=200))
def test_any_text_is_read_or_refused_with_an_input_error(tmp_path, text):
    """Arbitrary text (hypothesis) is either read as numbers or refused with InputError
    naming the file: never another exception."""
    path = tmp_path / "fuzz.csv"
    path.write_text(text, encoding="utf-8")
    try:
        t = read_numeric_csv(path, required=("v",))
    except InputError as exc:
        assert exc.file == str(path)
    else:
        assert "v" in t.header
        assert all(np.isfinite(c).all() for c in t.columns.values())
