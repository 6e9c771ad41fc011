"""``ionochem run``: solve a scenario, print the main densities, write dataset and figure."""

from __future__ import annotations

import dataclasses
import sys

from ionochem.cli.limits import check_transient
from ionochem.cli.observed import add_observed_option, load_observed, print_misfit
from ionochem.cli.options import (
    DEFAULT_REPORT_KM,
    MEMBERS_HELP,
    Table,
    add_rate_change_options,
    check_budgets,
    check_observed,
    check_output,
    check_outputs,
    fmt_value,
    load_model,
    parse_budget,
    print_warnings,
    report_altitudes,
    scenario_inputs,
    stamp_history,
    write_outputs,
)
from ionochem.errors import InputError

#: Species of the printed table, those present, in this order.
MAIN_SPECIES = ("N2+", "O2+", "NO+", "O+", "O+(total)", "N+", "e")


def register(subparsers):
    r = subparsers.add_parser("run", help="solve a scenario and report densities")
    r.add_argument("scenario")
    r.add_argument("-o", "--output", help="write the result dataset (netCDF)")
    r.add_argument("--plot", help="write a profile figure (PNG, PDF, SVG)")
    r.add_argument("--plot-levels", metavar="FILE", dest="plot_levels",
                   help="write the N2+ vibrational level distribution figure (steady runs; "
                        "PNG, PDF, SVG)")
    r.add_argument("--csv", metavar="FILE", help="write the printed density table as CSV")
    add_rate_change_options(r)
    r.add_argument("--budget", action="append", metavar="SPECIES@KM",
                   help="print the production and loss terms of a species at an altitude "
                        "(transient runs: at the last output time); one line per unit of "
                        "analysis (a whole family, a tie), see --members")
    r.add_argument("--members", action="store_true", help=MEMBERS_HELP + " in budgets")
    r.add_argument("--altitudes", metavar="KM,KM,...",
                   help="heights of the printed table and of the transient figure "
                        f"(default {','.join(str(a) for a in DEFAULT_REPORT_KM)}; transient: "
                        "200)")
    r.add_argument("--allow-long", action="store_true",
                   help="allow a transient run beyond the two-day bound (docs/scenario.md, "
                        "Long runs)")
    add_observed_option(r)
    r.set_defaults(func=cmd_run)


def parse_km_list(text, flag="--altitudes"):
    """``"100,150.5"`` → ``[100.0, 150.5]`` (km)."""
    import numpy as np  # lazy, see cmd_run
    out = []
    for item in str(text).split(","):
        item = item.strip()
        if not item:
            continue
        try:
            value = float(item)
        except ValueError:
            raise InputError(f"altitude {item!r} is not a number (km)", file=flag) from None
        if not np.isfinite(value):
            raise InputError(f"altitude {item!r} is not a finite number (km)", file=flag)
        out.append(value)
    if not out:
        raise InputError("no altitude given", file=flag)
    return out


def cmd_run(args):
    # Lazy: every command's parser is registered at start-up (cli/__init__.py); the model,
    # numpy and xarray load only when a run starts (tests/test_cli_imports.py).
    from ionochem.runner import run_model
    check_outputs(args, inputs=[args.scenario])
    check_output(args.csv, "--csv")
    check_output(getattr(args, "plot_levels", None), "--plot-levels", figure=True,
                 inputs=[args.scenario])
    budgets = [parse_budget(b) for b in (args.budget or [])]
    heights = parse_km_list(args.altitudes) if args.altitudes else None
    observed = load_observed(args)
    scen, model = load_model(args)
    check_outputs(args, inputs=scenario_inputs(scen))
    budgets += [parse_budget(b) for b in scen.output.budget]
    check_budgets(budgets, model)
    check_observed(observed, model)
    print_warnings(model.warnings)
    transient = scen.solve.mode in ("transient", "diurnal")
    if transient and getattr(args, "plot_levels", None):
        raise InputError(f"--plot-levels needs a steady run (solve.mode is "
                         f"'{scen.solve.mode}')", file="--plot-levels")
    if transient:
        check_transient(_with_output_times(scen), len(model.species), len(model.reactions),
                        allow_long=args.allow_long)
    ds = run_model(model)
    if transient:
        table = transient_table(ds, heights[0] if heights else 200.0)
    else:
        table = density_table(ds, heights or DEFAULT_REPORT_KM)
    stamp_history(ds, args)
    print(ds.attrs.get("title", ""))
    print(table.text())
    if "periodicity" in ds:
        print(periodicity_line(ds))
    if not transient:
        _print_steady_notes(ds, model)
    if observed is not None:
        from ionochem.analysis.misfit import misfit_of_dataset
        if transient:
            print("note: the misfit is of the last output time", file=sys.stderr)
        print_misfit(observed, {"model": misfit_of_dataset(observed, ds)})
    if budgets:
        from ionochem.analysis.budget import budget_table, format_budget
        at = ds
        if transient:
            at = ds.isel({"local_hour" if "local_hour" in ds.dims else "time": -1})
            print(f"budgets at the last output time, t = {float(at['time_s']):g} s")
        for name, km in budgets:
            print(format_budget(budget_table(at, name, km, members=args.members)))
    write_outputs(args, ds, table)
    if args.plot:
        if transient and (heights or "local_hour" in ds.dims):
            from ionochem.plot.profiles import plot_time_series
            plot_time_series(_on_time_axis(ds), args.plot,
                             altitudes_km=heights or (120.0, 200.0, 300.0))
        else:
            from ionochem.plot.profiles import plot_result
            plot_result(ds, args.plot, observed=observed)
        print(f"wrote {args.plot}")
    if getattr(args, "plot_levels", None):
        from ionochem.plot.levels import plot_levels
        plot_levels(ds, args.plot_levels)
        print(f"wrote {args.plot_levels}")
    return 0


def _print_steady_notes(ds, model):
    """The column's ionization balance, the result's own warnings, a peak above the grid
    and the dark altitudes of a steady run (stdout and stderr)."""
    bal = ds.attrs.get("column_balance")
    if "column_ionization_cm2_s" in ds.attrs:
        tail = (f"(balance {bal:.1e})" if bal is not None else
                "(at the given electron density, which this column's ionization does not "
                "make: no balance expected)")
        inflow = ds.attrs.get("column_transport_inflow_cm2_s")
        moved = (f", net transport inflow {inflow:.4e} cm-2 s-1" if inflow is not None
                 else "")
        print(f"column ionization {ds.attrs['column_ionization_cm2_s']:.4e} cm-2 s-1, "
              f"recombination {ds.attrs['column_recombination_cm2_s']:.4e} cm-2 s-1"
              f"{moved} " + tail)
    for note in ds.attrs.get("warnings", "").split("; "):
        if note and note not in model.warnings:
            print(f"warning: {note}", file=sys.stderr)
    dark = ds["dark"].values.astype(bool)
    from ionochem.io.plausibility import peak_above_grid
    names = [str(s) for s in ds["species"].values]
    if "e" in names:
        top = peak_above_grid(ds["altitude"].values,
                              ds["density"].sel(species="e").values, dark)
        if top:
            print(f"warning: {top}", file=sys.stderr)
    if dark.any() and not dark.all():
        print(f"{int(dark.sum())} dark altitude(s) below "
              f"{ds['altitude'].values[dark].max():g} km", file=sys.stderr)


def density_table(ds, heights):
    """The main densities (cm-3) at the grid altitudes nearest ``heights``."""
    species = [s for s in MAIN_SPECIES if s in ds["species"].values]
    table = Table(["alt_km", *species])
    for a in report_altitudes(ds["altitude"].values, heights):
        vals = ds["density"].sel(altitude=a, species=species).values
        table.add(f"{a:.1f}", *(fmt_value(v).strip() for v in vals))
    return table


def periodicity_line(ds):
    """How close a diurnal run came to a repeating day: the largest day-to-day change of
    ln(n + 1) between its last two days, where and for which species."""
    change = ds["periodicity"]
    i = int(change.values.argmax())
    worst = float(change.values[i])
    where = float(ds["periodicity_altitude"].values[i])
    return (f"periodicity: the last two days differ by at most {worst:.2g} in ln(n + 1) "
            f"({change['species'].values[i]} at {where:g} km"
            f"{'; give more days for a repeating day' if worst > 0.01 else ''})")


def _with_output_times(scen):
    """The scenario with the output times its run makes (a diurnal run's from its days and
    step), for the bounds of :func:`check_transient`."""
    if scen.solve.mode != "diurnal":
        return scen
    from ionochem.analysis.diurnal import diurnal_times  # lazy, see cmd_run
    times = diurnal_times(scen.solve.days, scen.solve.step_minutes * 60.0)
    return scen.replace(solve=dataclasses.replace(scen.solve, times_s=tuple(times)))


def _on_time_axis(ds):
    """A diurnal result on a ``time`` axis of seconds since the run's start (for the time
    series figure, which reads ``time``)."""
    if "local_hour" not in ds.dims:
        return ds
    return ds.swap_dims(local_hour="time_s").rename(time_s="time")


def transient_table(ds, height_km):
    """The main densities (cm-3) against time at the altitude nearest ``height_km``."""
    import numpy as np  # lazy, see cmd_run
    species = [s for s in MAIN_SPECIES if s in ds["species"].values]
    alt = ds["altitude"].values
    a = float(alt[np.argmin(np.abs(alt - height_km))])
    diurnal = "local_hour" in ds.dims
    table = Table([f"{'local_hour' if diurnal else 'time_s'} (at {a:g} km)", *species])
    axis = "local_hour" if diurnal else "time"
    seconds = ds["local_hour"].values if diurnal else (
        ds["time_s"].values if "time_s" in ds else ds["time"].values)
    for i, t in enumerate(seconds):
        vals = ds["density"].isel({axis: i}).sel(altitude=a, species=species).values
        table.add(f"{float(t):.1f}", *(fmt_value(v).strip() for v in vals))
    return table
