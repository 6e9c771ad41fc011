"""``ionochem fit``: rate multipliers (or a Te factor) fitted to measured profiles.

Command-line glue only: it loads the scenario and the observations, optionally puts the
column in measured-electron-density mode, and hands them to
:mod:`ionochem.analysis.fit`; it prints the multipliers, the misfit before and after, and
the identifiability warnings, and writes FIT.nc and the figure.
"""

from __future__ import annotations

import sys

from ionochem.analysis.bounds import MAX_PROFILE_POINTS, count_option
from ionochem.cli.observed import misfit_table
from ionochem.cli.options import (
    Table,
    check_observed,
    check_outputs,
    parse_assignments,
    print_warnings,
    scenario_inputs,
    stamp_history,
)
from ionochem.cli.steady_at import add_steady_at_option, analysis_scenario
from ionochem.errors import InputError


def register(subparsers):
    """Add the ``fit`` subcommand to ``subparsers``."""
    f = subparsers.add_parser(
        "fit", help="fit rate multipliers (or a Te factor) to measured profiles")
    f.add_argument("scenario")
    f.add_argument("--observed", required=True, metavar="FILE",
                   help="measured profiles (CSV: altitude_km, species, density_cm3, "
                        "sigma_cm3[, kind]; or netCDF)")
    f.add_argument("--free", action="append", required=True, metavar="ID",
                   help="a reaction id, a family id (all its levels together) or Te "
                        "(repeatable)")
    f.add_argument("--prior", action="append", metavar="ID=F",
                   help="one-sigma log-normal prior factor F > 1 of a free parameter, or "
                        "ID=none for a flat prior (default: the reaction's own f; Te flat)")
    f.add_argument("--max-factor", type=float, default=100.0, metavar="F",
                   help="bounds 1/F <= multiplier <= F (default 100)")
    f.add_argument("--constrain-electrons", action="store_true",
                   help="use the observed electron density (species e) as the electron "
                        "table ([solve] electrons = \"table\"): the balance ion is Ne minus "
                        "the other ions and the e rows are a constraint, not data")
    f.add_argument("--balance-ion", default="O+", metavar="NAME",
                   help="with --constrain-electrons: the ion set to Ne minus the others "
                        "(default O+)")
    f.add_argument("--profile", metavar="ID",
                   help="profile likelihood of one free parameter (chi-square with the "
                        "others refitted)")
    f.add_argument("--profile-points", type=count_option(3, MAX_PROFILE_POINTS, "points"),
                   default=13, metavar="K",
                   help="points of the profile (default 13)")
    f.add_argument("-o", "--output", help="write the fit dataset (netCDF)")
    f.add_argument("--plot", help="write the fit figure (PNG, PDF, SVG)")
    add_steady_at_option(f)
    f.set_defaults(func=cmd_fit)
    return subparsers


def cmd_fit(args):
    """``ionochem fit``: returns 0."""
    import numpy as np

    import ionochem
    from ionochem.analysis.fit import electron_constrained_model, fit, observations_of_fit
    from ionochem.analysis.misfit import band_rows
    from ionochem.io.netcdf import write_netcdf
    check_outputs(args, inputs=[args.scenario, args.observed])
    if args.constrain_electrons:
        from ionochem.io.checks import balance_ion_problem
        problem = balance_ion_problem(args.balance_ion)
        if problem:
            raise InputError(problem, file="--balance-ion")
    priors = parse_assignments(args.prior, "prior")
    obs = ionochem.load_observations(args.observed)
    scen = analysis_scenario(args, "fit")
    check_outputs(args, inputs=scenario_inputs(scen) + [args.observed])
    model = ionochem.Model(scen)
    check_observed(obs, model)
    print_warnings(model.warnings)
    if args.constrain_electrons:
        problem = balance_ion_problem(args.balance_ion, model.species)
        if problem:
            raise InputError(problem, file="--balance-ion")
        model = electron_constrained_model(model, obs, balance_ion=args.balance_ion)
    ds = fit(model, obs, args.free, priors=priors, max_factor=args.max_factor,
             profile=args.profile, profile_points=args.profile_points)
    stamp_history(ds, args)

    print(ds.attrs.get("title", ""))
    print(f"fit to {args.observed}: {ds.sizes['observation']} observations, "
          f"{ds.sizes['parameter']} free parameter(s), electrons: {ds.attrs['electrons']}")
    table = Table(["parameter", "multiplier", "68 % range", "prior f", "multiplies"],
                  align=["<", ">", ">", ">", "<"])
    for p in ds["parameter"].values:
        m = float(ds["multiplier"].sel(parameter=p))
        s = float(ds["log_multiplier_sigma"].sel(parameter=p))
        pr = float(ds["prior_log_sigma"].sel(parameter=p))
        rng = (f"{m / np.exp(s):.3g} - {m * np.exp(s):.3g}" if np.isfinite(s)
               else "unconstrained")
        table.add(p, f"{m:.4g}", rng, f"{np.exp(pr):.3g}" if np.isfinite(pr) else "flat",
                  str(ds["parameter_equation"].sel(parameter=p).values))
    print(table.text())
    if "prior_source" in ds:
        for p in ds["parameter"].values:
            print(f"prior of {p}: {ds['prior_source'].sel(parameter=p).values}")
    print(f"chi2 {float(ds['chi2_baseline']):.2f} (baseline) -> {float(ds['chi2']):.2f} "
          f"(fit) for {int(ds['degrees_of_freedom'])} degrees of freedom; prior chi2 "
          f"{float(ds['chi2_prior']):.2f}")
    names = list(ds["parameter"].values)
    if len(names) > 1:
        corr = Table(["correlation", *names], align=["<"] + [">"] * len(names))
        for p in names:
            corr.add(p, *(f"{float(ds['correlation'].sel(parameter=p, parameter_b=q)):+.3f}"
                          for q in names))
        print(corr.text())
    sv = ds["singular_value"].values
    if sv.size and sv.max() > 0:
        k = int(np.argmin(sv))
        vec = ds["singular_vector"].values[k]
        vec = vec / np.max(np.abs(vec))
        combo = " ".join(f"{c:+.2f} ln m({n})" for c, n in zip(vec, names) if abs(c) > 0.05)
        spread = f"+-{1 / sv[k]:.2g}" if sv[k] > 0 else "not at all"
        print(f"identifiability (data alone): singular values "
              f"{', '.join(f'{v:.3g}' for v in sv)}; the weakest combination {combo} is "
              f"constrained to {spread} in ln by the data")
    sub = observations_of_fit(ds)
    rows_base = band_rows(sub, ds["residual_baseline"].values,
                          np.log(ds["model_baseline"].values))
    rows_fit = band_rows(sub, ds["residual"].values, np.log(ds["model_fitted"].values))
    print("misfit per species and band (chi2 in log density)")
    print(misfit_table(sub, {"baseline": rows_base, "fitted": rows_fit}).text())
    if ds.attrs.get("profile_parameter"):
        print(f"profile likelihood of {ds.attrs['profile_parameter']}: 68 % interval "
              f"(delta chi2 = 1) {ds.attrs['profile_interval_68']}")
    for d in filter(None, ds.attrs["degenerate"].split("\n")):
        print(f"degenerate: {d}", file=sys.stderr)
    for w in filter(None, ds.attrs["warnings"].split("\n")):
        print(f"warning: {w}", file=sys.stderr)
    if args.output:
        write_netcdf(ds, args.output)
        print(f"wrote {args.output}")
    if args.plot:
        from ionochem.plot.fit import plot_fit
        plot_fit(ds, args.plot)
        print(f"wrote {args.plot}")
    return 0
