"""The axes of a sweep: ``--vary KEY=VALUES`` parsed into named dimensions.

A sweep varies scenario keys over a grid. Each axis is one key and its values:

- ``KEY`` is a scenario key written ``section.key`` (``sun.f107``, ``location.latitude_deg``,
  ``geomagnetic.ap``; deeper tables as ``section.sub.key``), or one of the derived keys
  ``time.local_hour`` and ``time.day_of_year`` (see :mod:`ionochem.analysis.sweep`).
- ``VALUES`` is a comma list (``100,150,200``) or a range ``start:stop:step`` with ``stop``
  included; ``(stop − start)/step`` must be a whole number (the rule of ``[grid]``).

Each axis becomes a dimension named after the key's last part (``f107``, ``latitude_deg``,
``local_hour``, ``day_of_year``: docs/design.md §4). Points are the Cartesian product of the axes,
the first ``--vary`` outermost (C order), numbered 0 … N − 1.

Only the form is checked here (a known shape of key, a non-empty list, a non-zero step,
distinct values); whether a value is acceptable for its key is the scenario loader's call
(:func:`ionochem.analysis.sweep.check_axes`). This module must not read files.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

import numpy as np

from ionochem.errors import InputError

#: Keys computed by the sweep rather than written in a scenario: they set ``time.utc``.
DERIVED_KEYS = ("time.local_hour", "time.day_of_year")
#: Sections that fix the shape or the identity of the column; varying them would change the
#: layout of the outputs (the grid) or duplicate ``--set``/``--scale`` (changes).
FIXED_SECTIONS = ("grid", "changes", "output")
#: Relative tolerance for ``(stop − start)/step`` to count as whole (as ``[grid]``).
RANGE_TOLERANCE = 1e-9
#: Most points of a sweep (all axes together), --allow-long or not: the store names batches
#: with nine digits and a sweep of a million columns is days of work on a few cores; the
#: work bound (level solves, cli/limits.py) usually refuses far fewer *(common practice)*.
MAX_SWEEP_POINTS = 1_000_000
#: Units and long names of the dimensions the demo keys make (CF attributes).
AXIS_ATTRS = {
    "f107": {"units": "1e-22 W m-2 Hz-1", "long_name": "daily F10.7 solar radio flux (sfu)"},
    "f107a": {"units": "1e-22 W m-2 Hz-1",
              "long_name": "81-day mean F10.7 solar radio flux (sfu)"},
    "ap": {"units": "1", "long_name": "daily geomagnetic ap index"},
    "latitude_deg": {"units": "degree_north", "long_name": "geodetic latitude",
                     "standard_name": "latitude"},
    "longitude_deg": {"units": "degree_east", "long_name": "longitude",
                      "standard_name": "longitude"},
    "local_hour": {"units": "h", "long_name": "local apparent solar time (12 h = the Sun's "
                   "meridian transit)"},
    "day_of_year": {"units": "day", "long_name": "day of the year of the scenario's year "
                    "(1 = 1 January)"},
    "ion_drift_m_s": {"units": "m s-1", "long_name": "ion-neutral drift speed"},
    "lyman_alpha_photons_cm2_s": {"units": "cm-2 s-1",
                                  "long_name": "solar Lyman-alpha photon flux"},
}

_KEY = re.compile(r"^[A-Za-z_][A-Za-z0-9_]*(\.[A-Za-z_][A-Za-z0-9_]*)+$")


@dataclass(frozen=True)
class Axis:
    """One varied key.

    Attributes
    ----------
    key : str
        The dotted scenario key (``sun.f107``) or derived key (``time.local_hour``).
    values : tuple
        Floats for numbers, ``bool`` or ``str`` otherwise, in the order given.
    """

    key: str
    values: tuple

    @property
    def name(self) -> str:
        """The dimension name: the key's last part."""
        return self.key.rsplit(".", 1)[1]

    @property
    def derived(self) -> bool:
        return self.key in DERIVED_KEYS

    def coordinate(self) -> np.ndarray:
        """The values as a coordinate array (float64, or str when not all numbers)."""
        if all(isinstance(v, float) for v in self.values):
            return np.asarray(self.values, float)
        return np.asarray([_text(v) for v in self.values], dtype=str)


def _text(v):
    if isinstance(v, bool):
        return "true" if v else "false"
    return format(v, "g") if isinstance(v, float) else str(v)


def parse_vary(items) -> tuple[Axis, ...]:
    """``["sun.f107=70:200:10", "time.local_hour=0,6,12"]`` → axes, checked for form.

    Raises
    ------
    InputError
        ``--vary: …`` for a malformed item, a key given twice, two keys with the same last
        part, an empty list or range, a zero step, repeated values.
    """
    axes = []
    for item in items or ():
        if "=" not in item:
            raise InputError(f"{item!r} must look like KEY=VALUES (sun.f107=70,150,250 or "
                             "sun.f107=70:250:20)", file="--vary")
        key, text = (part.strip() for part in item.split("=", 1))
        if not _KEY.match(key):
            raise InputError(f"{key!r} is not a scenario key: write section.key "
                             "(sun.f107, location.latitude_deg, time.local_hour)",
                             file="--vary")
        section = key.split(".", 1)[0]
        if section in FIXED_SECTIONS:
            raise InputError(f"{key}: the [{section}] section cannot be swept (it fixes the "
                             "column's layout or duplicates --set/--scale)", file="--vary")
        axes.append(Axis(key, parse_values(text, key)))
    keys = [a.key for a in axes]
    for k in keys:
        if keys.count(k) > 1:
            raise InputError(f"{k} is varied twice", file="--vary")
    names = [a.name for a in axes]
    for a in axes:
        if names.count(a.name) > 1:
            raise InputError(f"two varied keys end in {a.name!r}: each key names a dimension",
                             file="--vary")
    if "time.local_hour" in keys and "time.utc" in keys:
        raise InputError("time.local_hour sets time.utc: vary one of them", file="--vary")
    total = math.prod(len(a.values) for a in axes)
    if total > MAX_SWEEP_POINTS:
        raise InputError(f"the axes make {total:.3g} points, more than the "
                         f"{MAX_SWEEP_POINTS} a sweep may have", file="--vary")
    if "time.day_of_year" in keys and "time.utc" in keys:
        raise InputError("time.day_of_year sets time.utc: vary one of them", file="--vary")
    return tuple(axes)


def parse_values(text: str, key: str) -> tuple:
    """A comma list or ``start:stop:step`` (stop included) → tuple of values."""
    text = text.strip()
    where = f"--vary {key}"
    if not text:
        raise InputError(f"{key}: no values given", file="--vary")
    if ":" in text and "," not in text and not _looks_like_time(text):
        parts = [p.strip() for p in text.split(":")]
        if len(parts) != 3:
            raise InputError(f"{key}: a range is start:stop:step, got {text!r}", file="--vary")
        try:
            start, stop, step = (float(p) for p in parts)
        except ValueError:
            raise InputError(f"{key}: range {text!r} needs three numbers start:stop:step",
                             file="--vary") from None
        if not all(math.isfinite(v) for v in (start, stop, step)):
            raise InputError(f"{key}: range {text!r} must be finite numbers", file="--vary")
        if step == 0:
            raise InputError(f"{key}: the step of {text!r} is zero", file="--vary")
        ratio = (stop - start) / step
        if ratio < -RANGE_TOLERANCE:
            raise InputError(f"{key}: range {text!r} is empty (stop lies before start in the "
                             "direction of the step)", file="--vary")
        if ratio + 1 > MAX_SWEEP_POINTS:
            # Refused from the arguments, before a value is made.
            raise InputError(f"{key}: range {text!r} has {ratio + 1:.3g} values, more than "
                             f"the {MAX_SWEEP_POINTS} points a sweep may have", file="--vary")
        count = round(ratio)
        if abs(ratio - count) > RANGE_TOLERANCE * max(1.0, abs(ratio)):
            raise InputError(f"{key}: (stop - start)/step of {text!r} is {ratio:g}, not a "
                             "whole number (stop is included)", file="--vary")
        values = tuple(float(f"{start + i * step:.12g}") for i in range(count + 1))
    else:
        items = [p.strip() for p in text.split(",")]
        if len(items) > MAX_SWEEP_POINTS:
            raise InputError(f"{key}: {len(items)} values, more than the {MAX_SWEEP_POINTS} "
                             "points a sweep may have", file="--vary")
        if any(not p for p in items):
            raise InputError(f"{key}: empty value in {text!r}", file="--vary")
        values = tuple(_value(p, where) for p in items)
    seen = set()
    for v in values:
        if (type(v), v) in seen:
            raise InputError(f"{key}: value {_text(v)} is repeated", file="--vary")
        seen.add((type(v), v))
    return values


def _looks_like_time(text):
    """An ISO time (``2025-03-20T11:00:00Z``) has colons but is one value, not a range."""
    return bool(re.match(r"^\d{4}-\d\d-\d\d[T ]", text))


def _value(text, where):
    if len(text) >= 2 and text[0] == text[-1] and text[0] in "\"'":
        return text[1:-1]
    if text.lower() in ("true", "false"):
        return text.lower() == "true"
    try:
        v = float(text)
    except ValueError:
        return text
    if not math.isfinite(v):
        raise InputError(f"{text!r} is not a finite number", file=where)
    return v


def grid_shape(axes) -> tuple[int, ...]:
    """Sizes of the sweep dimensions, in ``--vary`` order."""
    return tuple(len(a.values) for a in axes)


def point_count(axes) -> int:
    """Number of points (columns) of the sweep: the product of the axis sizes (1 if none)."""
    return int(np.prod(grid_shape(axes), dtype=np.int64)) if axes else 1


def point_values(axes, index: int) -> dict:
    """``{key: value}`` of point ``index`` (C order, the first axis outermost)."""
    if not axes:
        return {}
    idx = np.unravel_index(int(index), grid_shape(axes))
    return {a.key: a.values[int(i)] for a, i in zip(axes, idx)}
