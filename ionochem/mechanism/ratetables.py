"""Tabulated rate coefficients k(T) referred to by ``table("file.csv", "column")``.

A rate table is a CSV file: ``#`` comment lines (and blank lines) may come anywhere, the first
other row is the header, the first column is the temperature the rate depends on (``Te``,
``Ti``, ``Tn`` or ``Teff``, optionally with the unit suffix ``_K``), in K, strictly increasing
and positive; every other column is a rate coefficient (positive). A column ``<col>_low`` and
``<col>_high`` next to ``<col>`` give its uncertainty band.

Level-row tables: a table may start with an integer column ``v`` (whole numbers >= 0) before
the temperature. Its rows then belong to vibrational levels: a family member of level v reads
only the rows of its own v (each level a k(T) of its own, with its own band), so one line of a
reaction list gives a per-level rate. Such a table cannot be used outside a family, every level
of the family must have at least two rows, the temperatures of a level must be strictly
increasing and no (v, T) pair may appear twice.

Values are interpolated linearly in log k versus log T. Outside the tabulated range the lookup
fails with :class:`~ionochem.errors.TableRangeError` unless extrapolation was asked for, which
continues the end segments in log-log.

Every problem in a table is reported as :class:`~ionochem.errors.ReactionListError` at the
*referring* reaction's file and line, with the table's name in the message. This module
knows nothing about reactions beyond that file and line.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ionochem.errors import ReactionListError, TableRangeError, safe_name
from ionochem.io.csvtable import TableProblem, number_cell, split_table
from ionochem.io.paths import PathProblem, decode_text, read_bounded, regular_file

__all__ = ["RateTable", "load_rate_table", "clear_cache", "TEMPERATURE_COLUMNS"]

TEMPERATURE_COLUMNS = ("Te", "Ti", "Tn", "Teff")
_TEMP_HEADER = re.compile(r"(Te|Ti|Tn|Teff)(_K)?")
_MAX_BYTES = 10_000_000
# Relative slack when checking the range, so a temperature equal to an end point up to
# rounding is not refused *(common practice)*.
_RTOL = 1e-9

_CACHE: dict[tuple, _Parsed] = {}


@dataclass(frozen=True, eq=False)
class _Parsed:
    """A table column as read from its file (every level), before a level is chosen."""

    path: Path
    column: str
    variable: str
    temperature_K: np.ndarray
    values: np.ndarray
    low: np.ndarray | None
    high: np.ndarray | None
    levels: np.ndarray | None       # the v of each row, or None for a plain table


@dataclass(frozen=True, eq=False)
class RateTable:
    """One column of a rate table, ready to interpolate.

    Attributes
    ----------
    name : str
        The table's name as written in the reaction list.
    path : Path
        Resolved path of the CSV file.
    column : str
        Column name.
    variable : str
        Temperature the rate depends on: ``"Te"``, ``"Ti"``, ``"Tn"`` or ``"Teff"``.
    temperature_K : ndarray
        Tabulated temperatures (K), strictly increasing.
    values : ndarray
        Rate coefficients at those temperatures (units of the reaction's k).
    low, high : ndarray or None
        Uncertainty band columns ``<column>_low`` / ``<column>_high``, or None.
    level : int or None
        For a level-row table, the vibrational level whose rows these are; else None.
    """

    name: str
    path: Path
    column: str
    variable: str
    temperature_K: np.ndarray
    values: np.ndarray
    low: np.ndarray | None
    high: np.ndarray | None
    level: int | None = None

    @property
    def has_bands(self) -> bool:
        """True when the table gives ``_low`` and ``_high`` columns for this column."""
        return self.low is not None

    def interpolate(self, temperature_K, *, extrapolate: bool = False, band: int = 0,
                    file=None, line=None) -> np.ndarray:
        """Interpolate the table at the given temperatures.

        Parameters
        ----------
        temperature_K : array_like
            Temperatures (K), any shape.
        extrapolate : bool
            Continue the end segments linearly in log k versus log T outside the table.
        band : {0, 1, 2}
            0 for the central column, 1 for ``_low``, 2 for ``_high`` (the central column
            when the table has no band).
        file, line
            The referring reaction, for the error.

        Returns
        -------
        ndarray
            Rate coefficients, the shape of ``temperature_K``.

        Raises
        ------
        TableRangeError
            A temperature outside the table (without ``extrapolate``) or not positive.
        """
        T = np.asarray(temperature_K, dtype=float)
        y = self.values
        if band == 1 and self.low is not None:
            y = self.low
        elif band == 2 and self.high is not None:
            y = self.high
        flat = T.reshape(-1)
        bad = ~np.isfinite(flat) | (flat <= 0)
        if bad.any():
            raise TableRangeError(
                f"{self.variable} = {flat[bad][0]!r} K cannot be looked up in rate table "
                f"'{self.name}' (temperatures must be finite and positive)",
                file=file, line=line)
        lo, hi = self.temperature_K[0], self.temperature_K[-1]
        if not extrapolate:
            outside = (flat < lo * (1 - _RTOL)) | (flat > hi * (1 + _RTOL))
            if outside.any():
                worst = flat[outside]
                value = worst.min() if worst.min() < lo else worst.max()
                raise TableRangeError(
                    f"{self.variable} = {value:.6g} K is outside rate table '{self.name}' "
                    f"(column '{self.column}', {lo:.6g} to {hi:.6g} K); add \"extrapolate\" "
                    "as the third table() argument to allow extrapolation",
                    file=file, line=line)
            flat = np.clip(flat, lo, hi)
        lx = np.log(self.temperature_K)
        ly = np.log(y)
        lt = np.log(flat)
        out = np.interp(lt, lx, ly)
        if extrapolate:
            below = lt < lx[0]
            above = lt > lx[-1]
            if below.any():
                s = (ly[1] - ly[0]) / (lx[1] - lx[0])
                out[below] = ly[0] + s * (lt[below] - lx[0])
            if above.any():
                s = (ly[-1] - ly[-2]) / (lx[-1] - lx[-2])
                out[above] = ly[-1] + s * (lt[above] - lx[-1])
        return np.exp(out).reshape(T.shape)


def clear_cache() -> None:
    """Forget every loaded table (tests use it)."""
    _CACHE.clear()


def _fail(name, message, file, line):
    raise ReactionListError(f"rate table '{name}': {message}", file=file, line=line)


def _number(cell: str, what: str, row_line: int, name, file, line) -> float:
    try:
        return number_cell(cell, what)
    except ValueError as exc:
        _fail(name, f"line {row_line}: {exc}", file, line)


def where_tables(base_dir) -> str:
    """Where a table path may point, for messages."""
    return (f"table paths are absolute or relative to {base_dir} (the reaction list's folder, "
            "or the working directory for --set) and must name a regular CSV file of at "
            f"most {_MAX_BYTES} bytes")


def load_rate_table(path, column: str, *, file=None, line=None, name: str | None = None,
                    level: int | None = None, base_dir=None) -> RateTable:
    """Load one column of a rate table (cached per file and column).

    Parameters
    ----------
    path : str or Path
        The CSV file, already resolved against the reaction file's folder.
    column : str
        Column to read.
    file, line
        The referring reaction (every error is reported there).
    name : str, optional
        The table's name as written in the reaction list (defaults to ``path``).
    level : int, optional
        The family level of the referring reaction (None outside a family). A level-row
        table (one with a ``v`` column) returns the rows of this level; a plain table
        ignores it.
    base_dir : str or Path, optional
        The folder relative names resolve against (named in "not found" messages).

    Returns
    -------
    RateTable

    Raises
    ------
    ReactionListError
        Missing or unreadable file, not UTF-8, bad header, missing column, a value that is not
        a positive number, temperatures not strictly increasing; for a level-row table also a
        ``v`` that is not a whole number >= 0, a repeated (v, T) row, use outside a family
        (``level`` None) and a level with no rows.
    """
    path = Path(path)
    name = str(path) if name is None else name
    hint = where_tables(path.parent if base_dir is None else base_dir)
    try:
        st = regular_file(path, _MAX_BYTES)
    except PathProblem as exc:
        _fail(name, f"{exc} (looked for {path}); {hint}", file, line)
    key = (str(path), column, st.st_mtime_ns, st.st_size)
    parsed = _CACHE.get(key)
    if parsed is None:
        parsed = _parse(path, column, st, name, file, line, hint)
        _CACHE[key] = parsed
    return _select(parsed, name, level, file, line)


def _select(p: _Parsed, name, level, file, line) -> RateTable:
    """The RateTable of one level (or the whole plain table)."""
    if p.levels is None:
        return RateTable(name, p.path, p.column, p.variable, p.temperature_K, p.values,
                         p.low, p.high)
    present = sorted({int(x) for x in p.levels})
    if level is None:
        _fail(name, "has a 'v' column (rows per vibrational level), so it can only be used "
                    "in a family entry (one with 'levels v = A..B'), where each level reads "
                    "its own rows", file, line)
    rows = p.levels == int(level)
    if not rows.any():
        _fail(name, f"no rows for level v = {int(level)} (the table has v = "
                    f"{', '.join(str(x) for x in present)})", file, line)
    if rows.sum() < 2:
        _fail(name, f"level v = {int(level)} needs at least two rows of values", file, line)

    def pick(a):
        if a is None:
            return None
        out = a[rows].copy()
        out.setflags(write=False)
        return out
    return RateTable(name, p.path, p.column, p.variable, pick(p.temperature_K),
                     pick(p.values), pick(p.low), pick(p.high), int(level))


def _parse(path: Path, column, st, name, file, line, hint) -> _Parsed:
    def fail(message):
        _fail(name, message, file, line)

    table = _split(path, hint, fail)
    header = list(table.header)
    rows = list(zip(table.lines, table.rows, strict=True))
    has_v, t_col, variable, cols = _layout(header, column, fail)
    arr, levels = _values(rows, header, cols, has_v, name, file, line, fail)
    T = arr[:, 0]
    row_lines = [r[0] for r in rows]
    lv = np.array(levels, dtype=int) if has_v else np.zeros(len(T), dtype=int)
    _check_temperatures(T, lv, has_v, header[t_col], row_lines, fail)
    values = arr[:, 1]
    low = high = None
    if len(cols) == 4:
        low, high = arr[:, 2], arr[:, 3]
        wrong = (low > values) | (high < values)
        if wrong.any():
            i = int(np.argmax(wrong))
            fail(f"line {row_lines[i]}: the band {column}_low .. {column}_high must "
                 f"contain {column}")
    for a in (T, values, low, high):
        if a is not None:
            a.setflags(write=False)
    return _Parsed(path, column, variable, T, values, low, high, lv if has_v else None)


def _split(path, hint, fail):
    """The table's text (bounded, UTF-8) split by :func:`ionochem.io.csvtable.split_table`."""
    try:
        data = read_bounded(path, _MAX_BYTES)
    except PathProblem as exc:
        fail(f"{exc}; {hint}")
    try:
        text = decode_text(data)
    except PathProblem as exc:
        fail(f"{str(exc).removeprefix('is ')} (line {exc.line})")
    try:
        return split_table(text)
    except TableProblem as exc:
        fail(f"line {exc.line}: {exc.message}" if exc.line else exc.message)


def _layout(header, column, fail):
    """(has a ``v`` column, index of the temperature column, its variable, the indices of
    the temperature, ``column`` and its band columns)."""
    has_v = header[0] == "v"
    if "v" in header[1:]:
        fail("the level column 'v' must be the first column (v, then the temperature)")
    t_col = 1 if has_v else 0
    if len(header) <= t_col:
        fail("the header has no temperature column after 'v'")
    m = _TEMP_HEADER.fullmatch(header[t_col])
    if not m:
        where = "the column after 'v'" if has_v else "the first column"
        fail(f"{where} must be the temperature (Te, Ti, Tn or Teff, "
             f"optionally with _K), found {safe_name(header[t_col])}")
    if column == header[t_col]:
        fail(f"column '{column}' is the temperature column")
    if has_v and column == "v":
        fail("column 'v' is the level column")
    if column not in header:
        fail(f"no column '{column}' (columns: "
             f"{', '.join(safe_name(h, quote=False) for h in header[t_col + 1:])})")
    lo_name, hi_name = f"{column}_low", f"{column}_high"
    has_lo, has_hi = lo_name in header, hi_name in header
    if has_lo != has_hi:
        fail(f"column '{lo_name if has_lo else hi_name}' needs its partner "
             f"'{hi_name if has_lo else lo_name}'")
    cols = [t_col, header.index(column)]
    if has_lo:
        cols += [header.index(lo_name), header.index(hi_name)]
    return has_v, t_col, m.group(1), cols


def _values(rows, header, cols, has_v, name, file, line, fail):
    """The numbers of ``cols`` in each row, all positive, and the level of each row."""
    table = []
    levels = []
    for row_line, cells in rows:
        if has_v:
            cell = cells[0]
            if not re.fullmatch(r"\+?[0-9]{1,3}", cell):
                fail(f"line {row_line}: the level v is not a whole number "
                     "from 0 to 999 (ASCII digits)")
            levels.append(int(cell))
        vals = [_number(cells[c], header[c], row_line, name, file, line) for c in cols]
        if vals[0] <= 0:
            fail(f"line {row_line}: temperature {vals[0]:g} K is not positive")
        for c, v in zip(cols[1:], vals[1:], strict=True):
            if v <= 0:
                fail(f"line {row_line}: {header[c]} = {v:g} is not positive "
                     "(rates are interpolated in log k)")
        table.append(vals)
    if len(table) < 2:
        fail("needs at least two rows of values")
    return np.array(table, dtype=float), levels


def _check_temperatures(T, lv, has_v, t_name, row_lines, fail):
    """No repeated (v, T) row; temperatures strictly increasing within each level."""
    if has_v:
        seen: dict[tuple[int, float], int] = {}
        for i, (v, t) in enumerate(zip(lv, T, strict=True)):
            first = seen.setdefault((int(v), float(t)), row_lines[i])
            if first != row_lines[i]:
                fail(f"duplicate row for v = {int(v)}, {t_name} = {t:g} "
                     f"(lines {first} and {row_lines[i]})")
    for v in np.unique(lv):
        idx_v = np.nonzero(lv == v)[0]
        steps = np.diff(T[idx_v])
        if (steps <= 0).any():
            i = idx_v[int(np.argmax(steps <= 0)) + 1]
            j = idx_v[int(np.argmax(steps <= 0))]
            within = f" within level v = {int(v)}" if has_v else ""
            fail(f"temperatures must be strictly increasing{within} "
                 f"({t_name} = {T[i]:g} after {T[j]:g}, line {row_lines[i]})")
