"""The commented-CSV table format, split into header and rows in one place.

Every CSV table of the project has the same shape: profile tables of scenarios, the packaged
data tables (flux model, cross sections), rate tables of reaction lists, observation files
and the laboratory toolkit's files. The text is UTF-8 (a byte-order mark dropped; decoding
is :func:`ionochem.io.paths.decode_text`); a line that is blank or whose first non-blank
character is ``#`` is a comment, anywhere in the file; the first other line is the header;
every later line is one row with one cell per column (cells and names stripped of blanks).
Each line is parsed on its own, so a stray quote cannot join two lines and every problem
has its own file line.

This module reads no files and knows nothing of what a table means: :func:`split_table`
raises :class:`TableProblem` (a message and the file line); each reader turns it into its
own error at its own place (``file:line``, a scenario key, the referring line of a reaction
list) with the message and the line unchanged. What the columns must be, and which cells
must be numbers (:func:`number_cell`), is the reader's business.
"""

from __future__ import annotations

import csv
import math
import re
from dataclasses import dataclass

from ionochem.errors import safe_name

__all__ = ["CsvTable", "TableProblem", "number_cell", "parse_number", "split_table"]


class TableProblem(ValueError):
    """A problem of a table's text: ``message`` and the 1-based file ``line`` (or None)."""

    def __init__(self, message: str, line: int | None = None):
        super().__init__(message)
        self.message = message
        self.line = line


@dataclass(frozen=True)
class CsvTable:
    """A table split into cells.

    Attributes
    ----------
    header : tuple of str
        Column names, unique and non-empty.
    header_line : int
        1-based file line of the header.
    rows : tuple of tuple of str
        The cells of each row, as many as the header has names.
    lines : tuple of int
        1-based file line of each row.
    """

    header: tuple
    header_line: int
    rows: tuple
    lines: tuple


def _cells(raw: str, line: int) -> list[str]:
    try:
        cells = next(csv.reader([raw], skipinitialspace=True), [])
    except csv.Error as exc:
        raise TableProblem(f"the row is not CSV ({str(exc).split(' (')[0]})", line) from None
    return [c.strip() for c in cells]


def split_table(text: str, *, max_rows: int | None = None,
                row_word: str = "rows") -> CsvTable:
    """Split a commented-CSV text into its header and rows.

    Parameters
    ----------
    text : str
        The decoded file.
    max_rows : int, optional
        Most data rows accepted (counted before any row is parsed).
    row_word : str
        What a row is, for the message of ``max_rows`` (``"observations"``).

    Raises
    ------
    TableProblem
        No header, a header name that is empty or repeated, a line that is not CSV, a row
        with another number of cells than the header has names, more than ``max_rows`` rows.
    """
    numbered = [(i, ln) for i, ln in enumerate(text.splitlines(), start=1)
                if ln.strip() and not ln.lstrip().startswith("#")]
    if not numbered:
        raise TableProblem("no header row (the table is empty)")
    if max_rows is not None and len(numbered) - 1 > max_rows:
        raise TableProblem(f"{len(numbered) - 1} rows, more than the {max_rows} {row_word} a "
                           "file may hold; thin or split the table")
    header_line = numbered[0][0]
    header = _cells(numbered[0][1], header_line)
    for j, name in enumerate(header):
        if not name:
            raise TableProblem(f"column {j + 1} of the header has no name", header_line)
    for name in header:
        if header.count(name) > 1:
            raise TableProblem(f"column {safe_name(name)} appears twice in the header",
                               header_line)
    rows, lines = [], []
    for line, raw in numbered[1:]:
        cells = _cells(raw, line)
        if len(cells) != len(header):
            raise TableProblem(f"{len(cells)} cells but the header has {len(header)} columns",
                               line)
        rows.append(tuple(cells))
        lines.append(line)
    return CsvTable(tuple(header), header_line, tuple(rows), tuple(lines))


_NUMBER = re.compile(r"[+-]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?")


def parse_number(cell: str) -> float | None:
    """The number written in ``cell`` with ASCII digits (``1.5e6``, ``-.5``), or None.

    ``float`` alone would also accept Unicode digits (``'١'``), underscores, ``inf`` and
    ``nan``; a table cell may hold none of them. A number too large for a float gives inf.
    """
    cell = cell.strip()
    return float(cell) if _NUMBER.fullmatch(cell) else None


def number_cell(cell: str, column: str) -> float:
    """The finite number in ``cell`` of ``column``.

    Raises
    ------
    ValueError
        Not a number written with ASCII digits, or too large for a float (the message
        quotes the column's name, never the cell).
    """
    value = parse_number(cell)
    if value is None:
        raise ValueError(f"the cell in column {safe_name(column)} is not a number "
                         "(ASCII digits, e.g. 1.5e6)")
    if not math.isfinite(value):
        raise ValueError(f"the cell in column {safe_name(column)} is too large (not a finite "
                         "number)")
    return value
