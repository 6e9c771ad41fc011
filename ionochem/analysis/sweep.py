"""Sweeps: the same column over a grid of conditions, one independent run per point.

What a point is
---------------
A sweep starts from a base scenario (as loaded: its parsed TOML ``raw``, folder and name)
and the axes of :mod:`ionochem.analysis.sweep_axes`. Point i overrides the varied keys in a
copy of the parsed TOML and builds its scenario through the loader's own validation
(:func:`ionochem.io.scenario.scenario_from_dict`), so a value the scenario refuses is refused
with the message a file would get. Its model is built from that scenario (with the
command's ``--set``/``--scale`` changes) and solved as ``ionochem run`` would solve it: a
steady state, or the transient run of a ``solve.mode = "transient"`` scenario. So every
point equals the single run of a scenario file carrying the same values.

Derived keys (they set ``time.utc``; the site's longitude λ and the scenario's time t₀ are
read after the other overrides of the point):

``time.local_hour``
    Local **apparent** (true) solar time, hours: UTC + λ/15 h + the equation of time
    (Meeus 1998, *Astronomical Algorithms*, ch. 28; the same true solar time as the zenith
    angle of :func:`ionochem.environment.geometry.solar_zenith_angle_deg`), so 12 h is the
    Sun's meridian transit at the site, where its zenith angle is least. The local date is
    the scenario's local (solar) date unless ``time.day_of_year`` sets it. The point's UTC
    may fall on the UTC day before or after. Needs ``[location]`` and ``[time]``.
``time.day_of_year``
    A whole day 1 … 365 (366 in a leap year) of the scenario's year: the local (solar) date
    at the site, keeping the scenario's local solar time of day (or ``time.local_hour``);
    without ``[location]`` the UTC date, keeping the UTC time of day.

Diurnal mode (``diurnal=(days, step_s, compare_days)``): each point runs through whole days
with the sun moving and reports its last day on a ``local_hour`` axis
(:mod:`ionochem.analysis.diurnal`); the point's scenario becomes transient, starting at
local apparent midnight.

Execution
---------
Points are independent tasks: solved in this process, on local single-threaded worker
processes, or on an existing dask.distributed scheduler (the helpers of
:mod:`ionochem.analysis.ensemble`). The workers receive a :class:`SweepSpec` (the parsed
scenario, the parsed reaction list, the changes): picklable, a few hundred kB, and they need
the scenario's table files at the same paths. At most two tasks per worker thread are in
flight, so memory is bounded whatever the number of points.

With an output file every finished batch of points goes at once to a store
(:class:`ionochem.analysis.ensemble_store.EnsembleStore`, the Monte Carlo's, in
``OUT.points/``: a manifest, a template column ``template.nc`` and one file per batch, each
written atomically); ``resume=True`` continues an interrupted sweep, computing only the
points that are not stored. The sweep file is assembled from the store batch by batch
(:func:`ionochem.io.sweep_file.write_sweep`).

The execution (batches, workers, store, assembly) is in :mod:`ionochem.analysis.sweep_run`.
This module must not read files other than through the scenario loader and the model.
"""

from __future__ import annotations

import copy
import dataclasses
import datetime as dt
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ionochem.analysis.sweep_axes import (
    DERIVED_KEYS,
    grid_shape,
    point_count,
    point_values,
)
from ionochem.analysis.sweep_run import (  # noqa: F401 (the execution, re-exported)
    SweepRun,
    _check_format,
    run_sweep,
    store_path,
)
from ionochem.errors import Error, InputError, ScenarioError


@dataclass(frozen=True)
class SweepSpec:
    """Everything a worker needs to build and solve any point (picklable).

    Attributes
    ----------
    raw : dict
        The base scenario as parsed (TOML structure).
    path : Path or None
        The scenario file's name (error messages, provenance).
    base_dir : Path
        Folder its relative paths resolve against.
    axes : tuple of Axis
    reaction_list : ReactionList
        The parsed list of the base scenario (parsed once, shipped to the workers).
    sets, scales : dict
        ``--set``/``--scale`` changes applied to every point's model.
    set_dir : Path or None
        Folder the table paths inside ``sets`` resolve against.
    sensitivity : bool
        Add the exact sensitivities (``Model.sensitivity()``) of every point.
    diurnal : (int, float, bool) or None
        ``(days, step_s, compare_days)`` of diurnal mode (compare_days: the last day
        against the one before in full, :func:`ionochem.analysis.diurnal.diurnal_dataset`).
    """

    raw: dict
    path: Path | None
    base_dir: Path
    axes: tuple
    reaction_list: object = None
    sets: dict = field(default_factory=dict)
    scales: dict = field(default_factory=dict)
    set_dir: Path | None = None
    sensitivity: bool = False
    diurnal: tuple | None = None

    @property
    def source(self) -> str:
        return "<scenario>" if self.path is None else str(self.path)

    @property
    def total(self) -> int:
        return point_count(self.axes)


def make_spec(scenario, axes, *, reaction_list=None, sets=None, scales=None, set_dir=None,
              sensitivity=False, diurnal=None) -> SweepSpec:
    """A :class:`SweepSpec` from a loaded :class:`~ionochem.io.scenario.Scenario`."""
    if reaction_list is None:
        from ionochem.model import load_reaction_list
        reaction_list = load_reaction_list(scenario.reactions)
    return SweepSpec(raw=copy.deepcopy(dict(scenario.raw)), path=scenario.path,
                     base_dir=Path(scenario.base_dir), axes=tuple(axes),
                     reaction_list=reaction_list, sets=dict(sets or {}),
                     scales=dict(scales or {}), set_dir=None if set_dir is None
                     else Path(set_dir), sensitivity=bool(sensitivity),
                     diurnal=None if diurnal is None else (
                         int(diurnal[0]), float(diurnal[1]),
                         bool(diurnal[2]) if len(diurnal) > 2 else False))


# ----------------------------------------------------------------------------- scenarios
def _set_key(raw, key, value, source):
    parts = key.split(".")
    node = raw
    for i, part in enumerate(parts[:-1]):
        nxt = node.get(part)
        if nxt is None:
            nxt = node[part] = {}
        elif not isinstance(nxt, dict):
            raise ScenarioError(f"is not a table in the scenario, so {key} cannot be set",
                                file=source, key=".".join(parts[:i + 1]))
        node = nxt
    old = node.get(parts[-1])
    if (isinstance(old, int) and not isinstance(old, bool) and isinstance(value, float)
            and value.is_integer()):
        value = int(value)          # keep an integer key an integer (ap = 8)
    node[parts[-1]] = value


def _local_offset_h(utc64, lon):
    """Hours from UTC to local apparent solar time at longitude ``lon`` (not wrapped)."""
    from ionochem.environment.geometry import equation_of_time_min
    lon = lon - 360.0 if lon > 180.0 else lon
    return lon / 15.0 + equation_of_time_min(utc64) / 60.0


def _derived_utc(scen, derived, *, diurnal_days=None):
    """The UTC a point's derived keys (and diurnal start) give, as an aware datetime."""
    from ionochem.environment.geometry import utc_at_local_solar_time
    src = scen.source
    if scen.time is None:
        key = next(iter(derived), "time.utc")
        raise ScenarioError("needs [time] utc in the scenario (it gives the date)", file=src,
                            key=key)
    base = np.datetime64(scen.time.utc.replace(tzinfo=None), "us")
    year = scen.time.utc.year
    lon = None if scen.location is None else float(scen.location.longitude_deg)
    if lon is None and ("time.local_hour" in derived or diurnal_days):
        raise ScenarioError("needs [location] in the scenario (the longitude sets local time)",
                            file=src, key="time.local_hour" if "time.local_hour" in derived
                            else "location")
    if lon is not None:
        local = base + np.timedelta64(int(round(_local_offset_h(base, lon) * 3.6e9)), "us")
    else:
        local = base
    date = local.astype("datetime64[D]")
    hour = float((local - date) / np.timedelta64(1, "h"))
    if "time.day_of_year" in derived:
        d = derived["time.day_of_year"]
        days_in_year = 366 if (year % 4 == 0 and year % 100 != 0) or year % 400 == 0 else 365
        if isinstance(d, bool) or not isinstance(d, float) or not d.is_integer() \
                or not 1 <= d <= days_in_year:
            raise ScenarioError(f"must be a whole day from 1 to {days_in_year} of {year} "
                                f"(got {d})", file=src, key="time.day_of_year")
        date = np.datetime64(f"{year}-01-01", "D") + np.timedelta64(int(d) - 1, "D")
    if "time.local_hour" in derived:
        h = derived["time.local_hour"]
        if isinstance(h, bool) or not isinstance(h, float) or not 0.0 <= h <= 24.0:
            raise ScenarioError(f"must be a number of hours from 0 to 24 (got {h})", file=src,
                                key="time.local_hour")
        hour = h
    if diurnal_days:
        date = date - np.timedelta64(int(diurnal_days) - 1, "D")
        hour = 0.0
    if lon is not None:
        t = utc_at_local_solar_time(date, hour, lon)
    else:
        t = date.astype("datetime64[us]") + np.timedelta64(int(round(hour * 3.6e9)), "us")
    return t.astype(dt.datetime).replace(tzinfo=dt.timezone.utc)


def point_scenario(spec: SweepSpec, values: dict):
    """The validated scenario of one point, ``values`` mapping varied keys to values.

    Raises
    ------
    ScenarioError
        As :func:`~ionochem.io.scenario.scenario_from_dict` would for a file with the
        same values (or for a derived key out of range).
    """
    from ionochem.io.scenario import scenario_from_dict
    raw = copy.deepcopy(spec.raw)
    derived = {}
    for key, value in values.items():
        if key in DERIVED_KEYS:
            derived[key] = value
        else:
            _set_key(raw, key, value, spec.source)
    scen = scenario_from_dict(raw, path=spec.path, base_dir=spec.base_dir)
    days = spec.diurnal[0] if spec.diurnal else None
    if not derived and not days:
        return scen
    raw.setdefault("time", {})
    raw["time"]["utc"] = _derived_utc(scen, derived, diurnal_days=days)
    if days:
        from ionochem.analysis.diurnal import diurnal_times
        raw.setdefault("solve", {})
        raw["solve"]["mode"] = "transient"
        raw["solve"]["times_s"] = [float(t) for t in diurnal_times(days, spec.diurnal[1])]
        raw["solve"]["start"] = "zero"
    return scenario_from_dict(raw, path=spec.path, base_dir=spec.base_dir)


def check_axes(spec: SweepSpec):
    """Refuse, before any work, a varied value the scenario would refuse.

    Each value of each axis is applied alone to the base scenario and validated; then the
    first and the last point (every axis at once). A key the scenario does not know is
    refused here too (the loader's message for an unknown key).
    """
    def attempt(values):
        try:
            point_scenario(spec, values)
        except ScenarioError as exc:
            shown = ", ".join(f"{k}={_fmt(v)}" for k, v in values.items())
            exc.message = f"{exc.message} (--vary {shown})"
            raise
    if spec.diurnal and any(a.key == "time.local_hour" for a in spec.axes):
        raise InputError("diurnal mode makes its own local_hour axis: do not vary "
                         "time.local_hour with it", file="--vary")
    for axis in spec.axes:
        for value in axis.values:
            attempt({axis.key: value})
    if spec.total > 1:
        attempt(point_values(spec.axes, 0))
        attempt(point_values(spec.axes, spec.total - 1))
    if not spec.axes:
        attempt({})


def _fmt(v):
    return format(v, "g") if isinstance(v, float) else str(v)


# ----------------------------------------------------------------------------- one point
def point_dataset(spec: SweepSpec, index: int):
    """The result dataset of point ``index`` (what a single run with its values gives),
    with the per-column variables of :func:`ionochem.io.sweep_file.column_variables`."""
    from ionochem.io.sweep_file import column_variables
    from ionochem.model import Model
    values = point_values(spec.axes, index)
    caught = warnings.catch_warnings(record=True)
    try:
        log = caught.__enter__()
        warnings.simplefilter("always")
        scen = point_scenario(spec, values)
        model = Model(scen, reaction_list=spec.reaction_list)
        if spec.sets or spec.scales:
            model = model.with_changes(spec.sets, scale=spec.scales, base_dir=spec.set_dir)
        if spec.diurnal:
            from ionochem.analysis.diurnal import diurnal_dataset
            ds = diurnal_dataset(model, spec.diurnal[0], spec.diurnal[1],
                                 compare_days=spec.diurnal[2])
        elif scen.solve.mode == "transient":
            initial = model.solve() if scen.solve.start == "steady" else None
            ds = model.integrate(np.asarray(scen.solve.times_s, float), initial=initial)
        else:
            ds = model.solve()
            if spec.sensitivity:
                sens = model.sensitivity(result=ds)      # the point solved once
                for name in sens.data_vars:
                    if name not in ds:
                        ds[name] = sens[name]
                ds.attrs["sensitivity_method"] = sens.attrs.get("method", "")
    except Error as exc:
        shown = ", ".join(f"{k}={_fmt(v)}" for k, v in values.items())
        exc.message = f"sweep point {index}" + (f" ({shown})" if shown else "") + \
            f": {exc.message}"
        raise
    finally:
        caught.__exit__(None, None, None)
    # One place for a point's warnings (a sweep reports them once, counted over points).
    notes = [str(w.message) for w in log] + [str(w) for w in model.warnings]
    # The dataset's notes join with "; ", as do some warnings: keep only the new pieces.
    notes += [n for n in str(ds.attrs.get("warnings", "")).split("; ")
              if n and not any(n in other for other in notes)]
    ds.attrs["_point_warnings"] = "\n".join(dict.fromkeys(notes))
    return column_variables(ds, np.datetime64(scen.time.utc.replace(tzinfo=None), "us")
                            if scen.time is not None else np.datetime64("NaT", "us"))


def solve_points(spec: SweepSpec, layout, start: int, stop: int):
    """Packed results of points ``start … stop − 1``: (stop − start, width) float64, and
    the points' warnings (list of str).

    Runs on dask workers as well as in this process.
    """
    from ionochem.analysis.ensemble import single_thread_blas
    from ionochem.io.sweep_file import pack, width
    out = np.empty((stop - start, width(layout)))
    notes = []
    with single_thread_blas():
        for i in range(start, stop):
            ds = point_dataset(spec, i)
            out[i - start] = pack(ds, layout)
            notes += [n for n in ds.attrs.pop("_point_warnings").split("\n") if n]
    return out, notes


def with_axes(spec: SweepSpec, **changes) -> SweepSpec:
    """A copy of ``spec`` with fields replaced (:func:`dataclasses.replace`)."""
    return dataclasses.replace(spec, **changes)


__all__ = ["SweepSpec", "SweepRun", "make_spec", "point_scenario", "point_dataset",
           "check_axes", "run_sweep", "solve_points", "store_path", "grid_shape"]
