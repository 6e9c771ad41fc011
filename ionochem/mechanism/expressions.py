"""The rate-expression language: a safe compiler from text to numpy array operations.

An expression such as ``2.2e-7*(300/Te)^0.39`` or ``1.95e-7*(300/Te)^0.7 if Te < 1200 else
7.38e-8*(1200/Te)^0.56`` is tokenized, parsed by a hand-written precedence-climbing parser into
a small syntax tree, type-checked (numbers versus conditions), constant-folded, and compiled to
a tree of closures over numpy operations. Nothing is ever passed to ``eval``/``exec``: the only
names are the ones listed below, and anything else is an error naming the file and line.

The parser is written by hand (rather than reusing Python's own ``ast``) so that the grammar is
exactly the documented one and so that no input can reach Python's recursion limit: nesting
(parentheses, calls, operator operands, conditionals) is counted and refused past 64 levels.

Grammar, lowest precedence first::

    expr    := or_expr [ 'if' or_expr 'else' expr ]       (Python-style conditional)
    or_expr := and_expr ( 'or' and_expr )*
    and_expr:= compare ( 'and' compare )*
    compare := sum [ ('<'|'<='|'>'|'>=') sum ]*          (chains like 300 < Te < 1000)
    sum     := product ( ('+'|'-') product )*
    product := unary ( ('*'|'/') unary )*
    unary   := ('-'|'+') unary | power
    power   := atom [ ('^'|'**') unary ]                   (right-associative: -2^2 == -4)
    atom    := NUMBER | VARIABLE | SOURCE | FUNC '(' expr (',' expr)* ')'
             | 'table' '(' STRING ',' STRING [',' '"extrapolate"'] ')' | '(' expr ')'

Inside a family member (``level`` given), ``table()`` of a level-row table (one with a ``v``
column, see :mod:`ionochem.mechanism.ratetables`) reads the rows of that level only.

This module must not know about reactions or the atmosphere: it sees text, a file and line for
messages, the folder table paths resolve against, and (for a family member) its level.
"""

from __future__ import annotations

import difflib
import re
from collections.abc import Callable, Mapping
from pathlib import Path

import numpy as np

from ionochem.errors import ReactionListError
from ionochem.io.paths import PathProblem, resolve_path
from ionochem.mechanism.ratetables import RateTable, load_rate_table, where_tables

__all__ = ["CompiledExpr", "compile_expression", "VARIABLES", "SOURCES", "FUNCTIONS",
           "MAX_DEPTH", "MAX_LENGTH"]

VARIABLES = ("Te", "Ti", "Tn", "Teff", "Tv", "v")
SOURCES = ("photo", "photoelectron", "prescribed")
#: function name -> (minimum, maximum) number of arguments
FUNCTIONS = {"exp": (1, 1), "log": (1, 1), "log10": (1, 1), "sqrt": (1, 1), "abs": (1, 1),
             "min": (2, None), "max": (2, None)}
MAX_DEPTH = 64
MAX_LENGTH = 4096
_KEYWORDS = {"if", "else", "and", "or"}
_FORBIDDEN = {"lambda", "not", "import", "from", "def", "class", "for", "in", "is", "while",
              "return", "yield", "with", "as", "del", "global", "nonlocal", "assert", "try",
              "except", "finally", "raise", "pass", "break", "continue", "elif", "await",
              "async", "None", "True", "False", "print", "eval", "exec", "open", "compile"}
_UNARY_FUNCS = {"exp": np.exp, "log": np.log, "log10": np.log10, "sqrt": np.sqrt,
                "abs": np.abs}
_CMP_FUNCS = {"<": np.less, "<=": np.less_equal, ">": np.greater, ">=": np.greater_equal}
_KNOWN_NAMES = list(VARIABLES) + list(SOURCES) + list(FUNCTIONS) + ["table"]

_TOKEN = re.compile(r"""
    (?P<ws>[ \t]+)
  | (?P<num>(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?)
  | (?P<name>[A-Za-z_][A-Za-z0-9_]*)
  | (?P<str>"[^"\\\n]*"|'[^'\\\n]*')
  | (?P<op>\*\*|<=|>=|==|!=|[-+*/^(),<>])
""", re.VERBOSE)

_BAD_CHARS = {
    ".": "attribute access ('.') is not allowed",
    "[": "subscripts ('[') are not allowed",
    "]": "subscripts (']') are not allowed",
    ";": "';' is not allowed: an expression is one formula",
    "=": "'=' (assignment) is not allowed in an expression",
    ":": "':' is not allowed in an expression",
    "{": "'{' is not allowed in an expression",
    "}": "'}' is not allowed in an expression",
    "\\": "backslash is not allowed in an expression",
    "@": "'@' is not allowed in an expression",
    "%": "'%' is not allowed; write the operation out",
    "!": "'!' is not allowed in an expression",
    "&": "'&' is not allowed; use 'and'",
    "|": "'|' is not allowed; use 'or'",
    "~": "'~' is not allowed in an expression",
    "`": "'`' is not allowed in an expression",
    "$": "'$' is not allowed in an expression",
    "?": "'?' is not allowed; write X if CONDITION else Y",
    "\u2212": "use the ASCII '-' instead of the minus sign '\u2212'",
    "\u00d7": "use '*' instead of '\u00d7'",
}

# Binding powers of the infix operators (precedence climbing).
_BP = {"if": 1, "or": 2, "and": 3, "<": 4, "<=": 4, ">": 4, ">=": 4, "+": 5, "-": 5,
       "*": 6, "/": 6, "^": 7, "**": 7}


# --------------------------------------------------------------------------- tokens


class _Tok:
    __slots__ = ("kind", "text", "pos")

    def __init__(self, kind, text, pos):
        self.kind = kind  # num name str op end bad
        self.text = text
        self.pos = pos

    def describe(self) -> str:
        if self.kind == "end":
            return "the end of the expression"
        return f"'{self.text}'"


def _tokenize(text: str) -> list[_Tok]:
    toks: list[_Tok] = []
    pos = 0
    n = len(text)
    while pos < n:
        m = _TOKEN.match(text, pos)
        if m is None:
            ch = text[pos]
            if ch in "\"'":
                msg = "unterminated string"
            elif ch in _BAD_CHARS:
                msg = _BAD_CHARS[ch]
            elif ch.isspace():
                msg = f"unexpected white-space character U+{ord(ch):04X}"
            elif ch.isdecimal():
                msg = f"'{ch}' is not an ASCII digit: write numbers with 0-9"
            elif ch.isprintable():
                msg = f"unexpected character '{ch}'"
            else:
                msg = f"unexpected character U+{ord(ch):04X}"
            toks.append(_Tok("bad", msg, pos))
            return toks
        kind = m.lastgroup
        if kind != "ws":
            toks.append(_Tok(kind, m.group(0), pos))
        pos = m.end()
    toks.append(_Tok("end", "", pos))
    return toks


# --------------------------------------------------------------------------- syntax tree
# Nodes are tuples: ("num", float) ("var", name) ("src", name) ("neg", x)
# ("sum", ((+1|-1, x), ...)) ("prod", ((False|True for divide, x), ...)) ("pow", a, b)
# ("call", fname, (args...)) ("table", RateTable, extrapolate) ("cmp", (x, op, y, op, z...))
# ("and", (xs...)) ("or", (xs...)) ("if", then, cond, else)

NUM, BOOL = "number", "condition"


class _Parser:
    def __init__(self, text, file, line, base_dir, level):
        self.text = text
        self.file = file
        self.line = line
        self.base_dir = Path(base_dir)
        self.level = level
        self.toks = _tokenize(text)
        self.i = 0
        self.depth = -1
        self.variables: set[str] = set()
        self.tables: list[RateTable] = []

    # helpers
    def error(self, message, tok=None):
        if tok is not None and tok.kind != "end" and len(self.text) > 1:
            message = f"{message} (at character {tok.pos + 1} of '{self._excerpt()}')"
        raise ReactionListError(f"in expression: {message}", file=self.file, line=self.line)

    def _excerpt(self):
        return self.text if len(self.text) <= 60 else self.text[:57] + "..."

    def peek(self) -> _Tok:
        tok = self.toks[self.i]
        if tok.kind == "bad":
            self.error(tok.text, tok)
        return tok

    def take(self) -> _Tok:
        tok = self.peek()
        if tok.kind != "end":
            self.i += 1
        return tok

    def expect(self, text, what):
        tok = self.peek()
        if tok.kind != "op" or tok.text != text:
            self.error(f"expected '{text}' {what}, found {tok.describe()}", tok)
        return self.take()

    def _need(self, node_type, want, what, tok):
        if node_type != want:
            if want == NUM:
                self.error(f"{what} needs a number, but this is a condition; a condition can "
                           "only be used in X if CONDITION else Y", tok)
            self.error(f"{what} needs a condition (a comparison such as Te < 1000)", tok)

    # grammar
    def parse(self):
        tok = self.peek()
        if tok.kind == "end":
            self.error("empty expression")
        node, typ = self.expr(0)
        tok = self.peek()
        if tok.kind != "end":
            if tok.text == ")":
                self.error("unmatched ')'", tok)
            if tok.text == "else":
                self.error("'else' without 'if'", tok)
            if tok.text == ",":
                self.error("',' outside a function call", tok)
            self.error(f"unexpected {tok.describe()}", tok)
        if typ != NUM:
            self.error("the expression is a condition, not a number; write "
                       "X if CONDITION else Y")
        return node

    def expr(self, min_bp):
        self.depth += 1
        if self.depth > MAX_DEPTH:
            self.error(f"nesting deeper than {MAX_DEPTH}")
        try:
            return self._expr(min_bp)
        finally:
            self.depth -= 1

    def _expr(self, min_bp):
        start = self.peek()
        left, ltype = self.prefix()
        while True:
            tok = self.peek()
            if tok.kind in ("num", "name", "str") and tok.text not in _BP and tok.text != "else":
                if tok.kind == "name" and tok.text in _FORBIDDEN:
                    self.error(f"'{tok.text}' is not allowed in a rate expression", tok)
                self.error(f"missing operator before {tok.describe()}", tok)
            if tok.kind == "op" and tok.text == "(":
                self.error("missing operator before '('", tok)
            if tok.kind == "op" and tok.text in ("==", "!="):
                self.error(f"'{tok.text}' is not allowed; conditions compare with "
                           "< <= > >=", tok)
            op = tok.text if tok.kind in ("op", "name") else None
            bp = _BP.get(op)
            if bp is None or bp <= min_bp:
                # right-associative power: handled by the recursion below
                return left, ltype
            self.take()
            if op == "if":
                self._need(ltype, NUM, "the value before 'if'", start)
                cond, ctype = self.expr(_BP["if"])
                self._need(ctype, BOOL, "'if'", tok)
                tok2 = self.peek()
                if not (tok2.kind == "name" and tok2.text == "else"):
                    self.error(f"expected 'else' after the condition, found "
                               f"{tok2.describe()}", tok2)
                self.take()
                other, otype = self.expr(0)
                self._need(otype, NUM, "the value after 'else'", tok2)
                left, ltype = ("if", left, cond, other), NUM
            elif op in ("or", "and"):
                self._need(ltype, BOOL, f"'{op}'", tok)
                right, rtype = self.expr(bp)
                self._need(rtype, BOOL, f"'{op}'", tok)
                items = left[1] if left[0] == op else (left,)
                left = (op, items + (right,))
            elif op in _CMP_FUNCS:
                self._need(ltype, NUM, f"'{op}'", tok)
                chain = [left]
                while True:
                    right, rtype = self.expr(bp)
                    self._need(rtype, NUM, f"'{op}'", tok)
                    chain += [op, right]
                    tok = self.peek()
                    if tok.kind == "op" and tok.text in _CMP_FUNCS:
                        op = tok.text
                        self.take()
                        continue
                    break
                left, ltype = ("cmp", tuple(chain)), BOOL
            elif op in ("+", "-"):
                self._need(ltype, NUM, f"'{op}'", tok)
                right, rtype = self.expr(bp)
                self._need(rtype, NUM, f"'{op}'", tok)
                items = left[1] if left[0] == "sum" else ((1, left),)
                left = ("sum", items + ((1 if op == "+" else -1, right),))
            elif op in ("*", "/"):
                self._need(ltype, NUM, f"'{op}'", tok)
                right, rtype = self.expr(bp)
                self._need(rtype, NUM, f"'{op}'", tok)
                items = left[1] if left[0] == "prod" else ((False, left),)
                left = ("prod", items + ((op == "/", right),))
            else:  # power, right-associative: the exponent may start with a sign
                self._need(ltype, NUM, f"'{op}'", tok)
                right, rtype = self.expr(bp - 1)
                self._need(rtype, NUM, f"'{op}'", tok)
                left = ("pow", left, right)

    def prefix(self):
        tok = self.take()
        kind, text = tok.kind, tok.text
        if kind == "num":
            value = float(text)
            if not np.isfinite(value):
                self.error(f"number '{text}' is too large", tok)
            return ("num", value), NUM
        if kind == "str":
            self.error("strings are only allowed as table() arguments", tok)
        if kind == "end":
            self.error("the expression ends too early")
        if kind == "op":
            if text == "(":
                if self.peek().kind == "op" and self.peek().text == ")":
                    self.error("empty parentheses", tok)
                node = self.expr(0)
                self.expect(")", "to close the '('", )
                return node
            if text in ("-", "+"):
                operand, typ = self.expr(_BP["*"])
                self._need(typ, NUM, f"unary '{text}'", tok)
                if text == "+":
                    return operand, NUM
                if operand[0] == "num":
                    return ("num", -operand[1]), NUM
                return ("neg", operand), NUM
            if text in ("==", "!="):
                self.error(f"'{text}' is not allowed; conditions compare with < <= > >=", tok)
            self.error(f"unexpected '{text}'", tok)
        # a name
        if text in _KEYWORDS:
            self.error(f"unexpected '{text}'", tok)
        if text in _FORBIDDEN:
            self.error(f"'{text}' is not allowed in a rate expression", tok)
        if text.startswith("_"):
            self.error(f"names starting with '_' are not allowed ('{text}')", tok)
        nxt = self.toks[self.i]
        is_call = nxt.kind == "op" and nxt.text == "("
        if text in FUNCTIONS or text == "table":
            if not is_call:
                self.error(f"'{text}' is a function: write {text}(...)", tok)
            self.take()
            if text == "table":
                return self.table_call(tok), NUM
            return self.call(text, tok), NUM
        if text in VARIABLES or text in SOURCES:
            if is_call:
                self.error(f"'{text}' is a {'variable' if text in VARIABLES else 'rate source'}"
                           ", not a function", nxt)
            self.variables.add(text)
            if text in SOURCES:
                return ("src", text), NUM
            if text == "v" and self.level is not None:
                return ("num", float(self.level)), NUM
            return ("var", text), NUM
        close = difflib.get_close_matches(text, _KNOWN_NAMES, n=1)
        hint = f"; did you mean '{close[0]}'?" if close else ""
        if is_call:
            self.error(f"unknown function '{text}' (functions: exp log log10 sqrt abs min "
                       f"max table){hint}", tok)
        self.error(f"unknown name '{text}' (variables: {' '.join(VARIABLES)}; rate sources: "
                   f"{' '.join(SOURCES)}){hint}", tok)

    def call(self, fname, tok):
        args = []
        if self.peek().kind == "op" and self.peek().text == ")":
            self.error(f"{fname}() needs an argument", tok)
        while True:
            arg, typ = self.expr(0)
            self._need(typ, NUM, f"{fname}()", tok)
            args.append(arg)
            nxt = self.peek()
            if nxt.kind == "op" and nxt.text == ",":
                self.take()
                continue
            if nxt.kind == "op" and nxt.text == ")":
                self.take()
                break
            self.error(f"expected ',' or ')' in {fname}(...), found {nxt.describe()}", nxt)
        lo, hi = FUNCTIONS[fname]
        if len(args) < lo or (hi is not None and len(args) > hi):
            want = f"{lo}" if lo == hi else f"at least {lo}"
            self.error(f"{fname}() takes {want} argument{'s' if lo != 1 else ''}, "
                       f"got {len(args)}", tok)
        return ("call", fname, tuple(args))

    def table_call(self, tok):
        args = []
        while True:
            a = self.take()
            if a.kind != "str":
                self.error("table() takes quoted text: table(\"file.csv\", \"column\") or "
                           "table(\"file.csv\", \"column\", \"extrapolate\")", a)
            args.append(a.text[1:-1])
            nxt = self.take()
            if nxt.kind == "op" and nxt.text == ",":
                continue
            if nxt.kind == "op" and nxt.text == ")":
                break
            self.error(f"expected ',' or ')' in table(...), found {nxt.describe()}", nxt)
        if len(args) not in (2, 3):
            self.error(f"table() takes 2 or 3 arguments, got {len(args)}", tok)
        extrapolate = False
        if len(args) == 3:
            if args[2] != "extrapolate":
                self.error(f"the third table() argument can only be \"extrapolate\", "
                           f"found \"{args[2]}\"", tok)
            extrapolate = True
        name, column = args[0], args[1]
        if not name.strip():
            self.error("table() needs a file name", tok)
        try:
            path = resolve_path(name, self.base_dir)
        except PathProblem as exc:
            self.error(f"table({name!r}): {exc}; {where_tables(self.base_dir)}", tok)
        table = load_rate_table(path, column, file=self.file, line=self.line, name=name,
                                level=self.level, base_dir=self.base_dir)
        self.tables.append(table)
        self.variables.add(table.variable)
        return ("table", table, extrapolate)


# --------------------------------------------------------------------------- compiler

def _is_const(node) -> bool:
    return node[0] == "num"


def _fold(node):
    """Fold constant sub-trees into ("num", value) nodes (iterative over children)."""
    kind = node[0]
    if kind in ("num", "var", "src", "table"):
        return node
    if kind == "neg":
        x = _fold(node[1])
        return ("num", -x[1]) if _is_const(x) else ("neg", x)
    if kind == "pow":
        a, b = _fold(node[1]), _fold(node[2])
        if _is_const(a) and _is_const(b):
            with np.errstate(all="ignore"):
                return ("num", float(np.power(a[1], b[1])))
        return ("pow", a, b)
    if kind in ("sum", "prod"):
        items = tuple((flag, _fold(x)) for flag, x in node[1])
        if all(_is_const(x) for _, x in items):
            with np.errstate(all="ignore"):
                return ("num", float(_apply_nary(kind, [(f, x[1]) for f, x in items])))
        return (kind, items)
    if kind == "call":
        args = tuple(_fold(a) for a in node[2])
        if all(_is_const(a) for a in args):
            with np.errstate(all="ignore"):
                return ("num", float(_apply_call(node[1], [a[1] for a in args])))
        return ("call", node[1], args)
    if kind == "cmp":
        return ("cmp", tuple(x if isinstance(x, str) else _fold(x) for x in node[1]))
    if kind in ("and", "or"):
        return (kind, tuple(_fold(x) for x in node[1]))
    if kind == "if":
        then, cond, other = _fold(node[1]), _fold(node[2]), _fold(node[3])
        value = _const_cond(cond)
        if value is not None:
            return then if value else other
        return ("if", then, cond, other)
    raise AssertionError(kind)


def _const_cond(node):
    """The truth value of a condition with no variables, else None."""
    if node[0] == "cmp":
        chain = node[1]
        if all(isinstance(x, str) or _is_const(x) for x in chain):
            result = True
            for i in range(1, len(chain), 2):
                result = result and bool(_CMP_FUNCS[chain[i]](chain[i - 1][1], chain[i + 1][1]))
            return result
        return None
    values = [_const_cond(x) for x in node[1]]
    if any(v is None for v in values):
        return None
    return all(values) if node[0] == "and" else any(values)


def _apply_nary(kind, items):
    if kind == "sum":
        acc = None
        for sign, x in items:
            acc = (x if sign > 0 else np.negative(x)) if acc is None else (
                np.add(acc, x) if sign > 0 else np.subtract(acc, x))
        return acc
    acc = None
    for divide, x in items:
        if acc is None:
            acc = np.divide(1.0, x) if divide else x
        else:
            acc = np.divide(acc, x) if divide else np.multiply(acc, x)
    return acc


def _apply_call(fname, args):
    if fname in _UNARY_FUNCS:
        return _UNARY_FUNCS[fname](np.asarray(args[0], dtype=float))
    func = np.minimum if fname == "min" else np.maximum
    acc = args[0]
    for a in args[1:]:
        acc = func(acc, a)
    return acc


Closure = Callable[[Mapping, int], object]


class _Compiler:
    def __init__(self, file, line):
        self.file = file
        self.line = line

    def get(self, name):
        file, line = self.file, self.line

        def read(env, band):
            try:
                value = env[name]
            except KeyError:
                raise ReactionListError(f"the expression needs '{name}', which is not "
                                        "available here", file=file, line=line) from None
            return np.asarray(value, dtype=float)
        return read

    def build(self, node) -> Closure:
        kind = node[0]
        if kind == "num":
            value = node[1]
            return lambda env, band: value
        if kind in ("var", "src"):
            return self.get(node[1])
        if kind == "neg":
            f = self.build(node[1])
            return lambda env, band: np.negative(f(env, band))
        if kind == "pow":
            fa, fb = self.build(node[1]), self.build(node[2])
            return lambda env, band: np.power(fa(env, band), fb(env, band))
        if kind in ("sum", "prod"):
            parts = [(flag, self.build(x)) for flag, x in node[1]]
            return lambda env, band: _apply_nary(kind, [(f, g(env, band)) for f, g in parts])
        if kind == "call":
            fname = node[1]
            fargs = [self.build(a) for a in node[2]]
            return lambda env, band: _apply_call(fname, [g(env, band) for g in fargs])
        if kind == "table":
            table, extrapolate = node[1], node[2]
            temp = self.get(table.variable)
            file, line = self.file, self.line
            return lambda env, band: table.interpolate(temp(env, band), extrapolate=extrapolate,
                                                       band=band, file=file, line=line)
        if kind == "cmp":
            chain = node[1]
            fs = [None if isinstance(x, str) else self.build(x) for x in chain]

            def compare(env, band):
                vals = [None if f is None else f(env, band) for f in fs]
                result = None
                for i in range(1, len(chain), 2):
                    r = _CMP_FUNCS[chain[i]](vals[i - 1], vals[i + 1])
                    result = r if result is None else np.logical_and(result, r)
                return result
            return compare
        if kind in ("and", "or"):
            fs = [self.build(x) for x in node[1]]
            func = np.logical_and if kind == "and" else np.logical_or

            def combine(env, band):
                acc = fs[0](env, band)
                for f in fs[1:]:
                    acc = func(acc, f(env, band))
                return acc
            return combine
        if kind == "if":
            ft, fc, fo = self.build(node[1]), self.build(node[2]), self.build(node[3])
            return lambda env, band: np.where(fc(env, band), ft(env, band), fo(env, band))
        raise AssertionError(kind)


def _source_product(node) -> bool:
    """True for ``src`` or a product of constants with exactly one source product."""
    if node[0] == "src":
        return True
    if node[0] != "prod":
        return False
    found = 0
    for divide, x in node[1]:
        if _is_const(x):
            continue
        if divide or not _source_product(x):
            return False
        found += 1
    return found == 1


def _check_sources(node, parser: _Parser):
    """A rate source stands alone or multiplied by constant factors (``0.5*photo``)."""
    srcs = [name for name in parser.variables if name in SOURCES]
    if not srcs:
        return None
    if len(srcs) > 1:
        parser.error("only one rate source (photo, photoelectron, prescribed) per expression")
    src = srcs[0]
    if _source_product(node):
        return src
    parser.error(f"'{src}' may only be multiplied by constant factors, e.g. 0.5*{src}")


_ENV_NAMES = frozenset(VARIABLES) | frozenset(SOURCES)


class CompiledExpr:
    """A compiled rate expression.

    Attributes
    ----------
    text : str
        The expression as written.
    file, line
        Where it was written (for messages).
    level : int or None
        The family level bound to ``v``, or None.
    variables : frozenset of str
        Names it reads: among ``Te Ti Tn Teff Tv v`` and ``photo photoelectron
        prescribed`` (a table adds its temperature variable). ``v`` is listed when it is used,
        even when ``level`` binds it (then ``evaluate`` does not need it).
    source : str or None
        ``"photo"``, ``"photoelectron"``, ``"prescribed"``, or None for an ordinary rate law.
    tables : tuple of RateTable
        The tables it refers to.
    value : float or None
        The value when the expression is a constant, else None.
    """

    def __init__(self, text, file, line, level, variables, source, tables, tree, func):
        self.text = text
        self.file = file
        self.line = line
        self.level = level
        self.variables = frozenset(variables)
        self.source = source
        self.tables = tuple(tables)
        self.value = tree[1] if tree[0] == "num" else None
        self._tree = tree
        self._func = func
        self._has_bands = any(t.has_bands for t in self.tables)

    def __getstate__(self):
        # closures do not pickle with the standard pickler; rebuild them from the tree
        state = self.__dict__.copy()
        del state["_func"]
        return state

    def __setstate__(self, state):
        self.__dict__.update(state)
        self._func = _Compiler(self.file, self.line).build(self._tree)

    @property
    def is_constant(self) -> bool:
        """True when the expression reads no variable."""
        return self.value is not None

    def __repr__(self) -> str:
        return f"CompiledExpr({self.text!r})"

    def _run(self, env, band):
        shapes = [np.shape(env[k]) for k in _ENV_NAMES if k in env]
        with np.errstate(all="ignore"):
            out = np.asarray(self._func(env, band), dtype=float)
        if shapes:
            shape = np.broadcast_shapes(out.shape, *shapes)
            if out.shape != shape:
                out = np.broadcast_to(out, shape).copy()
        elif out.ndim == 0:
            out = out.copy()
        return out

    def evaluate(self, env: Mapping) -> np.ndarray:
        """Evaluate on arrays.

        Parameters
        ----------
        env : mapping
            Variable name → array (K for temperatures; s-1 for ``photo``/``photoelectron``,
            the per-reaction rate for ``prescribed``); arrays broadcast together, shape
            ``(altitude,)`` or ``(sample, altitude)``. ``v`` is needed only when the
            expression uses it and no level was bound at compilation.

        Returns
        -------
        ndarray
            The values (float), broadcast to the shape of the variables in ``env``. Numerical
            problems (log of a negative number, division by zero) give inf/NaN silently;
            use :meth:`evaluate_checked` to turn them into an error.

        Raises
        ------
        TableRangeError
            A temperature outside a rate table that does not allow extrapolation.
        """
        return self._run(env, 0)

    def evaluate_checked(self, env: Mapping, what: str = "rate coefficient") -> np.ndarray:
        """Evaluate, raising :class:`ReactionListError` at file:line for a value that is
        not finite or is negative.
        """
        out = self.evaluate(env)
        self.check(out, what)
        return out

    def check(self, values, what: str = "rate coefficient") -> None:
        """Raise :class:`ReactionListError` when ``values`` has a non-finite or negative
        entry (``what`` names the quantity in the message)."""
        values = np.asarray(values, dtype=float)
        bad = ~np.isfinite(values)
        if bad.any():
            raise ReactionListError(f"{what} '{self.text}' evaluates to "
                                    f"{values[bad].flat[0]} (a logarithm or square root of a "
                                    "negative number, a division by zero or an overflow)",
                                    file=self.file, line=self.line)
        if (values < 0).any():
            raise ReactionListError(f"{what} '{self.text}' is negative "
                                    f"({values[values < 0].flat[0]:.6g})",
                                    file=self.file, line=self.line)

    def bands(self, env: Mapping):
        """The uncertainty band from tabulated ``_low``/``_high`` columns.

        Returns
        -------
        (low, high) : tuple of ndarray, or None
            The whole expression evaluated with each table's value replaced by its low and
            its high column (element-wise min/max of the two, so ``low <= high`` also for
            ``1/table(...)``); None when no table in the expression has band columns.
        """
        if not self._has_bands:
            return None
        a = self._run(env, 1)
        b = self._run(env, 2)
        return np.minimum(a, b), np.maximum(a, b)


def compile_expression(text: str, *, file=None, line=None, base_dir=".",
                       level: int | None = None) -> CompiledExpr:
    """Compile a rate expression.

    Parameters
    ----------
    text : str
        The expression.
    file, line
        Where it was written; every error is raised there.
    base_dir : str or Path
        Folder that ``table()`` paths resolve against.
    level : int, optional
        Family level bound to ``v`` (then ``evaluate`` does not need ``v``).

    Returns
    -------
    CompiledExpr

    Raises
    ------
    ReactionListError
        Any syntax error, unknown name, strings outside ``table()``, nesting deeper than 64,
        a constant expression that evaluates to inf or NaN, or a problem in a rate table.
    """
    if not isinstance(text, str):
        raise ReactionListError("an expression must be text", file=file, line=line)
    stripped = text.strip()
    if len(stripped) > MAX_LENGTH:
        raise ReactionListError(f"expression longer than {MAX_LENGTH} characters",
                                file=file, line=line)
    parser = _Parser(stripped, file, line, base_dir, level)
    tree = parser.parse()
    tree = _fold(tree)
    source = _check_sources(tree, parser)
    if tree[0] == "num" and not np.isfinite(tree[1]):
        raise ReactionListError(f"expression '{stripped}' evaluates to {tree[1]} (a logarithm "
                                "or square root of a negative number, a division by zero or "
                                "an overflow)", file=file, line=line)
    func = _Compiler(file, line).build(tree)
    return CompiledExpr(stripped, file, line, level, parser.variables, source,
                        parser.tables, tree, func)
