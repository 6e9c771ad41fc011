"""The ``ionochem`` command.

Every :class:`ionochem.Error` becomes one line on stderr (``file:line: message``, or
``file: key: message`` for scenarios) and exit status 2; a traceback means a bug (exit 1).
"""

from __future__ import annotations

import argparse
import sys
import warnings

import numpy as np

from ionochem.errors import Error, InputError

MAIN_SPECIES = ("N2+", "O2+", "NO+", "O+", "O+(total)", "N+", "e")
DEFAULT_REPORT_KM = (100, 120, 150, 200, 250, 300, 400)


def _assignment_split(item):
    """Index of the first ``=`` outside parentheses (ids like ``DR(v=2)`` contain one)."""
    depth = 0
    for i, ch in enumerate(item):
        if ch == "(":
            depth += 1
        elif ch == ")":
            depth -= 1
        elif ch == "=" and depth == 0:
            return i
    return None


def _parse_assignments(items, what):
    out = {}
    for item in items or ():
        cut = _assignment_split(item)
        if cut is None:
            raise InputError(f"{what} {item!r} must look like ID=VALUE", file=f"--{what}")
        key, value = item[:cut], item[cut + 1:]
        key, value = key.strip(), value.strip()
        if not key or not value:
            raise InputError(f"{what} {item!r} must look like ID=VALUE", file=f"--{what}")
        out[key] = value
    return out


def _parse_scales(items):
    out = {}
    for key, value in _parse_assignments(items, "scale").items():
        try:
            f = float(value)
        except ValueError:
            raise InputError(f"scale factor {value!r} for {key} is not a number",
                             file="--scale") from None
        if not np.isfinite(f) or f < 0:
            raise InputError(f"scale factor for {key} must be a non-negative number",
                             file="--scale")
        out[key] = f
    return out


def _print_table(ds, out=None, altitudes=DEFAULT_REPORT_KM):
    out = sys.stdout if out is None else out
    alt = ds["altitude"].values
    species = [s for s in MAIN_SPECIES if s in ds["species"].values]
    rows = sorted({float(alt[np.argmin(np.abs(alt - a))]) for a in altitudes
                   if alt.min() - 1e-9 <= a <= alt.max() + 1e-9})
    if not rows:
        rows = sorted({float(alt[0]), float(alt[len(alt) // 2]), float(alt[-1])})
    print(f"{ds.attrs.get('title', '')}", file=out)
    print("densities in cm-3", file=out)
    print("  alt_km " + "".join(f"{s:>11}" for s in species), file=out)
    for a in rows:
        vals = ds["density"].sel(altitude=a, species=species).values
        print(f"{a:8.1f} " + "".join(f"{v:11.3e}" for v in vals), file=out)


def _load_model(args):
    import ionochem
    scen = ionochem.load_scenario(args.scenario)
    model = ionochem.Model(scen)
    sets = _parse_assignments(getattr(args, "set", None), "set")
    scales = _parse_scales(getattr(args, "scale", None))
    if sets or scales:
        model = model.with_changes(sets, scale=scales)
    return scen, model


def _check_output_folders(args):
    """Refuse output paths in folders that do not exist before any work is done."""
    from pathlib import Path
    for flag in ("output", "plot"):
        path = getattr(args, flag, None)
        if path and not Path(path).resolve().parent.is_dir():
            raise InputError(f"output folder {Path(path).parent} does not exist", file=path)


def cmd_run(args):
    from ionochem.io.netcdf import write_netcdf
    _check_output_folders(args)
    scen, model = _load_model(args)
    for w in model.warnings:
        print(f"warning: {w}", file=sys.stderr)
    if scen.solve.mode == "transient":
        initial = model.solve() if scen.solve.start == "steady" else None
        ds = model.integrate(np.asarray(scen.solve.times_s, float), initial=initial)
    else:
        ds = model.solve()
        _print_table(ds)
        bal = ds.attrs.get("column_balance")
        if bal is not None:
            print(f"column ionization {ds.attrs['column_ionization_cm2_s']:.4e} cm-2 s-1, "
                  f"recombination {ds.attrs['column_recombination_cm2_s']:.4e} cm-2 s-1 "
                  f"(balance {bal:.1e})")
        dark = ds["dark"].values.astype(bool)
        for note in ds.attrs.get("warnings", "").split("; "):
            if note and note not in model.warnings:
                print(f"warning: {note}", file=sys.stderr)
        if dark.any() and not dark.all():
            print(f"{int(dark.sum())} dark level(s) below "
                  f"{ds['altitude'].values[dark].max():g} km", file=sys.stderr)
    if scen.solve.mode == "transient":
        _print_transient(ds)
    budgets = list(getattr(args, "budget", None) or []) + list(scen.output.budget)
    if budgets and scen.solve.mode != "transient":
        from ionochem.analysis.budget import budget_table, format_budget
        for item in budgets:
            print(format_budget(budget_table(ds, *_parse_budget(item))))
    if args.output:
        write_netcdf(ds, args.output)
        print(f"wrote {args.output}")
    if args.plot:
        from ionochem.plot.profiles import plot_result
        plot_result(ds, args.plot)
        print(f"wrote {args.plot}")
    return 0


def _parse_budget(item):
    if "@" not in item:
        raise InputError(f"budget {item!r} must look like SPECIES@KM (N2+@200)",
                         file="--budget")
    name, km = item.rsplit("@", 1)
    try:
        return name.strip(), float(km)
    except ValueError:
        raise InputError(f"budget altitude {km!r} is not a number", file="--budget") from None


def _print_transient(ds):
    species = [s for s in MAIN_SPECIES if s in ds["species"].values]
    alt = ds["altitude"].values
    a = float(alt[np.argmin(np.abs(alt - 200.0))])
    print(f"{ds.attrs.get('title', '')}: densities (cm-3) at {a:g} km")
    print("    time_s " + "".join(f"{s:>11}" for s in species))
    for t in ds["time"].values:
        vals = ds["density"].sel(time=t, altitude=a, species=species).values
        print(f"{t:10.1f} " + "".join(f"{v:11.3e}" for v in vals))


def cmd_check(args):
    from ionochem.environment.column import NEUTRAL_SPECIES
    from ionochem.mechanism.mechanism import Mechanism
    from ionochem.mechanism.parser import parse_reaction_list
    rl = parse_reaction_list(args.file)
    present = []
    for r in rl.reactions:
        for sp, _ in (*r.reactants, *r.products):
            if sp.name not in present:
                present.append(sp.name)
    fixed = [s for s in present if s in NEUTRAL_SPECIES]
    mech = Mechanism(rl, fixed=fixed)
    problems = []
    if args.strict:
        for r in rl.reactions:
            if not r.ref:
                problems.append(InputError(f"reaction {r.id} has no ref (required by --strict)",
                                           file=r.file, line=r.line))
            if r.f is None and rl.default_f is None:
                problems.append(InputError(f"reaction {r.id} has no uncertainty factor f and "
                                           "there is no @default f (required by --strict)",
                                           file=r.file, line=r.line))
    # The parser already warns of species produced but never lost (fixed neutrals are
    # fine; anything else is refused by `run` unless the neutral source fixes it).
    warn = list(rl.warnings)
    print(f"{args.file}: {len(rl.reactions)} reactions"
          + (f" ({len(rl.families)} families expanded)" if rl.families else ""))
    print(f"  solved    : {', '.join(mech.solved)}")
    print(f"  fixed     : {', '.join(fixed) or '-'}  (neutrals; the scenario's neutral source "
          "decides)")
    print(f"  electrons : {'e from charge neutrality' if mech.algebraic else '-'}")
    for tot in mech.derived:
        print(f"  derived   : {tot.name} = {' + '.join(tot.members)}")
    for fam, members in rl.families.items():
        print(f"  family    : {fam} -> {', '.join(members)}")
    for w in warn:
        print(f"warning: {w}", file=sys.stderr)
    if problems:
        for p in problems[1:]:
            print(str(p), file=sys.stderr)
        raise problems[0]
    return 0


def build_parser():
    p = argparse.ArgumentParser(
        prog="ionochem",
        description="Photochemistry of one ionospheric altitude column from a reaction list.")
    sub = p.add_subparsers(dest="command", required=True)

    r = sub.add_parser("run", help="solve a scenario and report densities")
    r.add_argument("scenario")
    r.add_argument("-o", "--output", help="write the result dataset (netCDF)")
    r.add_argument("--plot", help="write a profile figure (PNG, PDF, SVG)")
    r.add_argument("--set", action="append", metavar="ID=EXPR",
                   help="replace the rate expression of a reaction (repeatable)")
    r.add_argument("--scale", action="append", metavar="ID=FACTOR",
                   help="multiply a rate coefficient (repeatable)")
    r.add_argument("--budget", action="append", metavar="SPECIES@KM",
                   help="print the production and loss terms of a species at an altitude")
    r.set_defaults(func=cmd_run)

    c = sub.add_parser("check", help="validate a reaction list and summarise it")
    c.add_argument("file")
    c.add_argument("--strict", action="store_true",
                   help="require a ref and an uncertainty factor for every reaction")
    c.set_defaults(func=cmd_check)

    from ionochem.analysis import commands_compare, commands_uncertainty
    commands_compare.register(sub)
    commands_uncertainty.register(sub)
    return p


def main(argv=None):
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", category=RuntimeWarning)
            return args.func(args)
    except Error as exc:
        print(str(exc), file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:          # output piped into `head` and the like
        sys.stderr.close()
        return 0


if __name__ == "__main__":
    sys.exit(main())
