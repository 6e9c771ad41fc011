"""Measured profiles: the observation file formats, their loading and their checks.

An observation file holds measured densities (a rocket or satellite mass spectrometer, an
incoherent-scatter radar's composition or electron density) with their one-sigma errors, as
rows of one point each, several species in one file (docs/observations.md):

CSV (UTF-8; ``#`` comment lines and blank lines anywhere; one header row)::

    altitude_km, species, density_cm3, sigma_cm3[, kind]
    150, N2+, 1.2e3, 2.4e2
    200, e, 2.3e5, 2.0e4, electron_density
    180, NO+/O2+, 1.5, 0.2, ratio

``kind`` is optional: ``density`` (the default: a number density, cm-3),
``electron_density`` (species ``e``, or empty), ``ratio`` (species ``A/B``; the value and
sigma are then dimensionless). netCDF: the same columns as variables along one dimension
``observation`` (what :func:`load_observations` returns, written with ``to_netcdf``).

Every problem is an :class:`ionochem.InputError` at ``file:line`` (CSV) or
``file: observation N`` (netCDF): unknown or missing columns, a cell that is not a number,
NaN or infinity, a density or sigma that is zero or negative (the misfit is in log density),
an unknown kind, a malformed species name, the same point given twice. Checks against a
model (unknown species, altitudes outside the grid) are :func:`check_against_model`.

This module knows nothing of the chemistry: it reads, checks and labels.
"""

from __future__ import annotations

import math
import warnings
from pathlib import Path

import numpy as np
import xarray as xr

from ionochem.errors import InputError, safe_name
from ionochem.io.csvtable import TableProblem, split_table
from ionochem.io.paths import MAX_STORE_BYTES, PathProblem, read_text, regular_file, resolve_path
from ionochem.species import parse_species

__all__ = ["COLUMNS", "KINDS", "OPTIONAL_COLUMNS", "check_against_model",
           "check_matrix_size", "load_observations", "observation_where", "ratio_parts"]

#: Required columns, in the documented order.
COLUMNS = ("altitude_km", "species", "density_cm3", "sigma_cm3")
#: Columns that may be added.
OPTIONAL_COLUMNS = ("kind",)
#: What a row measures.
KINDS = ("density", "electron_density", "ratio")

#: Most observations one file may hold: a rocket or radar profile has hundreds to a few
#: thousand points; the bound keeps the interpolation matrix of a fit (observations ×
#: species × altitude rows) in memory *(common practice)*.
MAX_OBSERVATIONS = 100_000
#: Smallest one-sigma error relative to the value: below it the misfit's weight 1/σ² in log
#: density overflows or means nothing *(common practice: no density is measured to 1e-9)*.
MIN_RELATIVE_SIGMA = 1e-9
#: Largest interpolation matrix (observations × species × altitude rows entries, float64) a
#: comparison with a model may build: 2.5e8 entries are 2 GB *(common practice)*.
MAX_MATRIX_ENTRIES = 250_000_000

#: Largest usual measured ion or electron density (cm-3): F2 peaks reach some 3e6 cm-3
#: *(common practice)*; above it a file is taken to be per m3 (warned, not refused).
USUAL_MAX_CM3 = 1e8

#: Altitude tolerance (km) for a point at the edge of the model grid (grid rounding).
EDGE_TOLERANCE_KM = 1e-6


def ratio_parts(name):
    """``"NO+/O2+"`` → ``("NO+", "O2+")``; a name without one ``/`` → ``None``."""
    parts = str(name).split("/")
    if len(parts) != 2:
        return None
    return parts[0].strip(), parts[1].strip()


def _canonical_species(name):
    """Canonical species name (``O+(4S)`` → ``O+``); ``X(total)`` kept; ValueError if bad."""
    name = name.strip()
    if not name:
        raise ValueError("the species is empty")
    return parse_species(name).name


def _check_row(kind, species, alt, value, sigma):
    """Canonical (kind, species) of one row; raises ValueError with a readable message."""
    if kind not in KINDS:
        raise ValueError(f"kind {kind!r} is not one of {', '.join(KINDS)}")
    if kind == "electron_density":
        if species not in ("", "e"):
            raise ValueError(f"an electron_density row has species {species!r}; write 'e' "
                             "or leave it empty")
        species = "e"
    elif kind == "ratio":
        parts = ratio_parts(species)
        if parts is None:
            raise ValueError(f"a ratio row needs species written A/B, not {species!r}")
        try:
            species = "/".join(_canonical_species(p) for p in parts)
        except ValueError as exc:
            raise ValueError(f"species {species!r}: {exc}") from None
    else:
        if "/" in species:
            raise ValueError(f"species {species!r} looks like a ratio; give kind = ratio")
        try:
            species = _canonical_species(species)
        except ValueError as exc:
            raise ValueError(f"species {species!r}: {exc}") from None
        if species == "e":
            kind = "electron_density"
    for what, v in (("altitude_km", alt), ("density_cm3", value), ("sigma_cm3", sigma)):
        if not math.isfinite(v):
            raise ValueError(f"{what} is {v!r}, not a finite number")
    if value <= 0:
        raise ValueError(f"density_cm3 is {value:g}; a measured value must be positive "
                         "(the misfit is in log density)")
    if sigma <= 0:
        raise ValueError(f"sigma_cm3 is {sigma:g}; the one-sigma error must be positive")
    if sigma < MIN_RELATIVE_SIGMA * value:
        raise ValueError(f"sigma_cm3 is {sigma:g}, below {MIN_RELATIVE_SIGMA:g} of the "
                         f"value {value:g}; no measurement is that precise (a slip of units?)")
    return kind, species


def _number(cell, column):
    # The cell is not quoted back: the file may be any file the user can read.
    try:
        return float(cell)
    except ValueError:
        raise ValueError(f"the cell in column {column!r} is not a number") from None


def _read_csv(path):
    try:
        _, text = read_text(path)
    except PathProblem as exc:
        raise InputError(str(exc), file=path, line=exc.line) from None
    try:
        table = split_table(text, max_rows=MAX_OBSERVATIONS, row_word="observations")
    except TableProblem as exc:
        hint = f"; the header is {', '.join(COLUMNS)}[, kind]" if exc.line is None and \
            exc.message.startswith("no header") else ""
        raise InputError(exc.message + hint, file=path, line=exc.line) from None
    header, head_line = table.header, table.header_line
    for name in header:
        if name not in COLUMNS + OPTIONAL_COLUMNS:
            raise InputError(f"unknown column {safe_name(name)}; the columns are "
                             f"{', '.join(COLUMNS)} and optionally kind", file=path,
                             line=head_line)
    missing = [c for c in COLUMNS if c not in header]
    if missing:
        raise InputError(f"missing column{'s' if len(missing) > 1 else ''} "
                         f"{', '.join(missing)}; the header is {', '.join(COLUMNS)}[, kind]",
                         file=path, line=head_line)
    col = {name: j for j, name in enumerate(header)}
    records = []
    for lineno, cells in zip(table.lines, table.rows, strict=True):
        try:
            alt = _number(cells[col["altitude_km"]], "altitude_km")
            value = _number(cells[col["density_cm3"]], "density_cm3")
            sigma = _number(cells[col["sigma_cm3"]], "sigma_cm3")
            kind = cells[col["kind"]] if "kind" in col else ""
            kind, species = _check_row(kind or "density", cells[col["species"]], alt, value,
                                       sigma)
        except ValueError as exc:
            raise InputError(str(exc), file=path, line=lineno) from None
        records.append((alt, species, kind, value, sigma, lineno))
    if not records:
        raise InputError("the file has a header but no observations", file=path,
                         line=head_line)
    return records


def _read_netcdf(path):
    try:
        regular_file(resolve_path(path), MAX_STORE_BYTES)
    except PathProblem as exc:
        raise InputError(str(exc), file=path) from None
    try:
        with xr.open_dataset(path) as raw:
            ds = raw.load()
    except (OSError, ValueError, RuntimeError):
        raise InputError("cannot be read as a netCDF observation file", file=path) from None
    missing = [c for c in COLUMNS if c not in ds.variables]
    if missing:
        raise InputError(f"missing variable{'s' if len(missing) > 1 else ''} "
                         f"{', '.join(missing)}; an observation file has {', '.join(COLUMNS)} "
                         "[and kind] along the dimension 'observation'", file=path)
    known = set(COLUMNS + OPTIONAL_COLUMNS + ("line",))
    extra = [str(v) for v in ds.data_vars if str(v) not in known]
    if extra:
        raise InputError(f"unknown variable{'s' if len(extra) > 1 else ''} "
                         f"{', '.join(safe_name(e) for e in extra)}", file=path)
    for name in (*COLUMNS, *(c for c in OPTIONAL_COLUMNS if c in ds.variables)):
        if ds[name].dims != ("observation",):
            raise InputError(f"variable {name!r} must have the single dimension "
                             f"'observation', not {ds[name].dims}", file=path)
    if ds.sizes["observation"] > MAX_OBSERVATIONS:
        raise InputError(f"{ds.sizes['observation']} observations, more than the "
                         f"{MAX_OBSERVATIONS} a file may hold; thin or split the profile",
                         file=path)
    records = []
    kinds = ds["kind"].values if "kind" in ds.variables else None
    for i in range(ds.sizes["observation"]):
        where = f"observation {i + 1}"
        try:
            alt = float(ds["altitude_km"].values[i])
            value = float(ds["density_cm3"].values[i])
            sigma = float(ds["sigma_cm3"].values[i])
            kind = str(kinds[i]) if kinds is not None else "density"
            kind, species = _check_row(kind or "density", str(ds["species"].values[i]),
                                       alt, value, sigma)
        except (ValueError, TypeError) as exc:
            raise InputError(str(exc), file=path, key=where) from None
        records.append((alt, species, kind, value, sigma, 0))
    if not records:
        raise InputError("the file holds no observations", file=path)
    return records


def load_observations(path):
    """Read and check an observation file (CSV, or netCDF by its ``.nc`` suffix).

    Parameters
    ----------
    path : str or Path

    Returns
    -------
    xarray.Dataset
        Dimension ``observation``; variables ``altitude_km`` (km), ``species`` (canonical
        name; ``e`` for electrons, ``A/B`` for a ratio), ``kind`` (see :data:`KINDS`),
        ``density_cm3`` (cm-3; dimensionless for a ratio), ``sigma_cm3`` (one-sigma error,
        same units) and ``line`` (the row's line in a CSV file, 0 for netCDF); attribute
        ``source`` (the file).

    Raises
    ------
    InputError
        At ``file:line`` for the first bad row (see the module docstring).
    """
    path = Path(path)
    if path.suffix.lower() in (".nc", ".nc4", ".cdf"):
        records = _read_netcdf(path)
    else:
        records = _read_csv(path)
    seen = {}
    for alt, species, kind, _, _, line in records:
        key = (kind, species, round(alt, 9))
        if key in seen:
            first = seen[key]
            raise InputError(f"{species} at {alt:g} km ({kind}) is given twice (first "
                             f"{'on line ' + str(first) if first else 'earlier'})",
                             file=path, line=line or None)
        seen[key] = line
    dense = [(v, ln) for _, _, k, v, _, ln in records if k != "ratio" and v > USUAL_MAX_CM3]
    if dense:
        v, ln = max(dense)
        warnings.warn(f"{path}{':' + str(ln) if ln else ''}: a measured density of {v:g} cm-3, "
                      f"above the {USUAL_MAX_CM3:g} cm-3 of any ionosphere: is the file per m3 "
                      "(1e6 times per cm3)?", stacklevel=2)
    alt, species, kind, value, sigma, line = zip(*records)
    ds = xr.Dataset(
        {
            "altitude_km": ("observation", np.asarray(alt, float),
                            {"units": "km", "long_name": "altitude of the measurement"}),
            "species": ("observation", np.asarray(species, dtype=object),
                        {"long_name": "species measured (A/B for a ratio)"}),
            "kind": ("observation", np.asarray(kind, dtype=object),
                     {"long_name": "density, electron_density or ratio"}),
            "density_cm3": ("observation", np.asarray(value, float),
                            {"units": "cm-3", "long_name": "measured density (a ratio is "
                             "dimensionless)"}),
            "sigma_cm3": ("observation", np.asarray(sigma, float),
                          {"units": "cm-3", "long_name": "one-sigma error of the measurement"}),
            "line": ("observation", np.asarray(line, int),
                     {"long_name": "line of the row in the CSV file (0: netCDF)"}),
        },
        attrs={"source": str(path)},
    )
    return ds


def observation_where(obs, i):
    """``(file, line, key)`` of observation ``i`` for an error message."""
    line = int(obs["line"].values[i])
    return (obs.attrs.get("source"), line or None,
            None if line else f"observation {i + 1}")


def check_against_model(obs, species, altitude_km):
    """Refuse observations a model cannot be compared with.

    Parameters
    ----------
    obs : xarray.Dataset
        From :func:`load_observations`.
    species : sequence of str
        The species a result reports (``ds["species"]``: solved, electrons, fixed, totals).
    altitude_km : array_like
        The model's grid, km.

    Raises
    ------
    InputError
        At the row's ``file:line``: a species the model does not have (the message lists
        those it has), an altitude outside the grid.
    """
    names = [str(s) for s in species]
    known = set(names)
    alt = np.asarray(altitude_km, float)
    check_matrix_size(obs.sizes["observation"], len(names), alt.size,
                      source=obs.attrs.get("source"))
    lo, hi = float(alt.min()), float(alt.max())
    for i, (name, kind, a) in enumerate(zip(obs["species"].values, obs["kind"].values,
                                            obs["altitude_km"].values)):
        file, line, key = observation_where(obs, i)
        parts = ratio_parts(name) if kind == "ratio" else (str(name),)
        for part in parts:
            if part not in known:
                raise InputError(f"species {part!r} is not in the model (it has: "
                                 f"{', '.join(names)})", file=file, line=line, key=key)
        if not (lo - EDGE_TOLERANCE_KM <= a <= hi + EDGE_TOLERANCE_KM):
            raise InputError(f"altitude {a:g} km is outside the model grid {lo:g} to {hi:g} "
                             "km", file=file, line=line, key=key)


def check_matrix_size(n_obs, n_species, n_rows, *, source=None):
    """Refuse a comparison whose interpolation matrix would exceed
    :data:`MAX_MATRIX_ENTRIES` (observations × species × altitude rows), before it is built."""
    entries = int(n_obs) * int(n_species) * int(n_rows)
    if entries > MAX_MATRIX_ENTRIES:
        raise InputError(f"{n_obs} observations against {n_species} species on {n_rows} "
                         f"altitude rows need a {entries * 8 / 1024 ** 3:.1f} GiB interpolation "
                         f"matrix, above the {MAX_MATRIX_ENTRIES * 8 / 1024 ** 3:.0f} GiB "
                         "bound; thin the observations or use fewer altitude rows", file=source)
