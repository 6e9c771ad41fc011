"""CSV profile tables referenced by scenarios.

A profile table is a small comma-separated file: optional ``#`` comment lines, one header row of
column names, then numeric rows. The first column of a *profile* is ``altitude_km``; every
other column is one quantity (a density in cm-3, a temperature in K, a volume rate in
cm-3 s-1). :func:`read_profile_table` reads one and interpolates each column onto the model's
altitude grid; :func:`read_csv_columns` is the shared low-level reader that other tables (a
solar spectrum, say) reuse.

The commented-CSV format itself is split by :mod:`ionochem.io.csvtable` (the one reader of
that format); only the checks and the interpolation rule are written here. This module
must not know what a column means beyond the ``_K`` naming rule (temperatures in kelvin must
be positive): the caller says which columns it needs and whether they must be non-negative.
"""

from __future__ import annotations

import warnings
from collections.abc import Collection, Sequence
from pathlib import Path

import numpy as np

from ionochem.errors import InputError, ScenarioError, safe_name
from ionochem.io.csvtable import TableProblem, number_cell, split_table
from ionochem.io.paths import PathProblem, decode_text, read_bounded
from ionochem.io.plausibility import check_column

__all__ = ["ALTITUDE_TOLERANCE_KM", "read_csv_columns", "read_profile_table"]

#: How far (km) a grid point may lie outside a table's altitude range and still be accepted
#: (rounding of grid arithmetic, not extrapolation).
ALTITUDE_TOLERANCE_KM = 1e-9


def _fail(message: str, path: Path, line: int | None, where: str | None,
          scenario_file: str | Path | None):
    """Build the error for a bad table.

    With ``where`` (the scenario key that names the table) the error is a
    :class:`ScenarioError` at that key, with the table's file name and line in the message;
    without it, an :class:`InputError` at ``path:line``.
    """
    if where is None:
        return InputError(message, file=path, line=line)
    place = path.name if line is None else f"{path.name} line {line}"
    return ScenarioError(f"{place}: {message}",
                         file=scenario_file if scenario_file is not None else path, key=where)


def read_csv_columns(path: str | Path, *, where: str | None = None,
                     scenario_file: str | Path | None = None
                     ) -> tuple[list[str], np.ndarray, np.ndarray]:
    """Read a numeric CSV table with a header row.

    Lines that are blank or whose first non-blank character is ``#`` are skipped anywhere in
    the file. The first remaining line is the header; every later line is a row with exactly
    one finite number per column.

    Parameters
    ----------
    path : str or Path
        The CSV file (UTF-8, a byte-order mark is accepted).
    where : str, optional
        Dotted scenario key that refers to this table (``"neutrals.table"``). When given,
        errors are :class:`~ionochem.errors.ScenarioError` at that key with the table's file
        name and line in the message; otherwise :class:`~ionochem.errors.InputError` at
        ``path:line``.
    scenario_file : str or Path, optional
        The scenario that refers to the table, used as the error's file with ``where``.

    Returns
    -------
    header : list of str
        Column names, stripped of surrounding blanks.
    data : numpy.ndarray
        Shape (row, column), float64.
    lines : numpy.ndarray
        Shape (row,), int: the 1-based file line of each row, for error messages.

    Raises
    ------
    InputError or ScenarioError
        Missing or unreadable file, no header, empty or repeated column names, a row with the
        wrong number of cells, a cell that is not a finite number, or no data rows.
    """
    path = Path(path)
    try:
        text = decode_text(read_bounded(path))
    except PathProblem as exc:
        raise _fail(f"table file {exc}", path, exc.line, where, scenario_file) from None
    try:
        table = split_table(text)
    except TableProblem as exc:
        raise _fail(exc.message, path, exc.line, where, scenario_file) from None
    if not table.rows:
        raise _fail("the table has a header but no data rows", path, table.header_line,
                    where, scenario_file)
    values: list[list[float]] = []
    for line, cells in zip(table.lines, table.rows, strict=True):
        try:
            values.append([number_cell(cell, name)
                           for name, cell in zip(table.header, cells, strict=True)])
        except ValueError as exc:
            raise _fail(str(exc), path, line, where, scenario_file) from None
    return (list(table.header), np.asarray(values, dtype=float),
            np.asarray(table.lines, dtype=int))


def read_profile_table(path: str | Path, grid_km: Sequence[float] | np.ndarray, *,
                       columns: Sequence[str] | None = None, where: str,
                       nonnegative: bool | Collection[str] = False,
                       scenario_file: str | Path | None = None) -> dict[str, np.ndarray]:
    """Read a CSV altitude profile and interpolate its columns onto a grid.

    The first column must be ``altitude_km``, strictly increasing or strictly decreasing (a
    decreasing table is reversed). Each column is interpolated on altitude: log-linearly
    (linear in the logarithm of the value, exact for an exponential profile) when all its
    values are strictly positive, linearly otherwise. Columns whose name ends in ``_K``
    (temperatures in kelvin) must be strictly positive.

    Parameters
    ----------
    path : str or Path
        The CSV table.
    grid_km : array_like
        Shape (altitude,): the grid altitudes (km) to interpolate onto.
    columns : sequence of str, optional
        Column names that must be present; only these are returned, in this order. ``None``
        returns every column except ``altitude_km``.
    where : str
        Dotted scenario key that names the table (``"neutrals.table"``), used in errors.
    nonnegative : bool or collection of str, default False
        ``True``: every returned column must be >= 0 (densities, volume rates); a collection:
        the named columns must be.
    scenario_file : str or Path, optional
        The scenario file that refers to the table; errors name it with the key ``where``
        (the table's name and line go in the message). Without it errors name the table.

    Returns
    -------
    dict of str to numpy.ndarray
        Column name -> values on the grid, each shape (altitude,), in the table's units.

    Raises
    ------
    ScenarioError
        Any problem of :func:`read_csv_columns`; a first column other than ``altitude_km``;
        altitudes not strictly monotonic; a missing required column (the message lists the
        columns present); a negative value in a column that must be non-negative; a
        non-positive temperature; a grid point outside the table's altitude range by more
        than :data:`ALTITUDE_TOLERANCE_KM`.
    """
    path = Path(path)

    def fail(message, line=None):
        return _fail(message, path, line, where, scenario_file)

    header, data, lines = read_csv_columns(path, where=where, scenario_file=scenario_file)
    data, lines = _ascending(header, data, lines, fail)
    alt = data[:, 0]
    index = {name: j for j, name in enumerate(header)}
    wanted = _wanted_columns(header, columns, fail)
    if nonnegative is True:
        must_be_nonneg = set(wanted)
    elif nonnegative is False:
        must_be_nonneg = set()
    else:
        must_be_nonneg = set(nonnegative)
    x = _grid_inside(grid_km, alt, fail)
    out: dict[str, np.ndarray] = {}
    for name in wanted:
        col = data[:, index[name]]
        _check_values(name, col, alt, lines, name in must_be_nonneg, where, path, fail)
        if np.all(col > 0):
            out[name] = np.exp(np.interp(x, alt, np.log(col)))
        else:
            out[name] = np.interp(x, alt, col)
    return out


def _ascending(header, data, lines, fail):
    """The rows in increasing altitude: the first column must be ``altitude_km``, strictly
    increasing or strictly decreasing (a decreasing table is reversed)."""
    if header[0] != "altitude_km":
        raise fail(f"the first column must be 'altitude_km', not {safe_name(header[0])}")
    if len(header) < 2:
        raise fail("the table has no column besides altitude_km")
    alt = data[:, 0]
    if alt.size > 1:
        step = np.diff(alt)
        sign = 1.0 if step[0] > 0 else -1.0
        bad = np.flatnonzero(~(sign * step > 0))
        if bad.size:
            i = bad[0] + 1
            raise fail(f"altitude_km {alt[i]:g} does not continue the "
                       f"{'increasing' if sign > 0 else 'decreasing'} order of the column "
                       "(altitudes must be strictly increasing or strictly decreasing)",
                       int(lines[i]))
        if sign < 0:
            data, lines = data[::-1], lines[::-1]
    return data, lines


def _wanted_columns(header, columns, fail):
    """The columns to return: ``columns`` (each must be present) or all but the first."""
    if columns is None:
        return header[1:]
    wanted = list(columns)
    missing = [name for name in wanted if name not in header]
    if missing:
        raise fail(f"missing column{'s' if len(missing) > 1 else ''} "
                   f"{', '.join(missing)}; the table has: "
                   f"{', '.join(safe_name(h, quote=False) for h in header)}")
    return wanted


def _grid_inside(grid_km, alt, fail):
    """The grid (km), refused when a point lies outside the table's altitudes by more than
    :data:`ALTITUDE_TOLERANCE_KM`, clipped onto them."""
    grid = np.asarray(grid_km, dtype=float).reshape(-1)
    if not np.all(np.isfinite(grid)):
        raise fail("the altitude grid has non-finite values")
    lo, hi = alt[0], alt[-1]
    outside = np.flatnonzero((grid < lo - ALTITUDE_TOLERANCE_KM)
                             | (grid > hi + ALTITUDE_TOLERANCE_KM))
    if outside.size:
        first = grid[outside[0]]
        n_more = outside.size - 1
        more = f" (and {n_more} more grid point{'s' if n_more > 1 else ''})" if n_more else ""
        raise fail(f"grid altitude {first:g} km is outside the table's altitude range "
                   f"{lo:g} to {hi:g} km{more}")
    return np.clip(grid, lo, hi)


def _check_values(name, col, alt, lines, nonneg, where, path, fail):
    """A temperature column (``_K``) positive, a non-negative column not negative, and the
    plausibility bounds of :func:`ionochem.io.plausibility.check_column`."""
    if nonneg or name.endswith("_K"):
        bad = np.flatnonzero(col <= 0 if name.endswith("_K") else col < 0)
        if bad.size:
            i = bad[0]
            need = "a positive temperature" if name.endswith("_K") else "non-negative"
            raise fail(f"column {safe_name(name)} has {col[i]:g}; it must be {need}",
                       int(lines[i]))
    bad, error, warning = check_column(safe_name(name, quote=False), where, col, alt)
    if error:
        raise fail(error, int(lines[bad]))
    if warning:
        warnings.warn(f"{path.name}: {warning}", stacklevel=3)
