"""``ionochem sweep``: the same column over a grid of conditions (or through whole days).

Command-line glue only: it parses ``--vary``, loads the scenario and its reaction list,
checks every varied value through the scenario loader before any work, and hands the sweep
to :mod:`ionochem.analysis.sweep`; the figure is :mod:`ionochem.plot.sweep`.
"""

from __future__ import annotations

import sys
from pathlib import Path

from ionochem.cli.options import (
    Table,
    add_rate_change_options,
    check_output,
    fmt_value,
    parse_assignments,
    parse_scales,
    scenario_inputs,
    stamp_history,
)
from ionochem.errors import InputError, ScenarioError

#: Points listed on the terminal at most.
SHOWN_POINTS = 12
#: Distinct warnings printed at most.
SHOWN_WARNINGS = 8


def register(subparsers):
    """Add the ``sweep`` subcommand to ``subparsers``."""
    s = subparsers.add_parser(
        "sweep", help="the same column over a grid of conditions (solar activity, season, "
                      "latitude, local time), or through whole days (--diurnal)")
    s.add_argument("scenario")
    s.add_argument("--vary", action="append", metavar="KEY=VALUES",
                   help="a scenario key (sun.f107, location.latitude_deg, geomagnetic.ap, …) "
                        "or time.local_hour / time.day_of_year, over a comma list or "
                        "start:stop:step (stop included); repeatable, one dimension each")
    s.add_argument("--diurnal", action="store_true",
                   help="run each point through whole days with the sun moving and report "
                        "the last day on a local_hour axis")
    s.add_argument("--days", type=int, default=2, metavar="N",
                   help="--diurnal: days integrated from local midnight, the last one "
                        "reported (default 2: the first day brings the column to a "
                        "periodic state)")
    s.add_argument("--step-minutes", type=float, default=15.0, metavar="M",
                   help="--diurnal: minutes between outputs (default 15; divides 1440)")
    s.add_argument("--compare-days", action="store_true",
                   help="--diurnal: also store the last day against the day before "
                        "(diurnal_change by altitude, previous_day_density); without it "
                        "only the periodicity reached (periodicity per species)")
    s.add_argument("--sensitivity", action="store_true",
                   help="store the exact sensitivities dln n/dln k of every species to every "
                        "reaction at every point (steady points)")
    add_rate_change_options(s, "at every point")
    par = s.add_mutually_exclusive_group()
    par.add_argument("--workers", type=int, default=1, metavar="K",
                     help="solve on K local worker processes (default 1: "
                          "in this process)")
    par.add_argument("--scheduler", metavar="ADDRESS",
                     help="solve on an existing dask scheduler (tcp://host:port)")
    s.add_argument("--batch", type=int, metavar="B",
                   help="points per stored batch and dask task (default 1, more beyond "
                        "2000 points)")
    s.add_argument("--resume", action="store_true",
                   help="continue an interrupted sweep from OUT.points")
    s.add_argument("--restart", action="store_true",
                   help="discard the points of an earlier sweep in OUT.points and start over")
    s.add_argument("--keep-points", action="store_true",
                   help="keep OUT.points (the stored batches) after writing OUT")
    s.add_argument("-o", "--output",
                   help="write the sweep (netCDF .nc; .zarr when the zarr package is "
                        "installed)")
    s.add_argument("--plot", help="write a map: altitude against the first swept key "
                                  "(PNG, PDF, SVG)")
    s.add_argument("--map-species", metavar="NAME",
                   help="species of the map (default N2+ when present)")
    s.add_argument("--map-reaction", metavar="ID",
                   help="with --sensitivity: the reaction, family or tie whose control of "
                        "the species is mapped (default: the unit of analysis with the "
                        "largest |sensitivity| over the map)")
    s.add_argument("--map-axis", metavar="NAME",
                   help="the swept dimension along the map's x axis (default the first; "
                        "other dimensions at their first value)")
    s.add_argument("--allow-long", action="store_true",
                   help="allow sweeps beyond the work bounds (docs/scenario.md, 'Long runs'): "
                        "more than 2e6 level solves, diurnal or transient spans over 2 days")
    s.add_argument("--no-progress", action="store_true", help="no progress bar")
    s.set_defaults(func=cmd_sweep)
    return subparsers


def _check_args(args):
    out = args.output
    if out is not None:
        if Path(out).suffix.lower() == ".zarr":
            check_output(str(Path(out).with_suffix(".check")), "-o")
        else:
            check_output(out, "-o", inputs=[args.scenario])
        from ionochem.analysis.sweep import _check_format
        _check_format(out)
    check_output(args.plot, "--plot", figure=True, inputs=[args.scenario])
    if args.workers is not None and args.workers < 1:
        raise InputError("--workers must be at least 1", file="--workers")
    if args.batch is not None and args.batch < 1:
        raise InputError("--batch must be at least 1", file="--batch")
    if args.resume and not out:
        raise InputError("--resume needs -o OUT.nc (the finished points are kept next to it)",
                         file="--resume")
    if args.restart and (args.resume or not out):
        raise InputError("--restart needs -o OUT and cannot go with --resume (continue the "
                         "earlier points, or discard them: one or the other)",
                         file="--restart")
    if not args.vary and not args.diurnal:
        raise InputError("give at least one --vary KEY=VALUES (or --diurnal)", file="--vary")
    if args.diurnal:
        from ionochem.analysis.diurnal import check_days, check_step
        check_days(args.days)
        check_step(args.step_minutes)
        if args.sensitivity:
            raise InputError("--sensitivity needs steady points; it cannot go with --diurnal",
                             file="--sensitivity")


def cmd_sweep(args):
    """``ionochem sweep``: returns 0."""
    import ionochem
    from ionochem.analysis.sweep import check_axes, make_spec, run_sweep
    from ionochem.analysis.sweep_axes import parse_vary, point_count
    _check_args(args)
    axes = parse_vary(args.vary)
    sets = parse_assignments(args.set, "set")
    scales = parse_scales(args.scale)
    scen = ionochem.load_scenario(args.scenario)
    if args.output and Path(args.output).suffix.lower() != ".zarr":
        check_output(args.output, "-o", inputs=scenario_inputs(scen))
    if args.sensitivity and scen.solve.mode != "steady":
        raise InputError(f"--sensitivity needs steady points; {scen.source} has solve.mode "
                         f"{scen.solve.mode!r}", file="--sensitivity")
    if scen.solve.mode == "diurnal" and not args.diurnal:
        raise ScenarioError("is 'diurnal': a sweep runs whole days only with --diurnal "
                            "(--days, --step-minutes); give them, or a steady or transient "
                            "scenario", file=scen.source, key="solve.mode")
    if args.compare_days and not args.diurnal:
        raise InputError("goes with --diurnal (it compares the last two days of a diurnal "
                         "run)", file="--compare-days")
    diurnal = (args.days, 60.0 * args.step_minutes, args.compare_days) if args.diurnal \
        else None
    spec = make_spec(scen, axes, sets=sets, scales=scales, set_dir=Path.cwd(),
                     sensitivity=args.sensitivity, diurnal=diurnal)
    check_axes(spec)
    if args.plot and args.map_axis is not None:
        names = ["local_hour"] if args.diurnal else []
        names += [a.name for a in axes]
        if args.map_axis not in names:
            raise InputError(f"{args.map_axis!r} is not a swept dimension (have "
                             f"{', '.join(names) or 'none'})", file="--map-axis")
    _check_work(args, spec, total=point_count(axes))
    members = _map_members(spec.reaction_list, args.map_reaction)
    total = point_count(axes)
    print(f"sweep of {total} column(s)"
          + (f" over {' x '.join(f'{a.name} ({len(a.values)})' for a in axes)}" if axes
             else "") + (f", diurnal: {args.days} day(s)" if diurnal else ""),
          file=sys.stderr)
    history = stamp_history(_Attrs(), args).attrs["history"]
    if args.restart:
        from ionochem.analysis.ensemble_store import discard_store
        from ionochem.analysis.sweep import store_path
        if discard_store(store_path(args.output)):
            print(f"--restart: discarded the points of an earlier sweep in "
                  f"{store_path(args.output)}", file=sys.stderr)
    try:
        run = run_sweep(spec, output=args.output, resume=args.resume, workers=args.workers,
                        scheduler=args.scheduler, batch=args.batch,
                        progress=not args.no_progress and sys.stderr.isatty(),
                        keep_store=args.keep_points, attrs={"history": history})
    except KeyboardInterrupt:
        if args.output:
            print(f"finished points are kept in {args.output}.points: run the same command "
                  "with --resume to continue", file=sys.stderr)
        raise
    ds = run.dataset
    try:
        print(f"computed {run.computed} column(s)"
              + (f", {run.reused} taken from {args.output}.points" if run.reused else ""))
        print(_summary(ds, axes, diurnal).text())
        for text, count in list(run.warnings.items())[:SHOWN_WARNINGS]:
            print(f"warning ({count} of {run.computed} column(s)): {text}", file=sys.stderr)
        if len(run.warnings) > SHOWN_WARNINGS:
            print(f"… and {len(run.warnings) - SHOWN_WARNINGS} more distinct warning(s)",
                  file=sys.stderr)
        if args.output:
            print(f"wrote {args.output}")
            if args.keep_points:
                print(f"points kept in {args.output}.points")
        if args.plot:
            from ionochem.plot.sweep import plot_sweep_map
            plot_sweep_map(ds, args.plot, species=args.map_species,
                           reaction=args.map_reaction, members=members, axis=args.map_axis)
            print(f"wrote {args.plot}")
    finally:
        ds.close()
    return 0


def _check_work(args, spec, *, total):
    """Refuse, before any work, a sweep beyond the bounds of :mod:`ionochem.cli.limits`:
    level solves (columns × levels) without --allow-long, each column's transient span and
    memory, and, without -o (the sweep then held in memory), the memory of the results."""
    from ionochem.analysis.sweep import point_scenario
    from ionochem.analysis.sweep_axes import point_values
    from ionochem.cli.limits import (
        MAX_LEVEL_SOLVES,
        MAX_RESULT_BYTES,
        _gib,
        check_transient,
    )
    rl = spec.reaction_list
    species = {sp.name for r in rl.reactions for sp, _ in (*r.reactants, *r.products)}
    n_s, n_r = len(species), len(rl.reactions)
    first = point_scenario(spec, point_values(spec.axes, 0))
    levels = len(first.grid.altitude_km)
    if first.solve.mode == "transient":
        check_transient(first, n_s, n_r, allow_long=args.allow_long)
    times = len(first.solve.times_s or ()) if first.solve.mode == "transient" else 1
    solves = total * levels
    if solves > MAX_LEVEL_SOLVES and not args.allow_long:
        raise InputError(f"{total} columns x {levels} levels are {solves:.3g} level solves, "
                         f"beyond the {MAX_LEVEL_SOLVES:.0e} allowed without --allow-long",
                         file="--vary")
    if not args.output:
        per = 8 * levels * times * (6 * n_s + 4 * n_r + (n_s * n_r if spec.sensitivity
                                                          else 0))
        if total * per > MAX_RESULT_BYTES:
            raise InputError(f"{total} columns held in memory would need about "
                             f"{_gib(total * per)}, above the {_gib(MAX_RESULT_BYTES)} "
                             "ceiling; give -o SWEEP.nc (written batch by batch)",
                             file="--vary")


def _map_members(reaction_list, name):
    """Reaction ids ``--map-reaction`` stands for: itself, or every member of a family
    (``O2D_N2`` or ``O2D_N2(v)``: the map then shows the sum of the members' sensitivities,
    the exact sensitivity to one factor on the whole family)."""
    if name is None:
        return None
    ids = [r.id for r in reaction_list.reactions]
    if name in ids:
        return [name]
    for fam, members in getattr(reaction_list, "families", {}).items():
        if name in (fam, fam.split("(")[0]):
            return list(members)
    for unit in getattr(reaction_list, "units", ()):
        if unit.name == name:
            return list(unit.members)
    raise InputError(f"reaction or unit {name!r} is not in the reaction list",
                     file="--map-reaction")


class _Attrs:
    def __init__(self):
        self.attrs = {}


def _summary(ds, axes, diurnal):
    """Peak electron density and its height for the first points (and the point count)."""
    import numpy as np
    dims = [a.name for a in axes]
    e = ds["density"].sel(species="e")
    if diurnal:
        e = e.max("local_hour")
    if "time" in e.dims:
        e = e.isel(time=-1)
    stacked = e.stack(point=dims) if dims else e.expand_dims(point=[0])
    n = stacked.sizes["point"]
    shown = stacked.isel(point=slice(0, SHOWN_POINTS)).load()
    alt = ds["altitude"].values
    table = Table([*dims, "peak Ne (cm-3)" + (" over the day" if diurnal else ""),
                   "at km"])
    for i in range(shown.sizes["point"]):
        col = shown.isel(point=i)
        vals = col.transpose("altitude").values
        j = int(np.nanargmax(vals)) if np.any(np.isfinite(vals)) else 0
        coords = [_coord_text(col[d].values) for d in dims]
        table.add(*coords, fmt_value(vals[j]).strip(), f"{alt[j]:g}")
    if n > SHOWN_POINTS:
        table.add(*["…"] * len(dims), f"({n - SHOWN_POINTS} more)", "")
    return table


def _coord_text(v):
    import numpy as np
    v = np.asarray(v).item()
    return f"{v:g}" if isinstance(v, float) else str(v)
