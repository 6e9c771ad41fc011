"""Typed checks of single scenario values (a number, a string, a choice, a file, a list).

The building blocks of the schema walk (:mod:`ionochem.io.scenario.schema`): each check
takes a parsed TOML value and the dotted key it came from, and returns the value in its final
type or raises :class:`ionochem.ScenarioError` at that key. Physical plausibility lives in
:mod:`ionochem.io.scenario.ranges`, path rules in :mod:`ionochem.io.paths`.
"""

from __future__ import annotations

import datetime as dt
import math
from pathlib import Path

from ionochem.errors import ScenarioError
from ionochem.io.paths import PathProblem, regular_file, resolve_path
from ionochem.io.scenario.ranges import check_range

_MISSING = object()


class ValueChecks:
    """Checks of single values, each raising ScenarioError at its key."""

    def __init__(self, source: str, base: Path):
        self.source = source
        self.base = base
        #: Messages for values outside their usual (soft) range.
        self.warnings: list[str] = []

    # -- primitives ---------------------------------------------------------------

    def fail(self, key: str | None, message: str) -> ScenarioError:
        return ScenarioError(message, file=self.source, key=key)

    def table(self, value, key: str, allowed: tuple[str, ...]) -> dict:
        """A TOML table with no keys outside ``allowed``."""
        if not isinstance(value, dict):
            raise self.fail(key, f"must be a table (a [{key}] section or {{ ... }}), "
                                 f"not {_kind(value)}")
        for name in value:
            if name not in allowed:
                where = f"in [{key}]" if key else "at the top level"
                raise self.fail(_join(key, name),
                                f"unknown key {name!r} {where} (allowed: "
                                f"{', '.join(allowed)})")
        return value

    def mapping(self, value, key: str) -> dict:
        """A TOML table with free keys (reaction ids)."""
        if not isinstance(value, dict):
            raise self.fail(key, f"must be a table {{ \"ID\" = ... }}, not {_kind(value)}")
        return value

    def number(self, value, key: str, *, low=None, low_open=False, high=None,
               high_open=False, what="a number") -> float:
        if isinstance(value, bool):
            raise self.fail(key, f"must be {what}, not a boolean ({str(value).lower()})")
        if not isinstance(value, (int, float)):
            raise self.fail(key, f"must be {what}, not {_kind(value)}")
        x = float(value)
        if not math.isfinite(x):
            raise self.fail(key, f"must be a finite number, not {value}")
        if low is not None and (x <= low if low_open else x < low):
            if low == 0 and low_open:
                raise self.fail(key, f"must be positive (got {value})")
            if low == 0:
                raise self.fail(key, f"must not be negative (got {value})")
            raise self.fail(key, f"must be {'>' if low_open else '>='} {low:g} (got {value})")
        if high is not None and (x >= high if high_open else x > high):
            raise self.fail(key, f"must be {'<' if high_open else '<='} {high:g} "
                                 f"(got {value})")
        return x

    def physical(self, value, key: str, *, range_key: str | None = None,
                 what: str = "a number") -> float:
        """A number inside its documented range (:data:`~.ranges.RANGES`).

        Outside the hard range it is an error stating the range; outside the soft range it
        is accepted and a warning is kept in :attr:`warnings`.
        """
        x = self.number(value, key, what=what)
        error, warning = check_range(key, x, range_key=range_key)
        if error:
            raise self.fail(key, error)
        if warning:
            self.warnings.append(f"{self.source}: {warning}")
        return x

    def string(self, value, key: str) -> str:
        if not isinstance(value, str):
            raise self.fail(key, f"must be a string, not {_kind(value)}")
        if not value.strip():
            raise self.fail(key, "must not be empty")
        return value

    def boolean(self, value, key: str) -> bool:
        if not isinstance(value, bool):
            raise self.fail(key, f"must be true or false, not {_kind(value)}")
        return value

    def choice(self, value, key: str, options: tuple[str, ...]) -> str:
        self.string(value, key)
        if value not in options:
            raise self.fail(key, f"must be one of {', '.join(repr(o) for o in options)}, "
                                 f"not {value!r}")
        return value

    def file(self, value, key: str) -> Path:
        """A path to an existing regular file, resolved against the scenario's folder."""
        self.string(value, key)
        try:
            p = resolve_path(value, self.base)
            regular_file(p)
        except PathProblem as exc:
            raise self.fail(key, f"{value!r}: {exc} (paths are absolute or relative to the "
                                 f"scenario's folder {self.base}; ~ is expanded)") from None
        return p

    def increasing(self, value, key: str, *, what: str) -> tuple[float, ...]:
        """A non-empty list of non-negative, strictly increasing numbers."""
        if not isinstance(value, list):
            raise self.fail(key, f"must be a list of numbers, not {_kind(value)}")
        if not value:
            raise self.fail(key, f"is empty: give at least one {what}")
        out = []
        for i, item in enumerate(value):
            if isinstance(item, bool) or not isinstance(item, (int, float)):
                raise self.fail(key, f"item {i + 1} must be a number, not {_kind(item)}")
            x = float(item)
            if not math.isfinite(x):
                raise self.fail(key, f"item {i + 1} must be a finite number, not {item}")
            if x < 0:
                raise self.fail(key, f"item {i + 1} must not be negative (got {item})")
            if out and not x > out[-1]:
                raise self.fail(key, f"must be strictly increasing: item {i + 1} ({item:g}) "
                                     f"follows {out[-1]:g}")
            out.append(x)
        return tuple(out)

    def inapplicable(self, section: dict, name: str, key: str, condition: str) -> None:
        if name in section:
            raise self.fail(_join(key, name), f"is only used when {condition}; remove it or "
                                              "change that setting")


def _join(prefix: str, name: str) -> str:
    return f"{prefix}.{name}" if prefix else name


def _kind(value) -> str:
    """Describe a TOML value's type in words."""
    if isinstance(value, bool):
        return f"a boolean ({str(value).lower()})"
    if isinstance(value, str):
        return f"a string ({value!r})"
    if isinstance(value, (int, float)):
        return f"a number ({value})"
    if isinstance(value, list):
        return "a list"
    if isinstance(value, dict):
        return "a table"
    if isinstance(value, (dt.datetime, dt.date, dt.time)):
        return f"a date/time ({value})"
    return type(value).__name__
