"""The project's error types.

Every error ionochem raises on purpose derives from :class:`Error`. The command line turns
one into a single line ``file:line: message`` (or ``file: key: message`` for scenarios) and
exit status 2; anything else escaping is a bug (exit 1, traceback).
"""

from __future__ import annotations

from pathlib import Path


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

    ``levels`` holds the altitudes (km) that failed.
    """

    def __init__(self, message: str, *, levels=(), **kw):
        super().__init__(message, **kw)
        self.levels = tuple(levels)
