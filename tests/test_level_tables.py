"""Level-row rate tables: a ``v`` column gives each family level its own k(T) and band.

The reference values are analytic: each level's rows tabulate an exact power law
k_v(Te) = a_v (300/Te)^b_v, which log-log interpolation must reproduce exactly; the error
cases follow the format rules of docs/reaction-list.md (errors at the referring file:line, with the
table's name).
"""

from __future__ import annotations

import numpy as np
import pytest

from ionochem import ReactionListError
from ionochem.cli import main
from ionochem.mechanism.expressions import compile_expression
from ionochem.mechanism.parser import parse_reaction_text
from ionochem.mechanism.ratetables import clear_cache, load_rate_table

#: Invented per-level power laws (a_v in cm3 s-1, b_v): test data only.
LAWS = {0: (2.0e-7, 0.39), 1: (3.0e-7, 0.5), 2: (1.0e-7, 0.2)}
TEMPS = (300.0, 1000.0, 3000.0)


def _write_levels(folder, name="dr_levels.csv", laws=LAWS, interleave=False):
    rows = [(v, t, a * (300 / t) ** b) for v, (a, b) in laws.items() for t in TEMPS]
    if interleave:
        rows.sort(key=lambda r: (r[1], r[0]))
    lines = ["# invented per-level test table: exact power laws per level",
             "v,Te_K,k,k_low,k_high"]
    lines += [f"{v},{t:g},{k:.17g},{k / (1.5 + v):.17g},{k * (1.5 + v):.17g}"
              for v, t, k in rows]
    (folder / name).write_text("\n".join(lines) + "\n")
    return folder / name


@pytest.fixture
def level_table(tmp_path):
    clear_cache()
    _write_levels(tmp_path)
    return tmp_path


@pytest.mark.parametrize("interleave", [False, True])
def test_each_family_level_reads_its_own_rows(tmp_path, interleave):
    """A family over v = 0..2 with k = table(...) of a level-row table gives level v exactly
    the power law a_v (300/Te)^b_v of its rows (analytic: log-log interpolation is exact for
    a power law), whether the rows are grouped by level or interleaved."""
    clear_cache()
    _write_levels(tmp_path, interleave=interleave)
    text = ('DR(v): N2+(v) + e -> N + N | k = table("dr_levels.csv", "k") '
            '| levels v = 0..2\n')
    rl = parse_reaction_text(text, path=str(tmp_path / "t.reactions"), base_dir=tmp_path)
    Te = np.array([300.0, 640.0, 1700.0, 3000.0])
    for r in rl.reactions:
        a, b = LAWS[r.level]
        np.testing.assert_allclose(r.k.evaluate({"Te": Te}), a * (300 / Te) ** b, rtol=1e-12)


def test_bands_are_per_level(level_table):
    """The _low/_high columns of a level's rows give that level's band: here k/(1.5+v) ..
    k(1.5+v), as written into the invented table."""
    Te = np.array([450.0, 2500.0])
    for v, (a, b) in LAWS.items():
        expr = compile_expression('table("dr_levels.csv", "k")', file="r", line=1,
                                  base_dir=level_table, level=v)
        k = a * (300 / Te) ** b
        low, high = expr.bands({"Te": Te})
        np.testing.assert_allclose(low, k / (1.5 + v), rtol=1e-12)
        np.testing.assert_allclose(high, k * (1.5 + v), rtol=1e-12)


def test_level_table_outside_a_family_is_an_error_at_the_referring_line(level_table):
    """A table with a v column used by a plain entry is a ReactionListError at that entry's
    line naming the table (docs/reaction-list.md, 'Rate tables')."""
    text = '# header\n\nDR: N2+ + e -> N + N | k = table("dr_levels.csv", "k")\n'
    with pytest.raises(ReactionListError) as info:
        parse_reaction_text(text, path="x.reactions", base_dir=level_table)
    assert info.value.line == 3
    assert "'dr_levels.csv'" in info.value.message and "family" in info.value.message


def test_missing_level_is_an_error_naming_the_level(level_table):
    """A family level with no rows in the table is an error at the family's line that says
    which level is missing and which the table has."""
    text = ('A(v): N2+(v) + e -> N + N | k = table("dr_levels.csv", "k") '
            '| levels v = 0..4\n')
    with pytest.raises(ReactionListError) as info:
        parse_reaction_text(text, path="x.reactions", base_dir=level_table)
    assert info.value.line == 1
    assert "v = 3" in info.value.message and "0, 1, 2" in info.value.message


@pytest.mark.parametrize("content, words", [
    ("v,Te,k\n0,300,1\n0,400,2\n0,300,3\n", "duplicate row for v = 0, Te = 300 (lines 2 and 4)"),
    ("v,Te,k\n0,300,1\n0,200,2\n", "strictly increasing within level v = 0"),
    ("v,Te,k\n0.5,300,1\n0.5,400,2\n", "line 2: the level v is not a whole number"),
    ("v,Te,k\n-1,300,1\n-1,400,2\n", "line 2: the level v is not a whole number"),
    ("Te,v,k\n300,0,1\n400,0,2\n", "'v' must be the first column"),
    ("v,k,Te\n0,1,300\n0,2,400\n", "the column after 'v' must be the temperature"),
    ("v,Te,k\n0,300,1\n1,400,2\n", "level v = 0 needs at least two rows"),
])
def test_malformed_level_tables_are_errors_at_the_referring_line(tmp_path, content, words):
    """Level-row table problems are ReactionListErrors at the referring line with the
    table's name (docs/reaction-list.md, 'Rate tables')."""
    clear_cache()
    (tmp_path / "t.csv").write_text(content)
    with pytest.raises(ReactionListError) as info:
        load_rate_table(tmp_path / "t.csv", "k", file="r.reactions", line=5, name="t.csv",
                        level=0)
    assert info.value.line == 5 and "'t.csv'" in info.value.message
    assert words in info.value.message


def test_plain_table_in_a_family_is_shared_by_every_level(tmp_path):
    """A table without a v column still gives every level the same k(T) (unchanged
    behaviour): the power law 2e-7 (300/Te)^0.5 tabulated once (analytic)."""
    clear_cache()
    (tmp_path / "p.csv").write_text("Te,k\n300,2e-7\n1200,1e-7\n")
    a = compile_expression('table("p.csv", "k")', file="r", line=1, base_dir=tmp_path, level=0)
    b = compile_expression('table("p.csv", "k")', file="r", line=1, base_dir=tmp_path, level=3)
    Te = np.array([600.0])
    np.testing.assert_allclose(a.evaluate({"Te": Te}), b.evaluate({"Te": Te}), rtol=0)
    np.testing.assert_allclose(a.evaluate({"Te": Te}), 2e-7 * (300 / 600) ** 0.5, rtol=1e-12)


@pytest.mark.parametrize("entry, line, words", [
    ('X: N2+ + e -> N + N | k = table("lv.csv", "k")', 3, "can only be used in a family"),
    ('X(v): N2+(v) + e -> N + N | k = table("lv.csv", "k") | levels v = 0..3', 3,
     "no rows for level v = 3"),
    ('X(v): N2+(v) + e -> N + N | k = table("dup.csv", "k") | levels v = 0..1', 3,
     "duplicate row for v = 1"),
])
def test_check_command_reports_level_table_errors_at_file_and_line(tmp_path, capsys, entry,
                                                                   line, words):
    """`ionochem check` prints `file:line: message` and exits 2 for each level-table error
    (docs/reaction-list.md, 'Error messages')."""
    clear_cache()
    _write_levels(tmp_path, "lv.csv")
    (tmp_path / "dup.csv").write_text("v,Te,k\n0,300,1\n0,900,1\n1,300,1\n1,300,2\n")
    path = tmp_path / "bad.reactions"
    path.write_text(f"# invented bad input\n\n{entry}\n")
    code = main(["check", str(path)])
    err = capsys.readouterr().err.strip().splitlines()[-1]
    assert code == 2
    assert err.startswith(f"{path}:{line}:") and words in err, err


def test_model_and_set_use_each_levels_rows(column):
    """In a Model, each family member's rate coefficient on the grid is its own level's
    power law; `with_changes` (the engine of --set) with another level-row table on the
    family id replaces every level by that table's own level (analytic power laws)."""
    alt = np.linspace(150.0, 300.0, 4)
    Te = np.linspace(400.0, 2800.0, alt.size)
    text = ('P(v): N2 -> N2+(v) + e | k = prescribed | levels v = 0..2 | ref = invented\n'
            'D(v): N2+(v) + e -> N + N | k = table("lv.csv", "k") | levels v = 0..2 '
            '| ref = invented\n')
    path = column(text, alt, neutrals={"N2": np.full(alt.size, 1e10), "N": np.ones(alt.size)},
                  Tn=np.full(alt.size, 800.0), Te=Te,
                  production={f"P(v={v})": np.full(alt.size, 10.0) for v in range(3)})
    clear_cache()
    _write_levels(path.parent, "lv.csv")
    other = {v: (a * 2, b + 0.1) for v, (a, b) in LAWS.items()}
    _write_levels(path.parent, "other.csv", laws=other)
    import ionochem
    model = ionochem.Model(ionochem.load_scenario(path))
    changed = model.with_changes({"D": 'table("other.csv", "k")'})
    for v in range(3):
        j = model.reactions.index(f"D(v={v})")
        a, b = LAWS[v]
        np.testing.assert_allclose(model.rate_coefficients()[:, j], a * (300 / Te) ** b,
                                   rtol=1e-12)
        a, b = other[v]
        np.testing.assert_allclose(changed.rate_coefficients()[:, j], a * (300 / Te) ** b,
                                   rtol=1e-12)
