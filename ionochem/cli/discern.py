"""``ionochem discern``: can a measurement tell the baseline rates from the changed ones?

The change options are those of ``compare`` (``--set``, ``--scale``, ``--reactions``,
``--add``, ``--list``); the sweep axes those of ``sweep`` (``--vary``). The analysis is
:mod:`ionochem.analysis.discern` (one column) and :mod:`ionochem.analysis.discern_sweep`
(a grid of conditions, ranking), the Monte Carlo check
:mod:`ionochem.analysis.discern_check`.
"""

from __future__ import annotations

import sys
from pathlib import Path

from ionochem.cli.compare import add_change_options
from ionochem.cli.options import (
    Table,
    check_outputs,
    parse_assignments,
    parse_scales,
    print_warnings,
    scenario_inputs,
    stamp_history,
    write_outputs,
)
from ionochem.cli.steady_at import add_steady_at_option, analysis_scenario
from ionochem.errors import InputError

#: Observables when none is given: the main ions, the electrons and N2+/O+.
DEFAULT_OBSERVABLES = ("N2+", "O+(total)", "O2+", "NO+", "e", "N2+/O+(total)")


def register(subparsers):
    d = subparsers.add_parser(
        "discern", help="how many standard deviations separate the baseline from changed "
                        "rates, by observable, altitude and condition")
    d.add_argument("scenario")
    add_change_options(d)
    add_steady_at_option(d)
    d.add_argument("--observable", action="append", metavar="Y",
                   help="a species density (N2+, e) or a ratio (N2+/O+) (repeatable; "
                        "default the main ions, e and N2+/O+)")
    d.add_argument("--error", action="append", metavar="[Y=]REL[:ABS]",
                   help="one-sigma measurement error of observable Y (or of all): relative "
                        "part REL (0.25 = 25 %%) and absolute part ABS in Y's unit (cm-3 for "
                        "a density); default 0.1 relative, no absolute part")
    d.add_argument("--environment", metavar="NAME=F,...|none",
                   help="one-sigma factors of the environment (EUV, n(O), n(N2), n(O2), Te, "
                        "Ti, Tn), over the defaults EUV=1.2,n(O)=1.2,n(N2)=1.1,n(O2)=1.15,"
                        "Te=1.1,Ti=1.05; 1 or 'none' switches off")
    d.add_argument("--member-correlation", type=float, default=1.0, metavar="RHO",
                   help="correlation of the members of a unit of analysis (default 1)")
    d.add_argument("--given-electrons", action="store_true",
                   help="the electron density is measured (as by a radar): both models run "
                        "with Ne fixed to the baseline's")
    d.add_argument("--altitudes", metavar="LO:HI",
                   help="altitudes combined in the whole-profile separation, km (default all)")
    d.add_argument("--bands", metavar="NAME=LO:HI,...",
                   help="altitude bands of the ranking, km (default E=90:150,F1=150:200,"
                        "F2=200:300,upper=300:500)")
    d.add_argument("--vary", action="append", metavar="KEY=VALUES",
                   help="a swept scenario key as in sweep (repeatable, one dimension each)")
    d.add_argument("--monte-carlo", type=int, metavar="N",
                   help="check the linear separation by N Monte Carlo samples per model at "
                        "the best condition (or at --check-point)")
    d.add_argument("--check-point", type=int, action="append", metavar="I",
                   help="sweep point index (C order, first --vary outermost) of the Monte "
                        "Carlo check (repeatable)")
    d.add_argument("--seed", type=int, default=0, help="Monte Carlo seed (default 0)")
    d.add_argument("--top", type=int, default=10, help="rows of the ranked list (default 10)")
    d.add_argument("-o", "--output", help="write the separation dataset (netCDF)")
    d.add_argument("--plot", help="write the separation figure (PNG, PDF, SVG)")
    d.add_argument("--csv", metavar="FILE", help="write the ranked list as CSV")
    d.set_defaults(func=cmd_discern)


def _check_args(args):
    if args.top < 1:
        raise InputError("--top must be at least 1", file="--top")
    if not 0.0 <= args.member_correlation <= 1.0:
        raise InputError("must be between 0 and 1", file="--member-correlation")
    if args.monte_carlo is not None and args.monte_carlo < 20:
        raise InputError("at least 20 samples", file="--monte-carlo")
    if args.seed < 0:
        raise InputError("must be a non-negative integer", file="--seed")
    if args.check_point and args.monte_carlo is None:
        raise InputError("needs --monte-carlo N", file="--check-point")


def _errors(items, observables):
    from ionochem.analysis.discern import MeasurementError, parse_error
    names = [o.name for o in observables]
    out = {n: MeasurementError() for n in names}
    for item in items or ():
        key, sep, value = item.rpartition("=")
        if sep and key.strip() not in names:
            raise InputError(f"{key.strip()!r} is not one of the observables "
                             f"({', '.join(names)})", file="--error")
        err = parse_error(value.strip())
        for n in ([key.strip()] if sep else names):
            out[n] = err
    return out


def _changes(args):
    """The change options read (lists parsed) and a function making the changed model."""
    from ionochem.analysis.compare import changed_model
    from ionochem.mechanism.parser import parse_reaction_list
    sets = parse_assignments(args.set, "set")
    scales = parse_scales(args.scale)
    files = {"replacements": args.reactions or [], "additions": args.add or []}
    if not (sets or scales or any(files.values()) or args.alternative):
        raise InputError("discern needs at least one change: --set ID=EXPR, --scale ID=F, "
                         "--reactions FILE, --add FILE or --list FILE", file=args.scenario)
    lists = {k: [parse_reaction_list(f) for f in v] for k, v in files.items()}
    alternative = parse_reaction_list(args.alternative) if args.alternative else None

    def make(base):
        return changed_model(base, set_dict=sets, scale=scales, alternative=alternative,
                             base_dir=Path.cwd(), **lists)
    return make


def cmd_discern(args):
    import ionochem
    from ionochem.analysis.discern import (
        Uncertain,
        check_spreads,
        parse_environment,
        parse_observables,
    )
    from ionochem.analysis.discern_sweep import discern, ranking
    from ionochem.analysis.sweep import check_axes, make_spec
    from ionochem.analysis.sweep_axes import parse_vary
    _check_args(args)
    files = [*(args.reactions or []), *(args.add or [])] + (
        [args.alternative] if args.alternative else [])
    check_outputs(args, inputs=[args.scenario, *files])
    altitudes = None
    if args.altitudes:
        from ionochem.analysis.rank import parse_altitude_range
        altitudes = parse_altitude_range(args.altitudes)
    bands = None
    if args.bands:
        from ionochem.analysis.compare import parse_bands
        bands = parse_bands(args.bands)
    spreads, named = parse_environment(args.environment)
    axes = parse_vary(args.vary) if args.vary else ()
    make_changed = _changes(args)
    scen = analysis_scenario(args, "discern")
    check_outputs(args, inputs=scenario_inputs(scen) + files)
    if args.given_electrons and scen.transport is not None:
        raise InputError("a given electron density makes O+ the balance of Ne minus the "
                         "other ions, which cannot be transported: use a scenario without "
                         "[transport]", file="--given-electrons")
    spec = make_spec(scen, axes)
    if axes:
        check_axes(spec)
    if args.check_point:
        bad = [i for i in args.check_point if not 0 <= i < spec.total]
        if bad:
            raise InputError(f"point {bad[0]} is outside the grid of {spec.total} points",
                             file="--check-point")
    base = ionochem.Model(scen, reaction_list=spec.reaction_list)
    print_warnings(base.warnings)
    names = _observable_names(args, base)
    observables = parse_observables(names, _species(base))
    if args.given_electrons and any("e" in (o.numerator, o.denominator) for o in observables):
        raise InputError("the electron density is given with --given-electrons; it cannot "
                         "be an observable", file="--observable")
    errors = _errors(args.error, observables)
    uncertain = Uncertain(check_spreads(spreads, base, named), args.member_correlation)
    ds = discern(spec, make_changed, observables, errors, uncertain,
                 electrons_given=args.given_electrons, altitude_range=altitudes, bands=bands)
    rows = ranking(ds, args.top)
    if args.monte_carlo:
        from ionochem.analysis.discern_check import add_checks
        points = args.check_point or [_best_index(ds, rows, spec)]
        ds = add_checks(ds, spec, points, make_changed, observables, errors, uncertain,
                   args.monte_carlo, seed=args.seed, electrons_given=args.given_electrons)
    stamp_history(ds, args)
    table = _print(ds, rows, observables)
    write_outputs(args, ds, table)
    if args.plot:
        from ionochem.plot.discern import plot_discern
        plot_discern(ds, args.plot)
        print(f"wrote {args.plot}")
    return 0


def _species(model):
    from ionochem.analysis.discern import reported_species
    return reported_species(model)


def _observable_names(args, model):
    if args.observable:
        return args.observable
    have = set(_species(model))
    out = []
    for name in DEFAULT_OBSERVABLES:
        parts = name.split("/")
        if all(p in have for p in parts) and not (args.given_electrons and "e" in parts):
            out.append(name)
    if "O+(total)" not in have:
        out += [n.replace("O+(total)", "O+") for n in DEFAULT_OBSERVABLES
                if "O+(total)" in n and "O+" in have]
    return out


def _best_index(ds, rows, spec):
    from ionochem.analysis.sweep_axes import grid_shape
    if not rows or not spec.axes:
        return 0
    idx = tuple(list(ds[a.name].values).index(rows[0]["condition"][a.name])
                for a in spec.axes)
    import numpy as np
    return int(np.ravel_multi_index(idx, grid_shape(spec.axes)))


def _print(ds, rows, observables):
    import numpy as np
    print(f"{ds.attrs.get('title', '')}")
    print(f"changed reactions (not counted as uncertain): "
          f"{ds.attrs['discern_excluded_reactions'] or '(none)'}")
    print("separation in combined standard deviations (model uncertainty of both rate sets "
          "averaged, plus measurement error); best first")
    dims = [d for d in ds["separation_band"].dims if d not in ("observable", "band")]
    table = Table(["observable", "band", *dims, "separation"],
                  align=["<", "<", *[">"] * len(dims), ">"])
    for r in rows:
        table.add(r["observable"], f"{r['band']} {r['bottom_km']:g}-{r['top_km']:g}",
                  *[f"{r['condition'][d]:g}" if isinstance(r["condition"][d], float)
                    else str(r["condition"][d]) for d in dims], f"{r['separation']:.2f}")
    print(table.text())
    if "separation_montecarlo" in ds:
        _print_checks(ds)
    if not dims:
        prof = ", ".join(f"{o} {v:.2f}" for o, v in zip(ds["observable"].values,
                                                        ds["separation_profile"].values))
        print(f"whole profile: {prof}; all observables together "
              f"{float(np.asarray(ds['separation_combined'])):.2f}")
    return table


def _print_checks(ds):
    import numpy as np
    print("Monte Carlo check (linear | sampled ± standard error) at the largest linear "
          "separation of each observable")
    alt = ds["altitude"].values
    for c in range(ds.sizes["check_point"]):
        for o, name in enumerate(ds["observable"].values):
            lin = ds["separation_check_linear"].values[c, o]
            if not np.any(np.isfinite(lin)):
                continue
            a = int(np.nanargmax(lin))
            mc = ds["separation_montecarlo"].values[c, o, a]
            se = ds["separation_montecarlo_stderr"].values[c, o, a]
            print(f"  point {int(ds['check_point'].values[c])} {name} at {alt[a]:g} km: "
                  f"{lin[a]:.2f} | {mc:.2f} ± {se:.2f}")
    skipped = ds.attrs.get("montecarlo_not_sampled")
    if skipped:
        print(f"  (not sampled in the check: {skipped})", file=sys.stderr)
