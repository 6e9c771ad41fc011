"""The ``ionochem`` command: one module per subcommand, shared option parsing in
:mod:`ionochem.cli.options`.

Every :class:`ionochem.Error` becomes one line on stderr (``file:line: message``, or
``file: key: message`` for scenarios) and exit status 2; a traceback means a bug (exit 1).
Nothing below the command layer imports it.

Lazy imports, for start-up speed: building the parser imports every command module, so a
command module imports the library (the model, analyses, plots, rate toolkit, anything that
loads numpy, scipy, xarray or matplotlib) inside its command function, where only the
command that runs pays for it. Such imports are the documented exception to "imports at
module top" (docs/style.md); ``tests/test_cli_imports.py`` guards what ``--help``,
``check`` and ``run`` load. Imports between command modules stay at module top.
"""

from __future__ import annotations

import argparse
import contextlib
import gc
import importlib
import os
import sys

from ionochem.cli.wording import option_flags, worded
from ionochem.errors import Error

#: Subcommand modules of this package, in the order ``ionochem --help`` lists them; each
#: has ``register(subparsers)`` which adds its parser and sets ``func``.
COMMANDS = ("run", "check", "reactions", "compare", "rank", "uncertainty", "fit", "rates",
            "sweep", "discern")


def build_parser():
    """The argument parser with every subcommand registered."""
    from ionochem import __version__
    p = argparse.ArgumentParser(
        prog="ionochem",
        description="Photochemistry of one ionospheric altitude column from a reaction list. "
                    "Research output, not a forecast.")
    p.add_argument("--version", action="version", version=f"ionochem {__version__}")
    sub = p.add_subparsers(dest="command", required=True, metavar="COMMAND")
    for name in COMMANDS:
        importlib.import_module(f"ionochem.cli.{name}").register(sub)
    _word_errors(p, {}, set())
    return p


def _word_errors(parser, inherited, seen):
    """Wrap the command function of ``parser`` and of its subcommands so that library errors
    name options (:mod:`ionochem.cli.wording`)."""
    if id(parser) in seen:
        return
    seen.add(id(parser))
    flags = {**inherited, **option_flags(parser)}
    func = parser.get_default("func")
    if func is not None:
        parser.set_defaults(func=worded(func, flags))
    for action in parser._actions:      # argparse keeps no public list of subparsers
        if isinstance(action, argparse._SubParsersAction):
            for child in action.choices.values():
                _word_errors(child, flags, seen)


#: Commands that never use dask: they run with its import blocked (see _WithoutDask).
#: Commands that may start a dask cluster (uncertainty, sweep) and new ones are not listed.
WITHOUT_DASK = ("run", "check", "reactions", "compare", "rank", "fit", "rates", "discern")


class _WithoutDask:
    """While active, ``import dask`` and ``import pint`` raise ImportError.

    xarray imports dask and pint, when installed, the first time it builds a variable (to
    recognise their arrays), and asks dask for a scheduler on every netCDF write: about
    0.3–0.5 s for dask and 0.13 s for pint of an ``ionochem run`` that uses neither
    (measured with ``python -X importtime``). xarray treats the ImportError as "not
    installed" and keeps that answer for the process (harmless: the command layer never
    gives xarray such arrays). Only the commands of ``WITHOUT_DASK`` run with it, and only
    before xarray is imported.
    """

    MODULES = ("dask", "pint")

    def __enter__(self):
        # Only before xarray is imported: xarray caches whether a module is available, and
        # a cached "available" with the import blocked would fail.
        self.blocked = [] if "xarray" in sys.modules else [
            m for m in self.MODULES if m not in sys.modules]
        for m in self.blocked:
            sys.modules[m] = None
        return self

    def __exit__(self, *exc):
        for m in self.blocked:
            if m in sys.modules and sys.modules[m] is None:
                del sys.modules[m]
        return False


#: Commands that do one column's worth of work and end: they run with the cyclic garbage
#: collector paused (see _CollectorPaused). Long analyses (uncertainty, fit, sweep) keep it.
PAUSE_GC = ("run", "check", "reactions", "compare", "rank", "rates")
#: Allocations between young collections while a one-column command runs (Python's default:
#: 700); start-up allocates a few hundred thousand objects.
GC_YOUNG_THRESHOLD = 200_000


class _CollectorPaused:
    """While active, Python's cyclic garbage collector runs rarely: a young collection
    every :data:`GC_YOUNG_THRESHOLD` allocations instead of every 700 (``gc.set_threshold``),
    so cyclic garbage stays bounded in a long transient run while start-up skips nearly all
    collections.

    Start-up imports about a thousand modules, and the collector keeps walking the ever
    larger heap they leave: 230 young, 21 middle and 2 full collections, 0.1-0.25 s of an
    ``ionochem run`` of the demo (measured with ``gc.callbacks``), for no memory back (the
    peak resident size is the same within 1 MB). Reference counting still frees every
    acyclic object at once; cycles wait for the next collection.

    When the process ends with the command (``process_ends``: :func:`main` was called
    without ``argv``, as the ``ionochem`` script and ``python -m ionochem`` do), every
    object left is moved to the permanent generation (``gc.freeze``) on exit, so that the
    collections of interpreter shutdown do not walk the heap once more: another 0.1-0.2 s
    of whole-process time (``python -c "import numpy, scipy.sparse.linalg, xarray"`` with
    and without a final ``gc.freeze()``). Python does not promise to finalise objects
    still alive at exit anyway (language reference, ``object.__del__``); what must reach a
    disk (netCDF files, tables) is closed explicitly by the commands. Skipping the final
    collection is the practice described in "Dismissing Python Garbage Collection at
    Instagram" (Instagram Engineering, 2017) *(from memory)*. The collector's previous
    state is restored on exit, so a caller of :func:`main` inside a longer process keeps
    its own.
    """

    def __init__(self, process_ends: bool = False):
        self.process_ends = process_ends

    def __enter__(self):
        self.thresholds = gc.get_threshold()
        gc.set_threshold(GC_YOUNG_THRESHOLD, *self.thresholds[1:])
        return self

    def __exit__(self, *exc):
        if self.process_ends:
            gc.freeze()
        gc.set_threshold(*self.thresholds)
        return False


#: Variables that set the BLAS thread count; a user who sets one keeps it.
BLAS_THREAD_VARIABLES = ("OPENBLAS_NUM_THREADS", "GOTO_NUM_THREADS", "OMP_NUM_THREADS",
                         "MKL_NUM_THREADS")


def _one_blas_thread():
    """Ask for one BLAS thread before numpy is loaded (a one-column command as a process).

    numpy and scipy each load their own OpenBLAS, and each starts a pool of worker threads
    that busy-wait for work after starting and after every call: on a two-core machine they
    take the main thread's core, and a product of two small matrices waits for them. The
    work of one column is small matrices throughout (solve/threads.py: one thread is
    faster there), and the results are bitwise the same (the demo's netCDF file, compared
    variable by variable). Whole-process ``ionochem run`` of the demo on a shared two-core
    machine: 0.74 s CPU and 1.14 s wall against 0.98 s and 1.56 s (medians of 7). Nothing is
    changed when numpy is already loaded (a caller of :func:`main` inside a longer process)
    or when the user set any of :data:`BLAS_THREAD_VARIABLES`.
    """
    if "numpy" in sys.modules or any(v in os.environ for v in BLAS_THREAD_VARIABLES):
        return
    os.environ["OPENBLAS_NUM_THREADS"] = "1"


#: errno values of a full or failing output device (stdout to /dev/full, a full disk).
_WRITE_FAILURES = ("ENOSPC", "EDQUOT", "EFBIG", "EIO")


def main(argv=None):
    """Run the command line; returns the exit status (0, 1 for a bug, 2 for bad input,
    130 when interrupted).

    Ctrl-C at any moment (even while the parser and the libraries load) ends with one line
    and status 130; standard output that cannot be written (``> /dev/full``) ends with one
    line and status 2, never a traceback.
    """
    import errno
    try:
        status = _main(argv)
        sys.stdout.flush()
        return status
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        return 130
    except OSError as exc:
        if exc.errno not in {getattr(errno, n) for n in _WRITE_FAILURES if hasattr(errno, n)}:
            raise
        # The data still buffered for stdout cannot be written; point the descriptor at
        # /dev/null so the interpreter's final flush does not fail a second time.
        with contextlib.suppress(OSError):
            fd = os.open(os.devnull, os.O_WRONLY)
            os.dup2(fd, sys.stdout.fileno())
        print(f"cannot write the output: {exc.strerror or exc}", file=sys.stderr)
        return 2


def _main(argv=None):
    parser = build_parser()
    process_ends = argv is None          # the `ionochem` script and `python -m ionochem`
    argv = sys.argv[1:] if argv is None else list(argv)
    args = parser.parse_args(argv)
    args.command_line = "ionochem " + " ".join(argv)
    if process_ends and args.command in PAUSE_GC:
        _one_blas_thread()
    import warnings

    def one_line(message, category, filename, lineno, file=None, line=None):
        print(f"warning: {message}", file=sys.stderr)

    warnings.showwarning = one_line
    # Notes of the library (such as the workers --workers auto chose) as one line each.
    import logging
    note = logging.StreamHandler(sys.stderr)
    note.setFormatter(logging.Formatter("note: %(message)s"))
    log = logging.getLogger("ionochem")
    if not log.handlers:
        log.addHandler(note)
        log.setLevel(logging.INFO)
    from ionochem.io.netcdf import terminate_cleanly
    try:
        # SIGTERM removes the temporary files being written and ends with status 143.
        import contextlib
        nodask = _WithoutDask() if args.command in WITHOUT_DASK else contextlib.nullcontext()
        nogc = (_CollectorPaused(process_ends) if args.command in PAUSE_GC
                else contextlib.nullcontext())
        with terminate_cleanly(), nodask, nogc:
            from ionochem.cli.options import check_targets
            check_targets(args)
            return args.func(args)
    except Error as exc:
        print(str(exc), file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:          # output piped into `head` and the like
        sys.stderr.close()
        return 0
