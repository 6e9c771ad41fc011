"""The ``ionochem`` command: one module per subcommand, shared option parsing in
:mod:`ionochem.cli.options`.

Every :class:`ionochem.Error` becomes one line on stderr (``file:line: message``, or
``file: key: message`` for scenarios) and exit status 2; a traceback means a bug (exit 1).
Nothing below the command layer imports it.
"""

from __future__ import annotations

import argparse
import importlib
import sys

from ionochem.errors import Error

#: Subcommand modules of this package, in the order ``ionochem --help`` lists them; each
#: has ``register(subparsers)`` which adds its parser and sets ``func``.
COMMANDS = ("run", "check", "reactions", "compare", "rank", "uncertainty", "fit", "rates",
            "sweep")


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
    return p


def main(argv=None):
    """Run the command line; returns the exit status (0, 1 for a bug, 2 for bad input)."""
    parser = build_parser()
    argv = sys.argv[1:] if argv is None else list(argv)
    args = parser.parse_args(argv)
    args.command_line = "ionochem " + " ".join(argv)
    import warnings

    def one_line(message, category, filename, lineno, file=None, line=None):
        print(f"warning: {message}", file=sys.stderr)

    warnings.showwarning = one_line
    from ionochem.io.netcdf import terminate_cleanly
    try:
        # SIGTERM removes the temporary files being written and ends with status 143.
        with terminate_cleanly():
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
