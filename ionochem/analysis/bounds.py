"""Bounds on the sizes of work that library functions and the command line both apply.

A count given by a user (bootstrap refits, profile points, a random seed) is checked from
the argument before anything is allocated, in the library function as well as on the
command line (which checks it while parsing, through :func:`count_option`), so a call from
Python is held to the same bound. The bounds are round numbers *(common practice)*, each
far above what a meaningful run uses and far below what would exhaust memory.
"""

from __future__ import annotations

import argparse

from ionochem.errors import InputError

#: Largest random seed: numpy's ``SeedSequence`` takes any integer, but a seed is written
#: into the result's attributes as a 64-bit integer (netCDF has no larger type).
MAX_SEED = 2 ** 63 - 1
#: Most points of a profile likelihood (each a full fit): 201 points resolve a profile far
#: more finely than its curvature needs (the default is 13).
MAX_PROFILE_POINTS = 201
#: Most bootstrap refits: 100,000 give the 68 % band to well under 1 % of its width.
MAX_BOOTSTRAP = 100_000

__all__ = ["MAX_BOOTSTRAP", "MAX_PROFILE_POINTS", "MAX_SEED", "check_count", "count_option"]


def check_count(value, lo, hi, option, what="value"):
    """``value`` as an int, refused unless a whole number ``lo ≤ value ≤ hi``.

    ``option`` names the caller's argument (``n_boot``); the command layer shows it as its
    option (:mod:`ionochem.cli.wording`).

    Raises
    ------
    InputError
        ``ARGUMENT: …`` naming the bound.
    """
    try:
        ok = not isinstance(value, bool) and float(value).is_integer()
    except (TypeError, ValueError, OverflowError):
        ok = False
    if not ok or not lo <= int(value) <= hi:
        raise InputError(f"{what} {value!r} must be a whole number from {lo} to {hi}",
                         file=option)
    return int(value)


def count_option(lo, hi, what="value"):
    """An argparse ``type=`` for a whole number from ``lo`` to ``hi`` (``1e5`` accepted)."""

    def parse(text):
        try:
            number = float(text) if any(c in text for c in ".eE") else int(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{text!r} is not a whole number") from None
        try:
            return check_count(number, lo, hi, "", what)
        except InputError as exc:
            raise argparse.ArgumentTypeError(exc.message) from None
    parse.__name__ = what
    return parse
