"""The sections of a validated scenario: frozen dataclasses, every default filled in.

Each class is one ``[section]`` of a scenario file (docs/scenario.md); :class:`Scenario` holds
them all with the file's provenance. The values here are already checked; building them from
TOML is :mod:`ionochem.io.scenario.schema`'s job, and nothing here computes physics.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from ionochem.errors import ScenarioError
from ionochem.io.tables import read_profile_table
from ionochem.species import parse_species_at

#: Relative tolerance for ``(stop - start) / step`` to count as a whole number.
GRID_TOLERANCE = 1e-9
MSIS_MODELS = ("msis2.1", "msis2.0", "msis00")
NEUTRAL_MODELS = ("table",) + MSIS_MODELS
#: Neutral models that carry no NO density (NRLMSIS 2.1 added NO: Emmert et al. 2022,
#: JGR Space Physics 127, e2022JA030896).
MODELS_WITHOUT_NO = ("msis2.0", "msis00")
TEMPERATURE_SOURCES = ("table", "neutral", "profile")

@dataclass(frozen=True)
class Grid:
    """``[grid]``: the altitudes of the column.

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
        Height where Te starts to depart from Tn (km), >= 0, default 125.
    scale_km : float
        e-folding height of the rise of Te (km), > 0, default 85.
    """

    te_peak_K: float = 2800.0
    ti_offset_K: float = 300.0
    base_km: float = 125.0
    scale_km: float = 85.0


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
    days : int
        Days a ``"diurnal"`` run integrates from local apparent midnight (default 2; the
        last one is reported).
    step_minutes : float
        Minutes between a diurnal run's outputs, a divisor of 1440 (default 15).
    freeze_environment : bool
        Transient and diurnal runs: hold the neutral atmosphere and the temperatures at
        their values at ``[time] utc`` (default False: they follow time, the sun always
        moves).
    compare_days : bool
        Diurnal runs: also report the last day against the day before in full
        (``diurnal_change``, ``previous_day_density``); by default only the periodicity
        reached (``periodicity``).
    """

    mode: str = "steady"
    times_s: tuple[float, ...] | None = None
    electrons: str = "neutrality"
    electron_table: Path | None = None
    balance_ion: str = "O+"
    rtol: float = 1e-10
    start: str = "zero"
    days: int = 2
    step_minutes: float = 15.0
    freeze_environment: bool = False
    compare_days: bool = False


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


#: Species the ``[transport]`` section may name (O+ ambipolar diffusion; light ions later).
TRANSPORTED_SPECIES = ("O+",)


@dataclass(frozen=True)
class Transport:
    """``[transport]``: vertical transport of O+ along the field (its presence switches it on).

    Attributes
    ----------
    species : tuple of str
        Transported species, ``("O+",)``.
    upper_boundary_flux_cm2_s : float
        O+ flux through the top of the grid, cm-2 s-1, positive upward (negative: a
        downward flux from the plasmasphere into the column), default 0.
    dip_deg : float or None
        Magnetic dip angle, degrees, -90..90 (positive where the field points down);
        None: from the IGRF at the scenario's location and date.
    meridional_wind_m_s : float
        Meridional neutral wind, m/s, positive northward, default 0.
    """

    species: tuple[str, ...] = ("O+",)
    upper_boundary_flux_cm2_s: float = 0.0
    dip_deg: float | None = None
    meridional_wind_m_s: float = 0.0


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
class Uncertainty:
    """``[uncertainty]``: how the Monte Carlo and global sensitivity draw the rates.

    Attributes
    ----------
    member_correlation : float
        Correlation ρ, 0 to 1, of the draws of two members of one unit of analysis (the
        levels of a family, the branches of a tie): 1 (default) draws one factor per unit,
        0 draws every member independently (docs/scenario.md).
    """

    member_correlation: float = 1.0


#: Profile tables a scenario can name: scenario key -> (section attribute, field).
_TABLE_KEYS = {
    "neutrals.table": ("neutrals", "table"),
    "neutrals.no_table": ("neutrals", "no_table"),
    "temperatures.table": ("temperatures", "table"),
    "production.table": ("production", "table"),
    "solve.electron_table": ("solve", "electron_table"),
}


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
    transport : Transport or None
        None (a photochemical column) unless the scenario has a ``[transport]`` section.
    path : Path or None
        The scenario file as given (used in error messages), None when built from a dict
        without one.
    base_dir : Path
        Folder relative paths were resolved against.
    sha256 : str
        Hex SHA-256 of the file bytes (of a canonical JSON form when built from a dict).
    raw : dict
        The parsed TOML as read.
    warnings : tuple of str
        Values outside their usual (soft) range (docs/scenario.md), one message each.
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
    transport: Transport | None = None
    uncertainty: Uncertainty = field(default_factory=Uncertainty)
    path: Path | None = None
    base_dir: Path = field(default_factory=Path.cwd)
    sha256: str = ""
    raw: dict = field(default_factory=dict, compare=False, repr=False)
    warnings: tuple[str, ...] = field(default=(), compare=False, repr=False)

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

    def table_requests(self) -> dict[str, tuple[Path, list[str] | None, bool]]:
        """The profile tables this scenario uses and what each must contain.

        Returns
        -------
        dict
            Scenario key -> (path, required columns or None for all, non-negative flag).
            ``neutrals.table`` returns all columns and must hold ``Tn_K``;
            ``temperatures.table`` needs ``Te_K``/``Ti_K``/``Tv_K`` for the temperatures set
            to ``"table"``; ``neutrals.no_table`` needs ``NO``; ``solve.electron_table``
            needs ``Ne``; ``production.table`` returns all columns.
        """
        out: dict[str, tuple[Path, list[str] | None, bool]] = {}
        n, t = self.neutrals, self.temperatures
        if n.table is not None:
            out["neutrals.table"] = (n.table, None, True)
        if n.no_table is not None:
            out["neutrals.no_table"] = (n.no_table, ["NO"], True)
        if t.table is not None:
            cols = [c for c, src in (("Te_K", t.electron), ("Ti_K", t.ion),
                                     ("Tv_K", t.vibrational)) if src == "table"]
            out["temperatures.table"] = (t.table, cols, False)
        if self.production.table is not None:
            out["production.table"] = (self.production.table, None, True)
        if self.solve.electron_table is not None:
            out["solve.electron_table"] = (self.solve.electron_table, ["Ne"], True)
        return out

    def read_table(self, key: str, columns: list[str] | None = None, *,
                   nonnegative: bool = False) -> dict[str, np.ndarray]:
        """Read one referenced profile table onto the grid.

        Parameters
        ----------
        key : str
            One of ``neutrals.table``, ``neutrals.no_table``, ``temperatures.table``,
            ``production.table``, ``solve.electron_table``.
        columns : list of str, optional
            Required columns (all when None).
        nonnegative : bool
            Require every returned column to be >= 0.

        Returns
        -------
        dict of str to numpy.ndarray
            Column -> values, shape (altitude,); see
            :func:`ionochem.io.tables.read_profile_table`.

        Raises
        ------
        ScenarioError
            At ``key``, for an absent table or any table problem.
        """
        if key not in _TABLE_KEYS:
            raise ValueError(f"not a table key: {key!r}")
        section, name = _TABLE_KEYS[key]
        path = getattr(getattr(self, section), name)
        if path is None:
            raise self.error("no table is given here", key=key)
        return read_profile_table(path, self.altitude_km, columns=columns, where=key,
                                  nonnegative=nonnegative, scenario_file=self.source)

    def read_tables(self) -> dict[str, dict[str, np.ndarray]]:
        """Read every profile table of :meth:`table_requests` onto the grid.

        This is where table errors surface (bad cells, missing columns, a grid outside a
        table); the model calls it when it is built.

        Returns
        -------
        dict
            Scenario key -> (column name -> values, shape (altitude,)).

        Raises
        ------
        ScenarioError
            At the key of the first bad table.
        """
        out = {}
        for key, (_, columns, nonneg) in self.table_requests().items():
            out[key] = self.read_table(key, columns, nonnegative=nonneg)
        if "neutrals.table" in out and "Tn_K" not in out["neutrals.table"]:
            present = ", ".join(["altitude_km", *out["neutrals.table"]])
            raise self.error(f"{self.neutrals.table.name}: the neutral table has no Tn_K "
                             f"column (the neutral temperature, K); it has: {present}",
                             key="neutrals.table")
        return out


def parse_budget(text: str) -> tuple[str, float]:
    """Split a ``SPECIES@KM`` budget request: :func:`ionochem.species.parse_species_at`
    (the one reader of that form), ``(canonical species, km)`` or ValueError."""
    return parse_species_at(text)

