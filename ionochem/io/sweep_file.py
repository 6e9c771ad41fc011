"""A sweep's dataset: per-column results packed for the store, and the assembled file.

Every point (column) of a sweep gives one result :class:`xarray.Dataset` with the same
variables and shapes. This module

- describes those variables once (:func:`layout_of`, from a template column) and packs a
  column's numbers into one float64 vector (:func:`pack`) so a batch of columns is one
  ``(columns, values)`` array for the resumable store
  (:class:`ionochem.analysis.ensemble_store.EnsembleStore`); float64 holds the int8 and
  int32 flags and counters exactly;
- assembles stored batches into the sweep dataset: every per-column variable gains the sweep
  dimensions in front (``f107``, ``local_hour``, …), coordinates and attributes come from
  the template. :func:`assemble_sweep` builds it in memory; :func:`write_sweep` streams it
  into a netCDF file (or a zarr folder when the ``zarr`` package is installed), one batch at
  a time, so memory stays bounded by a batch whatever the number of columns, and the file
  appears under its name only when complete (written beside it, then renamed).

It must not compute chemistry nor decide which columns to run.
"""

from __future__ import annotations

import contextlib
import os
import shutil
import tempfile
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import xarray as xr

from ionochem.errors import InputError
from ionochem.io.netcdf import _encodable, atomic_path, cf_dimension_order

#: Variables that describe the reaction list rather than a column: stored once.
STATIC_VARIABLES = ("reaction_order", "net_stoichiometry")
#: Global attributes of a single run that differ from column to column: they become
#: variables (the column sums) or are dropped (the per-column hash, history, warnings).
POINT_ATTRIBUTES = ("time_utc", "scenario_sha256", "column_ionization_cm2_s",
                    "column_recombination_cm2_s", "column_balance", "warnings", "history")
#: Column attributes kept as per-column variables, with their units.
ATTRIBUTE_VARIABLES = {
    "column_ionization_cm2_s": ("cm-2 s-1", "column-integrated ionization rate"),
    "column_recombination_cm2_s": ("cm-2 s-1", "column-integrated recombination rate"),
    "column_balance": ("1", "relative imbalance of column ionization and recombination"),
}
#: Where the column is, as CF coordinates (scalar when the key is not swept; a swept
#: ``latitude_deg`` or ``longitude_deg`` is itself the coordinate): name → (global
#: attribute of a single run, attributes).
POSITION = {
    "latitude": ("latitude_deg", {"units": "degree_north", "standard_name": "latitude",
                                  "long_name": "geodetic latitude of the column"}),
    "longitude": ("longitude_deg", {"units": "degree_east", "standard_name": "longitude",
                                    "long_name": "longitude of the column"}),
}
#: Per-column variables that are coordinates of the sweep (the UTC of each point).
POINT_COORDINATES = ("time_utc",)
EPOCH = np.datetime64("1970-01-01T00:00:00", "us")
TIME_UNITS = "seconds since 1970-01-01 00:00:00"


@dataclass(frozen=True)
class Entry:
    """One per-column variable: its name, dimensions, shape and dtype."""

    name: str
    dims: tuple
    shape: tuple
    dtype: str

    @property
    def size(self) -> int:
        return int(np.prod(self.shape, dtype=np.int64))


def column_variables(ds, utc):
    """Add the per-column variables a single run keeps in attributes: ``time_utc`` (the
    column's UTC, seconds since 1970 with CF units) and the column sums. Returns ``ds``."""
    t = np.datetime64(utc, "us")
    ds["time_utc"] = ((), float((t - EPOCH) / np.timedelta64(1, "s")),
                      {"units": TIME_UNITS, "calendar": "proleptic_gregorian",
                       "standard_name": "time",
                       "long_name": "UTC of the column (the scenario time of this point)"})
    for name, (units, long_name) in ATTRIBUTE_VARIABLES.items():
        if name in ds.attrs:
            ds[name] = ((), float(ds.attrs[name]), {"units": units, "long_name": long_name})
    return ds


def layout_of(template) -> tuple[Entry, ...]:
    """The per-column variables of a template column dataset, in its order."""
    out = []
    for name, var in template.data_vars.items():
        if name in STATIC_VARIABLES:
            continue
        dtype = np.dtype(var.dtype)
        if dtype.kind not in "fiub":
            raise InputError(f"column variable {name} is not numeric ({dtype}); a sweep "
                             "cannot store it")
        out.append(Entry(name, tuple(var.dims), tuple(var.shape),
                         "int8" if dtype.kind == "b" else dtype.str.lstrip("<>=|")))
    return tuple(out)


def pack(ds, layout) -> np.ndarray:
    """A column's numbers as one float64 vector, in ``layout`` order.

    Raises
    ------
    InputError
        When the column's variables differ from the layout's (a varied key that changes
        the shape of the outputs).
    """
    parts = []
    for e in layout:
        if e.name not in ds:
            raise InputError(f"this column has no {e.name}, which the first column has; a "
                             "varied key changes the outputs' layout")
        var = ds[e.name].transpose(*e.dims) if set(ds[e.name].dims) == set(e.dims) else None
        if var is None or var.shape != e.shape:
            raise InputError(f"{e.name} has shape {dict(ds[e.name].sizes)} here and "
                             f"{dict(zip(e.dims, e.shape))} in the first column; a varied key "
                             "changes the outputs' layout")
        parts.append(np.asarray(var.values, np.float64).ravel())
    return np.concatenate(parts) if parts else np.zeros(0)


def width(layout) -> int:
    """Length of a packed column."""
    return sum(e.size for e in layout)


def _unpack(vector_rows, layout):
    """``(B, width)`` → ``{name: (B, *shape)}`` in each entry's dtype."""
    out, pos = {}, 0
    B = vector_rows.shape[0]
    for e in layout:
        block = vector_rows[:, pos:pos + e.size].reshape((B, *e.shape))
        out[e.name] = block.astype(e.dtype) if e.dtype != "float64" else block
        pos += e.size
    return out


# ----------------------------------------------------------------------------- skeleton
def skeleton(template, layout, coords, attrs):
    """The sweep dataset without its per-column variables.

    Parameters
    ----------
    template : xarray.Dataset
        One column's dataset (coordinates, static variables, attributes of variables).
    layout : tuple of Entry
    coords : dict
        Sweep dimension name → (values, attributes), in ``--vary`` order.
    attrs : dict
        Global attributes of the sweep.
    """
    ds = xr.Dataset(attrs=dict(attrs))
    for name, (values, vattrs) in coords.items():
        ds.coords[name] = (name, np.asarray(values), dict(vattrs))
    for name, (key, vattrs) in POSITION.items():
        if key not in coords and key in template.attrs:
            ds.coords[name] = ((), float(template.attrs[key]), dict(vattrs))
    for name, c in template.coords.items():
        ds.coords[name] = c.variable.copy()
    for name in STATIC_VARIABLES:
        if name in template:
            ds[name] = template[name].variable.copy()
    return ds


def _dims(coords, e):
    return (*coords, *e.dims)


def _runs(start, stop, shape):
    """Split flat C-order indices ``start..stop-1`` of ``shape`` into runs along the last
    axis: yields (offset in the batch, index tuple of the leading axes, slice of the last)."""
    if not shape:
        yield 0, (), None
        return
    i = start
    while i < stop:
        idx = np.unravel_index(i, shape)
        end = min(stop, i + shape[-1] - int(idx[-1]))
        yield i - start, tuple(int(j) for j in idx[:-1]), slice(int(idx[-1]),
                                                               int(idx[-1]) + end - i)
        i = end


def assemble_sweep(skel, layout, batches, *, var_attrs):
    """The whole sweep in memory.

    Parameters
    ----------
    skel : xarray.Dataset
        From :func:`skeleton` (its ``sweep_dimensions`` attribute names the sweep dims).
    layout : tuple of Entry
    batches : iterable of (start, stop, rows)
        ``rows`` (stop − start, width) packed columns; together they cover every point.
    var_attrs : dict
        Variable name → attributes (from the template).
    """
    dims = sweep_dims(skel)
    shape = tuple(skel.sizes[d] for d in dims)
    total = int(np.prod(shape, dtype=np.int64))
    data = {e.name: np.full((total, *e.shape), np.nan if e.dtype.startswith("float") else 0,
                            dtype=e.dtype) for e in layout}
    seen = np.zeros(total, bool)
    for a, b, rows in batches:
        for name, block in _unpack(np.asarray(rows, float), layout).items():
            data[name][a:b] = block
        seen[a:b] = True
    if not seen.all():
        raise InputError(f"{int((~seen).sum())} of {total} columns are missing")
    ds = skel.copy()
    for e in layout:
        ds[e.name] = ((*dims, *e.dims), data[e.name].reshape((*shape, *e.shape)),
                      dict(var_attrs.get(e.name, {})))
    ds = ds.set_coords([n for n in POINT_COORDINATES if n in ds.data_vars])
    return xr.decode_cf(ds, decode_timedelta=False)


# ----------------------------------------------------------------------------- writing
def write_sweep(path, skel, layout, batches, *, var_attrs):
    """Write the sweep to ``path`` (``.nc``: netCDF-4; ``.zarr``: a zarr folder), one
    batch at a time, atomically (a temporary name beside it, renamed when complete).

    Parameters
    ----------
    path : str or Path
    skel : xarray.Dataset
        From :func:`skeleton` (its ``sweep_dimensions`` attribute names the sweep dims).
    layout : tuple of Entry
    batches : iterable of (start, stop, rows)
    var_attrs : dict
        Variable name → attributes (from the template).
    """
    path = Path(path)
    if path.suffix.lower() == ".zarr":
        return _write_zarr(path, skel, layout, batches, var_attrs)
    return _write_netcdf(path, skel, layout, batches, var_attrs)


def sweep_dims(skel):
    return tuple(skel.attrs["sweep_dimensions"].split()) if skel.attrs.get(
        "sweep_dimensions") else ()


def _nc_attrs(attrs):
    out = {}
    for k, v in attrs.items():
        if k.startswith("_"):
            continue
        if isinstance(v, bool):
            v = int(v)
        elif v is None:
            v = ""
        out[k] = v
    return out


def _write_netcdf(path, skel, layout, batches, var_attrs):
    """Stream the batches into a CF-1.8 netCDF file (dimensions in the order CF §2.4
    recommends, the UTC and position of the points as coordinates of every variable)."""
    import netCDF4

    dims = sweep_dims(skel)
    shape = tuple(skel.sizes[d] for d in dims)
    ready = _encodable(skel)
    names = {e.name for e in layout}
    coords = " ".join(n for n in (*POINT_COORDINATES, *POSITION)
                      if n in names or n in ready.coords)
    with atomic_path(path) as tmp:
        ready.to_netcdf(tmp, format="NETCDF4", engine="netcdf4")
        with netCDF4.Dataset(tmp, "a") as nc:
            sizes = dict(skel.sizes)
            variables = {}
            for e in layout:
                for d, n in zip(e.dims, e.shape):
                    if d not in nc.dimensions:
                        nc.createDimension(d, sizes.get(d, n))
                variables[e.name] = _create(nc, ready, e, dims, shape)
                attrs = _nc_attrs(var_attrs.get(e.name, {}))
                if dims and coords and e.name not in POINT_COORDINATES:
                    attrs["coordinates"] = coords
                variables[e.name][0].setncatts(attrs)
            for a, b, rows in batches:
                blocks = _unpack(np.asarray(rows, float), layout)
                for off, lead, last in _runs(a, b, shape):
                    n = 1 if last is None else last.stop - last.start
                    for e in layout:
                        _put(*variables[e.name], blocks[e.name][off:off + n], e, dims,
                             lead, last)
    return path


def _create(nc, ready, e, dims, shape):
    """The netCDF variable of one per-column entry, its dimensions in CF order; returns
    (variable, dimension order)."""
    natural = (*dims, *e.dims)
    order = cf_dimension_order(ready, natural)
    size = dict(zip(natural, (*shape, *e.shape)))
    full = tuple(size[d] for d in order)
    chunks = (tuple(1 if d in dims else size[d] for d in order)
              if all(full) and full else None)
    fill = np.nan if e.dtype.startswith("float") else None
    v = nc.createVariable(e.name, np.dtype(e.dtype), order, zlib=True, complevel=1,
                          shuffle=True, chunksizes=chunks, fill_value=fill)
    return v, order


def _put(var, order, block, e, dims, lead, last):
    """Write ``block`` (points along the last sweep dimension, *e.shape) into ``var``."""
    if last is None:
        var[...] = np.transpose(block[0], [e.dims.index(d) for d in order])
        return
    index = dict(zip(dims[:-1], lead))
    index[dims[-1]] = last
    key = tuple(index.get(d, slice(None)) for d in order)
    have = (dims[-1], *e.dims)
    left = [d for d in order if d not in dims[:-1]]
    var[key] = np.transpose(block, [have.index(d) for d in left])


def _write_zarr(path, skel, layout, batches, var_attrs):
    import dask.array as da
    dims = sweep_dims(skel)
    shape = tuple(skel.sizes[d] for d in dims)
    folder = path.parent if str(path.parent) else Path(".")
    tmp = Path(tempfile.mkdtemp(prefix=f".{path.name}.", suffix=".tmp", dir=folder))
    try:
        lazy = skel.copy()
        encoding = {}
        for e in layout:
            full = (*shape, *e.shape)
            chunks = (1,) * len(shape) + e.shape if all(full) and full else full or None
            lazy[e.name] = ((*dims, *e.dims), da.zeros(full, dtype=e.dtype, chunks=chunks),
                            _nc_attrs(var_attrs.get(e.name, {})))
            encoding[e.name] = {"chunks": chunks} if chunks else {}
        # Text as variable-length strings (zarr v3 specifies those, not fixed-width UTF-32).
        for name in list(lazy.variables):
            if lazy[name].dtype.kind in "UO":
                lazy[name] = lazy[name].astype(object)
            elif lazy[name].dtype == bool:
                lazy[name] = lazy[name].astype(np.int8)
        lazy.attrs = _nc_attrs(lazy.attrs)
        lazy.to_zarr(tmp, mode="w", compute=False, encoding=encoding)
        for a, b, rows in batches:
            blocks = _unpack(np.asarray(rows, float), layout)
            for off, lead, last in _runs(a, b, shape):
                n = 1 if last is None else last.stop - last.start
                region = {d: slice(i, i + 1) for d, i in zip(dims[:-1], lead)}
                if last is not None:
                    region[dims[-1]] = last
                part = xr.Dataset({e.name: ((*dims, *e.dims), blocks[e.name][off:off + n]
                                            .reshape((*[1] * len(lead), n, *e.shape)))
                                   for e in layout})
                if region:
                    part.to_zarr(tmp, region=region)
                else:
                    part.to_zarr(tmp, mode="r+")
        old = None
        if path.exists():
            old = Path(tempfile.mkdtemp(prefix=f".{path.name}.", suffix=".old", dir=folder))
            os.replace(path, old / "x")
        os.replace(tmp, path)
        if old is not None:
            shutil.rmtree(old, ignore_errors=True)
    except BaseException:
        with contextlib.suppress(OSError):
            shutil.rmtree(tmp, ignore_errors=True)
        raise
    return path
