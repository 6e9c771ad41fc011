"""Rate expressions: grammar, evaluation on arrays, rate tables, safety."""

import math

import numpy as np
import pytest

from ionochem import Error, ReactionListError, TableRangeError
from ionochem.mechanism.expressions import compile_expression
from ionochem.mechanism.ratetables import clear_cache, load_rate_table


def value(text, **env):
    expr = compile_expression(text, file="t.reactions", line=7, base_dir=".")
    return expr.evaluate({k: np.asarray(v, float) for k, v in env.items()})


@pytest.mark.parametrize("text, ref", [
    ("-2^2", -(2 ** 2)), ("-2**2", -(2 ** 2)), ("2^3^2", 2 ** 3 ** 2), ("2^-1", 2 ** -1),
    ("1 - 2 - 3", 1 - 2 - 3), ("8 / 4 / 2", 8 / 4 / 2), ("2 * 3 + 4 * 5", 2 * 3 + 4 * 5),
    ("-(3 - 5) * 2", -(3 - 5) * 2), ("1.5e-10 * 2", 1.5e-10 * 2), (".5 + 5.", .5 + 5.),
    ("2 ** -2 ** 2", 2 ** -2 ** 2), ("- - 3", 3), ("+3", +3),
    ("1 if 2 < 3 else 4", 1 if 2 < 3 else 4), ("1 if 3 < 2 else 4 if 1 < 2 else 5",
                                               1 if 3 < 2 else 4 if 1 < 2 else 5),
    ("2 * 3 if 1 > 2 else 7", 2 * 3 if 1 > 2 else 7),
    ("1 if 1 < 2 < 3 else 0", 1 if 1 < 2 < 3 else 0),
    ("1 if 1 < 3 < 2 else 0", 1 if 1 < 3 < 2 else 0),
    ("1 if 1 > 2 or 2 > 1 and 3 >= 3 else 0", 1 if 1 > 2 or 2 > 1 and 3 >= 3 else 0),
    ("1 if (1 > 2 or 2 > 1) and 3 <= 2 else 0", 1 if (1 > 2 or 2 > 1) and 3 <= 2 else 0),
])
def test_constant_expressions_follow_python_precedence(text, ref):
    """Operator precedence and associativity as in Python's expression grammar (Python
    Language Reference, section 6.17 'Operator precedence'), with ^ meaning **."""
    assert value(text) == pytest.approx(ref, rel=1e-15)


def test_functions_match_math_module():
    """exp, log, log10, sqrt, abs, min, max agree with Python's math module / builtins."""
    assert value("exp(1.5)") == pytest.approx(math.exp(1.5), rel=1e-14)
    assert value("log(7)") == pytest.approx(math.log(7), rel=1e-14)
    assert value("log10(300)") == pytest.approx(math.log10(300), rel=1e-14)
    assert value("sqrt(2)") == pytest.approx(math.sqrt(2), rel=1e-15)
    assert value("abs(-3.5)") == 3.5
    assert value("min(3, 1, 2)") == 1 and value("max(3, 1, 2)") == 3


def test_dissociative_recombination_rate_broadcasts_over_samples_and_altitudes():
    """O2+ recombination 1.95e-7 (300/Te)^0.70 below 1200 K and 7.38e-8 (1200/Te)^0.56 above
    (Schunk & Nagy 2009, Ionospheres, ch. 8 *(from memory)*), checked against the same
    formula written in numpy, on a (sample, altitude) grid."""
    Te = np.array([[300.0, 800.0, 1200.0, 2000.0], [500.0, 1500.0, 3000.0, 900.0]])
    got = value("1.95e-7*(300/Te)^0.70 if Te < 1200 else 7.38e-8*(1200/Te)^0.56", Te=Te)
    ref = np.where(Te < 1200, 1.95e-7 * (300 / Te) ** 0.70, 7.38e-8 * (1200 / Te) ** 0.56)
    assert got.shape == (2, 4)
    np.testing.assert_allclose(got, ref, rtol=1e-14)


def test_constant_is_broadcast_to_the_variable_shape():
    """A constant k evaluated with temperatures of shape (altitude,) has that shape."""
    assert value("2e-11", Te=np.ones(5)).shape == (5,)


def test_family_level_is_bound_at_compile_time():
    """With level=3, v is the constant 3: evaluation needs no v (docs/internals.md, Expressions)."""
    expr = compile_expression("1e-7*(1 + v)", file="t", line=1, base_dir=".", level=3)
    assert "v" in expr.variables
    assert expr.evaluate({"Te": np.ones(2)}) == pytest.approx(4e-7)


def test_variables_and_source_attributes():
    """variables lists what is read; source names the rate source (docs/internals.md,
    Expressions)."""
    e = compile_expression("1e-10*(300/Teff)^0.5*exp(-Tv/1000)", file="t", line=1)
    assert e.variables == {"Teff", "Tv"} and e.source is None
    p = compile_expression("0.5*photo", file="t", line=1)
    assert p.source == "photo" and p.variables == {"photo"}
    assert p.evaluate({"photo": np.array([2e-7])}) == pytest.approx(1e-7)
    assert compile_expression("prescribed", file="t", line=1).source == "prescribed"


@pytest.mark.parametrize("text, words", [
    ("__import__('os').system('x')", "'_'"), ("().__class__", "empty parentheses"),
    ("(1).__class__", "attribute access"), ("lambda: 1", "'lambda' is not allowed"),
    ("open('x')", "'open' is not allowed"), ("Te[0]", "subscripts"), ("1; 2", "';'"),
    ("Te == 300", "'=='"), ("Te = 3", "assignment"), ("'a' * 2", "strings are only"),
    ("foo(Te)", "unknown function 'foo'"), ("Tx", "unknown name 'Tx'"), ("Te > 3", "condition"),
    ("1 if Te else 2", "needs a condition"), ("1 if Te > 2", "'else'"), ("2 Te", "missing"),
    ("min(1)", "at least 2"), ("exp(1, 2)", "takes 1 argument"), ("exp", "is a function"),
    ("Te(1)", "not a function"), ("photo + 1", "constant factors"), ("1/photo", "constant"),
    ("photo*photoelectron", "only one rate source"), ("", "empty expression"),
    ("(1", "expected ')'"), ("1)", "unmatched"), ("1e999", "too large"),
    ("log(-1)", "evaluates to nan"), ("1/0", "evaluates to inf"), ("not 1 < 2", "'not'"),
    ("1 + 'x'", "strings are only"), ("table(Te, 'k')", "quoted text"), ("Te\u22121", "ASCII"),
])
def test_rejected_expressions_name_file_and_line(text, words):
    """Everything outside the documented grammar is a ReactionListError at file:line
    (docs/reaction-list.md, 'Expressions': nothing in a reaction file is executed as code)."""
    with pytest.raises(ReactionListError) as info:
        compile_expression(text, file="x.reactions", line=12, base_dir=".")
    assert info.value.file == "x.reactions" and info.value.line == 12
    assert words in info.value.message


def test_nesting_limit_is_64_levels():
    """64 nested parentheses compile, 65 are refused (docs/reaction-list.md, 'Expressions':
    nested at most 64 deep); a million-fold nesting is refused without reaching Python's
    recursion limit."""
    assert value("(" * 64 + "2" + ")" * 64) == 2
    for text in ("(" * 65 + "2" + ")" * 65, "-" * 100 + "1", "2^" * 100 + "2",
                 "exp(" * 70 + "1" + ")" * 70, "(" * 10**6):
        with pytest.raises(ReactionListError, match="nesting deeper than 64|longer than"):
            compile_expression(text, file="x", line=1)


def test_long_flat_sums_do_not_count_as_nesting():
    """A sum of 500 terms is flat (n-ary), not 500 levels deep; equals 500 by arithmetic."""
    assert value("+".join(["1"] * 500)) == 500


def test_evaluate_checked_reports_negative_and_nonfinite_values():
    """log of a negative temperature difference is NaN: evaluate_checked raises at
    file:line; a negative value is refused too."""
    expr = compile_expression("log(Te - 1000)", file="a.reactions", line=3)
    with pytest.raises(ReactionListError) as info:
        expr.evaluate_checked({"Te": np.array([500.0, 2000.0])})
    assert info.value.line == 3 and "nan" in info.value.message
    neg = compile_expression("1e-10*(Te - 1000)", file="a.reactions", line=4)
    with pytest.raises(ReactionListError, match="negative"):
        neg.evaluate_checked({"Te": np.array([500.0])})


# --------------------------------------------------------------------------- tables

@pytest.fixture
def power_law_table(tmp_path):
    """k = 2e-7 (300/Te)^0.5 tabulated at 300, 1000, 3000 K with a factor-2 band."""
    clear_cache()
    T = np.array([300.0, 1000.0, 3000.0])
    k = 2e-7 * (300 / T) ** 0.5
    lines = ["# invented test table: an exact power law", "Te_K,k,k_low,k_high,other"]
    lines += [f"{t:g},{v:.17g},{v / 2:.17g},{v * 2:.17g},1" for t, v in zip(T, k, strict=True)]
    (tmp_path / "dr.csv").write_text("\n".join(lines) + "\n")
    return tmp_path


def test_log_log_interpolation_reproduces_a_power_law(power_law_table):
    """Interpolation linear in log k versus log T is exact for a power law k ∝ T^-0.5
    (analytic); ends of the range are included."""
    Te = np.array([300.0, 450.0, 999.0, 2500.0, 3000.0])
    expr = compile_expression('table("dr.csv", "k")', file="r", line=2, base_dir=power_law_table)
    assert expr.variables == {"Te"}
    np.testing.assert_allclose(expr.evaluate({"Te": Te}), 2e-7 * (300 / Te) ** 0.5, rtol=1e-12)


def test_table_outside_range_raises_at_referring_line(power_law_table):
    """Temperatures outside the table are a TableRangeError at the reaction's file:line,
    naming the table and the temperature (docs/internals.md, Expressions)."""
    expr = compile_expression('table("dr.csv", "k")', file="r.reactions", line=9,
                              base_dir=power_law_table)
    with pytest.raises(TableRangeError) as info:
        expr.evaluate({"Te": np.array([500.0, 5000.0])})
    assert info.value.line == 9 and "dr.csv" in info.value.message
    assert "5000" in info.value.message and "extrapolate" in info.value.message


def test_extrapolation_continues_the_end_segments(power_law_table):
    """With "extrapolate", log-log extrapolation of a power law is the power law (analytic)."""
    expr = compile_expression('table("dr.csv", "k", "extrapolate")', file="r", line=1,
                              base_dir=power_law_table)
    Te = np.array([100.0, 6000.0])
    np.testing.assert_allclose(expr.evaluate({"Te": Te}), 2e-7 * (300 / Te) ** 0.5, rtol=1e-12)


def test_bands_scale_the_whole_expression(power_law_table):
    """bands() replaces the table by its _low/_high columns in the whole expression:
    for 3*table the band is 3k/2 .. 6k; for 1/table the ends are ordered (low <= high)."""
    Te = np.array([400.0, 2000.0])
    k = 2e-7 * (300 / Te) ** 0.5
    expr = compile_expression('3*table("dr.csv", "k")', file="r", line=1,
                              base_dir=power_law_table)
    low, high = expr.bands({"Te": Te})
    np.testing.assert_allclose(low, 1.5 * k, rtol=1e-12)
    np.testing.assert_allclose(high, 6 * k, rtol=1e-12)
    inv = compile_expression('1e-14/table("dr.csv", "k")', file="r", line=1,
                             base_dir=power_law_table)
    low, high = inv.bands({"Te": Te})
    np.testing.assert_allclose(low, 1e-14 / (2 * k), rtol=1e-12)
    assert compile_expression("2e-7", file="r", line=1).bands({"Te": Te}) is None
    assert compile_expression('table("dr.csv", "other")', file="r", line=1,
                              base_dir=power_law_table).bands({"Te": Te}) is None


@pytest.mark.parametrize("content, words", [
    ("T,k\n300,1\n400,2\n", "first column must be the temperature"),
    ("Te,k\n300,1\n300,2\n", "strictly increasing"),
    ("Te,k\n300,1\n400,-2\n", "not positive"),
    ("Te,k\n300,1\n400,abc\n", "not a number"),
    ("Te,k\n300,1\n400,nan\n", "not a number"),
    ("Te,k\n300,1\n", "at least two rows"),
    ("Te,k\n300,1,3\n400,2\n", "line 2: 3 cells but the header has 2 columns"),
    ("Te,k,k_low\n300,1,1\n400,2,1\n", "needs its partner"),
    ("Te,k,k_low,k_high\n300,1,2,3\n400,2,1,3\n", "must contain"),
    ("# only a comment\n", "no header row"),
])
def test_malformed_tables_are_errors_at_the_referring_line(tmp_path, content, words):
    """Every table problem is a ReactionListError at the referring line with the table's
    name in the message (docs/reaction-list.md, 'Rate tables')."""
    clear_cache()
    (tmp_path / "t.csv").write_text(content)
    with pytest.raises(ReactionListError) as info:
        load_rate_table(tmp_path / "t.csv", "k", file="r.reactions", line=5, name="t.csv")
    assert info.value.line == 5 and "'t.csv'" in info.value.message
    assert words in info.value.message


def test_table_errors_are_project_errors_for_missing_and_binary_files(tmp_path):
    """A missing file, a missing column and a non-UTF-8 file are ionochem errors."""
    clear_cache()
    with pytest.raises(Error, match="file not found"):
        compile_expression('table("none.csv", "k")', file="r", line=1, base_dir=tmp_path)
    (tmp_path / "bin.csv").write_bytes(b"Te,k\n300,1\xff\n")
    with pytest.raises(Error, match="not valid UTF-8"):
        compile_expression('table("bin.csv", "k")', file="r", line=1, base_dir=tmp_path)
    (tmp_path / "ok.csv").write_text("Tn,k\n200,1\n300,2\n")
    with pytest.raises(Error, match="no column 'q'"):
        compile_expression('table("ok.csv", "q")', file="r", line=1, base_dir=tmp_path)
    with pytest.raises(Error, match="third table"):
        compile_expression('table("ok.csv", "k", "yes")', file="r", line=1, base_dir=tmp_path)


def test_compiled_expressions_survive_pickling(power_law_table):
    """A pickled and restored expression (as sent to dask workers) gives the same values
    as the power law it tabulates (analytic)."""
    import pickle

    expr = compile_expression('2*table("dr.csv", "k") if Te < 2000 else 1e-7', file="r",
                              line=1, base_dir=power_law_table)
    back = pickle.loads(pickle.dumps(expr))
    Te = np.array([400.0, 2500.0])
    np.testing.assert_allclose(back.evaluate({"Te": Te}),
                               [2 * 2e-7 * (300 / 400) ** 0.5, 1e-7], rtol=1e-12)
