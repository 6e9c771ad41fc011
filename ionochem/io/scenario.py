"""Scenario files: load, validate and hold one run's settings.

A scenario (``*.toml``, specified key by key in ``docs/scenario.md``) says on which grid, with
which reaction list, neutral atmosphere, temperatures, sun and overrides a column is run. This
module parses it with the standard library's :mod:`tomllib`, checks every key strictly
(unknown keys, wrong types, out-of-range values, missing files are errors naming the dotted
key), fills in every default and returns a frozen :class:`Scenario`.

It must not compute physics: the parametric temperature shape, the neutral model and the
photon sources are only validated and stored here. Referenced CSV profile tables are checked
for existence when the scenario is loaded; their contents are read (with their own checks) by
the environment stage when the model is built (``ionochem.environment.column``, through
:func:`ionochem.io.tables.read_profile_table`). Nothing in a scenario is ever executed as
code.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import hashlib
import json
import math
import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from ionochem.errors import ScenarioError

__all__ = [
    "Changes", "Geomagnetic", "Grid", "Location", "Neutrals", "Output", "Photons",
    "Production", "Scenario", "Solve", "Sun", "TemperatureProfile", "Temperatures", "Time",
    "GRID_TOLERANCE", "NEUTRAL_MODELS", "MSIS_MODELS", "load_scenario", "parse_budget",
    "scenario_from_dict",
]

#: Relative tolerance for ``(stop - start) / step`` to count as a whole number.
GRID_TOLERANCE = 1e-9
MSIS_MODELS = ("msis2.1", "msis2.0", "msis00")
NEUTRAL_MODELS = ("table",) + MSIS_MODELS
#: Neutral models that carry no NO density (NRLMSIS 2.1 added NO: Emmert et al. 2022,
#: JGR Space Physics 127, e2022JA030896).
MODELS_WITHOUT_NO = ("msis2.0", "msis00")
TEMPERATURE_SOURCES = ("table", "neutral", "profile")
# Upper end of the ap index scale (ap runs 0..400 by construction; Mayaud 1980, AGU
# Geophysical Monograph 22) *(from memory)*.
AP_MAX = 400.0


# ----------------------------------------------------------------------------- sections

@dataclass(frozen=True)
class Grid:
    """``[grid]``: the altitude levels of the column.

    Attributes
    ----------
    altitude_km : tuple of float
        Strictly increasing, non-negative altitudes (km), at least one.
    """

    altitude_km: tuple[float, ...]


@dataclass(frozen=True)
class Neutrals:
    """``[neutrals]``: the neutral atmosphere.

    Attributes
    ----------
    model : str
        ``"table"``, ``"msis2.1"``, ``"msis2.0"`` or ``"msis00"``.
    table : Path or None
        The neutral profile table (model ``"table"`` only): ``altitude_km``, one column per
        species (cm-3), ``Tn_K``.
    no_table : Path or None
        NO profile (``altitude_km``, ``NO`` in cm-3) for the msis models without NO.
    """

    model: str
    table: Path | None = None
    no_table: Path | None = None


@dataclass(frozen=True)
class TemperatureProfile:
    """``[temperatures.profile]``: parameters of the parametric convenience shape.

    The shape itself is implemented (and documented) by
    :func:`ionochem.environment.temperatures.parametric_profile`, which receives these
    values as keyword arguments; docs/scenario.md restates it. It is a convenience shape,
    not an empirical model. The defaults equal that function's defaults, round numbers
    typical of the mid-latitude ionosphere by day *(common practice)*.

    Attributes
    ----------
    te_peak_K : float
        Topside electron temperature by day (K), > 0, default 2800.
    ti_offset_K : float
        Topside ion minus neutral temperature by day (K), >= 0, default 300.
    base_km : float
        Height where Te starts to depart from Tn (km), >= 0, default 110.
    scale_km : float
        e-folding height of the rise of Te (km), > 0, default 60.
    """

    te_peak_K: float = 2800.0
    ti_offset_K: float = 300.0
    base_km: float = 110.0
    scale_km: float = 60.0


@dataclass(frozen=True)
class Temperatures:
    """``[temperatures]``: electron, ion and N2 vibrational temperatures.

    Attributes
    ----------
    electron, ion : str
        ``"table"``, ``"neutral"`` (equal to Tn) or ``"profile"``.
    table : Path or None
        Table with ``altitude_km`` and ``Te_K`` / ``Ti_K`` / ``Tv_K`` as needed.
    ion_drift_m_s : float
        Ion-neutral drift speed (m/s), >= 0, default 0.
    vibrational : str
        Tv of N2: ``"neutral"`` (Tv = Tn, default), ``"table"`` (column ``Tv_K``) or
        ``"electron"`` (Tv = Tn + c max(Te - Tn, 0), c = ``vibrational_coupling``).
    vibrational_coupling : float
        c in [0, 1] for ``vibrational = "electron"`` (default 0.5).
    profile : TemperatureProfile
        Parameters of the parametric shape (defaults when not given).
    """

    electron: str
    ion: str
    table: Path | None = None
    ion_drift_m_s: float = 0.0
    vibrational: str = "neutral"
    vibrational_coupling: float = 0.5
    profile: TemperatureProfile = field(default_factory=TemperatureProfile)


@dataclass(frozen=True)
class Production:
    """``[production]``: prescribed volume rates.

    Attributes
    ----------
    table : Path or None
        ``altitude_km`` and one column per reaction id written ``k = prescribed``
        (cm-3 s-1).
    """

    table: Path | None = None


@dataclass(frozen=True)
class Solve:
    """``[solve]``: what to solve and how.

    Attributes
    ----------
    mode : str
        ``"steady"`` (default) or ``"transient"``.
    times_s : tuple of float or None
        Output times (s) of a transient run: non-negative, strictly increasing.
    electrons : str
        ``"neutrality"`` (default: Ne is the sum of the ion charges) or ``"table"``.
    electron_table : Path or None
        ``altitude_km`` and ``Ne`` (cm-3) when ``electrons = "table"``.
    balance_ion : str
        The ion set to Ne minus the other ions when ``electrons = "table"``, default ``O+``.
    rtol : float
        Steady-state relative convergence tolerance, default 1e-10.
    start : str
        Initial state of a transient run: ``"zero"`` (no ions, default) or ``"steady"``
        (photochemical equilibrium at the scenario's time, t = 0).
    """

    mode: str = "steady"
    times_s: tuple[float, ...] | None = None
    electrons: str = "neutrality"
    electron_table: Path | None = None
    balance_ion: str = "O+"
    rtol: float = 1e-10
    start: str = "zero"


@dataclass(frozen=True)
class Changes:
    """``[changes]``: overrides applied to the reaction list.

    Attributes
    ----------
    set : dict of str to str
        Reaction id -> replacement rate expression.
    scale : dict of str to float
        Reaction id -> positive factor on the rate coefficient.
    """

    set: dict[str, str] = field(default_factory=dict)
    scale: dict[str, float] = field(default_factory=dict)


@dataclass(frozen=True)
class Location:
    """``[location]``: geographic position of the column.

    Attributes
    ----------
    latitude_deg : float
        Geodetic latitude, -90..90 (degrees north).
    longitude_deg : float
        Longitude, -180..360 (degrees east).
    """

    latitude_deg: float
    longitude_deg: float


@dataclass(frozen=True)
class Time:
    """``[time]``: the moment of the run.

    Attributes
    ----------
    utc : datetime.datetime
        Time zone aware, converted to UTC.
    """

    utc: dt.datetime


@dataclass(frozen=True)
class Sun:
    """``[sun]``: solar activity.

    Attributes
    ----------
    f107 : float
        Daily 10.7 cm solar radio flux (solar flux units), > 0.
    f107a : float
        Its 81-day centred mean (solar flux units), > 0.
    """

    f107: float
    f107a: float


@dataclass(frozen=True)
class Geomagnetic:
    """``[geomagnetic]``: geomagnetic activity.

    Attributes
    ----------
    ap : float
        Daily ap index, 0..400.
    """

    ap: float


@dataclass(frozen=True)
class Photons:
    """``[photons]``: the photon sources.

    Attributes
    ----------
    flux : str
        ``"euvac"`` (default) or ``"table"``.
    spectrum : Path or None
        The user spectrum when ``flux = "table"``.
    secondary : bool
        Include photoelectron (secondary) ionization, default True.
    extra_spectrum : Path or None
        Bins added to EUVAC (for example soft X-rays below 50 A), same CSV layout as a user
        spectrum.
    lyman_alpha_photons_cm2_s : float or None
        Solar Lyman-alpha flux (photons cm-2 s-1); None means the physics module's cited
        default.
    soft_xrays : bool
        Add the solar soft X-rays below 50 A to EUVAC (default True; ``flux = "euvac"`` only).
    night_sources : bool
        Add the scattered night-time sources (geocoronal Lyman alpha and beta, He I 584 A,
        He II 304 A), default True.
    """

    flux: str = "euvac"
    spectrum: Path | None = None
    secondary: bool = True
    lyman_alpha_photons_cm2_s: float | None = None
    extra_spectrum: Path | None = None
    soft_xrays: bool = True
    night_sources: bool = True


@dataclass(frozen=True)
class Output:
    """``[output]``: extra outputs.

    Attributes
    ----------
    budget : tuple of str
        Production/loss budgets to report, each ``"SPECIES@KM"`` as written (checked with
        :func:`parse_budget`; the altitude lies within the grid).
    """

    budget: tuple[str, ...] = ()


@dataclass(frozen=True)
class Scenario:
    """One validated scenario, every default filled in, every path absolute.

    Build one with :func:`load_scenario` or :func:`scenario_from_dict`; derive a variant
    with :meth:`replace` (or :func:`dataclasses.replace`). ``sha256`` and ``raw`` describe
    the input as read and are not updated by :meth:`replace`.

    Attributes
    ----------
    title : str
    reactions : Path
        The reaction list.
    grid, neutrals, temperatures, production, solve, changes, photons, output
        Section objects (always present, defaults filled in).
    location, time, sun, geomagnetic : section object or None
        None when the scenario leaves the section out.
    path : Path or None
        The scenario file as given (used in error messages), None when built from a dict
        without one.
    base_dir : Path
        Folder relative paths were resolved against.
    sha256 : str
        Hex SHA-256 of the file bytes (of a canonical JSON form when built from a dict).
    raw : dict
        The parsed TOML as read.
    """

    title: str
    reactions: Path
    grid: Grid
    neutrals: Neutrals
    temperatures: Temperatures
    production: Production = field(default_factory=Production)
    solve: Solve = field(default_factory=Solve)
    changes: Changes = field(default_factory=Changes)
    location: Location | None = None
    time: Time | None = None
    sun: Sun | None = None
    geomagnetic: Geomagnetic | None = None
    photons: Photons = field(default_factory=Photons)
    output: Output = field(default_factory=Output)
    path: Path | None = None
    base_dir: Path = field(default_factory=Path.cwd)
    sha256: str = ""
    raw: dict = field(default_factory=dict, compare=False, repr=False)

    @property
    def altitude_km(self) -> np.ndarray:
        """Grid altitudes, shape (altitude,), km (a new float64 array)."""
        return np.array(self.grid.altitude_km, dtype=float)

    @property
    def source(self) -> str:
        """The scenario's name for error messages: its path, or ``<scenario>``."""
        return "<scenario>" if self.path is None else str(self.path)

    def replace(self, **changes: Any) -> Scenario:
        """Return a copy with the given fields replaced (see :func:`dataclasses.replace`)."""
        return dataclasses.replace(self, **changes)

    def error(self, message: str, key: str | None = None) -> ScenarioError:
        """A :class:`ScenarioError` at this scenario's file and ``key`` (to raise)."""
        return ScenarioError(message, file=self.source, key=key)

    def require(self, *sections: str, reason: str) -> None:
        """Raise unless every named optional section is present.

        Parameters
        ----------
        *sections : str
            Section names among ``location``, ``time``, ``sun``, ``geomagnetic``.
        reason : str
            Why they are needed, completing "... is needed for ...", e.g.
            ``"photoionization (k = photo reactions)"``.

        Raises
        ------
        ScenarioError
            At the key of the first missing section.
        """
        for name in sections:
            if getattr(self, name) is None:
                raise self.error(f"the [{name}] section is needed for {reason}", key=name)


# ----------------------------------------------------------------------------- loading

def load_scenario(path: str | Path) -> Scenario:
    """Load and validate a scenario file.

    Parameters
    ----------
    path : str or Path
        The ``*.toml`` scenario; relative paths inside resolve against its folder.

    Returns
    -------
    Scenario
        With ``path`` as given, ``sha256`` of the file bytes and ``raw`` the parsed TOML.

    Raises
    ------
    ScenarioError
        ``file:line: message`` for a TOML syntax error, ``file: key: message`` for anything
        invalid (see docs/scenario.md), ``file: message`` when the file cannot be read.
    """
    path = Path(path)
    try:
        data = path.read_bytes()
    except FileNotFoundError:
        raise ScenarioError("scenario file not found", file=path) from None
    except IsADirectoryError:
        raise ScenarioError("is a folder, not a scenario file", file=path) from None
    except OSError as exc:
        raise ScenarioError(f"cannot read the scenario: {exc.strerror}", file=path) from None
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = data[:exc.start].count(b"\n") + 1
        raise ScenarioError("not UTF-8 text", file=path, line=line) from None
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise _toml_error(exc, text, path) from None
    scen = scenario_from_dict(raw, path=path, base_dir=path.parent)
    return dataclasses.replace(scen, sha256=hashlib.sha256(data).hexdigest())


def _toml_error(exc: tomllib.TOMLDecodeError, text: str, path: Path) -> ScenarioError:
    """Turn a tomllib error into ``file:line: message``.

    tomllib (Python 3.11) reports the place only inside its message, as
    ``(at line L, column C)`` or ``(at end of document)``.
    """
    msg = str(exc)
    line = None
    m = re.search(r"\s*\(at line (\d+), column (\d+)\)\s*$", msg)
    if m:
        line = int(m.group(1))
        msg = msg[:m.start()] + f" (column {m.group(2)})"
    else:
        m = re.search(r"\s*\(at end of document\)\s*$", msg)
        if m:
            line = max(1, len(text.splitlines()))
            msg = msg[:m.start()] + " (at the end of the file)"
    msg = msg[:1].lower() + msg[1:]
    return ScenarioError(f"not valid TOML: {msg}", file=path, line=line)


def scenario_from_dict(data: dict, path: str | Path | None = None,
                       base_dir: str | Path | None = None) -> Scenario:
    """Validate a scenario given as a dictionary (the parsed TOML).

    Parameters
    ----------
    data : dict
        Same structure as the TOML file (``datetime`` values allowed for ``time.utc``).
    path : str or Path, optional
        Name used in error messages and stored as ``Scenario.path``.
    base_dir : str or Path, optional
        Folder for relative paths; the current folder when None.

    Returns
    -------
    Scenario
        ``sha256`` is that of a canonical JSON form of ``data``.

    Raises
    ------
    ScenarioError
        At the dotted key of the first problem found.
    """
    path = None if path is None else Path(path)
    base = Path.cwd() if base_dir is None else Path(base_dir)
    base = base.resolve()
    v = _Validator("<scenario>" if path is None else str(path), base)
    scen = v.scenario(data)
    digest = hashlib.sha256(json.dumps(data, sort_keys=True, default=str)
                            .encode("utf-8")).hexdigest()
    return dataclasses.replace(scen, path=path, base_dir=base, sha256=digest, raw=data)


def parse_budget(text: str) -> tuple[str, float]:
    """Split a ``SPECIES@KM`` budget request.

    Parameters
    ----------
    text : str
        E.g. ``"N2+@200"``.

    Returns
    -------
    (str, float)
        Species name and altitude (km).

    Raises
    ------
    ValueError
        When the text is not ``SPECIES@KM`` with a finite, non-negative KM.
    """
    species, sep, km = str(text).rpartition("@")
    species, km = species.strip(), km.strip()
    if not sep or not species or not km:
        raise ValueError(f"{text!r} is not SPECIES@KM (e.g. 'N2+@200')")
    try:
        value = float(km)
    except ValueError:
        raise ValueError(f"{text!r}: altitude {km!r} is not a number") from None
    if not math.isfinite(value) or value < 0:
        raise ValueError(f"{text!r}: altitude must be a finite, non-negative km value")
    return species, value


# ----------------------------------------------------------------------------- validation

_MISSING = object()


class _Validator:
    """Walks the parsed TOML, raising ScenarioError at the first bad key."""

    def __init__(self, source: str, base: Path):
        self.source = source
        self.base = base

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
        """A path to an existing file, resolved against the scenario's folder."""
        self.string(value, key)
        p = Path(value).expanduser()
        if not p.is_absolute():
            p = self.base / p
        p = p.resolve()
        if not p.exists():
            raise self.fail(key, f"file not found: {value} (looked for {p})")
        if not p.is_file():
            raise self.fail(key, f"not a file: {value} (resolved to {p})")
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

    # -- sections -----------------------------------------------------------------

    def scenario(self, data) -> Scenario:
        top = self.table(data, "", ("title", "reactions", "grid", "neutrals", "temperatures",
                                    "production", "solve", "changes", "location", "time",
                                    "sun", "geomagnetic", "photons", "output"))
        for name in ("title", "reactions"):
            if name not in top:
                raise self.fail(name, "is required")
        title = self.string(top["title"], "title")
        reactions = self.file(top["reactions"], "reactions")
        if "grid" not in top:
            raise self.fail("grid.altitude_km", "is required (the [grid] section is missing)")
        grid = self.grid(top["grid"])

        location = self.location(top["location"]) if "location" in top else None
        time = self.time(top["time"]) if "time" in top else None
        sun = self.sun(top["sun"]) if "sun" in top else None
        geomagnetic = self.geomagnetic(top["geomagnetic"]) if "geomagnetic" in top else None
        neutrals = self.neutrals(top.get("neutrals", _MISSING),
                                 have_place_and_time=location is not None and time is not None)
        if neutrals.model in MSIS_MODELS:
            for name, obj, keys in (("location", location, "latitude_deg, longitude_deg"),
                                    ("time", time, "utc"), ("sun", sun, "f107, f107a"),
                                    ("geomagnetic", geomagnetic, "ap")):
                if obj is None:
                    raise self.fail(name, f"the {neutrals.model} neutral model needs the "
                                          f"[{name}] section ({keys})")
        if "temperatures" not in top:
            raise self.fail("temperatures.electron",
                            "is required (the [temperatures] section is missing)")
        temperatures = self.temperatures(top["temperatures"])
        production = self.production(top.get("production", {}))
        solve = self.solve(top.get("solve", {}))
        changes = self.changes(top.get("changes", {}))
        photons = self.photons(top.get("photons", {}))
        output = self.output(top.get("output", {}), grid)
        return Scenario(title=title, reactions=reactions, grid=grid, neutrals=neutrals,
                        temperatures=temperatures, production=production, solve=solve,
                        changes=changes, location=location, time=time, sun=sun,
                        geomagnetic=geomagnetic, photons=photons, output=output)

    def grid(self, value) -> Grid:
        sec = self.table(value, "grid", ("altitude_km",))
        key = "grid.altitude_km"
        if "altitude_km" not in sec:
            raise self.fail(key, "is required")
        alt = sec["altitude_km"]
        if isinstance(alt, list):
            return Grid(self.increasing(alt, key, what="altitude"))
        if not isinstance(alt, dict):
            raise self.fail(key, "must be a list of altitudes or { start, stop, step }, "
                                 f"not {_kind(alt)}")
        spec = self.table(alt, key, ("start", "stop", "step"))
        for name in ("start", "stop", "step"):
            if name not in spec:
                raise self.fail(f"{key}.{name}", "is required")
        start = self.number(spec["start"], f"{key}.start", low=0)
        stop = self.number(spec["stop"], f"{key}.stop", low=0)
        step = self.number(spec["step"], f"{key}.step", low=0, low_open=True)
        if not stop > start:
            raise self.fail(key, f"stop ({stop:g}) must be above start ({start:g}); for a "
                                 "single level give a list")
        n = (stop - start) / step
        whole = round(n)
        if abs(n - whole) > GRID_TOLERANCE * max(1.0, abs(n)):
            raise self.fail(key, f"(stop - start)/step = {n:.10g} is not a whole number: "
                                 f"step {step:g} km does not divide {start:g}..{stop:g} km")
        levels = start + step * np.arange(whole + 1, dtype=float)
        levels[-1] = stop
        return Grid(tuple(float(x) for x in levels))

    def neutrals(self, value, *, have_place_and_time: bool) -> Neutrals:
        key = "neutrals"
        sec = {} if value is _MISSING else self.table(value, key,
                                                      ("model", "table", "no_table"))
        if "model" in sec:
            model = self.choice(sec["model"], "neutrals.model", NEUTRAL_MODELS)
        elif have_place_and_time:
            model = "msis2.1"
        else:
            raise self.fail("neutrals.model",
                            "is required: 'table' with table = \"file.csv\", or an msis model "
                            "with [location] and [time] (msis2.1 is the default when both "
                            "are given)")
        table = no_table = None
        if model == "table":
            if "table" not in sec:
                raise self.fail("neutrals.table", "is required when model = 'table'")
            table = self.file(sec["table"], "neutrals.table")
        else:
            self.inapplicable(sec, "table", key, "model = 'table'")
        if model in MODELS_WITHOUT_NO:
            if "no_table" in sec:
                no_table = self.file(sec["no_table"], "neutrals.no_table")
        else:
            self.inapplicable(sec, "no_table", key, "model is 'msis2.0' or 'msis00' (which "
                              "carry no NO)")
        return Neutrals(model=model, table=table, no_table=no_table)

    def temperatures(self, value) -> Temperatures:
        key = "temperatures"
        sec = self.table(value, key, ("electron", "ion", "table", "ion_drift_m_s",
                                      "vibrational", "vibrational_coupling", "profile"))
        for name in ("electron", "ion"):
            if name not in sec:
                raise self.fail(f"{key}.{name}", "is required ('table', 'neutral' or "
                                                 "'profile')")
        electron = self.choice(sec["electron"], f"{key}.electron", TEMPERATURE_SOURCES)
        ion = self.choice(sec["ion"], f"{key}.ion", TEMPERATURE_SOURCES)
        vibrational = self.choice(sec.get("vibrational", "neutral"), f"{key}.vibrational",
                                  ("neutral", "table", "electron"))
        coupling = 0.5
        if vibrational == "electron":
            coupling = self.number(sec.get("vibrational_coupling", 0.5),
                                   f"{key}.vibrational_coupling", low=0, high=1)
        else:
            self.inapplicable(sec, "vibrational_coupling", key, "vibrational is 'electron'")
        drift = self.number(sec.get("ion_drift_m_s", 0.0), f"{key}.ion_drift_m_s", low=0)
        table = None
        if "table" in (electron, ion, vibrational):
            if "table" not in sec:
                raise self.fail(f"{key}.table", "is required when electron, ion or "
                                                "vibrational is 'table'")
            table = self.file(sec["table"], f"{key}.table")
        else:
            self.inapplicable(sec, "table", key, "electron, ion or vibrational is 'table'")
        profile = TemperatureProfile()
        if "profile" in sec:
            pkey = f"{key}.profile"
            if "profile" not in (electron, ion):
                raise self.fail(pkey, "is only used when electron or ion is 'profile'; "
                                      "remove it or change that setting")
            p = self.table(sec["profile"], pkey, ("te_peak_K", "ti_offset_K", "base_km",
                                                  "scale_km"))
            d = TemperatureProfile()
            profile = TemperatureProfile(
                te_peak_K=self.number(p.get("te_peak_K", d.te_peak_K), f"{pkey}.te_peak_K",
                                      low=0, low_open=True),
                ti_offset_K=self.number(p.get("ti_offset_K", d.ti_offset_K),
                                        f"{pkey}.ti_offset_K", low=0),
                base_km=self.number(p.get("base_km", d.base_km), f"{pkey}.base_km", low=0),
                scale_km=self.number(p.get("scale_km", d.scale_km), f"{pkey}.scale_km",
                                     low=0, low_open=True))
        return Temperatures(electron=electron, ion=ion, table=table, ion_drift_m_s=drift,
                            vibrational=vibrational, vibrational_coupling=coupling,
                            profile=profile)

    def production(self, value) -> Production:
        sec = self.table(value, "production", ("table",))
        table = self.file(sec["table"], "production.table") if "table" in sec else None
        return Production(table=table)

    def solve(self, value) -> Solve:
        key = "solve"
        sec = self.table(value, key, ("mode", "times_s", "electrons", "electron_table",
                                      "balance_ion", "rtol", "start"))
        mode = self.choice(sec.get("mode", "steady"), f"{key}.mode", ("steady", "transient"))
        times = None
        if mode == "transient":
            if "times_s" not in sec:
                raise self.fail(f"{key}.times_s", "is required when mode = 'transient'")
            times = self.increasing(sec["times_s"], f"{key}.times_s", what="output time")
            start = self.choice(sec.get("start", "zero"), f"{key}.start", ("zero", "steady"))
        else:
            self.inapplicable(sec, "times_s", key, "mode = 'transient'")
            self.inapplicable(sec, "start", key, "mode = 'transient'")
            start = "zero"
        electrons = self.choice(sec.get("electrons", "neutrality"), f"{key}.electrons",
                                ("neutrality", "table"))
        etable, balance = None, "O+"
        if electrons == "table":
            if "electron_table" not in sec:
                raise self.fail(f"{key}.electron_table", "is required when electrons = "
                                                         "'table'")
            etable = self.file(sec["electron_table"], f"{key}.electron_table")
            balance = self.string(sec.get("balance_ion", "O+"), f"{key}.balance_ion").strip()
        else:
            for name in ("electron_table", "balance_ion"):
                self.inapplicable(sec, name, key, "electrons = 'table'")
        rtol = self.number(sec.get("rtol", 1e-10), f"{key}.rtol", low=0, low_open=True,
                           high=1, high_open=True)
        return Solve(mode=mode, times_s=times, electrons=electrons, electron_table=etable,
                     balance_ion=balance, rtol=rtol, start=start)

    def changes(self, value) -> Changes:
        key = "changes"
        sec = self.table(value, key, ("set", "scale"))
        sets: dict[str, str] = {}
        scales: dict[str, float] = {}
        if "set" in sec:
            s = self.mapping(sec["set"], f"{key}.set")
            for rid, expr in s.items():
                self.string(rid, f"{key}.set")
                sets[rid] = self.string(expr, f"{key}.set.{rid}")
        if "scale" in sec:
            s = self.mapping(sec["scale"], f"{key}.scale")
            for rid, factor in s.items():
                self.string(rid, f"{key}.scale")
                scales[rid] = self.number(factor, f"{key}.scale.{rid}", low=0, low_open=True,
                                          what="a positive number")
        return Changes(set=sets, scale=scales)

    def location(self, value) -> Location:
        key = "location"
        sec = self.table(value, key, ("latitude_deg", "longitude_deg"))
        for name in ("latitude_deg", "longitude_deg"):
            if name not in sec:
                raise self.fail(f"{key}.{name}", "is required")
        lat = self.number(sec["latitude_deg"], f"{key}.latitude_deg")
        if not -90.0 <= lat <= 90.0:
            raise self.fail(f"{key}.latitude_deg", f"must be between -90 and 90 degrees "
                                                   f"(got {sec['latitude_deg']})")
        lon = self.number(sec["longitude_deg"], f"{key}.longitude_deg")
        if not -180.0 <= lon <= 360.0:
            raise self.fail(f"{key}.longitude_deg", "must be between -180 and 360 degrees "
                                                    f"east (got {sec['longitude_deg']})")
        return Location(latitude_deg=lat, longitude_deg=lon)

    def time(self, value) -> Time:
        key = "time"
        sec = self.table(value, key, ("utc",))
        if "utc" not in sec:
            raise self.fail(f"{key}.utc", "is required")
        raw = sec["utc"]
        ukey = f"{key}.utc"
        if isinstance(raw, str):
            try:
                when = dt.datetime.fromisoformat(raw.strip())
            except ValueError:
                raise self.fail(ukey, f"{raw!r} is not an ISO 8601 date and time "
                                      "(e.g. 2024-06-21T18:00:00Z)") from None
        elif isinstance(raw, dt.datetime):
            when = raw
        elif isinstance(raw, (dt.date, dt.time)):
            raise self.fail(ukey, "must be a full date and time with a time zone "
                                  "(e.g. 2024-06-21T18:00:00Z), not a bare "
                                  f"{'date' if isinstance(raw, dt.date) else 'time'}")
        else:
            raise self.fail(ukey, f"must be a date and time, not {_kind(raw)}")
        if when.tzinfo is None or when.utcoffset() is None:
            raise self.fail(ukey, f"{raw} has no time zone: end it with Z (UTC) or an "
                                  "offset such as +02:00")
        return Time(utc=when.astimezone(dt.timezone.utc))

    def sun(self, value) -> Sun:
        key = "sun"
        sec = self.table(value, key, ("f107", "f107a"))
        out = {}
        for name in ("f107", "f107a"):
            if name not in sec:
                raise self.fail(f"{key}.{name}", "is required")
            out[name] = self.number(sec[name], f"{key}.{name}", low=0, low_open=True)
        return Sun(**out)

    def geomagnetic(self, value) -> Geomagnetic:
        key = "geomagnetic"
        sec = self.table(value, key, ("ap",))
        if "ap" not in sec:
            raise self.fail(f"{key}.ap", "is required")
        return Geomagnetic(ap=self.number(sec["ap"], f"{key}.ap", low=0, high=AP_MAX))

    def photons(self, value) -> Photons:
        key = "photons"
        sec = self.table(value, key, ("flux", "spectrum", "extra_spectrum", "secondary",
                                      "lyman_alpha_photons_cm2_s", "soft_xrays",
                                      "night_sources"))
        flux = self.choice(sec.get("flux", "euvac"), f"{key}.flux", ("euvac", "table"))
        spectrum = None
        if flux == "table":
            if "spectrum" not in sec:
                raise self.fail(f"{key}.spectrum", "is required when flux = 'table'")
            spectrum = self.file(sec["spectrum"], f"{key}.spectrum")
        else:
            self.inapplicable(sec, "spectrum", key, "flux = 'table'")
        extra = None
        if "extra_spectrum" in sec:
            if flux != "euvac":
                raise self.fail(f"{key}.extra_spectrum", "applies only with flux = 'euvac' "
                                "(a user spectrum in 'table' mode holds all its own bins)")
            extra = self.file(sec["extra_spectrum"], f"{key}.extra_spectrum")
        secondary = self.boolean(sec.get("secondary", True), f"{key}.secondary")
        lya = None
        if "lyman_alpha_photons_cm2_s" in sec:
            lya = self.number(sec["lyman_alpha_photons_cm2_s"],
                              f"{key}.lyman_alpha_photons_cm2_s", low=0)
        # Soft X-rays join EUVAC only; a user spectrum in 'table' mode holds all its bins.
        soft_xrays = self.boolean(sec.get("soft_xrays", flux == "euvac"), f"{key}.soft_xrays")
        if soft_xrays and flux != "euvac":
            raise self.fail(f"{key}.soft_xrays", "applies only with flux = 'euvac' (a user "
                            "spectrum in 'table' mode holds all its own bins)")
        night = self.boolean(sec.get("night_sources", True), f"{key}.night_sources")
        return Photons(flux=flux, spectrum=spectrum, secondary=secondary,
                       lyman_alpha_photons_cm2_s=lya, extra_spectrum=extra,
                       soft_xrays=soft_xrays, night_sources=night)

    def output(self, value, grid: Grid) -> Output:
        key = "output"
        sec = self.table(value, key, ("budget",))
        budget = []
        if "budget" in sec:
            bkey = f"{key}.budget"
            items = sec["budget"]
            if not isinstance(items, list):
                raise self.fail(bkey, f"must be a list of 'SPECIES@KM' strings, not "
                                      f"{_kind(items)}")
            lo, hi = grid.altitude_km[0], grid.altitude_km[-1]
            for item in items:
                self.string(item, bkey)
                try:
                    _, km = parse_budget(item)
                except ValueError as exc:
                    raise self.fail(bkey, str(exc)) from None
                if not lo - 1e-9 <= km <= hi + 1e-9:
                    raise self.fail(bkey, f"{item!r}: {km:g} km is outside the grid "
                                          f"({lo:g} to {hi:g} km)")
                budget.append(item.strip())
        return Output(budget=tuple(budget))


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
