"""Reader of reaction lists (``*.reactions``, docs/design.md §5; user guide
docs/reaction-list.md).

One reaction per entry::

    ID: LEFT -> RIGHT | k = EXPR [| f = EXPR] [| ref = TEXT] [| levels v = A..B]

The reader checks everything it can without an atmosphere: the syntax of every line, species
names, charge and element balance, the rate and uncertainty expressions (compiled by
:mod:`ionochem.mechanism.expressions`), the rate tables they refer to, family expansion, and
unique ids. Every error is a :class:`~ionochem.errors.ReactionListError` at the file and line
of the entry. It returns plain data (:class:`ReactionList`); it never builds stoichiometry
matrices or evaluates rates on a grid (that is the Mechanism's job).
"""

from __future__ import annotations

import hashlib
import re
from pathlib import Path

from ionochem.errors import ReactionListError
from ionochem.io.paths import PathProblem, read_bounded, resolve_path
from ionochem.mechanism.expressions import CompiledExpr, compile_expression
from ionochem.mechanism.reaction_list import Reaction, ReactionList, ReactionWarning
from ionochem.mechanism.units import Tie, check_ties, parse_tie
from ionochem.species import (
    format_elements,
    parse_species,
)

__all__ = ["Reaction", "ReactionList", "ReactionWarning", "parse_reaction_list",
           "parse_reaction_text", "MAX_LEVELS"]

#: Largest number of levels one family may expand to.
MAX_LEVELS = 100
_MAX_TERMS = 12
_MAX_ENTRY = 20_000
_ID = re.compile(r"[A-Za-z0-9_.\-]+")
_FAMILY_ID = re.compile(r"([A-Za-z0-9_.\-]+)\(v\)")
_FIELD_NAME = re.compile(r"[A-Za-z_][A-Za-z0-9_]*")
_LEVELS = re.compile(r"levels\s+v\s*=\s*(-?[0-9]+)\s*\.\.\s*(-?[0-9]+)")
_JOIN = re.compile(r"\s+\+\s+")
_COUNT = re.compile(r"([0-9]+)\s+(\S.*)")
_STATE = re.compile(r"\(([^()]*)\)$")
_PLACEHOLDER = re.compile(r"(?:v\s*=\s*)?v(?:\s*([+-])\s*([0-9]+))?")
_FIELDS = ("k", "f", "ref", "levels")


# --------------------------------------------------------------------------- lines

_BAD_CHAR = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\x7f-\x9f\u2028\u2029"
                       "\ud800-\udfff\ufffe\uffff]|\r(?!\n)")


def _check_characters(text: str, path: str) -> None:
    m = _BAD_CHAR.search(text)
    if m is None:
        return
    ch = m.group(0)
    if ch == "\x00":
        bad = "a NUL byte (U+0000); a reaction list is plain text"
    elif ch == "\r":
        bad = "a carriage return (U+000D) that does not end a line"
    else:
        bad = f"the control character U+{ord(ch):04X}; a reaction list is plain text"
    line = text.count("\n", 0, m.start()) + 1
    raise ReactionListError(f"contains {bad}", file=path, line=line)


def _strip_comment(line: str) -> str:
    """Drop a ``#`` comment; a ``#`` inside a double-quoted string is kept."""
    if "#" not in line:
        return line
    quoted = False
    for i, ch in enumerate(line):
        if ch == '"':
            quoted = not quoted
        elif ch == "#" and not quoted:
            return line[:i]
    return line


def _entries(text: str, path: str):
    """Yield (line number, logical text) with comments removed and continuations joined."""
    buf: list[str] = []
    start = 0
    lines = text.split("\n")
    if lines and lines[-1] == "":
        lines.pop()  # the newline that ends the last line
    for number, raw in enumerate(lines, start=1):
        body = _strip_comment(raw.removesuffix("\r")).rstrip()
        if buf and not body.strip() and not body.endswith("\\"):
            # an empty line ends a continued entry
            yield start, " ".join(buf)
            buf = []
            continue
        if body.endswith("\\"):
            if not buf:
                start = number
            buf.append(body[:-1])
            if sum(len(b) for b in buf) > _MAX_ENTRY:
                raise ReactionListError(f"entry longer than {_MAX_ENTRY} characters",
                                        file=path, line=start)
            continue
        if buf:
            buf.append(body)
            yield start, " ".join(buf)
            buf = []
            continue
        if body.strip():
            yield number, body
    if buf:
        raise ReactionListError("the file ends with a line continuation '\\'", file=path,
                                line=start)


def _split_fields(text: str) -> list[str]:
    """Split on ``|`` outside double quotes."""
    parts, cur, quoted = [], [], False
    for ch in text:
        if ch == '"':
            quoted = not quoted
        if ch == "|" and not quoted:
            parts.append("".join(cur))
            cur = []
        else:
            cur.append(ch)
    parts.append("".join(cur))
    return parts


# --------------------------------------------------------------------------- entries

class _Context:
    def __init__(self, path: str, base_dir: Path):
        self.path = path
        self.base_dir = base_dir
        self.line = 0

    def fail(self, message: str):
        raise ReactionListError(message, file=self.path, line=self.line)


def _substitute_levels(term: str, level: int | None, ctx: _Context) -> str:
    """Replace ``v``, ``v-1``, ``v+1`` (and ``v=v``...) in a species state by the level."""
    m = _STATE.search(term)
    if not m:
        return term
    parts = [p.strip() for p in m.group(1).split(",")]
    changed = False
    for i, part in enumerate(parts):
        pm = _PLACEHOLDER.fullmatch(part)
        if not pm:
            continue
        if level is None:
            ctx.fail(f"species '{term}' uses the family level v, but this reaction is not a "
                     "family (a family has an id ending in (v) and a 'levels v = A..B' field)")
        value = level
        if pm.group(1):
            offset = int(pm.group(2))
            value = level + offset if pm.group(1) == "+" else level - offset
        if value < 0:
            ctx.fail(f"species '{term}' has level {value} for v = {level}; levels must be 0 "
                     "or more (narrow the 'levels' range)")
        parts[i] = f"v={value}"
        changed = True
    if not changed:
        return term
    return term[:m.start()] + "(" + ",".join(parts) + ")"


def _parse_side(text: str, side: str, level: int | None, ctx: _Context):
    text = text.strip()
    if not text:
        ctx.fail(f"the {side} side of the reaction is empty")
    terms = _JOIN.split(text)
    if len(terms) > _MAX_TERMS:
        ctx.fail(f"more than {_MAX_TERMS} terms on the {side} side")
    merged: dict[str, list] = {}
    for term in terms:
        term = term.strip()
        if not term:
            ctx.fail(f"empty term on the {side} side (terms are joined by ' + ')")
        count = 1
        m = _COUNT.fullmatch(term)
        if m:
            if m.group(1).startswith("0") or len(m.group(1)) > 2:
                ctx.fail(f"count '{m.group(1)}' in '{term}' must be a whole number from 1 "
                         "to 99")
            count = int(m.group(1))
            term = m.group(2).strip()
        elif term[0] in "0123456789":
            if "0" in term:
                ctx.fail(f"'{term}' is not a species: it contains the digit zero (0); the "
                         "oxygen atom is the letter O (e.g. 'O2')")
            ctx.fail(f"write the count and the species apart, e.g. '2 O', not '{term}'")
        if re.search(r"\s", term):
            if "+" in term:
                ctx.fail(f"'{term}': terms are joined by ' + ' with a space on both sides "
                         "(a '+' glued to a name is a charge)")
            ctx.fail(f"'{term}' is not a species name (it contains a space)")
        term = _substitute_levels(term, level, ctx)
        try:
            sp = parse_species(term)
        except ValueError as exc:
            ctx.fail(str(exc))
        if sp.is_photon and side == "left":
            ctx.fail("hv on the left: write a photo process as 'O -> O+ + e | k = photo' "
                     "(the photon is implied by k = photo)")
        if sp.name in merged:
            merged[sp.name][1] += count
        else:
            merged[sp.name] = [sp, count]
        if sp.is_third_body and merged[sp.name][1] != 1:
            ctx.fail("M (third body) may appear only once on a side")
    return tuple((sp, n) for sp, n in merged.values() if not sp.is_photon)


def _balance(reactants, products, ctx: _Context):
    def totals(terms):
        charge = 0
        elements: dict[str, int] = {}
        for sp, n in terms:
            if sp.is_third_body:
                continue
            charge += n * sp.charge
            for sym, c in sp.elements:
                elements[sym] = elements.get(sym, 0) + n * c
        return charge, elements

    cl, el = totals(reactants)
    cr, er = totals(products)
    if el != er:
        ctx.fail(f"elements do not balance: left {format_elements(el)}, right "
                 f"{format_elements(er)}")
    if cl != cr:
        ctx.fail(f"charge is {cl:+d} on the left and {cr:+d} on the right".replace("+0", "0"))
    has_m_left = any(s.is_third_body for s, _ in reactants)
    has_m_right = any(s.is_third_body for s, _ in products)
    if has_m_right and not has_m_left:
        ctx.fail("M (third body) on the right needs M on the left")


def _parse_fields(fields: list[str], ctx: _Context) -> dict[str, object]:
    out: dict[str, object] = {}
    for raw in fields:
        text = raw.strip()
        if not text:
            ctx.fail("empty field (two '|' in a row or a '|' at the end)")
        m = _FIELD_NAME.match(text)
        if not m:
            ctx.fail(f"expected a field such as 'k = ...', found '{text[:40]}'")
        name = m.group(0)
        if name not in _FIELDS:
            ctx.fail(f"unknown field '{name}' (fields are k, f, ref, levels)")
        if name in out:
            ctx.fail(f"field '{name}' given twice")
        if name == "levels":
            lm = _LEVELS.fullmatch(text)
            if not lm:
                ctx.fail(f"write levels as 'levels v = A..B' with whole numbers (ASCII "
                         f"digits 0-9), found '{text[:60]}'")
            a, b = int(lm.group(1)), int(lm.group(2))
            if a < 0:
                ctx.fail(f"levels v = {a}..{b}: levels must be 0 or more")
            if a > b:
                ctx.fail(f"levels v = {a}..{b}: the first level must not exceed the last")
            if b - a + 1 > MAX_LEVELS:
                ctx.fail(f"levels v = {a}..{b}: a family has at most {MAX_LEVELS} levels")
            out[name] = (a, b)
            continue
        rest = text[m.end():].lstrip()
        if not rest.startswith("="):
            ctx.fail(f"expected '=' after '{name}'")
        value = rest[1:].strip()
        if not value:
            ctx.fail(f"field '{name}' is empty")
        out[name] = value
    return out


def _compile_raw(text, ctx: _Context, level, what) -> CompiledExpr:
    try:
        return compile_expression(text, file=ctx.path, line=ctx.line, base_dir=ctx.base_dir,
                                  level=level)
    except ReactionListError as exc:
        prefix = "in expression: "
        if exc.message.startswith(prefix):
            raise ReactionListError(f"in {what}: {exc.message[len(prefix):]}",
                                    file=exc.file, line=exc.line) from None
        raise


def _compile(text, ctx: _Context, level, what) -> CompiledExpr:
    return _validate(_compile_raw(text, ctx, level, what), ctx, level, what)


def _validate(expr: CompiledExpr, ctx: _Context, level, what) -> CompiledExpr:
    if expr.value is not None:
        if what == "k" and expr.value < 0:
            ctx.fail(f"k = {expr.value:g} is negative")
        if what == "f" and expr.value < 1:
            ctx.fail(f"the uncertainty factor f = {expr.value:g} must be 1 or more")
    if what != "k" and expr.source is not None:
        ctx.fail(f"'{expr.source}' can only be used in k")
    if level is None and "v" in expr.variables:
        ctx.fail(f"{what} uses the family level v, but this reaction is not a family"
                 if what != "@default f" else "'@default f' cannot use the family level v")
    return expr


class _Reader:
    def __init__(self, path: str, base_dir: Path):
        self.ctx = _Context(path, base_dir)
        self.reactions: list[Reaction] = []
        self.families: dict[str, tuple[str, ...]] = {}
        self.id_lines: dict[str, int] = {}
        self.family_lines: dict[str, int] = {}
        self.default_f: CompiledExpr | None = None
        self.default_line: int | None = None
        self.ties: list[Tie] = []

    def directive(self, text: str):
        ctx = self.ctx
        unit = re.fullmatch(r"@unit(?:\s+(.*))?", text.strip(), flags=re.DOTALL)
        if unit is not None:
            try:
                self.ties.append(parse_tie(unit.group(1) or "", ctx.line))
            except ValueError as exc:
                ctx.fail(str(exc))
            return
        m = re.fullmatch(r"@default\s+([A-Za-z_]\w*)\s*=(.*)", text.strip())
        if not m:
            word = text.strip().split()[0] if text.strip() else "@"
            if word != "@default":
                ctx.fail(f"unknown directive '{word[:30]}' (the directives are "
                         "'@default f = EXPR' and '@unit NAME = ID, ID, ...')")
            ctx.fail("write the default as '@default f = EXPR'")
        if m.group(1) != "f":
            ctx.fail(f"only f can have a default ('@default f = EXPR'), not "
                     f"'{m.group(1)}'")
        if self.default_line is not None:
            ctx.fail(f"a second '@default f' (the first is at line {self.default_line})")
        if self.reactions:
            ctx.fail("'@default f' must come before the first reaction")
        value = m.group(2).strip()
        if not value:
            ctx.fail("'@default f' has no expression")
        expr = _compile(value, ctx, None, "@default f")
        self.default_f = _validate(expr, ctx, None, "f")
        self.default_line = ctx.line

    def entry(self, text: str):
        ctx = self.ctx
        fields = _split_fields(text)
        head = fields[0]
        if ":" not in head:
            if "->" in head:
                ctx.fail("missing reaction id: write 'ID: LEFT -> RIGHT | k = ...'")
            ctx.fail(f"expected 'ID: LEFT -> RIGHT | k = ...', found '{head.strip()[:40]}'")
        rid, equation = head.split(":", 1)
        rid = rid.strip()
        if not rid:
            ctx.fail("missing reaction id before ':'")
        fm = _FAMILY_ID.fullmatch(rid)
        if fm is None and not _ID.fullmatch(rid):
            ctx.fail(f"invalid reaction id '{rid[:40]}': use letters, digits, _ - . "
                     "(a family id ends in (v), e.g. DRN2(v))")
        opts = _parse_fields(fields[1:], ctx)
        if "k" not in opts:
            ctx.fail(f"reaction '{rid}' has no rate coefficient: add '| k = EXPR'")
        if equation.count("->") != 1:
            ctx.fail("missing '->' between the sides" if "->" not in equation
                     else "more than one '->'")
        left, right = equation.split("->")
        levels = opts.get("levels")
        if fm is not None and levels is None:
            ctx.fail(f"family id '{rid}' needs a 'levels v = A..B' field")
        if fm is None and levels is not None:
            ctx.fail(f"'levels' given, but '{rid}' is not a family id (write {rid}(v))")
        plain = fm.group(1) if fm else rid
        for other, where in ((plain, self.id_lines), (plain, self.family_lines)):
            if other in where:
                first = where[other]
                ctx.fail(f"duplicate id '{rid}' (first used at line {first})")
        ref = opts.get("ref")
        if fm is None:
            self.id_lines[plain] = ctx.line
            self.reactions.append(self.build(rid, None, None, left, right, opts, ref))
            return
        self.family_lines[plain] = ctx.line
        a, b = levels
        ids = []
        shared: dict[str, CompiledExpr | None] = {}
        for name in ("k", "f"):
            if name in opts:
                # Compiled at the first level to learn whether it depends on the level (uses
                # v, or reads a level-row table); if not, one copy serves every level.
                expr = _compile_raw(opts[name], ctx, a, name)
                per_level = "v" in expr.variables or any(t.level is not None
                                                         for t in expr.tables)
                shared[name] = None if per_level else _validate(
                    _compile_raw(opts[name], ctx, None, name), ctx, None, name)
        for level in range(a, b + 1):
            member = f"{plain}(v={level})"
            ids.append(member)
            self.reactions.append(self.build(member, rid, level, left, right, opts, ref,
                                             shared))
        self.families[rid] = tuple(ids)

    def build(self, rid, family, level, left, right, opts, ref, shared=None):
        ctx = self.ctx
        reactants = _parse_side(left, "left", level, ctx)
        products = _parse_side(right, "right", level, ctx)
        _balance(reactants, products, ctx)
        molecularity = sum(n for _, n in reactants)
        if molecularity > 3:
            ctx.fail(f"{molecularity} reactants: a reaction has one, two or three "
                     "(counting M and e)")
        shared = shared or {}
        k = shared.get("k") or _compile(opts["k"], ctx, level, "k")
        f = None
        if "f" in opts:
            f = shared.get("f") or _compile(opts["f"], ctx, level, "f")
        if k.source in ("photo", "photoelectron"):
            absorbers = [s for s, n in reactants for _ in range(n)]
            if len(absorbers) != 1 or absorbers[0].is_electron or absorbers[0].is_third_body:
                ctx.fail(f"k = {k.source} needs exactly one reactant, the absorbing species "
                         "(e.g. 'N2 -> N2+ + e')")
        return Reaction(rid, family, level, reactants, products, k, f, ref, ctx.path,
                        ctx.line)


def _warnings(reactions, path) -> list[ReactionWarning]:
    consumed = {s.name for r in reactions for s, _ in r.reactants}
    out: list[ReactionWarning] = []
    seen: set[str] = set()
    for r in reactions:
        for s, _ in r.products:
            if s.is_third_body or s.name in consumed or s.name in seen:
                continue
            seen.add(s.name)
            out.append(ReactionWarning(f"{s.name} is produced but never lost (it grows "
                                       "without bound unless the scenario fixes it)",
                                       path, r.line))
    if not reactions:
        out.append(ReactionWarning("the list has no reactions", path, None))
    return out


def _parse(text: str, path: str, base_dir: Path, digest: str) -> ReactionList:
    text = text.removeprefix("\ufeff")
    reader = _Reader(path, base_dir)
    for number, entry in _entries(text, path):
        reader.ctx.line = number
        if len(entry) > _MAX_ENTRY:
            reader.ctx.fail(f"entry longer than {_MAX_ENTRY} characters")
        if entry.lstrip().startswith("@"):
            reader.directive(entry)
        else:
            reader.entry(entry)
    reactions = tuple(reader.reactions)
    problem = check_ties(reader.ties, {r.id for r in reactions}, reader.families)
    if problem is not None:
        raise ReactionListError(problem[1], file=path, line=problem[0])
    return ReactionList(path, digest, reactions, dict(reader.families), reader.default_f,
                        _warnings(reactions, path), tuple(reader.ties))


def parse_reaction_text(text: str, path: str = "<text>", base_dir=".") -> ReactionList:
    """Parse a reaction list given as text.

    Parameters
    ----------
    text : str
        The contents.
    path : str
        Name used in messages and in :attr:`ReactionList.path`.
    base_dir : str or Path
        Folder that ``table()`` paths resolve against.

    Returns
    -------
    ReactionList

    Raises
    ------
    ReactionListError
        For anything malformed, at ``path:line``.
    """
    if not isinstance(text, str):
        raise ReactionListError("reaction list text must be a string", file=path)
    path = str(path)
    _check_characters(text, path)
    digest = hashlib.sha256(text.encode("utf-8")).hexdigest()
    return _parse(text, path, Path(base_dir), digest)


def parse_reaction_list(path) -> ReactionList:
    """Read and parse a reaction-list file.

    Parameters
    ----------
    path : str or Path
        The file; messages name it as given. Table paths resolve against its folder.

    Returns
    -------
    ReactionList

    Raises
    ------
    ReactionListError
        Unreadable file, invalid UTF-8 (at the line of the first bad byte), control
        characters, or anything malformed, at ``path:line``.
    """
    name = str(path)
    try:
        p = resolve_path(path)
        data = read_bounded(p)
    except PathProblem as exc:
        raise ReactionListError(f"reaction list {exc}", file=name) from None
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = data.count(b"\n", 0, exc.start) + 1
        col = exc.start - (data.rfind(b"\n", 0, exc.start) + 1) + 1
        raise ReactionListError(f"not valid UTF-8 (byte 0x{data[exc.start]:02x} at column "
                                f"{col}); reaction lists are UTF-8 text",
                                file=name, line=line) from None
    _check_characters(text, name)
    digest = hashlib.sha256(data).hexdigest()
    return _parse(text, name, p.parent, digest)
