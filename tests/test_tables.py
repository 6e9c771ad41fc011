"""CSV profile tables: reading, checks and interpolation onto the altitude grid.

The table values are invented test inputs. References: the isothermal barometric law
n(z) = n0 exp(-(z - z0)/H) (e.g. Chamberlain & Hunten 1987, Theory of Planetary Atmospheres,
2nd ed., Academic Press, ch. 1), for which log-linear interpolation is exact; straight lines,
for which linear interpolation is exact; numpy.interp as a reference implementation of
piecewise-linear interpolation; and the table format of docs/scenario.md.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from ionochem.errors import InputError, ScenarioError
from ionochem.io.tables import read_csv_columns, read_profile_table


def _write(path, header, rows, comments=()):
    lines = [f"# {c}" for c in comments] + [",".join(header)]
    lines += [",".join(f"{v:.17g}" if not isinstance(v, str) else v for v in row)
              for row in rows]
    path.write_text("\n".join(lines) + "\n")
    return path


def test_log_linear_interpolation_reproduces_barometric_profile_exactly(tmp_path):
    """An isothermal exponential profile n0 exp(-(z-z0)/H) (barometric law, Chamberlain &
    Hunten 1987) tabulated every 20 km is recovered on a 2.5 km grid to rounding, which a
    linear interpolation would miss by tens of per cent."""
    z_tab = np.arange(100.0, 401.0, 20.0)
    H, n0 = 35.0, 3e11
    _write(tmp_path / "n.csv", ["altitude_km", "O"],
           np.column_stack([z_tab, n0 * np.exp(-(z_tab - 100) / H)]))
    grid = np.arange(100.0, 400.01, 2.5)
    out = read_profile_table(tmp_path / "n.csv", grid, where="neutrals.table")
    np.testing.assert_allclose(out["O"], n0 * np.exp(-(grid - 100) / H), rtol=1e-12)


def test_positive_column_is_interpolated_geometrically_between_nodes(tmp_path):
    """Midway between 1 and 100 the log-linear rule gives the geometric mean, 10 (analytic),
    not the arithmetic mean 50.5."""
    _write(tmp_path / "t.csv", ["altitude_km", "X"], [[100, 1.0], [200, 100.0]])
    out = read_profile_table(tmp_path / "t.csv", [150.0], where="production.table")
    assert out["X"][0] == pytest.approx(10.0, rel=1e-12)


def test_column_with_zero_is_interpolated_linearly_and_exactly_for_a_line(tmp_path):
    """A column with a zero cannot be interpolated in log; it is linear, which reproduces
    the straight line 3 (z - 100) exactly."""
    z = np.array([100.0, 150.0, 230.0, 300.0])
    _write(tmp_path / "p.csv", ["altitude_km", "P1"], np.column_stack([z, 3 * (z - 100)]))
    grid = np.linspace(100, 300, 41)
    out = read_profile_table(tmp_path / "p.csv", grid, where="production.table",
                             nonnegative=True)
    np.testing.assert_allclose(out["P1"], 3 * (grid - 100), rtol=1e-12, atol=1e-12)


def test_negative_values_are_linear_without_the_nonnegative_flag(tmp_path):
    """A signed column (no density) is allowed without the flag and matches numpy.interp,
    the reference piecewise-linear interpolation."""
    z = np.array([100.0, 200.0, 300.0])
    v = np.array([-5.0, 2.0, 7.0])
    _write(tmp_path / "s.csv", ["altitude_km", "V"], np.column_stack([z, v]))
    grid = np.array([100.0, 125.0, 260.0, 300.0])
    out = read_profile_table(tmp_path / "s.csv", grid, where="x.table")
    np.testing.assert_allclose(out["V"], np.interp(grid, z, v), rtol=1e-14)


def test_decreasing_table_gives_the_same_profile_as_increasing(tmp_path):
    """docs/scenario.md: altitude may be strictly decreasing; the result equals that of the
    same table written upwards."""
    z = np.arange(100.0, 301.0, 50.0)
    n = 1e10 * np.exp(-(z - 100) / 50)
    _write(tmp_path / "up.csv", ["altitude_km", "N2"], np.column_stack([z, n]))
    _write(tmp_path / "down.csv", ["altitude_km", "N2"], np.column_stack([z, n])[::-1])
    grid = np.arange(100.0, 300.1, 7.0)
    up = read_profile_table(tmp_path / "up.csv", grid, where="neutrals.table")
    down = read_profile_table(tmp_path / "down.csv", grid, where="neutrals.table")
    np.testing.assert_array_equal(up["N2"], down["N2"])


def test_columns_selects_and_orders_the_result(tmp_path):
    """docs/scenario.md: with columns only those are returned, in the order asked; with
    None every column except altitude_km."""
    _write(tmp_path / "t.csv", ["altitude_km", "Te_K", "Ti_K", "Tv_K"],
           [[100, 300, 290, 280], [200, 1500, 900, 850]])
    some = read_profile_table(tmp_path / "t.csv", [150.0], columns=["Ti_K", "Te_K"],
                              where="temperatures.table")
    assert list(some) == ["Ti_K", "Te_K"]
    every = read_profile_table(tmp_path / "t.csv", [150.0], where="temperatures.table")
    assert list(every) == ["Te_K", "Ti_K", "Tv_K"]


def test_missing_column_error_lists_the_columns_present(tmp_path):
    """docs/scenario.md: a required column that is absent is an error listing those
    present, at the scenario key, with the scenario as the error's file."""
    _write(tmp_path / "t.csv", ["altitude_km", "Ti_K"], [[100, 300], [200, 900]])
    with pytest.raises(ScenarioError) as info:
        read_profile_table(tmp_path / "t.csv", [150.0], columns=["Te_K", "Ti_K"],
                           where="temperatures.table", scenario_file="run.toml")
    err = info.value
    assert str(err).startswith("run.toml: temperatures.table: t.csv: ")
    assert "missing column Te_K" in err.message and "altitude_km, Ti_K" in err.message


def test_bad_cell_is_reported_with_table_name_and_file_line(tmp_path):
    """docs/scenario.md: a bad cell names the table and its line (comment lines counted),
    at the scenario key."""
    (tmp_path / "n.csv").write_text("# invented\n# test\naltitude_km,O\n100,1e10\n\n"
                                    "150,3.0e9x\n200,1e9\n")
    with pytest.raises(ScenarioError) as info:
        read_profile_table(tmp_path / "n.csv", [150.0], where="neutrals.table",
                           scenario_file="s.toml")
    assert info.value.key == "neutrals.table" and info.value.file == "s.toml"
    assert "n.csv line 6: the cell in column 'O' is not a number" in str(info.value)
    assert "3.0e9x" not in str(info.value)     # no content of the file is quoted


@pytest.mark.parametrize("cell", ["nan", "inf", "-inf", ""])
def test_non_finite_or_empty_cells_are_rejected(tmp_path, cell):
    """docs/scenario.md: every cell must be a finite number (Python reads 'nan' and 'inf'
    as floats, which a table must not carry)."""
    (tmp_path / "n.csv").write_text(f"altitude_km,O\n100,1\n200,{cell}\n")
    with pytest.raises(ScenarioError, match="line 3"):
        read_profile_table(tmp_path / "n.csv", [150.0], where="neutrals.table")


def test_grid_outside_table_names_the_point_and_the_range(tmp_path):
    """docs/scenario.md: tables are never extrapolated; the error names the grid point and
    the table's altitude range."""
    _write(tmp_path / "n.csv", ["altitude_km", "O"], [[100, 1e10], [300, 1e8]])
    with pytest.raises(ScenarioError) as info:
        read_profile_table(tmp_path / "n.csv", [200.0, 350.0], where="neutrals.table")
    assert "grid altitude 350 km is outside the table's altitude range 100 to 300 km" \
        in str(info.value)
    with pytest.raises(ScenarioError, match="grid altitude 99 km"):
        read_profile_table(tmp_path / "n.csv", [99.0, 200.0], where="neutrals.table")


def test_grid_may_exceed_the_table_by_rounding_only(tmp_path):
    """docs/scenario.md, 'Profile tables': 1e-9 km beyond the table end is rounding (accepted,
    value of the end node); 1e-6 km is extrapolation (rejected)."""
    _write(tmp_path / "n.csv", ["altitude_km", "O"], [[100, 1e10], [300, 1e8]])
    out = read_profile_table(tmp_path / "n.csv", [300.0 + 5e-10], where="neutrals.table")
    assert out["O"][0] == pytest.approx(1e8, rel=1e-12)
    with pytest.raises(ScenarioError, match="outside"):
        read_profile_table(tmp_path / "n.csv", [300.0 + 1e-6], where="neutrals.table")


def test_altitudes_not_monotonic_are_rejected_at_their_line(tmp_path):
    """docs/scenario.md: altitude_km strictly increasing or decreasing; a repeat or reversal
    is reported at the offending line."""
    (tmp_path / "n.csv").write_text("altitude_km,O\n100,1\n200,2\n200,3\n")
    with pytest.raises(ScenarioError, match="line 4"):
        read_profile_table(tmp_path / "n.csv", [150.0], where="neutrals.table")
    (tmp_path / "m.csv").write_text("altitude_km,O\n100,1\n200,2\n150,3\n")
    with pytest.raises(ScenarioError, match="line 4.*strictly"):
        read_profile_table(tmp_path / "m.csv", [150.0], where="neutrals.table")


def test_first_column_must_be_altitude(tmp_path):
    """docs/scenario.md: the first column of a profile is altitude_km."""
    (tmp_path / "n.csv").write_text("alt,O\n100,1\n200,2\n")
    with pytest.raises(ScenarioError, match="first column must be 'altitude_km'"):
        read_profile_table(tmp_path / "n.csv", [150.0], where="neutrals.table")


def test_negative_density_is_rejected_with_the_flag(tmp_path):
    """docs/scenario.md: densities and rates must be >= 0 (nonnegative flag)."""
    (tmp_path / "n.csv").write_text("altitude_km,O,N2\n100,1e9,1e10\n200,-1,1e9\n")
    with pytest.raises(ScenarioError, match=r"line 3.*'O'.*non-negative"):
        read_profile_table(tmp_path / "n.csv", [150.0], where="neutrals.table",
                           nonnegative=True)
    out = read_profile_table(tmp_path / "n.csv", [150.0], where="neutrals.table",
                             columns=["N2"], nonnegative={"N2"})
    assert out["N2"][0] == pytest.approx(np.sqrt(1e10 * 1e9))


def test_temperature_column_must_be_positive(tmp_path):
    """docs/scenario.md: temperatures (columns ending _K) must be > 0 K."""
    (tmp_path / "t.csv").write_text("altitude_km,Te_K\n100,300\n200,0\n")
    with pytest.raises(ScenarioError, match="positive temperature"):
        read_profile_table(tmp_path / "t.csv", [150.0], where="temperatures.table")


def test_missing_table_file_is_an_error_at_the_key(tmp_path):
    """A table that vanished after loading is an error at its key, not a traceback."""
    with pytest.raises(ScenarioError) as info:
        read_profile_table(tmp_path / "gone.csv", [150.0], where="solve.electron_table",
                           scenario_file="s.toml")
    assert str(info.value).startswith("s.toml: solve.electron_table: gone.csv: ")


def test_csv_reader_skips_comments_and_keeps_file_line_numbers(tmp_path):
    """read_csv_columns returns the header, a (row, column) array and each row's 1-based
    file line, counting comment and blank lines (the file's own numbering)."""
    (tmp_path / "s.csv").write_text("\ufeff# spectrum, invented\n\n"
                                    "wavelength_A, flux\n# mid comment\n100, 2.5\n"
                                    "200, 3.5\n")
    header, data, lines = read_csv_columns(tmp_path / "s.csv")
    assert header == ["wavelength_A", "flux"]
    np.testing.assert_array_equal(data, [[100, 2.5], [200, 3.5]])
    np.testing.assert_array_equal(lines, [5, 6])


def test_csv_reader_without_key_reports_file_and_line(tmp_path):
    """Without a scenario key the error is file:line: message (errors.py format)."""
    (tmp_path / "s.csv").write_text("a,b\n1,2\n3\n")
    with pytest.raises(InputError) as info:
        read_csv_columns(tmp_path / "s.csv")
    assert str(info.value) == f"{tmp_path / 's.csv'}:3: 1 cells but the header has 2 columns"


@pytest.mark.parametrize("text, message", [
    ("a,a\n1,2\n", "appears twice"),
    ("a,,b\n1,2,3\n", "has no name"),
    ("# only a comment\n", "no header"),
    ("a,b\n", "no data rows"),
])
def test_csv_reader_rejects_malformed_headers(tmp_path, text, message):
    """docs/scenario.md: one header row of distinct, non-empty names and at least one row."""
    (tmp_path / "s.csv").write_text(text)
    with pytest.raises(InputError, match=message):
        read_csv_columns(tmp_path / "s.csv")


@settings(max_examples=60, deadline=None)
@given(st.lists(st.floats(1e-3, 1e15), min_size=2, max_size=12),
       st.floats(0.0, 1.0))
def test_interpolated_value_lies_between_neighbouring_nodes(tmp_path_factory, values, frac):
    """Property of any monotone-between-nodes interpolation (linear in log or in value): a
    point between two nodes takes a value between theirs, and nodes are reproduced."""
    path = tmp_path_factory.mktemp("prop") / "t.csv"
    z = 100.0 + 10.0 * np.arange(len(values))
    _write(path, ["altitude_km", "X"], np.column_stack([z, values]))
    i = len(values) // 2 - 1
    point = z[i] + frac * 10.0
    out = read_profile_table(path, np.concatenate([z, [point]]), where="x.table")["X"]
    np.testing.assert_allclose(out[:-1], values, rtol=1e-12)
    lo, hi = sorted((values[i], values[i + 1]))
    assert lo * (1 - 1e-12) <= out[-1] <= hi * (1 + 1e-12)
