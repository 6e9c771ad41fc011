"""The parsed reaction list as data: :class:`Reaction`, :class:`ReactionList` and the
warnings a list carries (:class:`ReactionWarning`).

Built by :mod:`ionochem.mechanism.parser`; read by the Mechanism, the model, the analyses
and the command line. Nothing here reads files.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from ionochem.mechanism.expressions import CompiledExpr
from ionochem.mechanism.units import Tie, analysis_units
from ionochem.species import Species

__all__ = ["Reaction", "ReactionList", "ReactionWarning"]

#: Units of k by the number of reactants.
_UNITS = {1: "s-1", 2: "cm3 s-1", 3: "cm6 s-1"}


class ReactionWarning(str):
    """A warning about a reaction list: the text ``"file:line: message"``.

    Attributes ``file``, ``line`` and ``message`` hold the parts.
    """

    file: str
    line: int | None
    message: str

    def __new__(cls, message: str, file, line):
        where = str(file) if line is None else f"{file}:{line}"
        self = super().__new__(cls, f"{where}: {message}")
        self.file = str(file)
        self.line = line
        self.message = message
        return self

    def __reduce__(self):
        return (ReactionWarning, (self.message, self.file, self.line))


@dataclass(frozen=True)
class Reaction:
    """One (expanded) reaction.

    Attributes
    ----------
    id : str
        Unique id; a family member is written ``DRN2(v=0)``.
    family : str or None
        The family id (``DRN2(v)``) or None.
    level : int or None
        The family level ``v``.
    reactants, products : tuple of (Species, int)
        Species with their counts, in the order written, repeated species merged; ``hv`` is
        dropped; ``M`` is kept (it is never a solved species).
    k : CompiledExpr
        Rate coefficient; units follow the molecularity (:attr:`k_units`).
    f : CompiledExpr or None
        One-sigma multiplicative uncertainty factor, None when the entry gives none (then
        :attr:`ReactionList.default_f` applies).
    ref : str or None
        Where the value comes from.
    file : str
        The reaction list.
    line : int
        Line of the entry (its first line when continued).
    """

    id: str
    family: str | None
    level: int | None
    reactants: tuple[tuple[Species, int], ...]
    products: tuple[tuple[Species, int], ...]
    k: CompiledExpr
    f: CompiledExpr | None
    ref: str | None
    file: str
    line: int

    @property
    def molecularity(self) -> int:
        """Number of reactants, counting ``M`` and ``e`` (1, 2 or 3)."""
        return sum(n for _, n in self.reactants)

    @property
    def k_units(self) -> str:
        """Units of ``k``: ``s-1``, ``cm3 s-1`` or ``cm6 s-1``."""
        return _UNITS[self.molecularity]

    @property
    def termolecular(self) -> bool:
        """True when a third body ``M`` is among the reactants."""
        return any(s.is_third_body for s, _ in self.reactants)

    @property
    def source(self) -> str | None:
        """``"photo"``, ``"photoelectron"``, ``"prescribed"`` or None (from ``k``)."""
        return self.k.source

    @property
    def equation(self) -> str:
        """The reaction written canonically, e.g. ``O+ + N2 -> NO+ + N``."""
        def side(terms):
            return " + ".join(s.name if n == 1 else f"{n} {s.name}" for s, n in terms)
        return f"{side(self.reactants)} -> {side(self.products) or 'nothing'}"


@dataclass
class ReactionList:
    """A parsed reaction list.

    Attributes
    ----------
    path : str
        The file as given (``"<text>"`` for text).
    sha256 : str
        Hex SHA-256 of the file bytes (of the UTF-8 text for :func:`parse_reaction_text`).
    reactions : tuple of Reaction
        Expanded reactions in file order.
    families : dict
        Family id → tuple of the expanded ids, in level order.
    default_f : CompiledExpr or None
        The ``@default f = ...`` expression.
    warnings : list of ReactionWarning
        Things that parse but look wrong (a species produced and never lost).
    ties : tuple of Tie
        The ``@unit NAME = ...`` lines (:mod:`ionochem.mechanism.units`), checked.
    """

    path: str
    sha256: str
    reactions: tuple[Reaction, ...]
    families: dict[str, tuple[str, ...]]
    default_f: CompiledExpr | None
    warnings: list[ReactionWarning] = field(default_factory=list)
    ties: tuple[Tie, ...] = ()

    @property
    def units(self):
        """The units of analysis (plain reactions, families, ties), in list order."""
        return analysis_units(self.reactions, self.ties)

    @property
    def ids(self) -> tuple[str, ...]:
        """Reaction ids in order."""
        return tuple(r.id for r in self.reactions)

    @property
    def species(self) -> tuple[str, ...]:
        """Names of every species that appears (without ``M``), in order of appearance."""
        seen: dict[str, None] = {}
        for r in self.reactions:
            for s, _ in r.reactants + r.products:
                if not s.is_third_body:
                    seen.setdefault(s.name, None)
        return tuple(seen)

    def __len__(self) -> int:
        return len(self.reactions)

    def __iter__(self):
        return iter(self.reactions)

    def __getitem__(self, reaction_id: str) -> Reaction:
        for r in self.reactions:
            if r.id == reaction_id:
                return r
        raise KeyError(reaction_id)
