"""The project's error types.

Every error ionochem raises on purpose derives from :class:`Error`. The command line turns
one into a single line ``file:line: message`` (or ``file: key: message`` for scenarios) and
exit status 2; anything else escaping is a bug (exit 1, traceback).
"""

from __future__ import annotations

import re
from pathlib import Path

#: What a column or header name may look like to be quoted back in a message.
_NAME = re.compile(r"[A-Za-z_][A-Za-z0-9_+\-()=,.]{0,39}")


def safe_name(text, quote: bool = True) -> str:
    """``text`` quoted for a message when it looks like a column name, else a stand-in.

    Error messages about a file must not repeat arbitrary content of it (a table path may
    point at any file the user can read); a short name of letters, digits and ``_+-()=,.``
    is quoted, anything else is described as ``(not a column name)``.
    """
    text = str(text).strip()
    if not _NAME.fullmatch(text):
        return "(not a column name)"
    return repr(text) if quote else text


class Error(Exception):
    """Base of every deliberate ionochem error.

    Parameters
    ----------
    message : str
        What went wrong, in words a scientist understands.
    file : str or Path, optional
        The input file the problem is in.
    line : int, optional
        1-based line number in ``file``.
    key : str, optional
        Dotted scenario key (``solve.mode``) when there is no useful line.
    """

    def __init__(self, message: str, *, file: str | Path | None = None,
                 line: int | None = None, key: str | None = None):
        super().__init__(message)
        self.message = message
        self.file = None if file is None else str(file)
        self.line = line
        self.key = key

    def __str__(self) -> str:
        where = []
        if self.file is not None:
            where.append(self.file if self.line is None else f"{self.file}:{self.line}")
        if self.key is not None:
            where.append(self.key)
        return ": ".join(where + [self.message])


class InputError(Error):
    """A reaction list, scenario or table that cannot be accepted."""


class ReactionListError(InputError):
    """A malformed reaction list (or a rate table it refers to)."""


class ScenarioError(InputError):
    """A malformed scenario file or a table it refers to."""


class TableRangeError(InputError):
    """A value requested outside the range a table covers."""


class MechanismError(InputError):
    """A reaction list that parses but cannot make a solvable mechanism."""


class SolverError(Error):
    """A column the solvers could not bring to a valid answer.

    ``levels`` holds the altitudes (km) that failed and ``species``, where known, the species
    with the largest residual at each of them.
    """

    def __init__(self, message: str, *, levels=(), species=(), **kw):
        super().__init__(message, **kw)
        self.levels = tuple(levels)
        self.species = tuple(species)
