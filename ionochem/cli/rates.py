"""``ionochem rates``: the laboratory toolkit on the command line.

Subcommands (file formats in docs/rates.md):

- ``maxwellian SIGMA.csv``: cross sections to k(T) of an isotropic Maxwellian; ``--fit FORM``
  also fits each level and writes a level-row rate table and its reaction-list entry.
- ``beam SIGMA.csv --kt-perp EV --kt-par EV``: merged-beam rate curve against detuning;
  ``--measured CURVE.csv`` compares with a measurement (residuals; with several levels, the
  non-negative level mix that fits it).
- ``populations SIGNALS.csv --design DESIGN.csv``: level populations from level-resolved
  signals.
- ``fit RATES.csv --form FORM``: k(T) columns to a standard form, a level-row rate table and
  the reaction-list family entry that reads it.

The computations are :mod:`ionochem.rates`; this module reads and checks files, prints, and
writes outputs. A bad file is reported as ``file:line: message`` (exit 2).
"""

from __future__ import annotations

import sys
import warnings
from pathlib import Path

from ionochem.analysis.bounds import MAX_BOOTSTRAP, MAX_SEED, count_option
from ionochem.cli.options import Table, check_output
from ionochem.cli.rates_inputs import (
    channels_of,
    check_fit_outputs,
    check_non_negative,
    column_levels,
    parse_detuning,
    parse_temperatures,
    read_measured,
    read_rates,
    read_sigma,
    relabel,
    table_target,
)
from ionochem.cli.rates_table import add_entry_options, emit_entries, entry_ref
from ionochem.cli.rates_table import register as register_table
from ionochem.errors import InputError

FORMS = ("power", "broken", "arrhenius")
DEFAULT_TEMPERATURES = "100:6000:100"
TEMPERATURE_LABELS = {"Te_K": "electron temperature T$_e$ (K)",
                      "Ti_K": "ion temperature T$_i$ (K)",
                      "Tn_K": "neutral temperature T$_n$ (K)",
                      "Teff_K": "effective temperature T$_{eff}$ (K)"}


def register(subparsers):
    r = subparsers.add_parser(
        "rates", help="laboratory toolkit: cross sections to rate coefficients, beam "
                      "convolutions, fits to standard forms, level populations")
    sub = r.add_subparsers(dest="rates_command", required=True, metavar="JOB")

    m = sub.add_parser("maxwellian", help="cross sections to k(Te) of an isotropic Maxwellian")
    m.add_argument("sigma", metavar="SIGMA.csv",
                   help="energy_eV, then one cross-section column (cm2) per level")
    m.add_argument("--temperatures", metavar="LO:HI:STEP", default=DEFAULT_TEMPERATURES,
                   help=f"electron temperatures, K, HI included (default "
                        f"{DEFAULT_TEMPERATURES})")
    m.add_argument("-o", "--output", metavar="RATES.csv", help="write k(Te) as CSV")
    _fit_options(m, form_flag="--fit", required=False)
    m.add_argument("--plot", help="write a figure of k(Te) (and the fits)")
    m.set_defaults(func=cmd_maxwellian)

    b = sub.add_parser("beam", help="merged-beam rate coefficient against detuning energy")
    b.add_argument("sigma", metavar="SIGMA.csv",
                   help="energy_eV, then one cross-section column (cm2) per level")
    b.add_argument("--kt-perp", type=float, required=True, metavar="EV",
                   help="transverse electron temperature kT_perp, eV")
    b.add_argument("--kt-par", type=float, required=True, metavar="EV",
                   help="longitudinal electron temperature kT_par, eV")
    b.add_argument("--detuning", metavar="LO:HI:N",
                   help="N detuning energies from LO to HI eV (default: those of --measured)")
    b.add_argument("--log", action="store_true",
                   help="space the --detuning points logarithmically (LO > 0)")
    b.add_argument("--measured", metavar="CURVE.csv",
                   help="measured curve: detuning_eV, rate_cm3_s[, sigma_cm3_s]")
    b.add_argument("-o", "--output", metavar="OUT.csv", help="write the curves as CSV")
    b.add_argument("--plot", help="write the figure (theory, measured, residuals)")
    b.set_defaults(func=cmd_beam)

    p = sub.add_parser("populations", help="level populations from level-resolved signals")
    p.add_argument("signals", metavar="SIGNALS.csv", help="channel, signal, sigma")
    p.add_argument("--design", required=True, metavar="DESIGN.csv",
                   help="channel, then the response of that channel to each level (v0, v1...)")
    p.add_argument("--bootstrap", type=count_option(1, MAX_BOOTSTRAP, "refits"), metavar="N",
                   help="errors from N bootstrap refits instead of linearisation")
    p.add_argument("--seed", type=count_option(0, MAX_SEED, "seed"),
                   help="seed of the bootstrap noise")
    p.add_argument("-o", "--output", metavar="OUT.csv", help="write populations as CSV")
    p.set_defaults(func=cmd_populations)

    f = sub.add_parser("fit", help="fit k(T) columns to a standard form; write a level-row "
                                   "rate table and its reaction-list entry")
    f.add_argument("rates", metavar="RATES.csv",
                   help="a temperature column (Te_K...), then one k column (cm3 s-1) per "
                        "level, optional <col>_sigma, <col>_low/<col>_high")
    _fit_options(f, form_flag="--form", required=True)
    f.add_argument("--temperatures", metavar="LO:HI:STEP",
                   help="temperatures of the written table, K (default: those of the file)")
    f.add_argument("--plot", help="write a figure of the data and the fits")
    f.set_defaults(func=cmd_fit)
    register_table(sub)


def _fit_options(p, *, form_flag, required):
    p.add_argument(form_flag, dest="form", choices=FORMS, required=required,
                   help="standard form: power A(T/300)^B; broken (power law with a break); "
                        "arrhenius A(T/300)^B exp(-C/T)")
    p.add_argument("--table", metavar="TABLE.csv",
                   help="level-row rate table to write (default for `fit`: -o)")
    if form_flag == "--form":
        p.add_argument("-o", "--output", metavar="TABLE.csv", help="level-row rate table")
    add_entry_options(p)


# ------------------------------------------------------------------ option parsing






# ------------------------------------------------------------------ reading files












# ------------------------------------------------------------------ maxwellian
def cmd_maxwellian(args):
    import numpy as np

    from ionochem.rates import maxwellian_rate
    from ionochem.rates.tables import write_csv
    T = parse_temperatures(args.temperatures)
    check_fit_outputs(args, inputs=[args.sigma])
    check_output(args.output, "-o", inputs=[args.sigma])
    check_output(args.plot, "--plot", figure=True, inputs=[args.sigma])
    E, main, sig, bands, table = read_sigma(args.sigma)
    levels = column_levels(table, main) if args.form else None
    cols, names = [], []
    for c in main:
        cols.append(sig[c])
        names.append(c)
        if c in bands:
            cols += list(bands[c])
            names += [f"{c}_low", f"{c}_high"]
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", RuntimeWarning)
        try:
            k, miss = maxwellian_rate(E, np.column_stack(cols), T, uncovered="warn",
                                      return_coverage=True)
        except InputError as exc:
            raise relabel(exc, args.sigma) from None
    for w in caught:
        print(f"warning: {args.sigma}: {w.message}", file=sys.stderr)
    rates = {n: k[:, i] for i, n in enumerate(names)}
    print(f"{args.sigma}: Maxwellian rate coefficients (cm3 s-1) of {len(main)} column"
          f"{'s' if len(main) != 1 else ''}, {T.size} temperatures "
          f"{T[0]:g}..{T[-1]:g} K")
    _print_curves(T, {c: rates[c] for c in main}, miss)
    if args.output:
        write_csv(args.output, ["Te_K", *names, "missing_weight"],
                  [T, *[rates[n] for n in names], miss],
                  comments=[f"Maxwellian rate coefficients (cm3 s-1) from {args.sigma}",
                            "missing_weight: share of the rate outside the energy grid"])
        print(f"wrote {args.output}")
    fits = None
    if args.form:
        errors = {}
        fit_bands = {c: (rates[f"{c}_low"], rates[f"{c}_high"]) for c in main if c in bands}
        fits = _fit_and_write(args, T, {c: rates[c] for c in main}, errors, fit_bands,
                              dict(zip(main, levels)), "Te_K", source=args.sigma)
    if args.plot:
        from ionochem.plot.rates import plot_rate_curves
        plot_rate_curves(T, {c: rates[c] for c in main}, args.plot,
                         fits=fits and {c: f[0] for c, f in fits.items()},
                         bands=fits and {c: f[1] for c, f in fits.items()},
                         title=f"Maxwellian rate coefficients from {Path(args.sigma).name}")
        print(f"wrote {args.plot}")
    return 0


def _print_curves(T, curves, miss=None, rows=8):
    import numpy as np
    idx = np.unique(np.linspace(0, T.size - 1, min(rows, T.size)).round().astype(int))
    header = ["T_K", *curves]
    if miss is not None:
        header.append("outside grid")
    t = Table(header)
    for i in idx:
        cells = [f"{T[i]:g}", *[f"{curves[c][i]:.4e}" for c in curves]]
        if miss is not None:
            cells.append(f"{miss[i]:.1e}" + (" !" if miss[i] > 1e-3 else ""))
        t.add(*cells)
    print(t.text())


# ------------------------------------------------------------------ fit








def _fit_and_write(args, T_out, rates, errors, bands, levels, temperature_column, *, source,
                   T_data=None):
    """Fit every column, print the fits, write the level-row table and the entry.

    Returns {column: (fitted k on T_out, (low, high))}.
    """
    import numpy as np

    from ionochem.rates import fit_rate
    from ionochem.rates.tables import write_level_table
    T_data = T_out if T_data is None else T_data
    if T_out.min() < T_data.min() * (1 - 1e-9) or T_out.max() > T_data.max() * (1 + 1e-9):
        print(f"warning: {source}: the table's temperatures {T_out.min():g}..{T_out.max():g} K "
              f"go beyond the fitted data ({T_data.min():g}..{T_data.max():g} K); the fits are "
              "extrapolated there", file=sys.stderr)
    out = {}
    print(f"fit to the {args.form} form"
          + (" (errors from the given sigma columns)" if errors else
             " (no errors given: equal relative errors, scaled by the scatter)"))
    t = Table(["column", "v", "parameters (1 sigma)", "chi2/dof", "max |fit/k - 1|"],
              align=["<", ">", "<", ">", ">"])
    for c, k in rates.items():
        try:
            res = fit_rate(T_data, k, args.form, sigma=errors.get(c))
        except InputError as exc:
            raise InputError(f"column {c}: {exc.message}", file=source) from None
        fitted = res(T_out)
        if c in bands:
            lo_fit = fit_rate(T_data, bands[c][0], args.form)(T_out)
            hi_fit = fit_rate(T_data, bands[c][1], args.form)(T_out)
            band = (np.minimum(lo_fit, fitted), np.maximum(hi_fit, fitted))
        else:
            band = res.band(T_out)
        out[c] = (fitted, band)
        text = ", ".join(f"{n} = {v:.4g} ± {e:.2g}"
                         for n, v, e in zip(res.names, res.parameters, res.errors))
        worst = float(np.max(np.abs(res(T_data) / k - 1.0)))
        t.add(c, levels[c], text, f"{res.chi2:.3g}/{res.dof}", f"{100 * worst:.2g} %")
    print(t.text())
    target = table_target(args)
    if not target:
        print("note: give --table FILE (or -o) to write the level-row rate table and its entry")
        return out
    by_level = {levels[c]: out[c][0] for c in out}
    write_level_table(
        target, T_out, by_level,
        low={levels[c]: out[c][1][0] for c in out}, high={levels[c]: out[c][1][1] for c in out},
        temperature_column=temperature_column,
        comments=[f"{args.form} fits of {Path(source).name} by ionochem rates "
                  f"(bands: {'band columns' if bands else 'fit covariance, 1 sigma'})",
                  "columns: level v, temperature (K), k and its band (cm3 s-1)"])
    print(f"wrote {target}")
    from ionochem.rates.tables import band_f_expression, check_ref
    f = band_f_expression({levels[c]: (out[c][0], *out[c][1]) for c in out})
    args.source = source
    emit_entries(args, target, list(by_level), f=f,
                 ref=entry_ref(check_ref(getattr(args, "ref", None)),
                               f"{args.form} fit of {Path(source).name} (ionochem rates)"))
    return out




def cmd_fit(args):
    T, tcol, main, rates, errors, bands, table = read_rates(args.rates)
    levels = column_levels(table, main)
    T_out = parse_temperatures(args.temperatures) if args.temperatures else T
    check_fit_outputs(args, inputs=[args.rates])
    check_output(args.plot, "--plot", figure=True, inputs=[args.rates])
    print(f"{args.rates}: {len(main)} column{'s' if len(main) != 1 else ''}, {T.size} "
          f"temperatures {T[0]:g}..{T[-1]:g} K")
    _fit_and_write(args, T_out, rates, errors, bands, dict(zip(main, levels)), tcol,
                   source=args.rates, T_data=T)
    if args.plot:
        from ionochem.plot.rates import plot_rate_curves
        # the data at their own temperatures, the fits drawn there too; the band is the
        # file's band columns when it has them (as in the table), else the fit's
        redone = {c: _fit_on(args.form, T, rates[c], errors.get(c)) for c in main}
        plot_rate_curves(T, rates, args.plot, fits={c: r[0] for c, r in redone.items()},
                         bands={c: bands.get(c, r[1]) for c, r in redone.items()},
                         title=f"{args.form} fits of {Path(args.rates).name}",
                         temperature_label=TEMPERATURE_LABELS[tcol])
        print(f"wrote {args.plot}")
    return 0


def _fit_on(form, T, k, sigma):
    from ionochem.rates import fit_rate
    res = fit_rate(T, k, form, sigma=sigma)
    return res(T), res.band(T)


# ------------------------------------------------------------------ beam


def cmd_beam(args):
    import numpy as np

    from ionochem.rates import beam_rate
    from ionochem.rates.tables import write_csv
    for flag, v in (("--kt-perp", args.kt_perp), ("--kt-par", args.kt_par)):
        if not np.isfinite(v) or v <= 0:
            raise InputError(f"{v!r} must be a positive temperature in eV", file=flag)
    if args.detuning is None and args.measured is None:
        raise InputError("give --detuning LO:HI:N or --measured CURVE.csv", file=args.sigma)
    Ed = parse_detuning(args.detuning, args.log) if args.detuning else None
    check_output(args.output, "-o", inputs=[args.sigma, args.measured])
    check_output(args.plot, "--plot", figure=True, inputs=[args.sigma, args.measured])
    E, main, sig, _, table = read_sigma(args.sigma)
    measured = read_measured(args.measured) if args.measured else None
    if Ed is None:
        Ed = measured[0]
    S = np.column_stack([sig[c] for c in main])

    def run(det, where):
        try:
            return beam_rate(E, S, det, args.kt_perp, args.kt_par)
        except InputError as exc:
            raise relabel(exc, where) from None

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", RuntimeWarning)
        curve = run(Ed, args.sigma)
        at_measured = run(measured[0], args.measured) if measured else None
    for w in caught:
        print(f"warning: {args.sigma}: {w.message}", file=sys.stderr)
    print(f"{args.sigma}: merged-beam rate coefficients (cm3 s-1), kT_perp = "
          f"{args.kt_perp:g} eV, kT_par = {args.kt_par:g} eV, {Ed.size} detunings")
    _print_detuning(Ed, {c: curve[:, i] for i, c in enumerate(main)})
    total = None if measured is None else _against_measured(args, E, S, main, table,
                                                              measured, at_measured)
    if args.output:
        header = ["detuning_eV", *[f"rate_{c}" for c in main]]
        cols = [Ed, *[curve[:, i] for i in range(len(main))]]
        if measured is not None and args.detuning is None:
            header += ["measured_cm3_s", "theory_cm3_s"]
            cols += [measured[1], total]
        write_csv(args.output, header, cols,
                  comments=[f"merged-beam rate coefficients (cm3 s-1) from {args.sigma}",
                            f"kT_perp = {args.kt_perp:g} eV, kT_par = {args.kt_par:g} eV"])
        print(f"wrote {args.output}")
    if args.plot:
        from ionochem.plot.rates import plot_beam_curve
        plot_beam_curve(Ed, {c: curve[:, i] for i, c in enumerate(main)}, args.plot,
                        measured=None if measured is None else measured[:2],
                        measured_sigma=None if measured is None else measured[2],
                        total=total,
                        total_label=("fitted level mix" if len(main) > 1
                                     else "theory at the measured points"),
                        title=f"{Path(args.sigma).name}: kT$_\\perp$ = {args.kt_perp:g} eV, "
                              f"kT$_\\parallel$ = {args.kt_par:g} eV")
        print(f"wrote {args.plot}")
    return 0


def _against_measured(args, E, S, main, table, measured, at_measured):
    """Print how the theory compares with the measured curve (fitting the level mix when
    the file has several levels); returns the theory at the measured detunings."""
    import numpy as np

    from ionochem.rates import beam_populations
    mE, mk, ms = measured
    if len(main) == 1:
        total = at_measured[:, 0]
    else:
        if ms is None:
            raise InputError("fitting the level mix needs a sigma_cm3_s column",
                             file=args.measured)
        try:
            res = beam_populations(E, S, mE, mk, ms, args.kt_perp, args.kt_par)
        except InputError as exc:
            raise relabel(exc, args.measured) from None
        total = at_measured @ (res.populations * res.scale)
        levels = column_levels(table, main)
        t = Table(["column", "v", "population", "error"])
        for c, v, cells in zip(main, levels, population_cells(res)):
            t.add(c, v, *cells)
        print("level mix fitted to the measured curve (non-negative, normalised; "
              f"scale {res.scale:.4g}):")
        print(t.text())
    if ms is not None:
        chi2 = float(np.sum(((mk - total) / ms) ** 2))
        print(f"measured vs theory: chi2 = {chi2:.4g} for {mk.size} points")
    else:
        ratio = mk[total > 0] / total[total > 0]
        print(f"measured/theory: median {np.median(ratio):.4g} over {ratio.size} points")
    return total


def _print_detuning(Ed, curves, rows=8):
    import numpy as np
    idx = np.unique(np.linspace(0, Ed.size - 1, min(rows, Ed.size)).round().astype(int))
    t = Table(["E_d_eV", *curves])
    for i in idx:
        t.add(f"{Ed[i]:.4g}", *[f"{curves[c][i]:.4e}" for c in curves])
    print(t.text())


# ------------------------------------------------------------------ populations
def population_cells(res):
    """``(population, error)`` cells of each level: ``p ± e``, or for a level fitted at zero
    with linearised errors (which are then zero and mean nothing) ``0 (on bound)`` and its
    upper limit."""
    import numpy as np
    limits = res.upper_limits if res.method == "linear" else None
    out = []
    for i, (p, e) in enumerate(zip(res.populations, res.errors)):
        ul = np.nan if limits is None else limits[i]
        if np.isfinite(ul):
            out.append(("0 (on bound)", f"upper limit {ul:.4f}"))
        else:
            out.append((f"{p:.4f}", f"{e:.4f}"))
    return out




def cmd_populations(args):
    import numpy as np

    from ionochem.rates import level_populations
    from ionochem.rates.tables import read_numeric_csv, write_csv
    check_output(args.output, "-o", inputs=[args.signals, args.design])
    if args.bootstrap is not None and args.bootstrap < 2:
        raise InputError("the number of bootstrap refits must be at least 2",
                         file="--bootstrap")
    sig = read_numeric_csv(args.signals, first="channel", required=("signal", "sigma"))
    des = read_numeric_csv(args.design, first="channel")
    check_non_negative(sig, ["sigma"], positive=True)
    ch_s, ch_d = channels_of(sig), channels_of(des)
    level_cols = [h for h in des.header[1:]]
    if not level_cols:
        des.fail("no level columns after 'channel'")
    levels = column_levels(des, level_cols)
    check_non_negative(des, level_cols)
    index = {c: i for i, c in enumerate(ch_d)}
    for i, c in enumerate(ch_s):
        if c not in index:
            sig.fail(f"channel {c} is not in {args.design}", row=i)
    rows = [index[c] for c in ch_s]
    A = np.column_stack([des[c] for c in level_cols])[rows]
    method = "bootstrap" if args.bootstrap else "linear"
    try:
        res = level_populations(A, sig["signal"], sig["sigma"], method=method,
                                n_boot=args.bootstrap or 1000, seed=args.seed)
    except InputError as exc:
        raise relabel(exc, args.signals) from None
    print(f"{args.signals}: {len(ch_s)} channels, {len(levels)} levels; non-negative least "
          f"squares, errors by {'parametric bootstrap' if args.bootstrap else 'linearisation'}")
    t = Table(["v", "population", "error"])
    for v, cells in zip(levels, population_cells(res)):
        t.add(v, *cells)
    print(t.text())
    if res.upper_limits is not None and np.isfinite(res.upper_limits).any():
        print("a level fitted at 0 sits on the non-negativity bound, where the linearised "
              "error means nothing: its upper limit is where chi2 rises by 1 (the others "
              "refitted)")
    pv = "" if not np.isfinite(res.p_value) else f", p = {res.p_value:.3g}"
    print(f"chi2 = {res.chi2:.4g} for {res.dof} degrees of freedom{pv}; overall scale "
          f"{res.scale:.4g}")
    if args.output:
        cov = res.covariance
        write_csv(args.output, ["v", "population", "error", "upper_limit",
                                *[f"cov_v{v}" for v in levels]],
                  [np.array(levels), res.populations, res.errors, res.upper_limits,
                   *[cov[:, j] for j in range(len(levels))]],
                  comments=[f"level populations from {args.signals} and {args.design}",
                            f"chi2 = {res.chi2:.6g}, dof = {res.dof}, errors: {method}"])
        print(f"wrote {args.output}")
    return 0
