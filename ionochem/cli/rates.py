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

import re
import sys
import warnings
from pathlib import Path

from ionochem.analysis.bounds import MAX_BOOTSTRAP, MAX_SEED, count_option
from ionochem.cli.options import Table, check_output
from ionochem.cli.rates_table import add_entry_options, emit_entries, entry_ref
from ionochem.cli.rates_table import register as register_table
from ionochem.errors import InputError

FORMS = ("power", "broken", "arrhenius")
DEFAULT_TEMPERATURES = "100:6000:100"
_TEMP_HEADER = re.compile(r"(Te|Ti|Tn|Teff|T)(_K)?")
_MAX_POINTS = 1_000_000
IGNORED_COLUMNS = ("missing_weight",)
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
def _triple(text, flag):
    import numpy as np
    parts = str(text).split(":")
    if len(parts) != 3:
        raise InputError(f"{text!r} must look like LO:HI:{'N' if flag == '--detuning' else 'STEP'}",
                         file=flag)
    try:
        vals = [float(p) for p in parts]
    except ValueError:
        raise InputError(f"{text!r}: every part must be a number", file=flag) from None
    if not np.isfinite(vals).all():
        raise InputError(f"{text!r}: every part must be a finite number", file=flag)
    return vals


def parse_temperatures(text, flag="--temperatures"):
    """``LO:HI:STEP`` → temperatures (K) from LO to HI inclusive; (HI-LO)/STEP whole."""
    import numpy as np
    lo, hi, step = _triple(text, flag)
    if lo <= 0 or hi < lo or step <= 0:
        raise InputError(f"{text!r}: need 0 < LO <= HI and STEP > 0 (K)", file=flag)
    n = (hi - lo) / step
    if n > _MAX_POINTS:
        raise InputError(f"{text!r} gives more than {_MAX_POINTS} temperatures", file=flag)
    if abs(n - round(n)) > 1e-6 * max(1.0, n):
        raise InputError(f"{text!r}: (HI - LO)/STEP must be a whole number", file=flag)
    return lo + step * np.arange(int(round(n)) + 1)


def parse_detuning(text, log=False):
    """``LO:HI:N`` → N detuning energies (eV), evenly (or logarithmically) spaced."""
    import numpy as np
    lo, hi, n = _triple(text, "--detuning")
    if n != int(n) or n < 1 or n > _MAX_POINTS:
        raise InputError(f"{text!r}: N must be a whole number from 1 to {_MAX_POINTS}",
                         file="--detuning")
    if lo < 0 or hi < lo:
        raise InputError(f"{text!r}: need 0 <= LO <= HI (eV)", file="--detuning")
    if log:
        if lo <= 0:
            raise InputError(f"{text!r}: --log needs LO > 0", file="--detuning")
        return np.geomspace(lo, hi, int(n))
    return np.linspace(lo, hi, int(n))


# ------------------------------------------------------------------ reading files
def _columns(table, skip=()):
    """Main columns of a table (after the first) and their band / error partners."""
    names = [h for h in table.header[1:] if h not in skip]
    suffixes = ("_low", "_high", "_sigma")
    main = [h for h in names if not h.endswith(suffixes)]
    bands, errors = {}, {}
    for h in names:
        for suf in suffixes:
            if h.endswith(suf):
                base = h[: -len(suf)]
                if base not in main:
                    table.fail(f"column '{h}' has no column '{base}' to go with")
    for c in main:
        has_lo, has_hi = f"{c}_low" in names, f"{c}_high" in names
        if has_lo != has_hi:
            table.fail(f"column '{c}_{'low' if has_lo else 'high'}' needs its partner "
                       f"'{c}_{'high' if has_lo else 'low'}'")
        if has_lo:
            bands[c] = (table[f"{c}_low"], table[f"{c}_high"])
        if f"{c}_sigma" in names:
            errors[c] = table[f"{c}_sigma"]
    if not main:
        table.fail("no data column after the first")
    return main, bands, errors


def _levels(table, names):
    """Level number of each column: from its name (v0, sigma_v1, v=2), or 0 for a single
    unnamed column."""
    from ionochem.rates.tables import level_of_column
    levels = [level_of_column(n) for n in names]
    if all(v is None for v in levels):
        if len(names) == 1:
            return [0]
        table.fail("several columns without a level in their name; name them v0, v1, ... "
                   "(or sigma_v0, ...)")
    if any(v is None for v in levels):
        bad = names[levels.index(None)]
        table.fail(f"column '{bad}' carries no level (name it v<N>) while others do")
    if len(set(levels)) != len(levels):
        table.fail("two columns name the same level")
    return levels


def _increasing(table, col, what):
    import numpy as np
    x = table[col]
    steps = np.diff(x)
    if (steps <= 0).any():
        i = int(np.argmax(steps <= 0)) + 1
        table.fail(f"{what} must be strictly increasing ({x[i]:g} after {x[i - 1]:g})", row=i)


def _non_negative(table, cols, positive=False):
    import numpy as np
    for c in cols:
        bad = (table[c] <= 0) if positive else (table[c] < 0)
        if bad.any():
            i = int(np.argmax(bad))
            word = "positive" if positive else "non-negative"
            table.fail(f"{c} = {table[c][i]:g} must be {word}", row=i)


def read_sigma(path):
    """SIGMA.csv → (energies, main column names, {name: sigma}, {name: (low, high)}, table)."""
    import numpy as np

    from ionochem.rates.tables import read_numeric_csv
    t = read_numeric_csv(path, first="energy_eV", min_rows=2)
    main, bands, _ = _columns(t)
    _increasing(t, "energy_eV", "energies")
    _non_negative(t, t.header)
    for c, (lo, hi) in bands.items():
        wrong = (lo > t[c]) | (hi < t[c])
        if wrong.any():
            t.fail(f"the band {c}_low .. {c}_high must contain {c}", row=int(np.argmax(wrong)))
    return t["energy_eV"], main, {c: t[c] for c in main}, bands, t


def _relabel(exc, path):
    """A library InputError (no file) re-raised at the input file."""
    return InputError(exc.message, file=exc.file or path, line=exc.line)


# ------------------------------------------------------------------ maxwellian
def cmd_maxwellian(args):
    import numpy as np

    from ionochem.rates import maxwellian_rate
    from ionochem.rates.tables import write_csv
    T = parse_temperatures(args.temperatures)
    _check_fit_outputs(args, inputs=[args.sigma])
    check_output(args.output, "-o", inputs=[args.sigma])
    check_output(args.plot, "--plot", figure=True, inputs=[args.sigma])
    E, main, sig, bands, table = read_sigma(args.sigma)
    levels = _levels(table, main) if args.form else None
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
            raise _relabel(exc, args.sigma) from None
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
def _check_fit_outputs(args, inputs):
    if not args.form:
        for flag in ("table", "entry", "reaction", "fraction", "write_entry"):
            if getattr(args, flag, None):
                raise InputError(f"--{flag.replace('_', '-')} needs --fit FORM",
                                 file=f"--{flag.replace('_', '-')}")
        return
    _entries(args)
    target = _table_target(args)
    check_output(target, "--table", inputs=inputs)
    check_output(args.write_entry, "--write-entry", inputs=inputs)
    if args.write_entry and not args.reaction:
        raise InputError("--write-entry needs --reaction TEXT (the reaction of the entry)",
                         file="--write-entry")
    if args.write_entry and not target:
        raise InputError("--write-entry needs a table to refer to (--table or -o)",
                         file="--write-entry")


def _entries(args):
    """[(id, reaction, fraction or None)] of the entries to print, from the options."""
    import numpy as np
    ids = args.entry or ["NEW"]
    reactions = args.reaction or ["REACTANTS(v) -> PRODUCTS"] * len(ids)
    if len(reactions) != len(ids):
        raise InputError(f"{len(ids)} --entry but {len(reactions)} --reaction; give one "
                         "reaction per entry", file="--reaction")
    fractions = args.fraction or [None] * len(ids)
    if len(fractions) != len(ids):
        raise InputError(f"{len(ids)} --entry but {len(fractions)} --fraction; give one "
                         "fraction per entry", file="--fraction")
    for f in fractions:
        if f is not None and not (np.isfinite(f) and 0 < f <= 1):
            raise InputError(f"branching fraction {f!r} must be in (0, 1]", file="--fraction")
    if len(set(ids)) != len(ids):
        raise InputError("the same id is given twice", file="--entry")
    if args.reaction:
        for rid, reaction in zip(ids, reactions):
            _check_entry(rid, reaction)
    return list(zip(ids, reactions, fractions))


def _check_entry(rid, reaction):
    """Refuse an --entry/--reaction pair the reaction-list parser would refuse, before work:
    the entry is parsed as a family line with a constant rate (the table it will read is
    written later), so ``--reaction 'garbage ->'`` never reaches a file."""
    from ionochem.mechanism.parser import parse_reaction_text
    if any(c in reaction for c in "|\n#"):
        raise InputError("the reaction must not contain '|', '#' or a line break",
                         file="--reaction")
    try:
        parse_reaction_text(f"{rid}(v): {reaction} | k = 1e-7 | levels v = 1..2\n",
                            path="--reaction")
    except InputError as exc:
        message = exc.message.split(": ", 1)[-1] if exc.message.startswith("line") else \
            exc.message
        raise InputError(f"{rid}(v): {reaction!r} is not a valid family entry: {message}",
                         file="--reaction") from None


def _table_target(args):
    if getattr(args, "table", None):
        return args.table
    if getattr(args, "rates_command", None) == "fit":
        return args.output
    if args.output:
        p = Path(args.output)
        return str(p.with_name(p.stem + "_table" + (p.suffix or ".csv")))
    return None


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
    target = _table_target(args)
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


def read_rates(path):
    """RATES.csv → (T, temperature column name for tables, main, rates, errors, bands, table)."""
    from ionochem.rates.tables import read_numeric_csv
    t = read_numeric_csv(path, min_rows=2)
    m = _TEMP_HEADER.fullmatch(t.header[0])
    if not m:
        t.fail(f"the first column must be the temperature (Te_K, Ti_K, Tn_K, Teff_K or "
               f"T_K), found '{t.header[0]}'")
    var = "Te" if m.group(1) == "T" else m.group(1)
    main, bands, errors = _columns(t, skip=IGNORED_COLUMNS)
    _increasing(t, t.header[0], "temperatures")
    _non_negative(t, [t.header[0], *main, *[f"{c}_{s}" for c in bands for s in ("low", "high")],
                      *[f"{c}_sigma" for c in errors]], positive=True)
    return t[t.header[0]], f"{var}_K", main, {c: t[c] for c in main}, errors, bands, t


def cmd_fit(args):
    T, tcol, main, rates, errors, bands, table = read_rates(args.rates)
    levels = _levels(table, main)
    T_out = parse_temperatures(args.temperatures) if args.temperatures else T
    _check_fit_outputs(args, inputs=[args.rates])
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
def read_measured(path):
    """CURVE.csv → (detuning_eV, rate_cm3_s, sigma_cm3_s or None)."""
    from ionochem.rates.tables import read_numeric_csv
    t = read_numeric_csv(path, first="detuning_eV", required=("rate_cm3_s",), min_rows=1)
    _non_negative(t, ["detuning_eV"])
    _non_negative(t, ["rate_cm3_s"])
    s = None
    if "sigma_cm3_s" in t.header:
        _non_negative(t, ["sigma_cm3_s"], positive=True)
        s = t["sigma_cm3_s"]
    return t["detuning_eV"], t["rate_cm3_s"], s


def cmd_beam(args):
    import numpy as np

    from ionochem.rates import beam_populations, beam_rate
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
            raise _relabel(exc, where) from None

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", RuntimeWarning)
        curve = run(Ed, args.sigma)
        at_measured = run(measured[0], args.measured) if measured else None
    for w in caught:
        print(f"warning: {args.sigma}: {w.message}", file=sys.stderr)
    print(f"{args.sigma}: merged-beam rate coefficients (cm3 s-1), kT_perp = "
          f"{args.kt_perp:g} eV, kT_par = {args.kt_par:g} eV, {Ed.size} detunings")
    _print_detuning(Ed, {c: curve[:, i] for i, c in enumerate(main)})
    total = None
    if measured is not None:
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
                raise _relabel(exc, args.measured) from None
            total = at_measured @ (res.populations * res.scale)
            levels = _levels(table, main)
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


def _channels(table):
    import numpy as np
    ch = table["channel"]
    if (ch != np.round(ch)).any():
        i = int(np.argmax(ch != np.round(ch)))
        table.fail(f"channel {ch[i]:g} is not a whole number", row=i)
    _, first = np.unique(ch, return_index=True)
    if first.size != ch.size:
        dup = sorted(set(range(ch.size)) - set(first))[0]
        table.fail(f"channel {int(ch[dup])} appears twice", row=dup)
    return ch.astype(int)


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
    _non_negative(sig, ["sigma"], positive=True)
    ch_s, ch_d = _channels(sig), _channels(des)
    level_cols = [h for h in des.header[1:]]
    if not level_cols:
        des.fail("no level columns after 'channel'")
    levels = _levels(des, level_cols)
    _non_negative(des, level_cols)
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
        raise _relabel(exc, args.signals) from None
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
