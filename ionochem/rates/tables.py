"""CSV files of the laboratory toolkit: reading numeric tables, writing level-row rate tables,
and the reaction-list entry that uses them.

Reading: ``#`` comment lines and blank lines may come anywhere; the first other line is the
header; every other line is a row of plain decimal numbers, as many as the header has
columns. Every problem is an :class:`~ionochem.errors.InputError` at ``file:line``.

Level-row rate table (what ``ionochem rates fit`` writes; the format of
docs/reaction-list.md, "Rate tables", with an integer column ``v``)::

    v,Te_K,k,k_low,k_high
    0,300,2.2e-07,1.9e-07,2.5e-07
    ...

The level column ``v`` comes first, then the temperature (docs/reaction-list.md, "Level-row
tables"); rows are grouped by level, temperatures increasing within a level. Inside a family
entry (``| levels v = A..B``) each level reads the rows of its own ``v``.

This module knows nothing of the column; it only writes files the reaction-list parser reads.
"""

from __future__ import annotations

import io
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ionochem.errors import InputError, safe_name
from ionochem.io.csvtable import TableProblem, number_cell, split_table
from ionochem.io.netcdf import atomic_path
from ionochem.io.paths import PathProblem, read_text

__all__ = ["NumericTable", "read_numeric_csv", "write_level_table", "write_csv",
           "family_entry", "LEVEL_COLUMN", "level_of_column", "band_f_expression",
           "check_ref"]

LEVEL_COLUMN = "v"
_LEVEL_NAME = re.compile(r"(?:.*[_ ])?v=?(\d+)")
_MAX_BYTES = 50_000_000


@dataclass(frozen=True)
class NumericTable:
    """A CSV table of numbers.

    Attributes
    ----------
    path : str
    header : tuple of str
    columns : dict of str to ndarray
        Each column as floats, in file order.
    lines : ndarray of int
        1-based file line of each row (for error messages).
    header_line : int
        1-based file line of the header.
    """

    path: str
    header: tuple
    columns: dict
    lines: np.ndarray
    header_line: int

    def __getitem__(self, name):
        return self.columns[name]

    def fail(self, message, row=None):
        """Raise an InputError at the header line or at the line of ``row``."""
        line = int(self.lines[row]) if row is not None else self.header_line
        raise InputError(message, file=self.path, line=line)


def read_numeric_csv(path, *, required=(), first=None, min_rows=1):
    """Read a CSV of numbers.

    Parameters
    ----------
    path : str or Path
    required : sequence of str
        Columns that must be present.
    first : str, optional
        Name the first column must have.
    min_rows : int
        Fewest data rows accepted.

    Returns
    -------
    NumericTable
    """
    name = str(path)
    try:
        _, text = read_text(path, limit=_MAX_BYTES)
    except PathProblem as exc:
        raise InputError(str(exc), file=name, line=exc.line) from None
    try:
        table = split_table(text)
    except TableProblem as exc:
        raise InputError(exc.message, file=name, line=exc.line) from None
    header, header_line = table.header, table.header_line
    for i, h in enumerate(header, start=1):
        # Every later message may quote a column name; a header cell that is not one (a
        # line of some other file, a spreadsheet formula) is refused without quoting it.
        if safe_name(h) == "(not a column name)":
            raise InputError(f"header cell {i} is not a column name (letters, digits and "
                             "_+-()=,. only, starting with a letter)", file=name,
                             line=header_line)
    if first is not None and header[0] != first:
        raise InputError(f"the first column must be '{first}', found {safe_name(header[0])}",
                         file=name, line=header_line)
    for col in required:
        if col not in header:
            raise InputError(f"no column '{col}' (columns: "
                             f"{', '.join(safe_name(h, quote=False) for h in header)})", file=name,
                             line=header_line)
    values = []
    for number, cells in zip(table.lines, table.rows, strict=True):
        try:
            values.append([number_cell(cell, col) for col, cell in zip(header, cells)])
        except ValueError as exc:
            raise InputError(str(exc), file=name, line=number) from None
    if len(values) < min_rows:
        raise InputError(f"needs at least {min_rows} rows of values, found {len(values)}",
                         file=name, line=header_line)
    arr = np.array(values, dtype=float).reshape(len(values), len(header))
    cols = {h: arr[:, i] for i, h in enumerate(header)}
    return NumericTable(name, tuple(header), cols, np.array(table.lines, dtype=int), header_line)


def level_of_column(name):
    """The level number a column name carries (``v0``, ``v=2``, ``sigma_v3``), or None."""
    m = _LEVEL_NAME.fullmatch(name)
    return int(m.group(1)) if m else None


def write_csv(path, header, columns, comments=()):
    """Write columns of numbers (and ``#`` comment lines first) atomically."""
    cols = [np.asarray(c) for c in columns]
    buf = io.StringIO()
    for c in comments:
        buf.write(f"# {c}\n")
    buf.write(",".join(header) + "\n")
    for row in zip(*cols):
        buf.write(",".join(_fmt(v) for v in row) + "\n")
    with atomic_path(path) as tmp, open(tmp, "w", encoding="utf-8", newline="") as fh:
        fh.write(buf.getvalue())
    return Path(path)


def _fmt(v):
    if isinstance(v, (int, np.integer)):
        return str(int(v))
    return f"{float(v):.6g}"


def write_level_table(path, temperature_K, rates, *, low=None, high=None,
                      temperature_column="Te_K", column="k", comments=()):
    """Write a level-row rate table.

    Parameters
    ----------
    path : str or Path
    temperature_K : array_like, shape (temperature,)
        Increasing temperatures (K).
    rates : dict of int to array_like, each shape (temperature,)
        Rate coefficient (cm3 s-1) of each level ``v``.
    low, high : dict of int to array_like, optional
        Band columns ``<column>_low`` / ``<column>_high`` per level.
    temperature_column : str
        Header of the temperature column (``Te_K`` for electron collisions).
    column : str
        Name of the rate column.
    comments : sequence of str
        ``#`` lines written first (provenance).
    """
    T = np.asarray(temperature_K, float)
    levels = sorted(rates)
    header = [LEVEL_COLUMN, temperature_column, column]
    with_band = low is not None and high is not None
    if with_band:
        header += [f"{column}_low", f"{column}_high"]
    cols = [[] for _ in header]
    for v in levels:
        cols[0].extend([int(v)] * T.size)
        parts = [T, np.asarray(rates[v], float)]
        if with_band:
            parts += [np.asarray(low[v], float), np.asarray(high[v], float)]
        for c, part in zip(cols[1:], parts):
            c.extend(part.tolist())
    return write_csv(path, header, cols, comments)


def family_entry(reaction_id, reaction, table_name, levels, *, column="k", ref=None,
                 fraction=None, f=None):
    """The reaction-list family entry that reads a level-row table.

    Returns text like ``ID(v): N2+(v) + e -> N + N | k = table("file.csv", "k") |
    f = 1.3 | levels v = 0..4 | ref = ...``; with ``fraction`` (a branching fraction of
    one product channel) the rate is ``F*table(...)``; ``f`` is the text of the one-sigma
    factor (:func:`band_f_expression`).
    """
    lo, hi = min(levels), max(levels)
    k = f'table("{table_name}", "{column}")'
    if fraction is not None:
        k = f"{fraction:g}*{k}"
    parts = [f"{reaction_id}(v): {reaction}", f"k = {k}"]
    if f:
        parts.append(f"f = {f}")
    parts.append(f"levels v = {lo}..{hi}")
    if ref:
        parts.append(f"ref = {ref}")
    return " | ".join(parts)


def _round_up(x, digits=3):
    """``x`` rounded up to ``digits`` significant digits (a factor never understated)."""
    scale = 10.0 ** (digits - 1 - int(np.floor(np.log10(x))))
    return float(np.ceil(x * scale - 1e-9) / scale)


def band_f_expression(bands):
    """The ``f`` of a family entry from its table's bands: per level the widest one-sigma
    factor of the band over the table's temperatures, max(k/k_low, k_high/k), rounded up.

    ``bands`` maps each level v to ``(k, low, high)`` arrays. Returns ``"1.3"`` when every
    level has the same factor, else a chain ``"1.3 if v < 0.5 else (2.17 if v < 1.5 else
    2.3)"`` in the reaction-list language. The Monte Carlo samples the band itself
    (analysis/sampling.py); this ``f`` states the same width where one number is asked for
    (``check --strict``, the default-list convention of a factor per entry).
    """
    factors = {}
    for v, (k, low, high) in sorted(bands.items()):
        # The values as the table holds them (written to 6 significant digits, _fmt), so
        # the factor is the one a reader of the table finds.
        k, low, high = (np.array([float(_fmt(float(x))) for x in np.ravel(a)])
                        for a in (k, low, high))
        with np.errstate(divide="ignore", invalid="ignore"):
            f = np.fmax(np.where(low > 0, k / low, np.nan), np.where(k > 0, high / k, np.nan))
        f = f[np.isfinite(f)]
        factors[int(v)] = _round_up(max(1.0, float(f.max()))) if f.size else 1.0
    values = list(factors.values())
    if len(set(values)) == 1:
        return f"{values[0]:g}"
    levels = list(factors)
    text = f"{factors[levels[-1]]:g}"
    for v in reversed(levels[:-1]):
        text = f"{factors[v]:g} if v < {v + 0.5:g} else ({text})"
    return text


def check_ref(text, flag="ref"):
    """A reference for a reaction-list entry: one line, no ``|`` (the field separator)."""
    if text is None:
        return None
    text = str(text).strip()
    if not text or "|" in text or any(ord(c) < 32 for c in text):
        raise InputError("a reference must be one non-empty line without '|' (the "
                         "reaction list's field separator)", file=flag)
    return text
