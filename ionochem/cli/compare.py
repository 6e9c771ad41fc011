"""``ionochem compare``: a baseline and changed rates on the same column.

Changes are explicit: ``--set``/``--scale`` change rates, ``--reactions FILE`` replaces
entries by id, ``--add FILE`` adds entries with new ids, ``--list FILE`` swaps in a whole
alternative reaction list. The analysis is :mod:`ionochem.analysis.compare`.
"""

from __future__ import annotations

import sys
from pathlib import Path

from ionochem.cli.observed import add_observed_option, load_observed, print_misfit
from ionochem.cli.options import (
    Table,
    add_rate_change_options,
    check_observed,
    check_output,
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

#: Relative change of an effective rate coefficient below which it is listed as unchanged
#: (rounding of the level solutions, far below anything a table prints).
EFFECTIVE_UNCHANGED = 1e-6


def register(subparsers):
    c = subparsers.add_parser(
        "compare", help="solve a baseline and changed rates on the same column and compare")
    c.add_argument("scenario")
    add_change_options(c)
    c.add_argument("--species", action="append", metavar="NAME",
                   help="species summarised (repeatable; any species of the result, family "
                        "levels such as 'N2+(v=1)' included; default the main ions)")
    c.add_argument("-o", "--output", help="write the comparison dataset (netCDF)")
    c.add_argument("--plot", help="write the comparison figure (PNG, PDF, SVG)")
    c.add_argument("--csv", metavar="FILE", help="write the printed summary as CSV")
    c.add_argument("--bands", metavar="NAME=LO:HI,...",
                   help="altitude bands of the summary, km (default E=90:150,F1=150:200,"
                        "F2=200:300)")
    add_observed_option(c)
    add_steady_at_option(c)
    c.set_defaults(func=cmd_compare)


def add_change_options(c):
    """The change options of ``compare`` (and ``discern``): ``--set``, ``--scale``,
    ``--reactions``, ``--add``, ``--list``."""
    add_rate_change_options(c)
    c.add_argument("--reactions", action="append", metavar="FILE",
                   help="replacement entries: each replaces the baseline entry of the same id "
                        "(repeatable)")
    c.add_argument("--add", action="append", metavar="FILE",
                   help="entries with new ids, added to the baseline list (repeatable)")
    c.add_argument("--list", metavar="FILE", dest="alternative",
                   help="a whole alternative reaction list on the same column")


def baseline_model(args, command):
    """Scenario and model of ``args.scenario`` (a transient one at ``--steady-at``),
    warnings printed."""
    import ionochem
    scen = analysis_scenario(args, command)
    model = ionochem.Model(scen)
    print_warnings(model.warnings)
    return scen, model


def cmd_compare(args):
    from ionochem.analysis.compare import (
        band_summary,
        changed_model,
        compare,
        default_bands,
        parse_bands,
    )
    from ionochem.mechanism.parser import parse_reaction_list
    files = [*(args.reactions or []), *(args.add or [])]
    if args.alternative:
        files.append(args.alternative)
    check_outputs(args, inputs=[args.scenario, *files])
    check_output(args.csv, "--csv", inputs=[args.scenario, *files])
    bands = parse_bands(args.bands) if args.bands else None
    sets = parse_assignments(args.set, "set")
    scales = parse_scales(args.scale)
    if not (sets or scales or files):
        raise InputError("compare needs at least one change: --set ID=EXPR, --scale ID=F, "
                         "--reactions FILE, --add FILE or --list FILE", file=args.scenario)
    observed = load_observed(args)
    replacements = [parse_reaction_list(f) for f in args.reactions or []]
    additions = [parse_reaction_list(f) for f in args.add or []]
    alternative = parse_reaction_list(args.alternative) if args.alternative else None
    scen, base = baseline_model(args, "compare")
    check_outputs(args, inputs=scenario_inputs(scen) + files)
    check_observed(observed, base)
    log = []
    changed = changed_model(base, set_dict=sets, scale=scales, replacements=replacements,
                            additions=additions, alternative=alternative, base_dir=Path.cwd(),
                            log=log)
    for w in changed.warnings:
        if w not in base.warnings:
            print(f"warning: changed model: {w}", file=sys.stderr)
    ds = compare(base, changed, reaction_lists=files, change_log=log)
    stamp_history(ds, args)
    species = None
    if args.species:
        names = list(ds["species"].values)
        unknown = [s for s in args.species if s not in names]
        if unknown:
            raise InputError(f"no species {', '.join(unknown)} in the result (species: "
                             f"{', '.join(names)})", file="--species")
        species = list(args.species)
    what = "; ".join(x for x in (ds.attrs["changes_set"], ds.attrs["changes_scale"],
                                 ds.attrs["changes_reactions"]) if x)
    print(f"{ds.attrs.get('title', '')}\nchanged: {what or '(no effective change)'}")
    print_change_log(log)
    if bands is None:
        bands = default_bands(ds["altitude"].values)
    rows = band_summary(ds, bands, species=species)
    table = band_table(rows)
    print("percentage change of the changed model against the baseline "
          "(100 (changed/baseline - 1))")
    print(table.text())
    if "effective_rate_change" in ds:
        print_effective_rates(ds, bands)
    if observed is not None:
        from ionochem.analysis.misfit import misfit_of_dataset
        print_misfit(observed, {
            "baseline": misfit_of_dataset(observed, ds, density=ds["density_baseline"]),
            "changed": misfit_of_dataset(observed, ds, density=ds["density_changed"])})
    write_outputs(args, ds, table)
    if args.plot:
        from ionochem.plot.compare import plot_compare
        plot_compare(ds, args.plot, species=species, observed=observed)
        print(f"wrote {args.plot}")
    return 0


def print_change_log(log):
    """The changes applied and where each came from (command line over scenario)."""
    if log:
        print("changes applied (the command line takes precedence over the scenario):")
        for line in log:
            print(f"  {line}")


def band_table(rows, first="species"):
    """The band summary as an aligned table (one row per species and band)."""
    import numpy as np

    def pct(x):
        return f"{x:+.2f}" if np.isfinite(x) else "-"

    table = Table([first, "band", "median %", "largest %", "at km"],
                  align=["<", "<", ">", ">", ">"])
    for r in rows:
        at = f"{r.largest_alt_km:g}" if np.isfinite(r.largest_alt_km) else "-"
        table.add(r.species, f"{r.band} {r.low_km:g}-{r.high_km:g}", pct(r.median_pct),
                  pct(r.largest_pct), at)
    return table


def print_effective_rates(ds, bands):
    """The change of every family's population-weighted rate coefficient that changed, per
    altitude band (median and largest), and how many did not change."""
    import numpy as np

    from ionochem.analysis.compare import change_rows
    var = ds["effective_rate_change"]
    dim = var.dims[0]
    alt = ds["altitude"].values
    rows, same = [], []
    for name in var[dim].values:
        ratio = var.sel({dim: name}).values
        moved = np.abs(np.where(np.isfinite(ratio), ratio, 1.0) - 1.0)
        if not moved.max(initial=0.0) > EFFECTIVE_UNCHANGED:
            same.append(str(name))
            continue
        rows += change_rows(str(name), ratio, alt, bands)
    if rows:
        print("percentage change of each family's effective (population-weighted) rate "
              "coefficient")
        print(band_table(rows, "family reaction").text())
    if same:
        print(f"effective rate coefficients unchanged (below {100 * EFFECTIVE_UNCHANGED:g} "
              f"%): {', '.join(same)}")
