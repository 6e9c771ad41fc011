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

Diurnal mode (``diurnal=(days, step_s)``): each point runs through whole days with the sun
moving and reports its last day on a ``local_hour`` axis (:mod:`ionochem.analysis.diurnal`);
the point's scenario becomes transient, starting at local apparent midnight.

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

This module must not read files other than through the scenario loader and the model.
"""

from __future__ import annotations

import contextlib
import copy
import dataclasses
import datetime as dt
import hashlib
import json
import re
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ionochem.analysis.sweep_axes import (
    AXIS_ATTRS,
    DERIVED_KEYS,
    grid_shape,
    point_count,
    point_values,
)
from ionochem.errors import Error, InputError, ScenarioError

#: Points per stored batch: at most this many batches over a sweep by default.
MAX_BATCHES = 2000
INFLIGHT_PER_WORKER = 2
#: Distinct warning texts a sweep keeps (each with its count of points).
MAX_WARNINGS = 50


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
    diurnal : (int, float) or None
        ``(days, step_s)`` of diurnal mode.
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
                     diurnal=None if diurnal is None else (int(diurnal[0]),
                                                           float(diurnal[1])))


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
            ds = diurnal_dataset(model, spec.diurnal[0], spec.diurnal[1])
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


# ----------------------------------------------------------------------------- the sweep
def manifest(spec: SweepSpec) -> dict:
    """What the stored points were made from (a resume with other inputs is refused)."""
    from ionochem import __version__
    raw = json.dumps(spec.raw, sort_keys=True, default=str).encode()
    return {"kind": "sweep", "ionochem": __version__,
            "scenario": hashlib.sha256(raw).hexdigest(),
            "reaction_list": getattr(spec.reaction_list, "sha256", ""),
            "axes": [[a.key, [_fmt(v) for v in a.values]] for a in spec.axes],
            "set": dict(sorted(spec.sets.items())),
            "scale": {k: float(v) for k, v in sorted(spec.scales.items())},
            "sensitivity": spec.sensitivity,
            "diurnal": list(spec.diurnal) if spec.diurnal else None,
            "input_files": input_file_digests(spec)}


def input_file_digests(spec: SweepSpec) -> dict:
    """SHA-256 of every file the points read, by path: the tables and spectra the scenario
    names, the rate tables of the reaction list and of the ``--set`` expressions.

    The scenario and the list are hashed as parsed; a table changed between an interrupted
    run and its ``--resume`` would otherwise mix columns made from the old file with columns
    made from the new one (uncertainty hashes the arrays it samples for the same reason).
    """
    from ionochem.io.paths import file_digest, resolve_path
    paths = set()
    for section in spec.raw.values():
        if isinstance(section, dict):
            for name in _FILE_KEYS:
                value = section.get(name)
                if isinstance(value, str) and value.strip():
                    with contextlib.suppress(ValueError):
                        paths.add(resolve_path(value, spec.base_dir))
    for r in getattr(spec.reaction_list, "reactions", ()):
        for expr in (r.k, r.f):
            for table in getattr(expr, "tables", ()):
                paths.add(Path(table.path))
    for text in spec.sets.values():
        for name in re.findall(r"""table\(\s*["']([^"']+)["']""", str(text)):
            with contextlib.suppress(ValueError):
                paths.add(resolve_path(name, spec.set_dir))
    return {str(p): file_digest(p) for p in sorted(paths)}


#: Keys of scenario sections that name files (docs/scenario.md).
_FILE_KEYS = ("table", "no_table", "spectrum", "extra_spectrum", "electron_table")


def store_path(output) -> Path:
    """The store folder of a sweep file: ``OUT.nc`` → ``OUT.nc.points``."""
    return Path(str(output) + ".points")


def default_batch(total: int) -> int:
    """Points per stored batch: one, or more when that would make over MAX_BATCHES files."""
    return max(1, -(-int(total) // MAX_BATCHES))


@dataclass
class SweepRun:
    """Outcome of :func:`run_sweep`.

    Attributes
    ----------
    dataset : xarray.Dataset
        The sweep (in memory; opened lazily from the file when one was written — close it).
    computed : int
        Points solved by this call.
    reused : int
        Points taken from the store of an interrupted run.
    path : Path or None
        The sweep file written.
    warnings : dict
        Warning text → number of points (computed by this call) that gave it; at most
        MAX_WARNINGS distinct texts are kept.
    """

    dataset: object
    computed: int
    reused: int
    path: Path | None = None
    warnings: dict = field(default_factory=dict)


def run_sweep(spec: SweepSpec, *, output=None, resume=False, workers=1, scheduler=None,
              batch=None, progress=False, on_batch=None, keep_store=False,
              attrs=None) -> SweepRun:
    """Solve every point of ``spec``; return the sweep dataset.

    Parameters
    ----------
    spec : SweepSpec
    output : str or Path, optional
        ``.nc`` (netCDF-4) or ``.zarr`` (needs the zarr package): finished batches go to the
        store ``OUT.points/`` as they complete, the file is assembled at the end and the
        store removed (kept with ``keep_store``).
    resume : bool
        Continue the store of an interrupted run (its manifest must match).
    workers : int
        Local dask worker processes; 1 solves in this process.
    scheduler : str, optional
        Address of an existing dask scheduler.
    batch : int, optional
        Points per stored batch (and per dask task); default :func:`default_batch`.
    progress : bool
        tqdm progress bar on stderr.
    on_batch : callable, optional
        ``on_batch(start, stop, done, total)`` after each batch is stored.
    keep_store : bool
        Keep ``OUT.points/`` after the file is written.
    attrs : dict, optional
        Extra global attributes (``history``).
    """
    from tqdm import tqdm

    from ionochem.analysis.ensemble_store import EnsembleStore
    from ionochem.io.netcdf import write_netcdf
    from ionochem.io.sweep_file import layout_of, pack
    total = spec.total
    batch = int(batch) if batch else default_batch(total)
    if batch < 1:
        raise InputError("--batch must be at least 1", file="--batch")
    store = None
    results = {}
    computed = 0
    notes = {}

    def note(texts):
        for t in texts:
            if t in notes or len(notes) < MAX_WARNINGS:
                notes[t] = notes.get(t, 0) + 1
    if output is not None:
        _check_format(output)
        store = EnsembleStore(store_path(output), manifest(spec), resume=resume)
    try:
        template = None
        tpath = None if store is None else store.folder / "template.nc"
        if tpath is not None and tpath.is_file():
            import xarray as xr
            template = xr.load_dataset(tpath, decode_times=False)
        if template is None:
            template = point_dataset(spec, 0)
            note(n for n in template.attrs.pop("_point_warnings").split("\n") if n)
            computed += 1
            layout = layout_of(template)
            if store is not None:
                write_netcdf(template, tpath, reorder=False)   # read back by position
                if (0, 1) not in store.finished():
                    store.write(0, 1, np.zeros((1, 1)), pack(template, layout)[None])
            else:
                results[0] = pack(template, layout)[None]
        layout = layout_of(template)
        if store is not None:
            # The manifest pins the points; batch names carry their ranges (reading every
            # stored batch back here would cost as much as assembling the file).
            gaps = store.missing(total)
        else:
            gaps = [(1, total)] if total > 1 else []
        todo = [(s, min(s + batch, b)) for a, b in gaps for s in range(a, b, batch)]
        done = total - sum(b - a for a, b in todo)
        reused = done - computed
        bar = tqdm(total=total, initial=done, unit="column", desc="sweep",
                   disable=not progress, leave=False)

        def finish(a, b, result):
            nonlocal done, computed
            rows, texts = result
            note(texts)
            if store is not None:
                store.write(a, b, np.arange(a, b, dtype=float)[:, None], rows)
            else:
                results[a] = rows
            done += b - a
            computed += b - a
            bar.update(b - a)
            if on_batch is not None:
                on_batch(a, b, done, total)

        try:
            if scheduler:
                _run_dask(spec, layout, todo, workers, scheduler, finish)
            elif workers and int(workers) > 1:
                _run_pool(spec, layout, todo, int(workers), finish)
            else:
                for a, b in todo:
                    finish(a, b, solve_points(spec, layout, a, b))
        finally:
            bar.close()
        ds = _assemble(spec, template, layout, output, store, results, attrs or {})
    except BaseException:
        if store is not None and not store.finished():
            store.remove()          # nothing finished: leave no store that blocks a rerun
        raise
    finally:
        if store is not None and hasattr(store, "close"):
            store.close()
    if store is not None and not keep_store:
        store.remove()
    return SweepRun(ds, computed, reused, None if output is None else Path(output), notes)


def _check_format(output):
    suffix = Path(str(output)).suffix.lower()
    if suffix == ".zarr":
        try:
            import zarr  # noqa: F401
        except ImportError:
            raise InputError("writing .zarr needs the zarr package (pip install zarr); "
                             "write .nc instead", file=str(output), key="-o") from None
    elif suffix not in (".nc", ".nc4", ".netcdf"):
        raise InputError(f"a sweep is written as netCDF (.nc) or zarr (.zarr), not "
                         f"{suffix or 'a file without extension'}", file=str(output), key="-o")


def _pool_points(layout, start, stop):
    from ionochem.analysis.ensemble import pool_state
    return solve_points(pool_state(), layout, start, stop)


def _run_pool(spec, layout, todo, workers, finish):
    """Batches of points on ``workers`` local processes (ensemble.worker_pool), stored in
    order, INFLIGHT_PER_WORKER per worker in flight."""
    from ionochem.analysis.ensemble import ordered_results, worker_pool
    jobs = (((a, b), _pool_points, (layout, a, b)) for a, b in todo)
    with worker_pool(workers, spec) as pool:
        ordered_results(pool, jobs, INFLIGHT_PER_WORKER * workers,
                        lambda key, result: finish(*key, result))


def _run_dask(spec, layout, todo, workers, scheduler, finish):
    """Batches as dask tasks, at most INFLIGHT_PER_WORKER per worker thread in flight."""
    from dask.distributed import as_completed

    from ionochem.analysis.ensemble import dask_client
    with dask_client(workers, scheduler) as client:
        spec_future = client.scatter(spec, broadcast=True)
        nthreads = max(1, sum(client.nthreads().values()))
        queue = iter(todo)
        meta = {}
        pending = as_completed()

        def submit():
            try:
                a, b = next(queue)
            except StopIteration:
                return
            fut = client.submit(solve_points, spec_future, layout, a, b, pure=False)
            meta[fut.key] = (a, b, fut)
            pending.add(fut)

        try:
            for _ in range(INFLIGHT_PER_WORKER * nthreads):
                submit()
            for fut in pending:
                a, b, _ = meta.pop(fut.key)
                finish(a, b, fut.result())
                submit()
        finally:
            if meta:
                client.cancel([m[2] for m in meta.values()])


# ----------------------------------------------------------------------------- assembly
def sweep_attributes(spec: SweepSpec, template) -> dict:
    """Global attributes of the sweep: the template's, less what differs between points,
    plus the sweep's own description."""
    from ionochem.io.sweep_file import POINT_ATTRIBUTES
    names = {a.name for a in spec.axes}
    timed = any(a.key.startswith("time.") for a in spec.axes) or spec.diurnal
    attrs = {}
    for k, v in template.attrs.items():
        if k in POINT_ATTRIBUTES or k in names or k.startswith("_"):
            continue
        if timed and k == "time_utc":
            continue
        attrs[k] = v
    raw = json.dumps(spec.raw, sort_keys=True, default=str).encode()
    attrs.update({
        "sweep_dimensions": " ".join(a.name for a in spec.axes),
        "sweep_keys": " ".join(a.key for a in spec.axes),
        "sweep_points": int(spec.total),
        "base_scenario_sha256": hashlib.sha256(raw).hexdigest(),
        "sweep_comment": "each point is the single run of the base scenario with the swept "
                         "keys set to the point's coordinates (time.local_hour: local "
                         "apparent solar time, 12 h = solar transit)",
    })
    if spec.diurnal:
        attrs["diurnal_days"] = int(spec.diurnal[0])
        attrs["diurnal_step_s"] = float(spec.diurnal[1])
    return attrs


def _coords(spec):
    out = {}
    for a in spec.axes:
        attrs = dict(AXIS_ATTRS.get(a.name, {}))
        attrs.setdefault("long_name", f"swept scenario key {a.key}")
        attrs["scenario_key"] = a.key
        out[a.name] = (a.coordinate(), attrs)
    return out


def _assemble(spec, template, layout, output, store, results, extra):
    from ionochem.io.sweep_file import assemble_sweep, skeleton, write_sweep
    skel = skeleton(template, layout, _coords(spec),
                    {**sweep_attributes(spec, template), **extra})
    var_attrs = {e.name: dict(template[e.name].attrs) for e in layout}
    if store is None:
        batches = ((a, a + r.shape[0], r) for a, r in sorted(results.items()))
        return assemble_sweep(skel, layout, batches, var_attrs=var_attrs)
    ranges = store.complete_ranges(spec.total, what="points")
    batches = ((a, b, store.read(a, b)[1]) for a, b in ranges)
    write_sweep(output, skel, layout, batches, var_attrs=var_attrs)
    import xarray as xr
    if Path(str(output)).suffix.lower() == ".zarr":
        return xr.open_zarr(output)
    return xr.open_dataset(output)


def with_axes(spec: SweepSpec, **changes) -> SweepSpec:
    """A copy of ``spec`` with fields replaced (:func:`dataclasses.replace`)."""
    return dataclasses.replace(spec, **changes)


__all__ = ["SweepSpec", "SweepRun", "make_spec", "point_scenario", "point_dataset",
           "check_axes", "run_sweep", "solve_points", "store_path", "grid_shape"]
