"""Atomic netCDF writing: a temporary file in the target folder, then a rename.

An interrupted run therefore never leaves a half-written file where a good one was.
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from pathlib import Path

import numpy as np

from ionochem.errors import InputError


def _umask_mode():
    """Permissions a normally created file would get (mkstemp makes 0600 files)."""
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


def _encodable(ds):
    """Copy of ``ds`` with object (string) arrays as fixed strings and bools as int8."""
    out = ds.copy()
    for name in list(out.variables):
        var = out[name]
        if var.dtype == object:
            out[name] = var.astype(str)
        elif var.dtype == bool:
            out[name] = var.astype(np.int8)
    for key, val in list(out.attrs.items()):
        if isinstance(val, bool):
            out.attrs[key] = int(val)
        elif val is None:
            out.attrs[key] = ""
    return out


@contextlib.contextmanager
def atomic_path(path):
    """Yield a temporary path beside ``path``; on success it is renamed onto ``path``.

    On any failure (including an interrupt) the temporary file is removed and ``path`` keeps
    whatever it held before.
    """
    path = Path(path)
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise InputError(f"output folder {folder} does not exist", file=str(path))
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=folder)
    os.close(fd)
    try:
        yield tmp
        os.chmod(tmp, _umask_mode())
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


def write_netcdf(ds, path) -> Path:
    """Write ``ds`` to ``path`` atomically (NETCDF4 format); returns the path."""
    with atomic_path(path) as tmp:
        _encodable(ds).to_netcdf(tmp, format="NETCDF4", engine="netcdf4")
    return Path(path)


def atomic_write_bytes(path, data: bytes) -> Path:
    """Write bytes atomically (used for figures and text reports)."""
    with atomic_path(path) as tmp, open(tmp, "wb") as fh:
        fh.write(data)
    return Path(path)
