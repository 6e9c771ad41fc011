"""The physical column a mechanism is solved in: grid, neutrals, temperatures, sources.

:func:`build_environment` reads what a scenario asks for — tabulated or NRLMSIS neutrals,
tabulated, neutral or parametric temperatures, prescribed production, a given electron
density, and the sun (zenith angle, EUV photo and photoelectron rates) — and returns an
:class:`Environment` of plain arrays on the altitude grid. Photo rates may follow time
(``sources(time_s)``), so transient runs see the sun set.

It knows reactions only by the channel names they ask for (``"photo:O->O+(2D)"``); it never
reads a reaction list.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field

import numpy as np

from ionochem.environment.diffusion import oplus_face_coefficients
from ionochem.environment.geometry import solar_zenith_angle_deg
from ionochem.environment.magnetic import FieldModelRangeError, geomagnetic_field
from ionochem.environment.magnetisation import (
    DEFAULT_FIELD_T,
    magnetisation_height_km,
    magnetised_drift,
)
from ionochem.environment.n2_vibrational import vibrational_temperature
from ionochem.environment.neutral_source import msis_column
from ionochem.environment.sun import SunColumn
from ionochem.environment.temperatures import (
    check_tabulated_ti,
    frictional_ion_temperature,
    mean_neutral_mass_amu,
    parametric_profile,
)
from ionochem.errors import ScenarioError, safe_name
from ionochem.io.tables import read_profile_table
from ionochem.species import parse_species


@dataclass
class Environment:
    """Arrays on the altitude grid, all shaped (altitude,).

    Attributes
    ----------
    altitude_km : ndarray
    neutrals : dict[str, ndarray]
        Fixed neutral densities, cm-3.
    Tn, Te, Ti, Tv : ndarray
        Neutral, electron, ion and N2 vibrational temperatures, K.
    ion_drift_m_s : float or ndarray
        Ion–neutral drift speed entering the effective temperature, m s-1: the scenario's
        drift where ions are magnetised, fading below (``magnetisation``), shape (altitude,)
        when a drift is given.
    ti_includes_drift : bool
        Whether Ti already holds the frictional heating of the drift (the drift term is then
        not added again to Teff). The builder sets it True for every column: a tabulated Ti
        is taken as measured (heated already) and a modelled Ti is heated here.
    prescribed : dict[str, ndarray]
        Volume production rates for reactions written ``k = prescribed``, cm-3 s-1.
    electron_density : ndarray or None
        Given Ne (cm-3) in ``electrons = "table"`` mode.
    sun : object or None
        Photo-rate calculator (``ionochem.environment.sun.SunColumn``) when the scenario has
        a sun.
    warnings : list[str]
    info : dict
        Scalars worth reporting (``dip_deg``, ``magnetisation_height_km``).
    transport : FaceCoefficients or None
        O+ transport coefficients (``diffusion.oplus_face_coefficients``) when the scenario
        has a [transport] section.
    field_T : ndarray or None
        Geomagnetic field strength on the grid, T, when it was needed and known.
    """

    altitude_km: np.ndarray
    neutrals: dict
    Tn: np.ndarray
    Te: np.ndarray
    Ti: np.ndarray
    Tv: np.ndarray
    ion_drift_m_s: float = 0.0
    ti_includes_drift: bool = False
    prescribed: dict = field(default_factory=dict)
    electron_density: np.ndarray | None = None
    sun: object | None = None
    warnings: list = field(default_factory=list)
    info: dict = field(default_factory=dict)
    transport: object | None = None
    field_T: np.ndarray | None = None

    @property
    def time_dependent(self) -> bool:
        return self.sun is not None and self.sun.time_dependent

    def sources(self, time_s=None) -> dict:
        """Photo and photoelectron rates per absorber molecule (s-1) by channel key."""
        if self.sun is None:
            return {}
        return self.sun.sources(time_s)

    def source_nodes(self, time_s=None):
        """Times and weights of the sun's lattice nodes whose weighted sum of
        :meth:`sources` gives the sources at ``time_s`` (``((0.0, 1.0),)`` without a moving
        sun)."""
        if self.sun is None:
            return ((0.0, 1.0),)
        return self.sun.nodes(time_s)

    def solar_zenith_angle(self, time_s=None):
        """Solar zenith angle, degrees (NaN when the scenario has no sun)."""
        if self.sun is None:
            return np.nan
        return self.sun.zenith_deg(time_s)

    def dark(self, time_s=None) -> np.ndarray:
        """Altitude rows where no sunlight arrives (the ray to the sun meets the solid Earth)."""
        if self.sun is None:
            return np.zeros(self.altitude_km.size, bool)
        return self.sun.dark(time_s)


def _check_neutral_names(neutrals, file):
    """Every column of a neutral table names a neutral species (no ion, no electron).

    A column ``O2+`` would fix that ion at the tabulated density and silently break charge
    balance, so it is refused.
    """
    for name in neutrals:
        try:
            sp = parse_species(name)
        except ValueError as exc:
            raise ScenarioError(f"column {safe_name(name)} is not a species name ({exc})",
                                file=file, key="neutrals.table") from None
        if sp.charge != 0 or sp.name in ("e", "M"):
            raise ScenarioError(f"column {safe_name(name)} is charged or not a neutral; a "
                                "neutral table holds neutral densities only (ions and "
                                "electrons are solved, or given with [solve] electrons = "
                                "'table')", file=file, key="neutrals.table")


def build_environment(scenario, needs=frozenset()) -> Environment:
    """Build the column a scenario describes.

    Parameters
    ----------
    scenario : ionochem.io.scenario.Scenario
    needs : set of str
        What the mechanism asks for: channel keys ``"photo:…"``/``"photoelectron:…"``,
        ``"prescribed:ID"`` for prescribed reactions, species names it uses.
    """
    grid = np.asarray(scenario.altitude_km, float)
    file = scenario.source
    messages = []
    info = {}
    neutrals, Tn, profile_source = _neutral_column(scenario, grid, needs)
    ttable = _temperature_table(scenario, grid)
    drift, field_T, dip_deg = _ion_drift(scenario, grid, neutrals, messages, info)
    Te, Ti, Tv = _temperatures(scenario, grid, Tn, ttable, neutrals, drift, messages)
    prescribed = _prescribed(scenario, grid, needs)
    ne = None
    if scenario.solve.electrons == "table":
        t = read_profile_table(scenario.solve.electron_table, grid, columns=["Ne"],
                               where="solve.electron_table", scenario_file=file,
                               nonnegative=True)
        ne = t["Ne"]
    transport = None
    if scenario.transport is not None:
        transport = _transport(scenario, grid, neutrals, Te, Ti, Tn, dip_deg, messages)
        info["dip_deg"] = transport.dip_deg
    # The Ti the chemistry sees always contains the frictional heating exactly once (see
    # _temperatures); Teff then adds the pair's own reduced-mass drift term.
    env = Environment(altitude_km=grid, neutrals=neutrals, Tn=Tn, Te=Te, Ti=Ti, Tv=Tv,
                      ion_drift_m_s=drift, ti_includes_drift=True,
                      prescribed=prescribed, electron_density=ne, warnings=messages,
                      info=info, transport=transport, field_T=field_T)
    if any(n.startswith(("photo:", "photoelectron:")) for n in needs):
        env.sun = SunColumn(scenario, env, needs, profile_source)
        env.warnings.extend(env.sun.warnings)
    for m in messages:
        warnings.warn(m, stacklevel=2)
    return env


def _neutral_column(scenario, grid, needs):
    """Neutral densities (cm-3) and Tn (K) on the grid, from the table or from NRLMSIS, and
    the extended profile the slant columns use (None for a table)."""
    file = scenario.source
    neutrals_cfg = scenario.neutrals
    if neutrals_cfg.model != "table":
        return msis_column(scenario, grid, needs)
    table = read_profile_table(neutrals_cfg.table, grid, columns=None,
                               where="neutrals.table", scenario_file=file,
                               nonnegative=True)
    if "Tn_K" not in table:
        raise ScenarioError("the neutral table has no Tn_K column", file=file,
                            key="neutrals.table")
    Tn = table.pop("Tn_K")
    neutrals = {k: v for k, v in table.items() if k != "altitude_km"}
    _check_neutral_names(neutrals, file)
    return neutrals, Tn, None


def _ion_drift(scenario, grid, neutrals, messages, info):
    """The ion–neutral drift on the grid (m s-1), the field strength (T) and the dip (deg).

    Only magnetised ions drift past the neutrals (docs/physics.md §4a): the drift, and the
    frictional heating with it, fade below the height where ν_in = Ω_i.
    """
    file = scenario.source
    drift = float(scenario.temperatures.ion_drift_m_s)
    field_T = dip_deg = None
    if drift > 0 or scenario.transport is not None:
        field_T, dip_deg = _field(scenario, grid)
    if drift > 0:
        if field_T is None:
            field_T = np.full(grid.shape, DEFAULT_FIELD_T)
            messages.append(f"{file}: temperatures.ion_drift_m_s: no [location] and [time] "
                            f"for the IGRF; ions are taken as magnetised in a "
                            f"{DEFAULT_FIELD_T:g} T field")
        drift, kappa = magnetised_drift(drift, neutrals, field_T)
        info["magnetisation_height_km"] = magnetisation_height_km(grid, kappa)
    return drift, field_T, dip_deg


def _temperature_table(scenario, grid):
    """The columns of the temperature table the scenario uses, on the grid (or None)."""
    temps = scenario.temperatures
    want_cols = [c for c, on in (("Te_K", temps.electron == "table"),
                                 ("Ti_K", temps.ion == "table"),
                                 ("Tv_K", getattr(temps, "vibrational", "neutral") == "table"))
                 if on]
    if not want_cols:
        return None
    return read_profile_table(temps.table, grid, columns=want_cols,
                              where="temperatures.table", scenario_file=scenario.source)


def _temperatures(scenario, grid, Tn, ttable, neutrals, drift, messages):
    """Te, Ti and Tv (K) on the grid.

    The Ti the chemistry sees always contains the frictional heating exactly once: a
    tabulated Ti is taken as the real (measured) ion temperature, a modelled one is heated
    here (St.-Maurice & Torr 1978).
    """
    temps = scenario.temperatures
    file = scenario.source
    vibrational = getattr(temps, "vibrational", "neutral")
    Te = _temperature_of(temps.electron, "Te_K", ttable, Tn)
    Ti = _temperature_of(temps.ion, "Ti_K", ttable, Tn)
    if Te is None or Ti is None:
        day = _day_factor(scenario)
        Te_p, Ti_p = parametric_profile(grid, Tn, daytime=day, **_profile_kwargs(temps))
        Te = Te_p if Te is None else Te
        Ti = Ti_p if Ti is None else Ti
    if np.any(drift > 0):
        m_n = mean_neutral_mass_amu(neutrals)
        if temps.ion == "table":
            cold = check_tabulated_ti(Ti, Tn, drift, m_n, altitude_km=grid)
            if len(cold):
                messages.append(
                    f"{file}: temperatures.table: tabulated Ti is colder than frictional "
                    f"heating by a {temps.ion_drift_m_s:g} m/s drift implies at {len(cold)} "
                    "altitude(s) "
                    f"({_span(cold)} km); the drift term is still applied once in Teff")
        else:
            Ti = frictional_ion_temperature(Ti, drift, m_n)
    for name, arr in (("Tn", Tn), ("Te", Te), ("Ti", Ti)):
        if np.any(~np.isfinite(arr)) or np.any(arr <= 0):
            raise ScenarioError(f"{name} must be positive and finite on the grid",
                                file=file, key="temperatures")
    if vibrational == "table":
        Tv = ttable["Tv_K"]
    elif vibrational == "electron":
        Tv = vibrational_temperature(Tn, Te, temps.vibrational_coupling)
    else:
        Tv = Tn.copy()
    return Te, Ti, Tv


def _temperature_of(choice, column, ttable, Tn):
    """A temperature the scenario fixes (its table column, or Tn), or None (parametric)."""
    if choice == "table":
        return ttable[column]
    if choice == "neutral":
        return Tn.copy()
    return None


def _prescribed(scenario, grid, needs):
    """Volume rates (cm-3 s-1) of the ``k = prescribed`` reactions, by reaction id."""
    wanted = sorted(n.split(":", 1)[1] for n in needs if n.startswith("prescribed:"))
    if not wanted:
        return {}
    if scenario.production.table is None:
        raise ScenarioError(
            f"reactions {', '.join(wanted)} use k = prescribed but the scenario has no "
            "[production] table", file=scenario.source, key="production.table")
    return read_profile_table(scenario.production.table, grid, columns=wanted,
                              where="production.table", scenario_file=scenario.source,
                              nonnegative=True)


def _field(scenario, grid):
    """IGRF field strength (T) on the grid and dip angle (degrees) at 300 km, or (None, None).

    Without [location] and [time], or for a date the IGRF does not cover, there is no field
    model: the caller falls back (a given dip angle, a typical field strength).
    """
    if scenario.location is None or scenario.time is None:
        return None, None
    loc = scenario.location
    try:
        B, _ = geomagnetic_field(loc.latitude_deg, loc.longitude_deg, grid, scenario.time.utc)
        _, dip = geomagnetic_field(loc.latitude_deg, loc.longitude_deg, [300.0],
                                   scenario.time.utc)
    except FieldModelRangeError:
        return None, None
    return B, float(dip[0])


def _transport(scenario, grid, neutrals, Te, Ti, Tn, igrf_dip, messages):
    """Face coefficients of O+ transport for the scenario's [transport] section."""
    tr = scenario.transport
    file = scenario.source
    dip = tr.dip_deg if tr.dip_deg is not None else igrf_dip
    if dip is None:
        raise ScenarioError("the scenario's date is outside the IGRF coefficients "
                            "(1900-2030): give the dip angle", file=file,
                            key="transport.dip_deg")
    if abs(dip) < 10.0:
        messages.append(f"{file}: transport.dip_deg: the dip angle is {dip:.1f}°; near the "
                        "dip equator field-aligned transport is not vertical and its vertical "
                        "projection (sin²I) is a poor model")
    if "O" not in neutrals:
        raise ScenarioError("O+ transport needs atomic oxygen in the neutral atmosphere "
                            "(its collisions set the diffusion coefficient)", file=file,
                            key="transport")
    return oplus_face_coefficients(grid, neutrals, Te, Ti, Tn, dip_deg=dip,
                                   meridional_wind_m_s=tr.meridional_wind_m_s,
                                   upper_flux_cm2_s=tr.upper_boundary_flux_cm2_s)


def _span(altitudes):
    altitudes = np.asarray(altitudes)
    return f"{altitudes.min():g}–{altitudes.max():g}"


def _day_factor(scenario):
    """Cosine of the zenith angle clipped at 0, or 1 when the scenario has no sun."""
    if scenario.location is None or scenario.time is None:
        return 1.0
    chi = float(solar_zenith_angle_deg(np.datetime64(scenario.time.utc.replace(tzinfo=None)),
                                       scenario.location.latitude_deg,
                                       scenario.location.longitude_deg))
    return max(np.cos(np.radians(chi)), 0.0)


def _profile_kwargs(temps):
    prof = getattr(temps, "profile", None)
    if prof is None:
        return {}
    if isinstance(prof, dict):
        return dict(prof)
    return {k: v for k, v in vars(prof).items() if v is not None}
