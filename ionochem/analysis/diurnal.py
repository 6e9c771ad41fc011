"""A column through whole days with the sun moving, on a local-time axis.

The run starts at local apparent solar midnight (true solar time 0 h, see
:func:`ionochem.environment.geometry.local_solar_time_h`) ``days − 1`` days before the
scenario's local date, from zero ion densities, and integrates in time
(:meth:`ionochem.Model.integrate`, which moves the sun) to the end of the scenario's local
day. The last day is returned on a ``local_hour`` axis: hours since that day's local
apparent midnight (0 … 24, both ends). The true solar time of an output differs from its
``local_hour`` by the drift of the equation of time over the elapsed time, under 30 s a day
(Meeus 1998, ch. 28).

With ``days ≥ 2`` the run says what periodicity it reached: ``periodicity(species)``, the
largest |ln((n_last + 1)/(n_previous + 1))| over the day and the column at equal local times
(densities in cm-3), and ``periodicity_altitude(species)`` where it occurs. Only when asked
(``compare_days``) does it report the last day against the one before in full:
``diurnal_change(species, altitude)`` (that largest change at each altitude) and
``previous_day_density``, the day before on the same ``local_hour`` axis.

Molecular ions and metastables forget their start within minutes of sunrise; O+ near the F2
peak keeps a memory of a night (hours), so two days are the default and a third changes O+
little *(common practice)*.

This module works on a built model; it must not read files.
"""

from __future__ import annotations

import datetime as dt

import numpy as np

from ionochem.environment.geometry import local_solar_time_h, utc_at_local_solar_time
from ionochem.errors import InputError, ScenarioError
from ionochem.io.scenario.ranges import MAX_DIURNAL_DAYS as MAX_DAYS

DAY_S = 86400.0
#: Density floor of the day-to-day change, cm-3 (below it a species is absent).
CHANGE_FLOOR_CM3 = 1.0


def diurnal_times(days: int, step_s: float) -> np.ndarray:
    """Output times (s after the start) of a ``days``-day run every ``step_s`` seconds."""
    check_days(days)
    check_step(step_s / 60.0)
    per_day = int(round(DAY_S / step_s))
    return np.arange(days * per_day + 1, dtype=float) * (DAY_S / per_day)


def check_days(days):
    """Days of a diurnal run: a whole number from 1 to :data:`MAX_DAYS` (``--days``)."""
    if isinstance(days, bool) or not float(days).is_integer() or not 1 <= days <= MAX_DAYS:
        raise InputError(f"{days} days: give a whole number from 1 to {MAX_DAYS}",
                         file="--days")


def check_step(step_minutes: float):
    """Minutes between outputs: a divisor of a day's 1440 minutes, at least 1."""
    if not np.isfinite(step_minutes) or step_minutes < 1 or step_minutes > 1440:
        raise InputError("the output step must lie between 1 and 1440 minutes",
                         file="--step-minutes")
    if abs(1440.0 / step_minutes - round(1440.0 / step_minutes)) > 1e-9:
        raise InputError(f"{step_minutes:g} minutes does not divide a day (1440 minutes)",
                         file="--step-minutes")


def diurnal_dataset(model, days: int, step_s: float, *, compare_days: bool = False):
    """Integrate ``model`` (its scenario time at a local apparent midnight) over ``days``
    days and return the last day on ``local_hour``.

    Parameters
    ----------
    model : ionochem.Model
        Built from a transient scenario whose time is the start (local midnight).
    days : int
        Days integrated, ≥ 1.
    step_s : float
        Seconds between outputs (a divisor of a day).
    compare_days : bool
        Also report the last day against the one before (``days ≥ 2``): the day-to-day
        change at each altitude and the previous day's densities.

    Returns
    -------
    xarray.Dataset
        The transient dataset of the last day with ``time`` replaced by ``local_hour``
        (h), ``time_s`` kept as a coordinate (s after the start), and, for ``days ≥ 2``,
        ``periodicity(species)`` and ``periodicity_altitude(species)`` (with
        ``compare_days``, ``diurnal_change(species, altitude)`` and
        ``previous_day_density``).
    """
    times = diurnal_times(days, step_s)
    ds = model.integrate(times)
    per_day = (times.size - 1) // days
    last = slice((days - 1) * per_day, None)
    out = ds.isel(time=last)
    hours = (times[last] - (days - 1) * DAY_S) / 3600.0
    out = out.assign_coords(local_hour=("time", hours)).swap_dims(time="local_hour")
    out = out.drop_vars("time")
    out["local_hour"].attrs = {"units": "h", "long_name": "hours since local apparent solar "
                               "midnight (true solar time, to within the drift of the "
                               "equation of time)"}
    if days >= 2:
        prev = ds["density"].isel(time=slice((days - 2) * per_day, (days - 1) * per_day + 1))
        _add_periodicity(out, prev, ds["density"].isel(time=last), compare_days)
    out.attrs["diurnal_days"] = int(days)
    out.attrs["diurnal_step_s"] = float(step_s)
    return out


def _add_periodicity(out, prev, now, compare_days):
    """Put the day-to-day change of the last day ``now`` against ``prev`` (density, each on
    the last day's times) into ``out``: its largest value per species always, in full only
    with ``compare_days``."""
    # (species, altitude): the largest change over the day's times.
    change = np.abs(np.log((now.values + CHANGE_FLOOR_CM3) / (prev.values + CHANGE_FLOOR_CM3)))
    change = np.moveaxis(change, [now.dims.index(d) for d in ("species", "altitude", "time")],
                         [0, 1, 2]).max(axis=2)
    altitude = out["altitude"].values
    out["periodicity"] = (("species",), change.max(axis=1),
                          {"units": "1", "long_name": "largest |ln((n + 1)/(n_prev + 1))| "
                           "over the column between the last two days at equal local times "
                           "(n in cm-3); small means periodic"})
    out["periodicity_altitude"] = (("species",), altitude[change.argmax(axis=1)],
                                   {"units": "km", "long_name": "altitude of the largest "
                                    "day-to-day change of the species"})
    if compare_days:
        out["diurnal_change"] = (("species", "altitude"), change,
                                 {"units": "1", "long_name": "largest |ln((n + 1)/(n_prev + 1))| "
                                  "between the last two days at equal local times (n in cm-3)"})
        # The same dimension order as the last day's (time → local_hour).
        previous = out["density"].copy(data=prev.values)
        previous.attrs = dict(out["density"].attrs, long_name="number density on the day "
                              "before the reported one, at equal local times")
        out["previous_day_density"] = previous


def diurnal_start_utc(scenario, days: int):
    """UTC of the local apparent midnight that starts a ``days``-day run ending with the
    scenario's local (solar) day, as an aware datetime.

    Raises
    ------
    ScenarioError
        At ``time`` or ``location`` when the scenario lacks the date or the longitude.
    """
    if scenario.time is None:
        raise ScenarioError("a diurnal run needs [time] utc (it gives the date)",
                            file=scenario.source, key="time")
    if scenario.location is None:
        raise ScenarioError("a diurnal run needs [location] (the longitude sets local time)",
                            file=scenario.source, key="location")
    lon = float(scenario.location.longitude_deg)
    lon = lon - 360.0 if lon > 180.0 else lon
    utc = np.datetime64(scenario.time.utc.replace(tzinfo=None), "us")
    # Local solar time = UTC + offset, the offset within minutes of longitude / 15 h (the
    # equation of time is under 17 min): that fixes the local date.
    tod = float((utc - utc.astype("datetime64[D]")) / np.timedelta64(1, "h"))
    offset = float(local_solar_time_h(utc, lon)) - tod
    offset += 24.0 * round((lon / 15.0 - offset) / 24.0)
    local = utc + np.timedelta64(int(round(offset * 3.6e9)), "us")
    date = local.astype("datetime64[D]") - np.timedelta64(int(days) - 1, "D")
    start = utc_at_local_solar_time(date, 0.0, lon)
    return start.astype(dt.datetime).replace(tzinfo=dt.timezone.utc)
