"""Property and fuzz tests of the reaction-list reader and the expression compiler.

The contract (docs/internals.md, errors): every deliberate error derives from ``ionochem.Error``;
anything else escaping is a bug. Hypothesis feeds arbitrary text, bytes and token soup to the
reader and the compiler; generated expression trees are checked against an evaluator written
here.
"""

import re
import tempfile
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, assume, event, given, settings
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
    event("parsed" if rl is not None and rl.reactions else "refused or empty")
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


@pytest.mark.slow  # about 5 s (1500 examples); the full suite runs it
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


# --------------------------------------------------------------------------- grammar-built lists
# Whole reaction lists generated from the grammar of docs/reaction-list.md (ID, sides, k, f,
# ref, levels, continuation lines, comments, an @default header), so that every generated file
# is valid and reaches the parser's deep paths (families, level substitution, uncertainty
# expressions, references); then one grammar-level mutation per file, each of which the format
# says must be refused at the entry's line.

TEMPS = ["Te", "Ti", "Tn"]
coefficients = st.floats(1e-13, 1e-6).map(lambda x: f"{x:.3g}")
exponents = st.floats(-2.0, 2.0).map(lambda x: f"{x:.2f}")


@st.composite
def rate_laws(draw, family=False):
    """A rate expression of the forms used in reaction lists (all positive)."""
    a = draw(coefficients)
    form = draw(st.integers(0, 5 if family else 4))
    t = draw(st.sampled_from(TEMPS))
    if form == 0:
        return a
    if form == 1:
        return f"{a}*(300/{t})^{draw(exponents)}"
    if form == 2:
        return f"{a}*exp(-{draw(st.integers(0, 3000))}/{t})"
    if form == 3:
        b = draw(coefficients)
        return f"{a} if {t} < {draw(st.integers(300, 3000))} else {b}*({t}/1000)^-0.5"
    if form == 4:
        return f"max({a}, min({draw(coefficients)}, {a}*sqrt({t}/300)))"
    return f"{a}*(1 + {draw(st.floats(0, 1)):.3f}*v)"


uncertainty = st.one_of(st.floats(1.0, 3.0).map(lambda x: f"{x:.2f}"),
                        st.floats(1.0, 2.0).map(
                            lambda x: f"{x:.2f}*exp(100*abs(1/Ti - 1/298))"))
references = st.text(st.characters(codec="utf-8", categories=["L", "N", "Zs"],
                                   include_characters=".,;()&'-"),
                     min_size=1, max_size=40).map(str.strip).filter(bool)

#: Family templates (sides written with the level variable); each balances for every v.
FAMILIES = ["N2+(v) + e -> N + N", "N2+(v) + O -> NO+ + N", "N2+(v) + O2 -> O2+ + N2",
            "N2 -> N2+(v) + e", "N2+(v) + N2 -> N2+(v-1) + N2"]


@st.composite
def entries(draw, ident):
    """One entry: (id, text lines, number of reactions it expands to, ref or None, has f)."""
    is_family = draw(st.booleans())
    fields = []
    if is_family:
        sides = draw(st.sampled_from(FAMILIES))
        lo = 1 if "(v-1)" in sides else draw(st.integers(0, 3))
        hi = draw(st.integers(lo, lo + 4))
        rid, count = f"{ident}(v)", hi - lo + 1
        fields.append(f"k = {draw(rate_laws(family=True))}")
        fields.append(f"levels v = {lo}..{hi}")
    else:
        left, right = draw(balanced_reactions())
        sides, rid, count = f"{_side(left)} -> {_side(right)}", ident, 1
        fields.append(f"k = {draw(rate_laws())}")
    f = draw(st.none() | uncertainty)
    if f is not None:
        fields.append(f"f = {f}")
    ref = draw(st.none() | references)
    if ref is not None:
        fields.append(f"ref = {ref}")
    head, *rest = draw(st.permutations(fields)) if not is_family else (fields[0], *fields[1:])
    lines = [f"{rid}: {sides} | {head}"]
    for field in rest:
        if draw(st.booleans()):          # continuation line
            lines[-1] += " \\"
            lines.append(f"    | {field}")
        else:
            lines[-1] += f" | {field}"
    return rid, lines, count, ref, f is not None


@st.composite
def reaction_lists(draw):
    """A valid list: optional @default header, comments, 1-6 entries with unique ids.
    Returns (text, [(id, first line, count, ref, has_f)], has_default)."""
    lines, meta = [], []
    has_default = draw(st.booleans())
    if has_default:
        lines.append(f"@default f = {draw(st.floats(1.1, 2.0)):.2f}")
    n = draw(st.integers(1, 6))
    for i in range(n):
        if draw(st.booleans()):
            lines.append("# " + draw(references))
        if draw(st.booleans()):
            lines.append("")
        rid, text, count, ref, has_f = draw(entries(f"R{i}"))
        meta.append((rid, len(lines) + 1, count, ref, has_f))
        lines.extend(text)
    return "\n".join(lines) + "\n", meta, has_default


GRAMMAR = settings(max_examples=200, deadline=None,
                   suppress_health_check=[HealthCheck.too_slow])


@GRAMMAR
@given(reaction_lists())
def test_grammar_built_lists_parse_with_every_field_kept(generated):
    """Every list generated from the documented grammar parses (100 % of the examples reach
    the end of the parser): families expand to B - A + 1 members named ID(v=L), each entry keeps
    its line, its ref and its f, the @default header gives default_f, and every rate law
    evaluates to finite non-negative values (docs/reaction-list.md)."""
    text, meta, has_default = generated
    rl = parse_reaction_text(text, base_dir=_TMP)
    assert len(rl.reactions) == sum(m[2] for m in meta)
    assert (rl.default_f is not None) == has_default
    reactions = iter(rl.reactions)
    for rid, line, count, ref, has_f in meta:
        for _ in range(count):
            r = next(reactions)
            assert r.line == line, (r.id, r.line, line)
            assert r.id == rid if count == 1 and "(v)" not in rid else r.id.startswith(
                rid[:-3] + "(v=")
            assert r.ref == ref
            assert (r.f is not None) == has_f
            k = r.k.evaluate(ENV)
            assert np.all(np.isfinite(k)) and np.all(k >= 0), (r.id, r.k.text)


def _mutate(text, meta, which, rnd):
    """One grammar-level defect in a random entry; returns (text, line of the refused entry,
    words of the expected message)."""
    lines = text.split("\n")
    rid, line, count, _, _ = meta[rnd.randrange(len(meta))]
    i = line - 1
    if which == "arrow":
        lines[i] = lines[i].replace("->", "=>", 1)
        return "\n".join(lines), line, "->"
    if which == "unknown field":
        lines[i] = lines[i].replace(" | ", " | g = 2 | ", 1)
        return "\n".join(lines), line, "unknown field"
    if which == "unbalanced":
        lines[i] = lines[i].replace(" | ", " + O | ", 1)
        return "\n".join(lines), line, "balance"
    if which == "duplicate id":
        # a second, valid entry under the same id
        lines.insert(-1, f"{rid}: N2+(v) + e -> N + N | k = 1e-7 | levels v = 0..1"
                     if "(v)" in rid else f"{rid}: O+ + e -> O | k = 1e-12")
        return "\n".join(lines), len(lines) - 1, "duplicate id"
    if which == "levels reversed":
        if "(v)" not in rid:
            return None
        out = "\n".join(lines)
        m = re.compile(r"levels v = (\d+)\.\.(\d+)").search(out, out.index(f"{rid}:"))
        if m.group(1) == m.group(2):
            return None
        out = out[:m.start()] + f"levels v = {m.group(2)}..{m.group(1)}" + out[m.end():]
        return out, line, "must not exceed"
    raise AssertionError(which)


MUTATIONS = ["arrow", "unknown field", "unbalanced", "duplicate id", "levels reversed"]


@GRAMMAR
@given(reaction_lists(), st.sampled_from(MUTATIONS), st.randoms(use_true_random=False))
def test_grammar_mutations_are_refused_at_the_entry_line(generated, which, rnd):
    """A valid generated list with one defect the format forbids (no '->', an unknown field, an
    unbalanced side, a duplicate id, reversed levels) raises ionochem.Error at the line of the
    defective entry, with a message naming the defect (docs/reaction-list.md)."""
    text, meta, _ = generated
    mutated = _mutate(text, meta, which, rnd)
    assume(mutated is not None)
    bad, line, words = mutated
    try:
        parse_reaction_text(bad, base_dir=_TMP)
    except Error as exc:
        assert exc.line == line, (which, exc.line, line, exc.message, bad)
        assert words in exc.message, (which, exc.message)
    else:
        raise AssertionError(f"{which}: defective list accepted:\n{bad}")


@GRAMMAR
@given(reaction_lists(), st.integers(0, 10 ** 6), st.sampled_from(["drop", "dup", "swap"]))
def test_character_mutations_of_valid_lists_raise_only_project_errors(generated, pos, how):
    """Deleting, doubling or swapping one character of a valid list gives a list or an
    ionochem.Error, never another exception; the parsed rate laws evaluate or raise Error.
    These start from valid files, so they exercise the deep paths token soup rarely reaches."""
    text = generated[0]
    i = pos % len(text)
    if how == "drop":
        text = text[:i] + text[i + 1:]
    elif how == "dup":
        text = text[:i] + text[i] + text[i:]
    elif i + 1 < len(text):
        text = text[:i] + text[i + 1] + text[i] + text[i + 2:]
    rl = _only_project_errors(parse_reaction_text, text, base_dir=_TMP)
    event("parsed" if rl is not None and rl.reactions else "refused or empty")
    if rl is not None:
        for r in rl.reactions:
            _only_project_errors(r.k.evaluate, ENV)
