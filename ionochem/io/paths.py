"""Guarded paths of input files: resolve a name, check it is a regular file, read it bounded.

Every file ionochem reads on a user's word — a scenario or reaction list named on the command
line, a reaction list, profile table or spectrum named in a scenario, a rate table named in a
reaction list — goes through this module, so that all of them obey the same rules:

* the name is text without NUL characters; ``~`` and ``~user`` are expanded, and a name whose
  home folder does not exist, a symlink loop or an unresolvable path is an error, not a
  traceback;
* the file exists and is a *regular* file (not a folder, a device such as ``/dev/zero``, a
  FIFO that would block forever, or a socket);
* it is at most :data:`MAX_INPUT_BYTES` long and is read with that bound, never unbounded.

Problems are raised as :class:`PathProblem` (a :class:`ValueError` with a message that never
quotes the file's content); each caller turns it into its own :class:`ionochem.Error` with the
file or scenario key. This module knows nothing about what the files contain.
"""

from __future__ import annotations

import os
import stat
from pathlib import Path

__all__ = ["MAX_INPUT_BYTES", "MAX_STORE_BYTES", "PathProblem", "decode_text", "file_digest",
           "read_bounded", "read_text", "regular_file", "resolve_path"]

#: Largest input file read (bytes). The largest packaged table is below 1 MB; a reaction list,
#: scenario or profile table of ten times the packaged ones is still far below this
#: *(common practice: a bound that stops /dev/zero, not real inputs)*.
MAX_INPUT_BYTES = 20_000_000
#: Largest netCDF file read back (bytes): observation files, templates of stores. A netCDF
#: file is opened by the netCDF library, which reads only what it needs, so the bound is
#: a sanity limit of the same kind, a hundred times the text one *(common practice)*.
MAX_STORE_BYTES = 2_000_000_000


class PathProblem(ValueError):
    """A path that cannot be used as an input file; ``str()`` is the message.

    ``line`` is the 1-based line of a text file the problem is on (``None`` for the file).
    """

    def __init__(self, message, line=None):
        super().__init__(message)
        self.line = line


def resolve_path(name, base: str | Path | None = None) -> Path:
    """Absolute path of ``name`` (``~`` expanded, relative to ``base``, symlinks resolved).

    Parameters
    ----------
    name : str or Path
        The path as written.
    base : str or Path, optional
        Folder a relative ``name`` is taken in; the working directory when None.

    Returns
    -------
    Path
        Absolute, with symlinks resolved (the file need not exist).

    Raises
    ------
    PathProblem
        Empty name, a NUL character, ``~user`` of an unknown user, a symlink loop or any
        other failure to resolve.
    """
    text = os.fspath(name)
    if not isinstance(text, str) or not text.strip():
        raise PathProblem("the file name is empty")
    if "\0" in text:
        raise PathProblem("the file name contains a NUL character")
    try:
        p = Path(text).expanduser()
    except RuntimeError:
        raise PathProblem(f"cannot expand {text.split('/')[0]!r}: no such user or home "
                          "folder") from None
    try:
        if not p.is_absolute():
            p = Path(base if base is not None else Path.cwd()) / p
        return p.resolve()
    except RuntimeError:
        raise PathProblem("the path loops through symbolic links") from None
    except (OSError, ValueError) as exc:
        raise PathProblem(f"the path cannot be resolved ({_reason(exc)})") from None


def regular_file(path: str | Path, limit: int = MAX_INPUT_BYTES) -> os.stat_result:
    """Check that ``path`` is an existing regular file of at most ``limit`` bytes.

    Raises
    ------
    PathProblem
        Not found, a folder, a device, FIFO or socket, unreadable, or too large.
    """
    try:
        st = os.stat(path)
    except FileNotFoundError:
        raise PathProblem("file not found") from None
    except RuntimeError:
        raise PathProblem("the path loops through symbolic links") from None
    except (OSError, ValueError) as exc:
        if getattr(exc, "errno", None) == 40:         # ELOOP
            raise PathProblem("the path loops through symbolic links") from None
        raise PathProblem(f"cannot be read ({_reason(exc)})") from None
    if stat.S_ISDIR(st.st_mode):
        raise PathProblem("is a folder, not a file")
    if not stat.S_ISREG(st.st_mode):
        raise PathProblem("is not a regular file (a device, pipe or socket); give a file")
    if st.st_size > limit:
        raise PathProblem(f"is {st.st_size} bytes, larger than the {limit}-byte limit for "
                          "input files")
    return st


def read_bounded(path: str | Path, limit: int = MAX_INPUT_BYTES) -> bytes:
    """The bytes of the regular file ``path``, read with the bound ``limit``.

    The file is opened without blocking (a FIFO swapped in after the check cannot hang the
    read) and its type is checked again on the open descriptor.

    Raises
    ------
    PathProblem
        Anything :func:`regular_file` refuses, or a file that grew past ``limit``.
    """
    regular_file(path, limit)
    flags = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_CLOEXEC", 0)
    try:
        fd = os.open(path, flags)
    except (OSError, ValueError) as exc:
        raise PathProblem(f"cannot be read ({_reason(exc)})") from None
    try:
        if not stat.S_ISREG(os.fstat(fd).st_mode):
            raise PathProblem("is not a regular file (a device, pipe or socket); give a file")
        chunks, total = [], 0
        while True:
            chunk = os.read(fd, min(1 << 20, limit + 1 - total))
            if not chunk:
                break
            chunks.append(chunk)
            total += len(chunk)
            if total > limit:
                raise PathProblem(f"is larger than the {limit}-byte limit for input files")
        return b"".join(chunks)
    except OSError as exc:
        raise PathProblem(f"cannot be read ({_reason(exc)})") from None
    finally:
        os.close(fd)


def read_text(name, base=None, limit: int = MAX_INPUT_BYTES) -> tuple[Path, str]:
    """Resolve ``name`` and read it as UTF-8 text, bounded: ``(path, text)``.

    The one reader of the text inputs a user names (observation files, the laboratory
    toolkit's CSV files): :func:`resolve_path`, :func:`read_bounded`, then UTF-8 (a leading
    byte-order mark dropped) without NUL characters (``/proc/self/environ`` and binary files
    are refused here, before any of their content could reach a message).

    Raises
    ------
    PathProblem
        Anything :func:`read_bounded` refuses; text that is not UTF-8 or holds a NUL
        character (``line`` says where).
    """
    path = resolve_path(name, base)
    return path, decode_text(read_bounded(path, limit))


def decode_text(data: bytes) -> str:
    """``data`` as UTF-8 text, a leading byte-order mark dropped.

    Raises
    ------
    PathProblem
        Bytes that are not UTF-8, or a NUL character (``line`` says where).
    """
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise PathProblem("is not valid UTF-8 text (a binary file?)",
                          line=data[:exc.start].count(b"\n") + 1) from None
    if "\0" in text:
        raise PathProblem("contains a NUL byte (a binary file?)",
                          line=text[:text.index("\0")].count("\n") + 1)
    return text.removeprefix("\ufeff")


def file_digest(path, limit: int = MAX_STORE_BYTES) -> str:
    """SHA-256 of a regular file's bytes (read bounded), or ``"unreadable: REASON"``.

    For resume manifests: a changed input file changes its digest, so stored results made
    from the old file are not silently reused.
    """
    import hashlib
    try:
        regular_file(path, limit)
        h = hashlib.sha256()
        with open(path, "rb") as fh:
            for chunk in iter(lambda: fh.read(1 << 20), b""):
                h.update(chunk)
        return h.hexdigest()
    except (PathProblem, OSError) as exc:
        return f"unreadable: {exc}"


def _reason(exc) -> str:
    return getattr(exc, "strerror", None) or str(exc) or type(exc).__name__
