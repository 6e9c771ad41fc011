"""Running a sweep: its points in batches (in this process, on local worker processes or
on a dask scheduler), the store of finished batches (resume), and the sweep file assembled
from them. What a point is and how it is solved: :mod:`ionochem.analysis.sweep`.
"""

from __future__ import annotations

import contextlib
import hashlib
import json
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from ionochem.analysis.sweep_axes import AXIS_ATTRS
from ionochem.errors import InputError

if TYPE_CHECKING:
    from ionochem.analysis.sweep import SweepSpec

#: Points per stored batch: at most this many batches over a sweep by default.
MAX_BATCHES = 2000
INFLIGHT_PER_WORKER = 2
#: Distinct warning texts a sweep keeps (each with its count of points).
MAX_WARNINGS = 50


def _points():
    """:mod:`ionochem.analysis.sweep` (the points), imported at call time: it imports this
    module for its public names."""
    from ionochem.analysis import sweep
    return sweep

def manifest(spec: SweepSpec) -> dict:
    """What the stored points were made from (a resume with other inputs is refused)."""
    from ionochem import __version__
    raw = json.dumps(spec.raw, sort_keys=True, default=str).encode()
    return {"kind": "sweep", "ionochem": __version__,
            "scenario": hashlib.sha256(raw).hexdigest(),
            "reaction_list": getattr(spec.reaction_list, "sha256", ""),
            "axes": [[a.key, [_points()._fmt(v) for v in a.values]] for a in spec.axes],
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
    total = spec.total
    batch = int(batch) if batch else default_batch(total)
    if batch < 1:
        raise InputError("--batch must be at least 1", file="--batch")
    store = None
    notes = {}
    if output is not None:
        from ionochem.analysis.ensemble_store import EnsembleStore
        _check_format(output)
        store = EnsembleStore(store_path(output), manifest(spec), resume=resume)
    try:
        template, results, computed = _template(spec, store, notes)
        layout = _layout(template)
        if store is not None:
            # The manifest pins the points; batch names carry their ranges (reading every
            # stored batch back here would cost as much as assembling the file).
            gaps = store.missing(total)
        else:
            gaps = [(1, total)] if total > 1 else []
        todo = [(s, min(s + batch, b)) for a, b in gaps for s in range(a, b, batch)]
        done = total - sum(b - a for a, b in todo)
        reused = done - computed
        computed += _solve_batches(spec, layout, todo, done, store, results, notes,
                                   workers=workers, scheduler=scheduler, progress=progress,
                                   on_batch=on_batch)
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


def _note(notes, texts):
    """Count warning texts (at most MAX_WARNINGS distinct ones)."""
    for t in texts:
        if t in notes or len(notes) < MAX_WARNINGS:
            notes[t] = notes.get(t, 0) + 1


def _layout(template):
    from ionochem.io.sweep_file import layout_of
    return layout_of(template)


def _template(spec, store, notes):
    """The first point's dataset (the template of every column), from the store or solved
    (and stored): (template, in-memory results, points computed)."""
    from ionochem.io.netcdf import write_netcdf
    from ionochem.io.sweep_file import pack
    results = {}
    tpath = None if store is None else store.folder / "template.nc"
    if tpath is not None and tpath.is_file():
        import xarray as xr
        return xr.load_dataset(tpath, decode_times=False), results, 0
    template = _points().point_dataset(spec, 0)
    _note(notes, (n for n in template.attrs.pop("_point_warnings").split("\n") if n))
    layout = _layout(template)
    if store is not None:
        write_netcdf(template, tpath, reorder=False)   # read back by position
        if (0, 1) not in store.finished():
            store.write(0, 1, np.zeros((1, 1)), pack(template, layout)[None])
    else:
        results[0] = pack(template, layout)[None]
    return template, results, 1


def _solve_batches(spec, layout, todo, done, store, results, notes, *, workers, scheduler,
                   progress, on_batch):
    """Solve the batches ``todo`` (here, on a local pool or on dask), storing each as it
    finishes; returns the points computed."""
    from tqdm import tqdm
    total = spec.total
    state = {"done": done, "computed": 0}
    bar = tqdm(total=total, initial=done, unit="column", desc="sweep",
               disable=not progress, leave=False)

    def finish(a, b, result):
        rows, texts = result
        _note(notes, texts)
        if store is not None:
            store.write(a, b, np.arange(a, b, dtype=float)[:, None], rows)
        else:
            results[a] = rows
        state["done"] += b - a
        state["computed"] += b - a
        bar.update(b - a)
        if on_batch is not None:
            on_batch(a, b, state["done"], total)

    try:
        if scheduler:
            _run_dask(spec, layout, todo, workers, scheduler, finish)
        elif workers and int(workers) > 1:
            _run_pool(spec, layout, todo, int(workers), finish)
        else:
            for a, b in todo:
                finish(a, b, _points().solve_points(spec, layout, a, b))
    finally:
        bar.close()
    return state["computed"]


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
    return _points().solve_points(pool_state(), layout, start, stop)


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
            fut = client.submit(_points().solve_points, spec_future, layout, a, b,
                                pure=False)
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


