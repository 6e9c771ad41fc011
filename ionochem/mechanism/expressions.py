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

Tokens and the parser live in :mod:`ionochem.mechanism.expression_syntax`; this module folds,
type-checks and compiles the tree. It must not know about reactions or the atmosphere: it sees
text, a file and line for messages, the folder table paths resolve against, and (for a family
member) its level.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping

import numpy as np

from ionochem.errors import ReactionListError
from ionochem.mechanism.expression_syntax import (
    CMP_FUNCS,
    FUNCTIONS,
    MAX_DEPTH,
    MAX_LENGTH,
    SOURCES,
    UNARY_FUNCS,
    VARIABLES,
    ExpressionParser,
)

__all__ = ["CompiledExpr", "compile_expression", "VARIABLES", "SOURCES", "FUNCTIONS",
           "MAX_DEPTH", "MAX_LENGTH"]


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
                result = result and bool(CMP_FUNCS[chain[i]](chain[i - 1][1], chain[i + 1][1]))
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
    if fname in UNARY_FUNCS:
        return UNARY_FUNCS[fname](np.asarray(args[0], dtype=float))
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
                    r = CMP_FUNCS[chain[i]](vals[i - 1], vals[i + 1])
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


def _check_sources(node, parser: ExpressionParser):
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
    parser = ExpressionParser(stripped, file, line, base_dir, level)
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
