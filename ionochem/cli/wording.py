"""Library errors in the command line's words.

The library (analysis/, rates/) names its own arguments in errors: ``InputError("must be at
least 1", file="top")``, and writes another argument it mentions in backquotes (``use
`additions```). A command shows the same error with its options: ``--top: must be at least
1``, ``use --add``. :func:`worded` wraps every command function (``build_parser`` applies
it), so the rewrite holds for ``ionochem`` and for a caller of ``args.func`` alike.

An error at a file line or a scenario key is left as it is; so is an argument no option of
the command sets.
"""

from __future__ import annotations

import copy
import functools

from ionochem.errors import InputError

__all__ = ["ARGUMENT_OPTIONS", "option_flags", "reworded", "worded"]

#: Library argument names that differ from the option's destination: name -> destination.
ARGUMENT_OPTIONS = {
    "n_boot": "bootstrap",
    "altitude_range": "altitudes",
    "altitudes_km": "altitudes",
    "observables": "observable",
    "replacements": "reactions",
    "additions": "add",
    "member_correlation": "member_correlation",
    "species_at": "budget",
}


def option_flags(parser) -> dict[str, str]:
    """Destination -> flag (the first ``--`` spelling) of the options of ``parser``."""
    out = {}
    for action in parser._actions:             # argparse keeps no public list of actions
        longs = [s for s in action.option_strings if s.startswith("--")]
        if longs or action.option_strings:
            out[action.dest] = (longs or action.option_strings)[0]
    return out


def reworded(exc: InputError, flags: dict[str, str]) -> InputError:
    """``exc`` with its argument names replaced by the options of ``flags``."""
    if exc.line is not None or exc.key is not None:
        return exc

    def flag(name):
        return flags.get(ARGUMENT_OPTIONS.get(name, name))

    message = exc.message
    for name in {*flags, *ARGUMENT_OPTIONS}:
        if f"`{name}`" in message and flag(name):
            message = message.replace(f"`{name}`", flag(name))
    file = flag(exc.file) if exc.file is not None and flag(exc.file) else exc.file
    if (file, message) == (exc.file, exc.message):
        return exc
    new = copy.copy(exc)
    new.file, new.message, new.args = file, message, (message,)
    return new


def worded(func, flags: dict[str, str]):
    """``func(args)`` with every InputError it raises :func:`reworded` by ``flags``."""

    @functools.wraps(func)
    def run(args):
        try:
            return func(args)
        except InputError as exc:
            new = reworded(exc, flags)
            if new is exc:
                raise
            raise new from None

    return run
