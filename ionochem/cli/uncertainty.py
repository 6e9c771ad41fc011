"""``ionochem uncertainty``: Monte Carlo over rate uncertainties, or global sensitivity.

Command-line glue only: it loads the scenario named on the command line and hands the model
to :mod:`ionochem.analysis.uncertainty` (Monte Carlo) or :mod:`ionochem.analysis.globalsens`
(Sobol, Morris).
"""

from __future__ import annotations

import sys

from ionochem.analysis.bounds import MAX_SEED, count_option
from ionochem.cli.compare import print_change_log
from ionochem.cli.limits import check_ensemble, sample_warnings
from ionochem.cli.observed import add_observed_option, load_observed, print_misfit
from ionochem.cli.options import (
    MEMBERS_HELP,
    Table,
    add_rate_change_options,
    check_observed,
    check_output,
    check_outputs,
    fmt_value,
    load_model,
    print_warnings,
    scenario_inputs,
    stamp_history,
    workers_option,
    write_outputs,
)
from ionochem.cli.steady_at import add_steady_at_option
from ionochem.errors import InputError

REPORT_KM = (100.0, 120.0, 150.0, 200.0, 250.0, 300.0, 400.0)


def register(subparsers):
    """Add the ``uncertainty`` subcommand to ``subparsers``."""
    u = subparsers.add_parser(
        "uncertainty",
        help="Monte Carlo over rate uncertainties, or global sensitivity (Sobol, Morris)")
    u.add_argument("scenario")
    u.add_argument("--samples", type=int, required=True, metavar="N",
                   help="Monte Carlo samples; sobol: base sample size (N (M+2) solves); "
                        "morris: trajectories (N (M+1) solves)")
    u.add_argument("--seed", type=count_option(0, MAX_SEED, "seed"), default=0, metavar="S",
                   help="seed of the random streams (default 0)")
    u.add_argument("--method", choices=("montecarlo", "sobol", "morris"), default="montecarlo")
    par = u.add_mutually_exclusive_group()
    par.add_argument("--workers", type=workers_option, default="auto", metavar="K",
                     help="solve on a local dask cluster of K worker processes; 1: in this "
                          "process; auto (default): in this process unless the run is large "
                          "and two or more CPUs are free")
    par.add_argument("--scheduler", metavar="ADDRESS",
                     help="solve on an existing dask scheduler (tcp://host:port)")
    u.add_argument("--batch", type=int, metavar="B",
                   help="samples per batch (default: about 1000 rows of samples x altitudes)")
    u.add_argument("--resume", action="store_true",
                   help="continue an interrupted run from OUT.nc.samples")
    u.add_argument("--restart", action="store_true",
                   help="discard the samples of an earlier run in OUT.nc.samples and start "
                        "over")
    u.add_argument("--keep-samples", action="store_true",
                   help="keep OUT.nc.samples (the solved samples) after writing OUT.nc")
    u.add_argument("--vary-environment", metavar="NAME=F,...",
                   help="one-sigma factors of environment inputs: euv, Te, a fixed neutral "
                        "(euv=1.2,O=1.15,Te=1.1)")
    u.add_argument("--top", type=int, default=10, metavar="M",
                   help="sobol/morris: reactions analysed, by first-order variance share "
                        "(default 10)")
    u.add_argument("--altitudes", metavar="KM,KM,...",
                   help="sobol/morris: altitudes analysed (default 100,120,150,200,250,300,"
                        "400 inside the grid)")
    u.add_argument("--species", action="append", metavar="NAME",
                   help="sobol/morris: species analysed (repeatable; default N2+, O2+, NO+, "
                        "O+(total) or O+, e)")
    u.add_argument("--member-correlation", type=float, default=None, metavar="RHO",
                   help="correlation, 0 to 1, of the draws of two members of one unit of "
                        "analysis (levels of a family, branches of a tie): 1 one draw per "
                        "unit, 0 independent members (default: the scenario's "
                        "uncertainty.member_correlation, else 1)")
    u.add_argument("--members", action="store_true", help=MEMBERS_HELP)
    add_rate_change_options(u, "before sampling")
    u.add_argument("--reactions", action="append", metavar="FILE",
                   help="replacement entries (by id) applied before sampling (repeatable)")
    u.add_argument("--add", action="append", metavar="FILE",
                   help="entries with new ids added before sampling (repeatable)")
    u.add_argument("--csv", metavar="FILE",
                   help="write the printed table (median and 68 %% factor) as CSV")
    u.add_argument("--no-progress", action="store_true", help="no progress bar")
    u.add_argument("--allow-long", action="store_true",
                   help="allow an ensemble beyond the work bound (docs/scenario.md, Long runs)")
    u.add_argument("-o", "--output", help="write the result dataset (netCDF)")
    u.add_argument("--plot", help="write the figure (PNG, PDF, SVG)")
    add_observed_option(u)
    add_steady_at_option(u)
    u.set_defaults(func=cmd_uncertainty)
    return subparsers


def _parse_altitudes(text):
    if text is None:
        return None
    out = []
    for item in str(text).split(","):
        item = item.strip()
        if not item:
            continue
        try:
            out.append(float(item))
        except ValueError:
            raise InputError(f"altitude {item!r} is not a number (km)",
                             file="--altitudes") from None
    if not out:
        raise InputError("no altitude given", file="--altitudes")
    return out


def _check_args(args):
    check_outputs(args, inputs=[args.scenario])
    if args.samples < 1:
        raise InputError("--samples must be at least 1", file="--samples")

    if args.batch is not None and args.batch < 1:
        raise InputError("--batch must be at least 1", file="--batch")
    if args.resume and not args.output:
        raise InputError("--resume needs -o OUT.nc (the samples are kept next to it)",
                         file="--resume")
    rho = args.member_correlation
    if rho is not None and not (0.0 <= rho <= 1.0):
        raise InputError(f"{rho:g} must be between 0 and 1 (1: one draw per unit; 0: "
                         "independent members)", file="--member-correlation")
    if args.restart and (args.resume or not args.output):
        raise InputError("--restart needs -o OUT.nc and cannot go with --resume (continue "
                         "the earlier samples, or discard them: one or the other)",
                         file="--restart")
    if args.method == "sobol" and args.samples & (args.samples - 1):
        print(f"note: --samples {args.samples} is not a power of 2; the Sobol' sequence is "
              "balanced only for powers of 2", file=sys.stderr)


def cmd_uncertainty(args):
    """``ionochem uncertainty``: returns 0."""
    from ionochem.analysis.uncertainty import parse_spreads, remove_store
    _check_args(args)
    files = [*(args.reactions or []), *(args.add or [])]
    check_output(args.csv, "--csv", inputs=[args.scenario, *files])
    spreads = parse_spreads(args.vary_environment)
    for text in sample_warnings(args.method, args.samples, spreads):
        print(f"warning: {text}", file=sys.stderr)
    altitudes = _parse_altitudes(args.altitudes)
    observed = load_observed(args)
    from ionochem.mechanism.parser import parse_reaction_list
    log = []
    scen, model = load_model(
        args, command="uncertainty", log=log,
        replacements=[parse_reaction_list(f) for f in args.reactions or []],
        additions=[parse_reaction_list(f) for f in args.add or []])
    check_outputs(args, inputs=scenario_inputs(scen) + files)
    check_observed(observed, model)
    print_change_log(log)
    runs = 1 if args.method == "montecarlo" else args.top + len(spreads or ()) + 2
    check_ensemble(args.samples, runs, model.altitude_km.size, len(model.species),
                   len(model.reactions), allow_long=args.allow_long)
    print_warnings(model.warnings)
    if args.restart:
        from ionochem.analysis.ensemble_store import discard_store, store_path_for
        if discard_store(store_path_for(args.output)):
            print(f"--restart: discarded the samples of an earlier run in "
                  f"{store_path_for(args.output)}", file=sys.stderr)
    common = dict(seed=args.seed, environment=spreads, batch=args.batch,
                  workers=args.workers, scheduler=args.scheduler, output=args.output,
                  resume=args.resume,
                  progress=not args.no_progress and sys.stderr.isatty(),
                  member_correlation=(scen.uncertainty.member_correlation
                                      if args.member_correlation is None
                                      else args.member_correlation))
    try:
        if args.method == "montecarlo":
            from ionochem.analysis.uncertainty import monte_carlo
            ds = monte_carlo(model, args.samples, **common)
        else:
            from ionochem.analysis.globalsens import global_sensitivity
            ds = global_sensitivity(model, args.samples, method=args.method, top=args.top,
                                    altitudes_km=altitudes, species=args.species,
                                    members=args.members, **common)
    except KeyboardInterrupt:
        if args.output:
            print(f"finished batches are kept in {args.output}.samples: run the same command "
                  "with --resume to continue", file=sys.stderr)
        raise
    if ds.attrs.get("failed_samples"):
        print(f"warning: {ds.attrs['failed_samples_note']}", file=sys.stderr)
    if args.method == "montecarlo":
        table = _print_montecarlo(ds, members=args.members)
    else:
        table = _print_global(ds)
    if observed is not None:
        _print_observed_misfit(observed, ds)
    stamp_history(ds, args)
    write_outputs(args, ds, table)
    if args.output:
        if args.keep_samples:
            print(f"samples kept in {args.output}.samples")
        else:
            remove_store(args.output)
    if args.plot:
        from ionochem.plot.uncertainty import plot_uncertainty
        plot_uncertainty(ds, args.plot, observed=observed)
        print(f"wrote {args.plot}")
    return 0


def _print_observed_misfit(observed, ds):
    """Misfit of the Monte Carlo median and of the central (unperturbed) column."""
    from ionochem.analysis.misfit import misfit_of_dataset
    if "density_quantiles" not in ds:
        print("note: --observed: no misfit for a global-sensitivity run (no density "
              "profiles); the misfit needs --method montecarlo", file=sys.stderr)
        return
    fits = {"median": misfit_of_dataset(
        observed, ds, density=ds["density_quantiles"].sel(quantile=0.5))}
    if "density_central" in ds:
        fits["central"] = misfit_of_dataset(observed, ds, density=ds["density_central"])
    print_misfit(observed, fits)


def _main_species(names):
    from ionochem.analysis.globalsens import default_species
    return default_species(list(names))


def _print_montecarlo(ds, out=None, members=False):
    import numpy as np
    out = sys.stdout if out is None else out
    alt = ds["altitude"].values
    names = list(ds["species"].values)
    species = _main_species(names)
    rows = sorted({float(alt[np.argmin(np.abs(alt - a))]) for a in REPORT_KM
                   if alt.min() - 1e-9 <= a <= alt.max() + 1e-9}) or [float(alt[0])]
    print(f"{ds.attrs.get('title', '')}", file=out)
    failed = ds.attrs.get("failed_samples", 0)
    print(f"Monte Carlo: {ds.attrs['samples']} samples"
          + (f" ({failed} more failed and are left out)" if failed else "")
          + f", seed {ds.attrs['seed']}"
          + (f", environment {ds.attrs['environment_spreads']}"
             if ds.attrs.get("environment_spreads") else ""), file=out)
    print("median density (cm-3) and the 68 % range as a factor (sqrt(n84/n16))", file=out)
    table = Table(["alt_km", *[c for s in species for c in (s, f"{s} x")]])
    q = ds["density_quantiles"]
    for a in rows:
        cells = []
        for s in species:
            med = float(q.sel(quantile=0.5, species=s, altitude=a))
            lo = float(q.sel(quantile=0.16, species=s, altitude=a))
            hi = float(q.sel(quantile=0.84, species=s, altitude=a))
            fac = np.sqrt(hi / lo) if lo > 0 else np.nan
            cells += [fmt_value(med).strip(), f"{fac:.2f}"]
        table.add(f"{a:.1f}", *cells)
    print(table.text(), file=out)
    by_unit = not members and "variance_share_unit" in ds
    suffix, dim = ("_unit", "unit") if by_unit else ("", "reaction")
    share = ds["variance_share" + suffix]
    rho = ds.attrs.get("member_correlation", 1.0)
    print(f"largest shares of var(ln n) by {'unit of analysis' if by_unit else 'reaction'} "
          f"(from the samples; first-order in brackets; members of a unit drawn with "
          f"correlation {rho:g})", file=out)
    shares = Table(["species", "altitude", dim, "share", "first-order"],
                   align=[">", ">", "<", ">", ">"])
    for s in species:
        for a in rows:
            v = share.sel(species=s, altitude=a).values
            lin = ds["variance_share_linear" + suffix].sel(species=s, altitude=a).values
            pick = v if np.any(np.isfinite(v)) else lin
            if not np.any(np.isfinite(pick)):
                continue
            j = int(np.nanargmax(pick))
            shares.add(s, f"{a:g} km", ds[dim].values[j],
                       f"{v[j]:.1%}" if np.isfinite(v[j]) else "-", f"[{lin[j]:.1%}]")
    print(shares.text(), file=out)
    return table


def _print_global(ds, out=None):
    import numpy as np
    out = sys.stdout if out is None else out
    method = ds.attrs["method"]
    key, second = (("S1", "ST") if method == "sobol" else ("mu_star", "sigma"))
    print(f"{ds.attrs.get('title', '')}", file=out)
    print(f"{method}: {ds.attrs['samples']} base samples, {ds.attrs['model_runs']} solves, "
          f"seed {ds.attrs['seed']}; factors: {ds.attrs['factors']}", file=out)
    print(f"per species and altitude: the three largest factors by {key} "
          f"({key} / {second})", file=out)
    table = Table(["species", "altitude", *[f"{n} {key}/{second}" for n in
                                             ("first", "second", "third")]],
                  align=[">", ">", "<", "<", "<"])
    for s in ds["species"].values:
        for a in ds["altitude"].values:
            v = ds[key].sel(species=s, altitude=a).values
            if not np.any(np.isfinite(v)):
                continue
            w = ds[second].sel(species=s, altitude=a).values
            order = np.argsort(-np.nan_to_num(v, nan=-np.inf))[:3]
            cells = [f"{ds['factor'].values[j]} {v[j]:.2f}/{w[j]:.2f}" for j in order]
            table.add(s, f"{a:g} km", *cells, *[""] * (3 - len(cells)))
    print(table.text(), file=out)
    return table
