"""Atomic writing of outputs (netCDF, figures, CSV): a temporary file, then a rename.

The data go to a hidden temporary file ``.NAME.PID.RANDOM.tmp`` in the target's folder, which
is flushed to disk (``fsync``) and then renamed onto the target; the folder is synced after
the rename so the new name survives a crash. A reader therefore sees the old file or the new
one, never a half-written file.

Interruptions: any exception or Ctrl-C removes the temporary file as it unwinds; SIGTERM
(while a write is under way, when no other handler is installed; always under the
``ionochem`` command) removes it in the signal handler and ends the process with status 143.
Only SIGKILL or a crash can leave one behind; the next write to the same target removes every
such leftover whose writing process no longer runs.
"""

from __future__ import annotations

import contextlib
import os
import re
import signal
import threading
from pathlib import Path

import numpy as np

from ionochem.errors import Error, InputError


def _umask_mode():
    """Permissions a normally created file would get (mkstemp makes 0600 files)."""
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


#: The CF version every output file declares and is checked against (compliance-checker's
#: ``cf:1.8`` suite, tests/test_outputs_cf.py).
CONVENTIONS = "CF-1.8"


#: Latitude and longitude units of CF §4.1 and §4.2.
_NORTH = ("degrees_north", "degree_north", "degree_N", "degrees_N", "degreeN", "degreesN")
_EAST = ("degrees_east", "degree_east", "degree_E", "degrees_E", "degreeE", "degreesE")


def _axis(var):
    """CF axis (``T``, ``Z``, ``Y``, ``X``) of a coordinate variable, or None (other)."""
    attrs = var.attrs
    units = str(attrs.get("units", ""))
    if (np.issubdtype(var.dtype, np.datetime64) or " since " in units
            or attrs.get("axis") == "T" or attrs.get("standard_name") == "time"):
        return "T"
    if attrs.get("axis") == "Z" or "positive" in attrs or attrs.get("standard_name") in (
            "altitude", "height"):
        return "Z"
    if attrs.get("axis") == "Y" or units in _NORTH:
        return "Y"
    if attrs.get("axis") == "X" or units in _EAST:
        return "X"
    return None


def cf_dimension_order(ds, dims):
    """``dims`` reordered as CF §2.4 recommends: other dimensions first (in their order),
    then time, altitude, latitude, longitude."""
    rank = {"T": 1, "Z": 2, "Y": 3, "X": 4}
    key = {d: rank.get(_axis(ds[d]), 0) if d in ds.coords else 0 for d in dims}
    return tuple(sorted(dims, key=lambda d: key[d]))        # sorted() is stable


def _fits_int32(var):
    """True when every value of an integer variable fits in a 32-bit signed integer (else
    it is kept 64-bit rather than wrapped)."""
    v = np.asarray(var.values)
    info = np.iinfo(np.int32)
    return v.size == 0 or (int(v.min()) >= info.min and int(v.max()) <= info.max)


def _encodable(ds, reorder=True):
    """Copy of ``ds`` ready for a CF-1.8 netCDF file.

    Object (string) arrays become fixed strings, bools int8 and 64-bit integers 32-bit
    ones (CF-1.8 §2.2 has no 64-bit integer); every variable's dimensions follow CF §2.4
    (time, altitude, latitude, longitude last and in that order); ``Conventions`` is
    :data:`CONVENTIONS`. ``reorder=False`` keeps the dimension order (a file read back by
    the program itself, whose layout must match the dataset's). A coordinate variable (one
    named after its dimension) is written without ``_FillValue`` (CF §2.5.1); one of labels
    (species, reaction ids) as a character array (CF §5 and §6.1: a coordinate variable is
    numeric, labels are characters), which xarray reads back as the same string index.
    """
    out = ds.copy()
    for name in list(out.variables):
        var = out[name]
        if var.dtype == object:
            out[name] = var.astype(str)
        elif var.dtype == bool:
            out[name] = var.astype(np.int8)
        elif var.dtype.kind in "iu" and var.dtype.itemsize == 8 and _fits_int32(var):
            out[name] = var.astype(np.int32)
    for name in list(out.data_vars) if reorder else ():
        order = cf_dimension_order(out, out[name].dims)
        if order != out[name].dims:
            out[name] = out[name].transpose(*order)
    for key, val in list(out.attrs.items()):
        if isinstance(val, bool):
            out.attrs[key] = int(val)
        elif val is None:
            out.attrs[key] = ""
    for name in out.dims:
        if name in out.variables:
            extra = ({"dtype": "S1"} if out[name].dtype.kind in "OSU"
                     else {"_FillValue": None})
            out[name].encoding = {**out[name].encoding, **extra}
    out.attrs["Conventions"] = CONVENTIONS
    return out


#: Temporary files being written now; SIGTERM removes them before the process ends.
_ACTIVE: set[str] = set()


def _on_term(signum, frame):
    """SIGTERM: remove the temporary files being written, say so, and end at once.

    The process ends with ``os._exit`` rather than by raising an exception: an exception
    raised inside the netCDF library's write could leave its internal lock held and hang
    the clean-up, where ending at once cannot. Locks held with ``flock`` go with the process.
    """
    for tmp in list(_ACTIVE):
        with contextlib.suppress(OSError):
            os.unlink(tmp)
    with contextlib.suppress(OSError):
        os.write(2, b"terminated\n")
    os._exit(128 + signum)


@contextlib.contextmanager
def terminate_cleanly():
    """While inside, SIGTERM removes the temporary files being written and ends the process
    (exit status 143) instead of leaving them behind.

    Only in the main thread and only when SIGTERM has its default action (a program that
    installed its own handler keeps it).
    """
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    try:
        previous = signal.getsignal(signal.SIGTERM)
    except (ValueError, OSError):
        previous = None
    if previous is not signal.SIG_DFL:
        yield
        return
    signal.signal(signal.SIGTERM, _on_term)
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, signal.SIG_DFL)


@contextlib.contextmanager
def registered_temporary(folder, prefix):
    """Create ``folder/PREFIX.XXXXXXXX.tmp`` (exclusive), registered for removal on SIGTERM.

    Yields the path. The name is registered before the file exists, so a SIGTERM at any
    moment finds it; the caller renames or removes it, and the registration ends on leaving.
    """
    import secrets
    for _ in range(100):
        tmp = os.path.join(folder, f"{prefix}.{secrets.token_hex(4)}.tmp")
        _ACTIVE.add(tmp)
        try:
            fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
        except FileExistsError:
            _ACTIVE.discard(tmp)
            continue
        except BaseException:
            _ACTIVE.discard(tmp)
            raise
        os.close(fd)
        break
    else:
        raise FileExistsError(f"no free temporary name in {folder}")
    try:
        yield tmp
    finally:
        _ACTIVE.discard(tmp)


def _tmp_pattern(name):
    """``.NAME.PID.XXXXXXXX.tmp`` (or the older ``.NAME.XXXXXXXX.tmp``) of one target."""
    return re.compile(rf"\.{re.escape(name)}\.(?:([0-9]+)\.)?[a-z0-9_]{{8}}\.tmp")


def sweep_stale(path) -> list[Path]:
    """Remove leftover temporary files of ``path`` whose writing process has ended.

    Returns the removed paths. A leftover without a process id (older naming) is removed
    when it is more than an hour old.
    """
    import time
    path = Path(path)
    folder = path.parent if str(path.parent) else Path(".")
    pattern = _tmp_pattern(path.name)
    removed = []
    try:
        entries = list(os.scandir(folder))
    except OSError:
        return removed
    for entry in entries:
        m = pattern.fullmatch(entry.name)
        if not m:
            continue
        pid = m.group(1)
        if pid is not None:
            stale = int(pid) != os.getpid() and not _alive(int(pid))
        else:
            try:
                stale = time.time() - entry.stat(follow_symlinks=False).st_mtime > 3600
            except OSError:
                stale = False
        if stale:
            with contextlib.suppress(OSError):
                os.unlink(entry.path)
                removed.append(Path(entry.path))
    return removed


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    except OSError:
        return False
    return True


def _fsync_path(path, directory=False):
    flags = os.O_RDONLY | (getattr(os, "O_DIRECTORY", 0) if directory else 0)
    try:
        fd = os.open(path, flags)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass            # some file systems cannot sync a folder; the rename is still atomic
    finally:
        os.close(fd)


@contextlib.contextmanager
def atomic_path(path):
    """Yield a temporary path beside ``path``; on success it is renamed onto ``path``.

    Stale temporary files of the same target are removed first. On success the temporary
    file is synced to disk, renamed onto ``path`` and the folder synced. On any failure
    (including Ctrl-C and SIGTERM) the temporary file is removed and ``path`` keeps whatever
    it held before.
    """
    path = Path(path)
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise InputError(f"output folder {folder} does not exist", file=str(path))
    sweep_stale(path)
    with terminate_cleanly(), contextlib.ExitStack() as stack:
        try:
            tmp = stack.enter_context(registered_temporary(str(folder),
                                                           f".{path.name}.{os.getpid()}"))
        except OSError as exc:
            raise Error(f"cannot write the output: {exc.strerror or exc}",
                        file=str(path)) from None
        try:
            yield tmp
            os.chmod(tmp, _umask_mode())
            _fsync_path(tmp)
            os.replace(tmp, path)
            _fsync_path(folder, directory=True)
        except OSError as exc:
            # Disk full, folder removed or made read-only while the run went on: the old
            # file (if any) is untouched; say so in one line.
            with contextlib.suppress(OSError):
                os.unlink(tmp)
            raise Error(f"cannot write the output: {exc.strerror or exc}; any earlier file "
                        "there is unchanged", file=str(path)) from None
        except RuntimeError as exc:
            # The netCDF library reports a failed write (a full disk, `ulimit -f`) as
            # RuntimeError("NetCDF: HDF error"); anything else is a bug and goes on.
            with contextlib.suppress(OSError):
                os.unlink(tmp)
            if not str(exc).startswith("NetCDF:"):
                raise
            raise Error(f"cannot write the output ({exc}: the disk may be full or a file "
                        "size limit reached); nothing was left behind and any earlier file "
                        "there is unchanged", file=str(path)) from None
        except BaseException:
            with contextlib.suppress(OSError):
                os.unlink(tmp)
            raise


def write_netcdf(ds, path, *, reorder=True) -> Path:
    """Write ``ds`` to ``path`` atomically (NETCDF4 format, CF-1.8); returns the path.

    ``reorder=False`` keeps each variable's dimension order (for files the program reads
    back and unpacks by position, such as a sweep's stored template column).
    """
    with atomic_path(path) as tmp:
        _encodable(ds, reorder=reorder).to_netcdf(tmp, format="NETCDF4", engine="netcdf4")
    return Path(path)


def atomic_write_bytes(path, data: bytes) -> Path:
    """Write bytes atomically (used for figures and text reports)."""
    with atomic_path(path) as tmp, open(tmp, "wb") as fh:
        fh.write(data)
    return Path(path)
