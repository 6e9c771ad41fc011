"""Species names: the vocabulary of reaction lists, scenarios, observations and options.

A species is written as element symbols with counts, a charge and an optional state in
parentheses: ``N2``, ``O+``, ``O+(2D)``, ``N2+(v=1)``, ``O+(2D,v=1)``, ``N(2D)``. This module
turns such a name into a :class:`Species` with its canonical name, elements, charge, state and
mass. It knows nothing about reactions or families: the parser substitutes family levels
(``N2+(v)`` → ``N2+(v=3)``) before it calls :func:`parse_species`, so only whole-number levels
ever reach this module.

Problems raise :class:`ValueError` with a readable message; the parser adds file and line.
The module sits at the bottom of the package (docs/design.md §3.1, with constants and errors),
so that scenario checks and observation files can name species without the mechanism.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

__all__ = ["Species", "parse_species", "parse_species_at", "ATOMIC_MASS_AMU", "ELECTRON_MASS_AMU",
           "ELECTRON", "THIRD_BODY", "PHOTON", "format_elements"]

# One table of atomic weights and the electron mass for the whole package (re-exported).
from ionochem.constants import ATOMIC_MASS_AMU, ELECTRON_MASS_AMU  # noqa: E402

# Ground terms written bare in canonical names: O+(4S) -> O+, O(3P) -> O, N(4S) -> N,
# N+(3P) -> N+ (NIST Atomic Spectra Database ground levels *(from memory)*).
_GROUND_TERMS = {("O", 1): "4S", ("O", 0): "3P", ("N", 0): "4S", ("N", 1): "3P"}

_ELEMENT = re.compile(r"([A-Z][a-z]?)([0-9]*)")
_FORMULA = re.compile(r"(?:[A-Z][a-z]?[0-9]*)+")
_TERM = re.compile(r"[A-Za-z0-9]+'*")
_VIB = re.compile(r"v\s*=\s*(\S*)")
_MAX_NAME = 64


@dataclass(frozen=True)
class Species:
    """One species of a reaction list.

    Attributes
    ----------
    name : str
        Canonical name; ground states written bare (``O+(4S)`` → ``O+``).
    elements : tuple of (str, int)
        Element symbols with their counts, sorted by symbol.
    charge : int
        Charge in units of the elementary charge.
    state : str or None
        ``"2D"``, ``"v=1"``, ``"2D,v=1"``, or None.
    vib : int or None
        Vibrational level.
    electronic : str or None
        Electronic term, None for the ground state or when not given.
    base : str
        Name without the vibrational part (``N2+(v=1)`` → ``N2+``).
    mass_amu : float
        Mass in u (atomic mass units): sum of the atomic weights minus the mass of the
        electrons removed. ``e`` has the electron mass, ``hv`` zero, ``M`` NaN (a third body
        has no fixed mass).
    """

    name: str
    elements: tuple[tuple[str, int], ...]
    charge: int
    state: str | None
    vib: int | None
    electronic: str | None
    base: str
    mass_amu: float

    @property
    def is_electron(self) -> bool:
        """True for ``e``."""
        return self.name == "e"

    @property
    def is_third_body(self) -> bool:
        """True for ``M``."""
        return self.name == "M"

    @property
    def is_photon(self) -> bool:
        """True for ``hv``."""
        return self.name == "hv"

    @property
    def is_ion(self) -> bool:
        """True for a charged species other than the electron."""
        return self.charge != 0 and not self.is_electron

    def __str__(self) -> str:
        return self.name


ELECTRON = Species("e", (), -1, None, None, None, "e", ELECTRON_MASS_AMU)
THIRD_BODY = Species("M", (), 0, None, None, None, "M", float("nan"))
PHOTON = Species("hv", (), 0, None, None, None, "hv", 0.0)
_SPECIAL = {"e": ELECTRON, "M": THIRD_BODY, "hv": PHOTON}


def format_elements(counts: dict[str, int] | tuple[tuple[str, int], ...]) -> str:
    """Write element counts as ``"N2 O"`` (symbols sorted, count 1 left out)."""
    items = sorted(dict(counts).items())
    text = " ".join(s if n == 1 else f"{s}{n}" for s, n in items if n)
    return text or "nothing"


def _parse_state(state: str, name: str) -> tuple[str | None, int | None]:
    if not state.strip():
        raise ValueError(f"empty state '()' in species '{name}'")
    electronic = None
    vib = None
    for part in (p.strip() for p in state.split(",")):
        if not part:
            raise ValueError(f"empty part in the state of species '{name}'")
        m = _VIB.fullmatch(part)
        if m:
            if vib is not None:
                raise ValueError(f"two vibrational levels in species '{name}'")
            level = m.group(1)
            if level == "v" or re.fullmatch(r"v\s*[-+]\s*[0-9]+", level or ""):
                raise ValueError(f"species '{name}' uses the family level v outside a family")
            if not re.fullmatch(r"0|[1-9][0-9]{0,3}", level):
                raise ValueError(f"vibrational level in species '{name}' must be a whole "
                                 f"number 0 or more in ASCII digits, found '{level}'")
            vib = int(level)
        elif re.fullmatch(r"v\s*([-+]\s*[0-9]+)?", part):
            raise ValueError(f"species '{name}' uses the family level v outside a family "
                             "(a family has an id ending in (v) and a 'levels v = A..B' field)")
        elif _TERM.fullmatch(part):
            if electronic is not None:
                raise ValueError(f"two electronic terms in species '{name}'")
            electronic = part
        else:
            raise ValueError(f"invalid state '{part}' in species '{name}': write an electronic "
                             "term such as 2D, a vibrational level such as v=1, or both (2D,v=1)")
    return electronic, vib


def parse_species(text: str) -> Species:
    """Parse a species name.

    Parameters
    ----------
    text : str
        The name as written, e.g. ``"O+(2D)"``, ``"N2+(v=1)"``, ``"e"``, ``"M"``, ``"hv"``.

    Returns
    -------
    Species

    Raises
    ------
    ValueError
        For a name that does not follow the rules (unknown element, charge beyond ±2,
        unclosed parenthesis, ...).
    """
    if not isinstance(text, str):
        raise ValueError("a species name must be text")
    name = text.strip()
    if not name:
        raise ValueError("empty species name")
    if len(name) > _MAX_NAME:
        raise ValueError(f"species name longer than {_MAX_NAME} characters")
    if name in _SPECIAL:
        return _SPECIAL[name]
    if name in ("e-", "e+"):
        raise ValueError(f"write the electron as 'e', not '{name}'")
    if re.search(r"\s", name):
        raise ValueError(f"species name '{name}' contains a space")
    m = _FORMULA.match(name)
    if not m:
        raise ValueError(f"species name '{name}' must start with an element symbol "
                         "(capital letter, e.g. N2, O+, NO+)")
    formula = m.group(0)
    rest = name[m.end():]
    counts: dict[str, int] = {}
    for sym, num in _ELEMENT.findall(formula):
        if sym not in ATOMIC_MASS_AMU:
            known = " ".join(sorted(ATOMIC_MASS_AMU))
            raise ValueError(f"unknown element '{sym}' in species '{name}' (known: {known})")
        if num.startswith("0"):
            raise ValueError(f"element count '{num}' in species '{name}' must not start with 0")
        if num == "1":
            raise ValueError(f"write an element count of 1 without the number "
                             f"('{sym}', not '{sym}1') in species '{name}'")
        if len(num) > 3:
            raise ValueError(f"element count '{num}' in species '{name}' is too large")
        counts[sym] = counts.get(sym, 0) + (int(num) if num else 1)
    mc = re.match(r"[+\-]*", rest)
    charge_text = mc.group(0)
    rest = rest[mc.end():]
    if charge_text:
        if len(set(charge_text)) > 1:
            raise ValueError(f"mixed charge signs '{charge_text}' in species '{name}'")
        if len(charge_text) > 2:
            raise ValueError(f"charge '{charge_text}' in species '{name}' is not allowed; "
                             "use +, ++, - or --")
    charge = charge_text.count("+") - charge_text.count("-")
    state_text = None
    if rest:
        if rest[0] in "0123456789" and charge_text:
            raise ValueError(f"write the charge as repeated signs (e.g. N2++), not "
                             f"'{charge_text}{rest[0]}', in species '{name}'")
        if rest[0] != "(":
            if rest[0].isdecimal():
                raise ValueError(f"'{rest[0]}' in species '{name}' is not an ASCII digit: "
                                 "write counts with 0-9")
            raise ValueError(f"unexpected '{rest[0]}' in species '{name}'")
        close = rest.find(")")
        if close < 0:
            raise ValueError(f"unclosed parenthesis in species '{name}'")
        if close != len(rest) - 1:
            raise ValueError(f"unexpected '{rest[close + 1:]}' after the state in species "
                             f"'{name}'")
        state_text = rest[1:-1]
        if "(" in state_text:
            raise ValueError(f"nested parenthesis in species '{name}'")
    electronic, vib = (None, None) if state_text is None else _parse_state(state_text, name)
    atoms = sum(counts.values())
    if vib is not None and atoms == 1:
        raise ValueError(f"species '{name}' is an atom and has no vibrational levels")
    prefix = formula + charge_text
    if electronic is not None and _GROUND_TERMS.get((formula, charge)) == electronic:
        electronic = None
    parts = [p for p in (electronic, None if vib is None else f"v={vib}") if p is not None]
    state = ",".join(parts) if parts else None
    canonical = prefix + (f"({state})" if state else "")
    base = prefix + (f"({electronic})" if electronic else "")
    mass = sum(ATOMIC_MASS_AMU[s] * n for s, n in counts.items()) - charge * ELECTRON_MASS_AMU
    return Species(canonical, tuple(sorted(counts.items())), charge, state, vib, electronic,
                   base, mass)


_ALTITUDE = re.compile(r"[+-]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?")


def parse_species_at(text: str) -> tuple[str, float]:
    """Read a ``SPECIES@KM`` request (``N2+@200``, ``O+(total)@250.5``).

    The one reader of this form, for ``--budget`` and the scenario's ``[output] budget``
    alike, so that a request is refused in the same words wherever it is written, before
    any solve. The caller checks the species against the result and KM against the grid.

    Returns
    -------
    (str, float)
        The canonical species name (``O+(4S)@200`` → ``O+``) and the altitude, km.

    Raises
    ------
    ValueError
        No ``@``, no species, a species name :func:`parse_species` refuses, or a KM that is
        not a finite, non-negative number written with ASCII digits.
    """
    species, sep, km = str(text).rpartition("@")
    species, km = species.strip(), km.strip()
    if not sep or not km:
        raise ValueError(f"{text!r} is not SPECIES@KM (e.g. 'N2+@200')")
    if not species:
        raise ValueError(f"{text!r} names no species; give SPECIES@KM (e.g. 'N2+@200')")
    try:
        name = parse_species(species).name
    except ValueError as exc:
        raise ValueError(f"{text!r}: {exc}") from None
    if not _ALTITUDE.fullmatch(km):
        raise ValueError(f"{text!r}: altitude {km!r} is not a number (km, e.g. 200)")
    value = float(km)
    if not math.isfinite(value) or value < 0:
        raise ValueError(f"{text!r}: altitude must be a finite, non-negative km value")
    return name, value
