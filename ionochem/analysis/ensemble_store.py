"""A resumable store of finished ensemble batches next to the output file.

An ensemble run (Monte Carlo, Sobol, Morris) writes every finished batch of samples to a
folder ``OUT.nc.samples/`` as soon as it completes, so an interrupted run loses at most the
batches in flight and ``--resume`` recomputes nothing that was finished:

``manifest.json``
    What the samples were made from: the method, seed, sample count, hashes of the scenario,
    the reaction list and the arrays the samples were drawn from (rate coefficients,
    uncertainty factors, fixed densities, spreads). A resume whose inputs differ is refused
    with an :class:`ionochem.InputError` naming the entries that differ.
``batch_<start>_<stop>.npz``
    The standard-normal draws ``z`` (stop − start, factors) and the solved densities ``n``
    (stop − start, altitude, species) of samples ``start`` … ``stop − 1``, written to a
    temporary file in the folder and renamed into place (an interrupted write leaves no
    half file under a batch name).

``.lock``
    Held (``fcntl.flock``) by the run using the store: a second run on the same store is
    refused at once with a clear message instead of interleaving batches. The lock goes with
    the process, so a killed run leaves no stale lock.

A batch file that cannot be read back (a file cut short by a crash of the machine, say) is
set aside as ``batch_….npz.damaged`` when the store is opened and its samples count as
missing, so a resumed run recomputes them (``discarded`` lists them); hidden temporary files
a killed run left are removed then too. A folder without a manifest is not taken for a store.

The store knows nothing of chemistry: it keeps arrays by sample index. It must not decide
which samples to compute; the ensemble runner asks it which ranges are missing.
"""

from __future__ import annotations

import contextlib
import json
import os
import re
import shutil
import zipfile
from pathlib import Path

import numpy as np

from ionochem.errors import Error, InputError

FORMAT = 1
_BATCH = re.compile(r"^batch_(\d{9})_(\d{9})\.npz$")


def store_path_for(output) -> Path:
    """The sample folder of an output file: ``OUT.nc`` → ``OUT.nc.samples``."""
    return Path(str(output) + ".samples")


def _atomic_write(folder: Path, name: str, write) -> None:
    from ionochem.io.netcdf import registered_temporary
    with registered_temporary(str(folder), f".{name}") as tmp:
        try:
            with open(tmp, "wb") as fh:
                write(fh)
                fh.flush()
                os.fsync(fh.fileno())
            os.replace(tmp, folder / name)
        except OSError as exc:
            # A full disk or a file size limit: the batch is not stored (a --resume after
            # freeing space recomputes it); one line instead of a traceback.
            with contextlib.suppress(OSError):
                os.unlink(tmp)
            raise Error(f"cannot store {name}: {exc.strerror or exc}; free space and run "
                        "again with --resume", file=str(folder)) from None
        except BaseException:
            with contextlib.suppress(OSError):
                os.unlink(tmp)
            raise


class EnsembleStore:
    """Finished batches of one ensemble run, kept in a folder.

    Parameters
    ----------
    folder : str or Path
        The store folder (``OUT.nc.samples``).
    manifest : dict
        JSON-serialisable description of the run (see the module docstring).
    resume : bool
        Continue an existing store (its manifest must equal ``manifest``). Without it an
        existing store is refused, so that a finished part of a long run is never wiped by
        accident.
    """

    def __init__(self, folder, manifest: dict, *, resume: bool = False):
        self.folder = Path(folder)
        self.manifest = {"format": FORMAT, **manifest}
        text = json.dumps(self.manifest, sort_keys=True)
        self.manifest = json.loads(text)          # normalise tuples → lists for comparison
        #: Batch files set aside because they could not be read back.
        self.discarded: list[str] = []
        self._lock_fd = None
        where = str(self.folder)
        mpath = self.folder / "manifest.json"
        created = False
        if not self.folder.exists() and not self.folder.is_symlink():
            parent = self.folder.parent if str(self.folder.parent) else Path(".")
            if not parent.is_dir():
                raise InputError(f"output folder {parent} does not exist", file=where)
            try:
                self.folder.mkdir()
                created = True
            except FileExistsError:
                pass                                 # another run made it just now
            except OSError as exc:
                raise InputError(f"cannot make the sample folder: {exc.strerror}",
                                 file=where) from None
        if not self.folder.is_dir():
            raise InputError("the sample store path exists and is not a folder; remove or "
                             "rename it", file=where)
        self._lock()
        self._sweep_temporaries()
        if not created and not mpath.exists():
            # An empty folder (a run stopped right after making it) is taken over.
            created = not [p for p in self.folder.iterdir() if p.name != ".lock"]
        if created:
            _atomic_write(self.folder, "manifest.json",
                          lambda fh: fh.write(text.encode() + b"\n"))
            return
        if not mpath.is_file():
            self._unlock()
            raise InputError("this folder has no manifest.json, so it is not an ionochem "
                             "sample store (or the run that made it was stopped before "
                             "writing one); remove or rename it, or choose another -o",
                             file=where)
        if not resume:
            self._unlock()
            raise InputError("holds samples of an earlier run: pass --resume to continue it, "
                             "or --restart to discard them and start again", file=where)
        try:
            stored = json.loads(mpath.read_text(encoding="utf-8"))
            if not isinstance(stored, dict):
                raise ValueError("not a JSON object")
        except (OSError, ValueError) as exc:
            self._unlock()
            raise InputError(f"unreadable manifest.json ({exc}); remove the folder to start "
                             "again", file=where) from None
        diff = sorted(k for k in set(stored) | set(self.manifest)
                      if stored.get(k) != self.manifest.get(k))
        if diff:
            self._unlock()
            shown = "; ".join(_difference(k, stored.get(k), self.manifest.get(k))
                              for k in diff)
            raise InputError("cannot resume: the stored samples were made with different "
                             f"inputs ({shown}); pass --restart to discard them and start "
                             "again, or use another output", file=where)
        self._set_aside_damaged()

    # ------------------------------------------------------------------ locking
    def _lock(self):
        """Take the store's lock or refuse: one run per store."""
        self._lock_fd = _take_lock(self.folder)

    def _unlock(self):
        if self._lock_fd is not None:
            with contextlib.suppress(OSError):
                os.close(self._lock_fd)
            self._lock_fd = None

    def close(self) -> None:
        """Release the lock (also released when the process ends)."""
        self._unlock()

    def _sweep_temporaries(self):
        """Remove temporary files a killed run left (safe: this run holds the lock)."""
        for p in self.folder.iterdir():
            if p.name.startswith(".") and p.name.endswith(".tmp"):
                with contextlib.suppress(OSError):
                    p.unlink()

    def _set_aside_damaged(self):
        """Rename batch files that cannot be read back; their samples become missing."""
        for p in sorted(self.folder.iterdir()):
            if _BATCH.match(p.name) and not _readable(p):
                with contextlib.suppress(OSError):
                    os.replace(p, p.with_name(p.name + ".damaged"))
                    self.discarded.append(p.name)

    # ------------------------------------------------------------------ reading
    def finished(self):
        """Sorted ``(start, stop)`` ranges of the stored batches."""
        out = []
        for p in self.folder.iterdir():
            m = _BATCH.match(p.name)
            if m:
                out.append((int(m.group(1)), int(m.group(2))))
        return sorted(out)

    def missing(self, total: int):
        """Sorted ``(start, stop)`` gaps of ``range(total)`` not yet stored."""
        gaps, pos = [], 0
        for a, b in self.finished():
            if a > pos:
                gaps.append((pos, min(a, total)))
            pos = max(pos, b)
        if pos < total:
            gaps.append((pos, total))
        return [(a, b) for a, b in gaps if b > a]

    def read(self, start: int, stop: int):
        """``(z, n)`` of one stored batch.

        Raises
        ------
        InputError
            When the batch file cannot be read back (damaged since the store was opened).
        """
        path = self.folder / _name(start, stop)
        try:
            with np.load(path, allow_pickle=False) as data:
                return data["z"], data["n"]
        except (OSError, ValueError, KeyError, EOFError, zipfile.BadZipFile) as exc:
            raise InputError(f"batch {path.name} cannot be read ({type(exc).__name__}); run "
                             "again with --resume to recompute it", file=str(self.folder)
                             ) from None

    def complete_ranges(self, total: int, what: str = "samples"):
        """The stored batch ranges ``[(start, stop), ...]``, checked to cover 0..total once.

        Raises
        ------
        InputError
            When some of the ``total`` items (``what``: samples, points) are missing or
            stored twice.
        """
        ranges = self.finished()
        pos = 0
        for a, b in ranges:
            if a != pos:
                raise InputError(f"{what} {pos}..{a - 1} are missing or stored twice",
                                 file=str(self.folder))
            pos = b
        if pos != total:
            raise InputError(f"{pos} of {total} {what} are stored", file=str(self.folder))
        return ranges

    def load(self, total: int):
        """All stored samples in index order: ``z`` (total, F) and ``n`` (total, A, S).

        Raises
        ------
        InputError
            When samples are missing or stored twice.
        """
        parts = [self.read(a, b) for a, b in self.complete_ranges(total)]
        return (np.concatenate([p[0] for p in parts]), np.concatenate([p[1] for p in parts]))

    # ------------------------------------------------------------------ writing
    def write(self, start: int, stop: int, z, n) -> None:
        """Store one finished batch atomically."""
        z = np.ascontiguousarray(z, float)
        n = np.ascontiguousarray(n, float)
        if z.shape[0] != stop - start or n.shape[0] != stop - start:
            raise ValueError("batch arrays do not match the sample range")
        _atomic_write(self.folder, _name(start, stop),
                      lambda fh: np.savez(fh, z=z, n=n))

    def remove(self) -> None:
        """Delete the store (after the final output was written)."""
        self._unlock()
        shutil.rmtree(self.folder, ignore_errors=True)


def _take_lock(folder):
    """Lock ``folder``'s ``.lock`` (flock, held until closed) and return its descriptor
    (None where there is no fcntl); another holder is refused with an InputError."""
    try:
        import fcntl
    except ImportError:                       # not POSIX: no lock
        return None
    path = Path(folder) / ".lock"
    try:
        fd = os.open(path, os.O_RDWR | os.O_CREAT, 0o644)
    except OSError as exc:
        raise InputError(f"cannot create the store lock: {exc.strerror}",
                         file=str(folder)) from None
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except OSError:
        holder = ""
        with contextlib.suppress(OSError, ValueError):
            holder = f" (process {int(os.read(fd, 32).decode().strip())})"
        os.close(fd)
        raise InputError(f"another ionochem run is using this sample store{holder}; "
                         "wait for it to finish or give another -o",
                         file=str(folder)) from None
    os.ftruncate(fd, 0)
    os.write(fd, f"{os.getpid()}\n".encode())
    return fd


def discard_store(folder) -> bool:
    """Empty an earlier run's store so that a new run starts over (``--restart``).

    Only a folder that is an ionochem sample store (it holds ``manifest.json``) is emptied,
    under the store's lock (a store another run is using is refused); its batch files, set
    aside files and manifest are removed, the folder stays. Returns whether there was a
    store to empty.

    Raises
    ------
    InputError
        When the path is not a folder, is a folder without a manifest (not a store: nothing
        is removed), or another run holds the lock.
    """
    folder = Path(folder)
    if not folder.exists() and not folder.is_symlink():
        return False
    where = str(folder)
    if not folder.is_dir():
        raise InputError("the sample store path exists and is not a folder; remove or "
                         "rename it", file=where)
    if not (folder / "manifest.json").is_file():
        if not [p for p in folder.iterdir() if p.name != ".lock"]:
            return False
        raise InputError("this folder has no manifest.json, so it is not an ionochem sample "
                         "store; --restart removes nothing there: remove or rename it, or "
                         "choose another -o", file=where)
    fd = _take_lock(folder)
    try:
        for p in folder.iterdir():
            if p.name == "manifest.json" or _BATCH.match(p.name.removesuffix(".damaged")) \
                    or (p.name.startswith(".") and p.name.endswith(".tmp")):
                with contextlib.suppress(OSError):
                    p.unlink()
    finally:
        if fd is not None:
            with contextlib.suppress(OSError):
                os.close(fd)
    return True


def _readable(path) -> bool:
    """Whether a batch file opens and holds ``z`` and ``n`` of matching length."""
    try:
        with np.load(path, allow_pickle=False) as data:
            z, n = data["z"], data["n"]
            return z.shape[0] == n.shape[0]
    except (OSError, ValueError, KeyError, EOFError, zipfile.BadZipFile):
        return False


def _name(start, stop):
    return f"batch_{start:09d}_{stop:09d}.npz"


def _difference(key, old, new):
    """One manifest entry that differs, as text; for a mapping (the digests of input files)
    the sub-keys that changed."""
    if isinstance(old, dict) and isinstance(new, dict):
        changed = sorted(k for k in set(old) | set(new) if old.get(k) != new.get(k))
        return f"{key}: changed since: {', '.join(changed)}"
    return f"{key}: stored {_short(old)}, now {_short(new)}"


def _short(value):
    text = json.dumps(value)
    return text if len(text) <= 60 else text[:57] + "..."
