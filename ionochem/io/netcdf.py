"""Atomic writing of outputs (netCDF, figures, CSV): a temporary file, then a rename.

The data go to a hidden temporary file ``.NAME.PID.RANDOM.tmp`` in the target's folder, which
is flushed to disk (``fsync``) and then renamed onto the target; the folder is synced after
the rename so the new name survives a crash. A reader therefore sees the old file or the new
one, never a half-written file.

Interruptions: any exception, Ctrl-C, or SIGTERM (turned into ``SystemExit(143)`` while a
write is under way, when no other handler is installed) removes the temporary file. Only
SIGKILL or a crash can leave one behind; the next write to the same target removes every such
leftover whose writing process no longer runs.
"""

from __future__ import annotations

import contextlib
import os
import re
import signal
import tempfile
import threading
from pathlib import Path

import numpy as np

from ionochem.errors import Error, InputError


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


def _terminate(signum, frame):
    # A second SIGTERM takes the default action, should the first be swallowed somewhere.
    signal.signal(signum, signal.SIG_DFL)
    raise SystemExit(128 + signum)


@contextlib.contextmanager
def terminate_cleanly():
    """While inside, SIGTERM raises ``SystemExit(143)`` so ``finally`` blocks run.

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
    signal.signal(signal.SIGTERM, _terminate)
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, signal.SIG_DFL)


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
    with terminate_cleanly():
        try:
            fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.{os.getpid()}.", suffix=".tmp",
                                       dir=folder)
        except OSError as exc:
            raise Error(f"cannot write the output: {exc.strerror or exc}",
                        file=str(path)) from None
        os.close(fd)
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
        except BaseException:
            with contextlib.suppress(OSError):
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
