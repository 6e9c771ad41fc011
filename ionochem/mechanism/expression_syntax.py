"""The syntax of the rate-expression language: tokens and the parser (text to a syntax tree).

The grammar, the names and the limits are documented in :mod:`ionochem.mechanism.expressions`,
which compiles the tree this module builds; nothing here evaluates anything. Problems raise
:class:`~ionochem.errors.ReactionListError` at the referring file and line, with the position
in the expression.
"""


from __future__ import annotations

import difflib
import re
from pathlib import Path

import numpy as np

from ionochem.errors import ReactionListError
from ionochem.io.paths import PathProblem, resolve_path
from ionochem.mechanism.ratetables import RateTable, load_rate_table, where_tables

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
UNARY_FUNCS = {"exp": np.exp, "log": np.log, "log10": np.log10, "sqrt": np.sqrt,
                "abs": np.abs}
CMP_FUNCS = {"<": np.less, "<=": np.less_equal, ">": np.greater, ">=": np.greater_equal}
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


class ExpressionParser:
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
            elif op in CMP_FUNCS:
                self._need(ltype, NUM, f"'{op}'", tok)
                chain = [left]
                while True:
                    right, rtype = self.expr(bp)
                    self._need(rtype, NUM, f"'{op}'", tok)
                    chain += [op, right]
                    tok = self.peek()
                    if tok.kind == "op" and tok.text in CMP_FUNCS:
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


