"""Property and fuzz tests of the reaction-list reader and the expression compiler.

The contract (DESIGN.md §4): every deliberate error derives from ``ionochem.Error``; anything
else escaping is a bug. Hypothesis feeds arbitrary text, bytes and token soup to the reader
and the compiler; generated expression trees are checked against an evaluator written here.
"""

import tempfile
from pathlib import Path

import numpy as np
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from ionochem import Error
from ionochem.mechanism.expressions import compile_expression
from ionochem.mechanism.parser import parse_reaction_list, parse_reaction_text

FAST = settings(max_examples=1500, deadline=None,
                suppress_health_check=[HealthCheck.too_slow])
_TMP = Path(tempfile.mkdtemp(prefix="ionochem-fuzz-"))
(_TMP / "t.csv").write_text("# invented\nTe,k,k_low,k_high\n300,2e-7,1e-7,3e-7\n"
                            "3000,1e-7,5e-8,2e-7\n")
ENV = {"Te": np.array([250.0, 1000.0, 4000.0]), "Ti": np.array([800.0, 900.0, 1000.0]),
       "Tn": np.array([700.0, 800.0, 900.0]), "Teff": np.array([750.0, 850.0, 950.0]),
       "Tv": np.array([700.0, 800.0, 900.0]), "v": np.array(1.0),
       "photo": np.array([1e-7, 2e-7, 0.0]), "photoelectron": np.array([1e-8, 0, 0]),
       "prescribed": np.array([1.0, 2.0, 3.0])}

LINE_TOKENS = ["R1", "DR(v)", ":", " ", " + ", "->", "|", "k", "f", "ref", "levels", "=",
               "v", "0..2", "3..1", "O", "O+", "N2", "N2+", "N2+(v)", "N2+(v-1)", "(2D)", "e",
               "M", "hv", "2", "photo", "Te", "1e-7", "(", ")", "*", "^", "-", "\\\n", "\n",
               "#", '"', "table(\"t.csv\", \"k\")", "@default", "if", "else", "<", "and",
               "\x00", "\t", "exp(", ",", "."]
EXPR_TOKENS = ["Te", "Ti", "Tn", "Teff", "Tv", "v", "photo", "1", "2.5", "1e-7", "300", "0",
               "+", "-", "*", "/", "^", "**", "(", ")", ",", "<", "<=", ">", ">=", "==", "if",
               "else", "and", "or", "not", "exp(", "log(", "log10(", "sqrt(", "abs(", "min(",
               "max(", "table(", '"t.csv"', '"k"', '"extrapolate"', "'", ".", "[", "]", " ",
               "__import__", "lambda", ":", ";", "=", "x"]


def _only_project_errors(call, *args, **kw):
    try:
        return call(*args, **kw)
    except Error:
        return None


@FAST
@given(st.text(max_size=400))
def test_arbitrary_text_raises_only_project_errors(text):
    """Any text into parse_reaction_text gives a ReactionList or an ionochem.Error."""
    _only_project_errors(parse_reaction_text, text, base_dir=_TMP)


@FAST
@given(st.lists(st.sampled_from(LINE_TOKENS), max_size=40).map("".join))
def test_reaction_token_soup_raises_only_project_errors(text):
    """Near-valid lines built from the format's own tokens reach deep parser paths; the
    only escape is an ionochem.Error, and parsed rate laws evaluate or raise Error."""
    rl = _only_project_errors(parse_reaction_text, text, base_dir=_TMP)
    if rl is not None:
        for r in rl.reactions:
            _only_project_errors(r.k.evaluate, ENV)


@settings(max_examples=800, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.binary(max_size=300))
def test_arbitrary_bytes_in_a_file_raise_only_project_errors(data):
    """Bytes on disk (invalid UTF-8, NUL, control characters) give only ionochem.Error."""
    path = _TMP / "fuzz.reactions"
    path.write_bytes(data)
    _only_project_errors(parse_reaction_list, path)


@FAST
@given(st.text(max_size=200))
def test_arbitrary_text_into_the_compiler_raises_only_project_errors(text):
    """Any text into compile_expression compiles or raises an ionochem.Error."""
    expr = _only_project_errors(compile_expression, text, file="f", line=1, base_dir=_TMP)
    if expr is not None:
        _only_project_errors(expr.evaluate, ENV)


@FAST
@given(st.lists(st.sampled_from(EXPR_TOKENS), max_size=60).map(" ".join))
def test_expression_token_soup_raises_only_project_errors(text):
    """Token soup of the expression language (with injection fragments) compiles to
    something that evaluates, or raises an ionochem.Error."""
    expr = _only_project_errors(compile_expression, text, file="f", line=1, base_dir=_TMP)
    if expr is not None:
        _only_project_errors(expr.evaluate, ENV)
        _only_project_errors(expr.bands, ENV)


@settings(max_examples=300, deadline=None)
@given(st.integers(min_value=0, max_value=3000), st.sampled_from(["(", "-", "exp(", "2^"]))
def test_deep_nesting_never_reaches_the_recursion_limit(depth, opener):
    """Nesting of any depth is accepted up to 64 and refused beyond, as an Error
    (never RecursionError)."""
    closer = ")" if opener.endswith("(") else ""
    text = opener * depth + "1" + closer * depth
    _only_project_errors(compile_expression, text, file="f", line=1)


# --------------------------------------------------------------------------- expression trees
# A tree is ("num", x) | ("var", name) | ("neg", t) | (op, a, b) | ("call", f, args)
# | ("if", then, (cmp, a, b), else). The printer adds parentheses where Python's precedence
# rules (Python Language Reference §6.17) require them and, at random, where they do not.

PREC = {"+": 1, "-": 1, "*": 2, "/": 2, "neg": 3, "^": 4}
NUMPY = {"+": np.add, "-": np.subtract, "*": np.multiply, "/": np.divide, "^": np.power}
FUNCS = {"exp": np.exp, "log": np.log, "log10": np.log10, "sqrt": np.sqrt, "abs": np.abs}
CMPS = {"<": np.less, "<=": np.less_equal, ">": np.greater, ">=": np.greater_equal}
VARS = ["Te", "Ti", "Tn"]

numbers = st.one_of(st.integers(0, 4).map(float), st.floats(0, 3),
                    st.floats(0, 1e4)).map(lambda x: ("num", x))
leaves = numbers | st.sampled_from(VARS).map(lambda v: ("var", v))


def _extend(children):
    binary = st.tuples(st.sampled_from(list(NUMPY)), children, children)
    neg = children.map(lambda t: ("neg", t))
    call = st.tuples(st.just("call"), st.sampled_from(list(FUNCS)), children.map(lambda c: (c,)))
    minmax = st.tuples(st.just("call"), st.sampled_from(["min", "max"]),
                       st.lists(children, min_size=2, max_size=3).map(tuple))
    cond = st.tuples(st.just("if"), children,
                     st.tuples(st.sampled_from(list(CMPS)), children, children), children)
    return binary | neg | call | minmax | cond


trees = st.recursive(leaves, _extend, max_leaves=12)


def _level(t):
    if t[0] in ("num", "var", "call"):
        return 5
    if t[0] == "if":
        return 0
    return PREC[t[0]]


def _show(t, draw_paren):
    kind = t[0]
    if kind == "num":
        return repr(t[1])
    if kind == "var":
        return t[1]
    if kind == "call":
        return f"{t[1]}(" + ", ".join(_show(a, draw_paren) for a in t[2]) + ")"
    if kind == "if":
        cmp, a, b = t[2]
        text = (f"{_wrap(t[1], 1, draw_paren)} if {_wrap(a, 1, draw_paren)} {cmp} "
                f"{_wrap(b, 1, draw_paren)} else {_wrap(t[3], 0, draw_paren)}")
        return text
    if kind == "neg":
        return "-" + _wrap(t[1], 3, draw_paren)
    op, a, b = t
    p = PREC[op]
    if op == "^":
        return f"{_wrap(a, 5, draw_paren)}^{_wrap(b, 3, draw_paren)}"
    return f"{_wrap(a, p, draw_paren)} {op} {_wrap(b, p + 1, draw_paren)}"


def _wrap(t, need, draw_paren):
    text = _show(t, draw_paren)
    if _level(t) < need or draw_paren():
        return f"({text})"
    return text


def _reference(t, env):
    kind = t[0]
    if kind == "num":
        return np.float64(t[1])
    if kind == "var":
        return env[t[1]]
    if kind == "neg":
        return np.negative(_reference(t[1], env))
    if kind == "call":
        args = [_reference(a, env) for a in t[2]]
        if t[1] in FUNCS:
            return FUNCS[t[1]](args[0])
        out = args[0]
        for a in args[1:]:
            out = (np.minimum if t[1] == "min" else np.maximum)(out, a)
        return out
    if kind == "if":
        cmp, a, b = t[2]
        mask = CMPS[cmp](_reference(a, env), _reference(b, env))
        return np.where(mask, _reference(t[1], env), _reference(t[3], env))
    op, a, b = t
    return NUMPY[op](_reference(a, env), _reference(b, env))


small = st.floats(0.5, 2.0).map(lambda x: ("num", x))
# Bases stay positive (products, quotients and powers of positive numbers); exponents and
# the whole may carry a unary minus.
power_trees = st.recursive(
    small, lambda c: st.tuples(st.just("^"), c, c)
    | st.tuples(st.just("^"), c, c.map(lambda t: ("neg", t)))
    | st.tuples(st.sampled_from(["*", "/"]), c, c), max_leaves=8,
).flatmap(lambda t: st.sampled_from([t, ("neg", t)]))


@settings(max_examples=1500, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(trees, st.randoms(use_true_random=False))
def test_generated_expressions_match_a_tree_evaluation(tree, rnd):
    """Printed trees (minimal or extra parentheses) evaluate to the same values as a
    direct evaluation of the tree written in this test (Python's precedence and
    associativity: Python Language Reference §6.17); constant folding changes nothing."""
    _compare(tree, rnd)


@settings(max_examples=500, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(power_trees, st.randoms(use_true_random=False))
def test_power_and_unary_minus_chains_match_a_tree_evaluation(tree, rnd):
    """Chains of ^, unary minus, * and - on numbers near 1 (so nothing overflows) follow
    Python's rules: ^ is right-associative and binds tighter than a unary minus on its
    left (Python Language Reference §6.5 'The power operator')."""
    _compare(tree, rnd)


def _compare(tree, rnd):
    text = _show(tree, lambda: rnd.random() < 0.3)
    assume(len(text) < 4000)
    env = {k: ENV[k] for k in VARS}
    with np.errstate(all="ignore"):
        ref = np.broadcast_to(_reference(tree, env), (3,))
    try:
        expr = compile_expression(text, file="f", line=1)
    except Error as exc:
        # only a constant that is not finite (per the reference) or too deep may be refused
        deep = "nesting deeper" in exc.message
        assert deep or ("evaluates to" in exc.message and not np.isfinite(ref).all()), (
            text, exc)
        return
    got = expr.evaluate(env)
    np.testing.assert_allclose(got, ref, rtol=1e-12, atol=0, equal_nan=True, err_msg=text)


# --------------------------------------------------------------------------- balanced reactions
# Rewrite rules that keep elements and charge (chemistry bookkeeping), used to make a
# balanced right side from a random left side; the element table is written here, not taken
# from the package.
ELEMENTS = {"O": {"O": 1}, "O2": {"O": 2}, "N": {"N": 1}, "N2": {"N": 2}, "NO": {"N": 1, "O": 1},
            "O+": {"O": 1}, "O2+": {"O": 2}, "N+": {"N": 1}, "N2+": {"N": 2},
            "NO+": {"N": 1, "O": 1}, "e": {}, "He": {"He": 1}, "He+": {"He": 1},
            "O+(2D)": {"O": 1}, "N(2D)": {"N": 1}, "N2+(v=1)": {"N": 2}}
CHARGE = {"O": 0, "O2": 0, "N": 0, "N2": 0, "NO": 0, "O+": 1, "O2+": 1, "N+": 1, "N2+": 1,
          "NO+": 1, "e": -1, "He": 0, "He+": 1, "O+(2D)": 1, "N(2D)": 0, "N2+(v=1)": 1}
REWRITES = {"O2": ["O", "O"], "N2": ["N", "N"], "NO": ["N", "O"], "O": ["O+", "e"],
            "N2+": ["N+", "N"], "O2+": ["O+", "O"], "NO+": ["N+", "O"], "He": ["He+", "e"],
            "N2+(v=1)": ["N2+"], "O+(2D)": ["O+"], "N(2D)": ["N"]}


@st.composite
def balanced_reactions(draw):
    left = draw(st.lists(st.sampled_from(sorted(ELEMENTS)), min_size=1, max_size=3))
    right = list(left)
    for _ in range(draw(st.integers(0, 4))):
        i = draw(st.integers(0, len(right) - 1))
        if right[i] in REWRITES and len(right) < 10:
            right[i:i + 1] = REWRITES[right[i]]
    right = draw(st.permutations(right))
    return left, right


def _side(names):
    counts = {}
    for n in names:
        counts[n] = counts.get(n, 0) + 1
    return " + ".join(n if c == 1 else f"{c} {n}" for n, c in counts.items())


def _totals(names):
    el, q = {}, 0
    for n in names:
        q += CHARGE[n]
        for s, c in ELEMENTS[n].items():
            el[s] = el.get(s, 0) + c
    return el, q


@settings(max_examples=1000, deadline=None)
@given(balanced_reactions())
def test_balanced_random_reactions_are_accepted(pair):
    """A right side made from the left by element- and charge-conserving rewrites is
    accepted; adding one extra O atom on the right makes it unbalanced and refused."""
    left, right = pair
    assert _totals(left) == _totals(right)
    text = f"R1: {_side(left)} -> {_side(right)} | k = 1e-10\n"
    rl = parse_reaction_text(text)
    r = rl.reactions[0]
    assert sum(n for _, n in r.reactants) == len(left)
    assert sum(n for _, n in r.products) == len(right)
    bad = f"R1: {_side(left)} -> {_side(right + ['O'])} | k = 1e-10\n"
    try:
        parse_reaction_text(bad)
    except Error as exc:
        assert "elements do not balance" in exc.message
    else:
        raise AssertionError(f"unbalanced reaction accepted: {bad}")
