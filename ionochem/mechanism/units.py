"""Units of analysis: the reactions a sensitivity, a budget line or an uncertainty draw treats
as one process.

Three kinds (docs/reaction-list.md, "Units of analysis"):

- a plain reaction is a unit of its own;
- a family ``ID(v): … | levels v = A..B`` is one unit: its levels are one process measured
  or computed together (a new dissociative-recombination table changes every level);
- a **tie** joins several reactions or families into one larger unit, written in the list as

      @unit NAME = MEMBER, MEMBER, ...

  where each MEMBER is a plain reaction id or a whole family id (``DR_N2plus(v)``); the
  product branches of one process (the two dissociative-recombination channels of N2+, the
  channels of O+(2P) + N2) are the usual case.

Rules, checked when the list is read (errors at the ``@unit`` line): a unit name uses the
characters of a reaction id and differs from every reaction and family id and every other
unit; a tie has at least two members; every member exists (a tie may come before or after
its members); a family is tied whole (not one of its levels); a reaction or family belongs to
at most one tie. This module knows nothing of the atmosphere.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

__all__ = ["Tie", "Unit", "parse_tie", "check_ties", "analysis_units", "family_key"]

_NAME = re.compile(r"[A-Za-z0-9_.\-]+")
_MEMBER = re.compile(r"[A-Za-z0-9_.\-]+(\(v\))?")
_LEVEL_ID = re.compile(r"([A-Za-z0-9_.\-]+)\(v=-?[0-9]+\)")


@dataclass(frozen=True)
class Tie:
    """A ``@unit NAME = A, B, ...`` line: its name, members as written and line number."""

    name: str
    members: tuple[str, ...]
    line: int


@dataclass(frozen=True)
class Unit:
    """One unit of analysis.

    Attributes
    ----------
    name : str
        The reaction id (plain), the family id (``DR_N2plus(v)``) or the tie's name.
    kind : str
        ``"reaction"``, ``"family"`` or ``"tied"``.
    parts : tuple of str
        What it is made of: itself (plain), the family id, or the tie's members as written.
    members : tuple of str
        The expanded reaction ids, in reaction-list order.
    """

    name: str
    kind: str
    parts: tuple[str, ...]
    members: tuple[str, ...]


def parse_tie(text: str, line: int) -> Tie:
    """Parse the part after ``@unit``: ``NAME = MEMBER, MEMBER, ...``.

    Raises
    ------
    ValueError
        With a readable message (the parser adds file and line).
    """
    name, sep, rest = text.partition("=")
    name = name.strip()
    if not sep or not name:
        raise ValueError("write a tie as '@unit NAME = ID, ID, ...'")
    if not _NAME.fullmatch(name):
        raise ValueError(f"invalid unit name '{name[:40]}': use letters, digits, _ - .")
    members = tuple(m.strip() for m in rest.split(","))
    if not members or any(not m for m in members):
        raise ValueError(f"unit '{name}': an empty member (write '@unit {name} = ID, ID')")
    for m in members:
        if _LEVEL_ID.fullmatch(m):
            fam = _LEVEL_ID.fullmatch(m).group(1)
            raise ValueError(f"unit '{name}': '{m[:40]}' is one level of a family; a family "
                             f"is tied whole (write {fam}(v))")
        if not _MEMBER.fullmatch(m):
            raise ValueError(f"unit '{name}': invalid member '{m[:40]}' (a reaction id or "
                             "a family id such as DRN2(v))")
    if len(set(members)) != len(members):
        raise ValueError(f"unit '{name}' lists a member twice")
    if len(members) < 2:
        raise ValueError(f"unit '{name}' has one member; a tie joins two or more reactions "
                         "or families (a family is already one unit)")
    return Tie(name, members, line)


def check_ties(ties, ids, families):
    """Check ties against the list's ids; return ``(line, message)`` of the first problem.

    Parameters
    ----------
    ties : sequence of Tie
    ids : collection of str
        Every expanded reaction id.
    families : dict
        Family id → its member ids.

    Returns
    -------
    tuple (int, str) or None
    """
    plain_families = {f.split("(")[0] for f in families}
    owner: dict[str, str] = {}
    names: set[str] = set()
    for tie in ties:
        if tie.name in ids or tie.name in plain_families or tie.name in families:
            return tie.line, (f"unit name '{tie.name}' is already a reaction or family id; "
                              "choose another name")
        if tie.name in names:
            return tie.line, f"a second unit named '{tie.name}'"
        names.add(tie.name)
        for m in tie.members:
            if m not in ids and m not in families:
                hint = (f" (the family is written {m}(v))" if m in plain_families else "")
                return tie.line, f"unit '{tie.name}': no reaction or family '{m}'{hint}"
            if m in owner:
                return tie.line, (f"'{m}' is already in unit '{owner[m]}'; a reaction "
                                  "belongs to one unit")
            owner[m] = tie.name
    return None


def family_key(reaction) -> str | None:
    """The family id of a reaction (``DR_N2plus(v)``), or None for a plain one."""
    return getattr(reaction, "family", None)


def analysis_units(reactions, ties=()) -> tuple[Unit, ...]:
    """Every unit of a list of reactions, in the order of their first member.

    Parameters
    ----------
    reactions : sequence of Reaction
        The expanded reactions (``id``, ``family``).
    ties : sequence of Tie
        The list's ``@unit`` lines (checked; members absent from ``reactions`` are skipped,
        so a tie still applies to a list with some reactions removed).

    Returns
    -------
    tuple of Unit
        Each reaction in exactly one unit.
    """
    part_of = {}
    for tie in ties:
        for m in tie.members:
            part_of[m] = tie
    units: dict[str, list] = {}
    info: dict[str, tuple] = {}
    for r in reactions:
        fam = family_key(r)
        key = fam or r.id
        tie = part_of.get(key)
        if tie is not None:
            name, kind, parts = tie.name, "tied", tie.members
        elif fam is not None:
            name, kind, parts = fam, "family", (fam,)
        else:
            name, kind, parts = r.id, "reaction", (r.id,)
        units.setdefault(name, []).append(r.id)
        info.setdefault(name, (kind, parts))
    out = []
    for name, members in units.items():
        kind, parts = info[name]
        if kind == "tied":
            present = {m for r in reactions if r.id in members
                       for m in (family_key(r) or r.id,)}
            parts = tuple(p for p in parts if p in present)
            if len(parts) < 2 and parts:
                # A tie of which one part remains is that part alone.
                kind = "family" if "(v)" in parts[0] else "reaction"
                name = parts[0]
        out.append(Unit(name, kind, tuple(parts), tuple(members)))
    return tuple(out)
