"""The sun over the column: zenith angle, attenuated EUV, photo and photoelectron rates.

:class:`SunColumn` joins the pieces of this stage — solar geometry (``geometry``), the
photon spectrum and cross sections (``euvac``, ``crosssections``, Lyman alpha
``lyman_alpha``, soft X-rays ``xrays``), slant columns through spherical shells
(``slant``), photo frequencies (``photorates``), photoelectron impact (``secondary``) and
the scattered night-time sources (``night_sources``, constant in time, added at every
level) — into per-channel rates on the grid at any time of a run. ``photon_sources`` lists
what acts, for the result.

For transient runs the rates are computed on a time lattice (every ``lattice_s`` seconds)
and interpolated linearly in between, so the stiff integrator sees a continuous right-hand
side and each lattice node is computed once.
"""

from __future__ import annotations

import collections

import numpy as np

from ionochem.environment.crosssections import solar_spectrum
from ionochem.environment.geometry import flux_distance_factor, solar_zenith_angle_deg
from ionochem.environment.n2plus_levels import (
    electron_impact_split,
    level_requests,
    level_sources,
    photoionization_split,
)
from ionochem.environment.neutrals import extended_grid_km
from ionochem.environment.night_sources import (
    describe,
    night_frequencies,
    night_rates,
    night_spectrum,
)
from ionochem.environment.photorates import photo_frequencies
from ionochem.environment.secondary import secondary_frequencies
from ionochem.environment.slant import EARTH_RADIUS_KM, column_nodes, slant_columns
from ionochem.environment.user_spectrum import load_user_spectrum
from ionochem.environment.xrays import soft_xray_spectrum
from ionochem.errors import ScenarioError

#: Spacing of the time lattice of photo rates in transient runs, s (a choice: the zenith
#: angle changes by at most 0.25° in 60 s).
LATTICE_S = 60.0
#: Lattice times whose rates are kept (oldest dropped first): 512 nodes are 8.5 hours, and the
#: integrator only moves forward, so a long run's memory stays bounded (a few tens of MB).
MAX_CACHED_NODES = 512
#: Photo and photoelectron frequencies below this (s-1 per molecule) are set to zero: they
#: make less than one ion per cm3 in 1e70 years, and along grazing rays (the hard soft X-ray
#: bins reach altitudes the EUV cannot) the densities they imply, ~1e-135 cm-3, underflow
#: double precision in the solver's products (a numerical choice).
NEGLIGIBLE_RATE_S = 1e-100


def _extend_down(alt, dens):
    """Continue a tabulated profile exponentially down to 0 km for rays past 90°.

    Each species keeps the scale height of its two lowest nodes (clamped to 1–100 km), a
    documented approximation used only for the part of grazing rays below the table.
    """
    if alt[0] <= 0.0:
        return alt, dens
    new = np.arange(0.0, alt[0], 1.0)
    out = {}
    for k, n in dens.items():
        n = np.asarray(n, float)
        if n.size > 1 and n[0] > 0 and n[1] > 0 and n[1] != n[0]:
            H = np.clip((alt[1] - alt[0]) / np.log(n[0] / n[1]), 1.0, 100.0)
        else:
            H = 100.0
        out[k] = np.concatenate([n[0] * np.exp((alt[0] - new) / H), n])
    return np.concatenate([new, alt]), out


class SunColumn:
    """Photo and photoelectron rates of a scenario's column at any time.

    Parameters
    ----------
    scenario : Scenario
    env : Environment
        The column being built (grid and neutrals).
    needs : set of str
        Channel keys the mechanism asks for (``"photo:O->O+"``, ``"photoelectron:…"``).
    profile : NeutralProfile or None
        NRLMSIS on an extended profile (None for tabulated neutrals).
    """

    def __init__(self, scenario, env, needs, profile=None):
        scenario.require("location", "time", reason="photo rates (k = photo reactions)")
        self.scenario = scenario
        self.warnings = []
        self.grid = env.altitude_km
        self.t0 = np.datetime64(scenario.time.utc.replace(tzinfo=None), "us")
        self.lat = scenario.location.latitude_deg
        self.lon = scenario.location.longitude_deg
        photons = scenario.photons
        if photons.flux == "table":
            spectrum = load_user_spectrum(photons.spectrum, where="photons.spectrum",
                                          scenario_file=scenario.source)
        else:
            scenario.require("sun", reason="the EUVAC solar flux")
            kw = {}
            if photons.lyman_alpha_photons_cm2_s is not None:
                kw["lyman_alpha_photons_cm2_s"] = photons.lyman_alpha_photons_cm2_s
            spectrum = solar_spectrum(scenario.sun.f107, scenario.sun.f107a, **kw)
            if photons.soft_xrays:
                spectrum = spectrum.concatenate(soft_xray_spectrum(scenario.sun.f107,
                                                                   scenario.sun.f107a))
            if photons.extra_spectrum is not None:
                extra = load_user_spectrum(photons.extra_spectrum,
                                           where="photons.extra_spectrum",
                                           scenario_file=scenario.source)
                if photons.soft_xrays and np.any(extra.wl_lo_A < 50.0):
                    self.warnings.append(
                        f"{scenario.source}: photons.extra_spectrum: it has bins below 50 A "
                        "and the packaged soft X-rays are on (soft_xrays = true): they are "
                        "counted twice unless one of them is switched off")
                spectrum = spectrum.concatenate(extra)
        self.spectrum = spectrum
        # Per-level N2+ channels ("photo:N2->N2+(v=1)") are split from their totals.
        self.level_requests = level_requests(needs)
        plain = [n for n in needs if "(v=" not in n]
        self.photo_channels = sorted(n.split(":", 1)[1] for n in plain
                                     if n.startswith("photo:"))
        self.pe_channels = sorted(n.split(":", 1)[1] for n in plain
                                  if n.startswith("photoelectron:"))
        missing = [c for c in self.photo_channels if c not in spectrum.sigma_channel_cm2]
        if missing:
            raise ScenarioError(
                f"the photon spectrum has no cross section for channel(s) "
                f"{', '.join(missing)} used by k = photo reactions (it has "
                f"{', '.join(sorted(spectrum.sigma_channel_cm2))})",
                file=scenario.source, key="photons")
        self.secondary = bool(photons.secondary)
        absorbers = set(spectrum.sigma_abs_cm2)
        if photons.night_sources:
            # The night lines are attenuated by their own absorbers, whatever the solar
            # spectrum (a user spectrum may lack some).
            absorbers |= set(night_spectrum().sigma_abs_cm2)
        absorbers = sorted(absorbers)
        if profile is not None:
            alt = np.asarray(profile.altitude_km, float)
            dens = {a: np.asarray(profile[a], float) for a in absorbers if a in profile}
        else:
            alt = env.altitude_km
            dens = {a: env.neutrals[a] for a in absorbers if a in env.neutrals}
            lacking = [a for a in ("O", "N2", "O2") if a not in dens]
            if lacking:
                self.warnings.append(
                    f"{scenario.source}: neutrals.table: no {', '.join(lacking)} column; "
                    "these absorbers are left out of the optical depth")
            alt, dens = _extend_down(alt, dens)
        # Columns on a fixed node grid: cost linear in altitude rows (slant.column_nodes).
        alt, dens = column_nodes(alt, dens, extended_grid_km(bottom_km=alt[0], top_km=alt[-1]))
        self.profile_alt = alt
        self.profile = dens
        self.msis_profile = profile
        # Absorber densities on the grid, for photoelectron sharing.
        self.local = {k: env.neutrals[k] for k in ("N2", "O2", "O") if k in env.neutrals}
        self.time_dependent = scenario.solve.mode in ("transient", "diurnal")
        # Rates at lattice times, most recent last; bounded so a long run's memory is too.
        self._cache = collections.OrderedDict()
        self.photon_sources = [spectrum.source]
        self.night = None
        if photons.night_sources:
            self._init_night()

    def _init_night(self):
        """Constant night-time (scattered) rates on the grid (``night_sources.py``)."""
        cols = slant_columns(self.grid, 0.0, self.profile_alt, self.profile)
        photo, pe = night_rates(cols, self.local, secondary=self.secondary)
        self.night = {f"photo:{k}": v for k, v in photo.items()}
        self.night.update({f"photoelectron:{k}": v for k, v in pe.items()})
        self.night.update(self._night_levels(cols))
        self.photon_sources += [f"night: {d}" for d in describe()]

    def _night_levels(self, cols):
        """Per-level N2+ keys of the night rates, split as the solar ones are
        (``n2plus_levels``): photons line by line, photoelectrons by the impact split."""
        out = {}
        spec = night_spectrum()
        for base, levels in self.level_requests.items():
            if base == "photo:N2->N2+":
                jb = night_frequencies(cols, spectrum=spec, per_bin=True)["N2->N2+"]
                split = photoionization_split(spec.wl_lo_A, spec.wl_hi_A, levels)["fraction"]
                per_level = jb @ split
            else:
                per_level = self.night[base][:, None] * electron_impact_split(levels)
            for i, v in enumerate(levels):
                out[f"{base}(v={v})"] = per_level[:, i]
        return out

    def _with_night(self, out):
        out = {k: np.where(v < NEGLIGIBLE_RATE_S, 0.0, v) for k, v in out.items()}
        if self.night is None:
            return out
        return {k: v + self.night[k] if k in self.night else v for k, v in out.items()}

    # ------------------------------------------------------------------ geometry
    def _utc(self, time_s):
        t = 0.0 if time_s is None else float(time_s)
        return self.t0 + np.timedelta64(int(round(t * 1e6)), "us")

    def zenith_deg(self, time_s=None):
        """Geometric solar zenith angle (degrees) at ``time_s`` after the scenario time."""
        return float(solar_zenith_angle_deg(self._utc(time_s), self.lat, self.lon))

    # ------------------------------------------------------------------ rates
    def _node(self, t):
        """Rates at lattice time t (s): dict of channel → (altitude,), and dark mask."""
        if t in self._cache:
            self._cache.move_to_end(t)
            return self._cache[t]
        while len(self._cache) >= MAX_CACHED_NODES:
            self._cache.popitem(last=False)
        chi = self.zenith_deg(t)
        top = self.grid.max()
        if chi > 90.0 and (EARTH_RADIUS_KM + top) * np.sin(np.radians(chi)) < EARTH_RADIUS_KM:
            # The Earth's shadow covers the whole column: no ray reaches any altitude.
            zero = np.zeros(self.grid.size)
            out = {f"photo:{k}": zero for k in self.photo_channels}
            out.update({f"photoelectron:{k}": zero for k in self.pe_channels})
            out.update({f"{b}(v={v})": zero for b, lv in self.level_requests.items()
                        for v in lv})
            self._cache[t] = (self._with_night(out), np.ones(self.grid.size, bool))
            return self._cache[t]
        cols = slant_columns(self.grid, chi, self.profile_alt, self.profile)
        spectrum = self.spectrum.scaled(float(flux_distance_factor(self._utc(t))))
        dark = np.zeros(self.grid.size, bool)
        for v in cols.values():
            dark |= ~np.isfinite(v)
        out = {}
        J = photo_frequencies(spectrum, cols, channels=self.photo_channels)
        for key, val in J.items():
            out[f"photo:{key}"] = np.where(dark, 0.0, val)
        if self.pe_channels:
            pe = self._photoelectron(spectrum, cols)
            for key in self.pe_channels:
                if key not in pe:
                    raise ScenarioError(
                        f"no photoelectron-impact rate is known for channel {key} (known: "
                        f"{', '.join(sorted(pe))})", file=self.scenario.source, key="photons")
                out[f"photoelectron:{key}"] = np.where(dark, 0.0, pe[key])
        if self.level_requests:
            for key, val in level_sources(spectrum, cols, out, self.level_requests).items():
                out[key] = np.where(dark, 0.0, val)
        self._cache[t] = (self._with_night(out), dark)
        return self._cache[t]

    def _photoelectron(self, spectrum, cols):
        return secondary_frequencies(spectrum, cols, self.local, enabled=self.secondary)

    def nodes(self, time_s=None):
        """The lattice times and weights whose weighted sum gives the sources at
        ``time_s``: one node on the lattice (or without a moving sun), else the two around
        it, linearly."""
        if time_s is None or not self.time_dependent:
            return ((0.0, 1.0),)
        t = float(time_s)
        lo = np.floor(t / LATTICE_S) * LATTICE_S
        if abs(t - lo) < 1e-9:
            return ((lo, 1.0),)
        w = (t - lo) / LATTICE_S
        return ((lo, 1 - w), (lo + LATTICE_S, w))

    def _at(self, time_s):
        nodes = self.nodes(time_s)
        if len(nodes) == 1:
            return self._node(nodes[0][0])
        (ta, wa), (tb, wb) = nodes
        a, da = self._node(ta)
        b, db = self._node(tb)
        return {k: wa * a[k] + wb * b[k] for k in a}, da & db

    def sources(self, time_s=None):
        """Channel key → rate per absorber molecule (s-1) on the grid."""
        return self._at(time_s)[0]

    def dark(self, time_s=None):
        """True at altitudes the direct sunlight does not reach."""
        return self._at(time_s)[1]

