"""The scenario schema: walk the parsed TOML section by section into :class:`Scenario`.

Every key is checked strictly — unknown keys, wrong types, values outside their ranges
(:mod:`ionochem.io.scenario.ranges`), missing files and keys that do not apply to the chosen
settings are errors naming the dotted key; defaults are filled in here. Values outside their
usual (soft) range are collected as warnings.
"""

from __future__ import annotations

import datetime as dt

import numpy as np

from ionochem.io.checks import balance_ion_problem
from ionochem.io.scenario.ranges import (
    MAX_DIURNAL_DAYS,
    MAX_GRID_ROWS,
    YEAR_RANGE,
    check_range,
)
from ionochem.io.scenario.sections import (
    GRID_TOLERANCE,
    MODELS_WITHOUT_NO,
    MSIS_MODELS,
    NEUTRAL_MODELS,
    TEMPERATURE_SOURCES,
    TRANSPORTED_SPECIES,
    Changes,
    Geomagnetic,
    Grid,
    Location,
    Neutrals,
    Output,
    Photons,
    Production,
    Scenario,
    Solve,
    Sun,
    TemperatureProfile,
    Temperatures,
    Time,
    Transport,
    Uncertainty,
    parse_budget,
)
from ionochem.io.scenario.values import _MISSING, ValueChecks, _kind


class SchemaValidator(ValueChecks):
    """Walks the parsed TOML, raising ScenarioError at the first bad key."""

    def scenario(self, data) -> Scenario:
        top = self.table(data, "", ("title", "reactions", "grid", "neutrals", "temperatures",
                                    "production", "solve", "changes", "location", "time",
                                    "sun", "geomagnetic", "photons", "output",
                                    "transport", "uncertainty"))
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
        transport = None
        if "transport" in top:
            transport = self.transport(top["transport"], grid=grid, solve=solve,
                                       have_place_and_time=location is not None
                                       and time is not None)
        return Scenario(title=title, reactions=reactions, grid=grid, neutrals=neutrals,
                        temperatures=temperatures, production=production, solve=solve,
                        changes=changes, location=location, time=time, sun=sun,
                        geomagnetic=geomagnetic, photons=photons, output=output,
                        transport=transport,
                        uncertainty=self.uncertainty(top.get("uncertainty", {})))

    def uncertainty(self, value) -> Uncertainty:
        sec = self.table(value, "uncertainty", ("member_correlation",))
        rho = 1.0
        if "member_correlation" in sec:
            rho = self.number(sec["member_correlation"], "uncertainty.member_correlation",
                              low=0.0, high=1.0)
        return Uncertainty(member_correlation=float(rho))

    def grid(self, value) -> Grid:
        sec = self.table(value, "grid", ("altitude_km",))
        key = "grid.altitude_km"
        if "altitude_km" not in sec:
            raise self.fail(key, "is required")
        alt = sec["altitude_km"]
        if isinstance(alt, list):
            return self._grid_range(Grid(self.increasing(alt, key, what="altitude")), key)
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
                                 "single altitude give a list")
        n = (stop - start) / step
        whole = round(n)
        if abs(n - whole) > GRID_TOLERANCE * max(1.0, abs(n)):
            raise self.fail(key, f"(stop - start)/step = {n:.10g} is not a whole number: "
                                 f"step {step:g} km does not divide {start:g}..{stop:g} km")
        if whole + 1 > MAX_GRID_ROWS:
            raise self.fail(key, f"{whole + 1} altitudes: a grid has at most {MAX_GRID_ROWS} "
                                 "altitudes (give a coarser step)")
        rows = start + step * np.arange(whole + 1, dtype=float)
        rows[-1] = stop
        return self._grid_range(Grid(tuple(float(x) for x in rows)), key)

    def _grid_range(self, grid: Grid, key: str) -> Grid:
        """The grid's ends inside the altitude range, its size inside the row bound."""
        if len(grid.altitude_km) > MAX_GRID_ROWS:
            raise self.fail(key, f"{len(grid.altitude_km)} altitudes: a grid has at most "
                                 f"{MAX_GRID_ROWS} altitudes")
        lo, hi = grid.altitude_km[0], grid.altitude_km[-1]
        for end in (lo, hi):
            error, _ = check_range(key, end)
            if error:
                raise self.fail(key, error)
        for end in (lo, hi):
            _, warning = check_range(key, end)
            if warning:
                self.warnings.append(f"{self.source}: {warning}")
                break
        return grid

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
        drift = self.physical(sec.get("ion_drift_m_s", 0.0), f"{key}.ion_drift_m_s")
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
            profile = TemperatureProfile(**{
                name: self.physical(p.get(name, getattr(d, name)), f"{pkey}.{name}")
                for name in ("te_peak_K", "ti_offset_K", "base_km", "scale_km")})
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
                                      "balance_ion", "rtol", "start", "days", "step_minutes",
                                      "freeze_environment", "compare_days"))
        mode = self.choice(sec.get("mode", "steady"), f"{key}.mode",
                           ("steady", "transient", "diurnal"))
        times = None
        days, step = 2, 15.0
        if mode == "transient":
            if "times_s" not in sec:
                raise self.fail(f"{key}.times_s", "is required when mode = 'transient'")
            times = self.increasing(sec["times_s"], f"{key}.times_s", what="output time")
            start = self.choice(sec.get("start", "zero"), f"{key}.start", ("zero", "steady"))
        else:
            self.inapplicable(sec, "times_s", key, "mode = 'transient'")
            self.inapplicable(sec, "start", key, "mode = 'transient'")
            start = "zero"
        freeze = False
        if mode == "steady":
            self.inapplicable(sec, "freeze_environment", key,
                              "mode = 'transient' or 'diurnal'")
        elif "freeze_environment" in sec:
            freeze = sec["freeze_environment"]
            if not isinstance(freeze, bool):
                raise self.fail(f"{key}.freeze_environment", "must be true or false")
        compare = False
        if mode == "diurnal":
            days, step = self.diurnal(sec, key)
            compare = sec.get("compare_days", False)
            if not isinstance(compare, bool):
                raise self.fail(f"{key}.compare_days", "must be true or false")
        else:
            for name in ("days", "step_minutes", "compare_days"):
                self.inapplicable(sec, name, key, "mode = 'diurnal'")
        electrons = self.choice(sec.get("electrons", "neutrality"), f"{key}.electrons",
                                ("neutrality", "table"))
        etable, balance = None, "O+"
        if electrons == "table":
            if "electron_table" not in sec:
                raise self.fail(f"{key}.electron_table", "is required when electrons = "
                                                         "'table'")
            etable = self.file(sec["electron_table"], f"{key}.electron_table")
            balance = self.string(sec.get("balance_ion", "O+"), f"{key}.balance_ion").strip()
            problem = balance_ion_problem(balance)
            if problem:
                raise self.fail(f"{key}.balance_ion", problem)
        else:
            for name in ("electron_table", "balance_ion"):
                self.inapplicable(sec, name, key, "electrons = 'table'")
        rtol = self.physical(sec.get("rtol", 1e-10), f"{key}.rtol")
        return Solve(mode=mode, times_s=times, electrons=electrons, electron_table=etable,
                     balance_ion=balance, rtol=rtol, start=start, days=days,
                     step_minutes=step, freeze_environment=freeze, compare_days=compare)

    def diurnal(self, sec, key):
        """``days`` (whole, 1 to MAX_DIURNAL_DAYS, default 2) and ``step_minutes`` (a divisor of a
        day's 1440 minutes, default 15) of a diurnal run."""
        days = sec.get("days", 2)
        if isinstance(days, bool) or not isinstance(days, int) \
                or not 1 <= days <= MAX_DIURNAL_DAYS:
            raise self.fail(f"{key}.days", f"must be a whole number of days from 1 to "
                                           f"{MAX_DIURNAL_DAYS}")
        step = sec.get("step_minutes", 15)
        if isinstance(step, bool) or not isinstance(step, (int, float)) \
                or not 1 <= step <= 1440 or abs(1440 / step - round(1440 / step)) > 1e-9:
            raise self.fail(f"{key}.step_minutes", "must divide a day (1440 minutes) into "
                                                   "whole steps of at least 1 minute")
        return days, float(step)

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
                scales[rid] = self.physical(factor, f"{key}.scale.{rid}",
                                            range_key="changes.scale",
                                            what="a positive number")
        return Changes(set=sets, scale=scales)

    def location(self, value) -> Location:
        key = "location"
        sec = self.table(value, key, ("latitude_deg", "longitude_deg"))
        for name in ("latitude_deg", "longitude_deg"):
            if name not in sec:
                raise self.fail(f"{key}.{name}", "is required")
        lat = self.physical(sec["latitude_deg"], f"{key}.latitude_deg")
        lon = self.physical(sec["longitude_deg"], f"{key}.longitude_deg")
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
        lo, hi = YEAR_RANGE
        try:
            utc = when.astimezone(dt.timezone.utc)
        except (OverflowError, ValueError):
            utc = None
        if utc is None or not lo <= utc.year <= hi:
            raise self.fail(ukey, f"{raw} is outside the years {lo}–{hi} the solar position "
                                  "formulas cover")
        return Time(utc=utc)

    def sun(self, value) -> Sun:
        key = "sun"
        sec = self.table(value, key, ("f107", "f107a"))
        out = {}
        for name in ("f107", "f107a"):
            if name not in sec:
                raise self.fail(f"{key}.{name}", "is required")
            out[name] = self.physical(sec[name], f"{key}.{name}")
        return Sun(**out)

    def geomagnetic(self, value) -> Geomagnetic:
        key = "geomagnetic"
        sec = self.table(value, key, ("ap",))
        if "ap" not in sec:
            raise self.fail(f"{key}.ap", "is required")
        return Geomagnetic(ap=self.physical(sec["ap"], f"{key}.ap"))

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
            lya = self.physical(sec["lyman_alpha_photons_cm2_s"],
                                f"{key}.lyman_alpha_photons_cm2_s")
        # Soft X-rays join EUVAC only; a user spectrum in 'table' mode holds all its bins.
        soft_xrays = self.boolean(sec.get("soft_xrays", flux == "euvac"), f"{key}.soft_xrays")
        if soft_xrays and flux != "euvac":
            raise self.fail(f"{key}.soft_xrays", "applies only with flux = 'euvac' (a user "
                            "spectrum in 'table' mode holds all its own bins)")
        night = self.boolean(sec.get("night_sources", True), f"{key}.night_sources")
        return Photons(flux=flux, spectrum=spectrum, secondary=secondary,
                       lyman_alpha_photons_cm2_s=lya, extra_spectrum=extra,
                       soft_xrays=soft_xrays, night_sources=night)

    def transport(self, value, *, grid: Grid, solve: Solve,
                  have_place_and_time: bool) -> Transport:
        key = "transport"
        sec = self.table(value, key, ("species", "upper_boundary_flux_cm2_s", "dip_deg",
                                      "meridional_wind_m_s"))
        species = sec.get("species", ["O+"])
        skey = f"{key}.species"
        if not isinstance(species, list) or not species:
            what = "an empty list" if species == [] else _kind(species)
            raise self.fail(skey, f"must be a non-empty list of species names, e.g. "
                                  f"[\"O+\"], not {what}")
        names = []
        for item in species:
            name = self.string(item, skey).strip()
            if name not in TRANSPORTED_SPECIES:
                raise self.fail(skey, f"{name!r} cannot be transported: this version "
                                      f"transports {', '.join(TRANSPORTED_SPECIES)} only")
            if name in names:
                raise self.fail(skey, f"{name!r} is listed twice")
            names.append(name)
        if solve.electrons == "table" and solve.balance_ion in names:
            raise self.fail(skey, f"{solve.balance_ion} is the balance ion of electrons = "
                                  "'table' (Ne minus the other ions), so it cannot also be "
                                  "transported")
        if len(grid.altitude_km) < 3:
            raise self.fail(key, "transport needs a grid of at least three altitudes")
        flux = self.physical(sec.get("upper_boundary_flux_cm2_s", 0.0),
                             f"{key}.upper_boundary_flux_cm2_s")
        dip = None
        if "dip_deg" in sec:
            dip = self.physical(sec["dip_deg"], f"{key}.dip_deg")
        elif not have_place_and_time:
            raise self.fail(f"{key}.dip_deg", "is required without [location] and [time] "
                                              "(otherwise it comes from the IGRF there)")
        wind = self.physical(sec.get("meridional_wind_m_s", 0.0),
                             f"{key}.meridional_wind_m_s")
        return Transport(species=tuple(names), upper_boundary_flux_cm2_s=flux, dip_deg=dip,
                         meridional_wind_m_s=wind)

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

