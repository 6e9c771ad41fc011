"""The ``ionochem compare`` and ``ionochem rank`` subcommands.

``register(subparsers)`` adds both to the command's argparse subparsers; each handler takes
the parsed ``args``, prints its table on stdout and returns 0. Errors are raised as
:class:`ionochem.Error` and become one line on stderr (exit 2) in :mod:`ionochem.cli`.
This is command-line glue: it reads the files named on the command line and hands parsed
objects to :mod:`ionochem.analysis.compare` and :mod:`ionochem.analysis.rank`.
"""

from __future__ import annotations

import sys
from pathlib import Path

from ionochem.errors import InputError


def register(subparsers):
    """Add the ``compare`` and ``rank`` subcommands to ``subparsers``."""
    c = subparsers.add_parser(
        "compare", help="solve a baseline and changed rates on the same column and compare")
    c.add_argument("scenario")
    c.add_argument("--set", action="append", metavar="ID=EXPR",
                   help="replace the rate expression of a reaction (repeatable)")
    c.add_argument("--scale", action="append", metavar="ID=F",
                   help="multiply a rate coefficient by F (repeatable)")
    c.add_argument("--reactions", action="append", metavar="FILE",
                   help="replacement entries (matched by id) or a whole alternative reaction "
                        "list (repeatable)")
    c.add_argument("-o", "--output", help="write the comparison dataset (netCDF)")
    c.add_argument("--plot", help="write the comparison figure (PNG, PDF, SVG)")
    c.add_argument("--bands", metavar="NAME=LO:HI,...",
                   help="altitude bands of the summary, km (default E=90:150,F1=150:200,"
                        "F2=200:300)")
    c.set_defaults(func=cmd_compare)

    r = subparsers.add_parser(
        "rank", help="rank the reactions (and Te) that control each species")
    r.add_argument("scenario")
    r.add_argument("--species", action="append", metavar="NAME",
                   help="species to rank for (repeatable; default N2+, O2+, NO+, "
                        "O+(total) or O+, e)")
    r.add_argument("--altitudes", metavar="LO:HI", help="altitude range, km (default: all)")
    r.add_argument("--top", type=int, default=10, metavar="N",
                   help="reactions listed per species (default 10)")
    r.add_argument("-o", "--output", help="write sensitivities and rankings (netCDF)")
    r.add_argument("--plot", help="write the heat map and bar chart (PNG, PDF, SVG)")
    r.set_defaults(func=cmd_rank)
    return subparsers


def _check_outputs(args):
    """Refuse output paths whose folder does not exist, before any work is done."""
    for flag, path in (("-o", args.output), ("--plot", args.plot)):
        if path and not (Path(path).parent if str(Path(path).parent) else Path(".")).is_dir():
            raise InputError(f"output folder {Path(path).parent} does not exist", file=path,
                             key=flag)


def _note_steady(scen):
    if scen.solve.mode != "steady":
        print(f"note: {scen.source}: solve.mode is {scen.solve.mode!r}; this command works "
              "on the steady state (photochemical equilibrium)", file=sys.stderr)


def _baseline(path):
    import ionochem
    scen = ionochem.load_scenario(path)
    _note_steady(scen)
    model = ionochem.Model(scen)
    for w in model.warnings:
        print(f"warning: {w}", file=sys.stderr)
    return scen, model


def cmd_compare(args):
    """``ionochem compare``: baseline against changed rates; returns 0."""
    from ionochem.analysis.compare import (
        DEFAULT_BANDS,
        band_summary,
        changed_model,
        compare,
        format_band_summary,
        parse_bands,
    )
    from ionochem.cli import _parse_assignments, _parse_scales
    from ionochem.mechanism.parser import parse_reaction_list
    _check_outputs(args)
    bands = parse_bands(args.bands) if args.bands else DEFAULT_BANDS
    sets = _parse_assignments(args.set, "set")
    scales = _parse_scales(args.scale)
    files = list(args.reactions or [])
    if not (sets or scales or files):
        raise InputError("compare needs at least one change: --set ID=EXPR, --scale ID=F "
                         "or --reactions FILE", file=args.scenario)
    lists = [parse_reaction_list(f) for f in files]
    _, base = _baseline(args.scenario)
    changed = changed_model(base, set_dict=sets, scale=scales, reaction_lists=lists)
    for w in changed.warnings:
        if w not in base.warnings:
            print(f"warning: changed model: {w}", file=sys.stderr)
    ds = compare(base, changed, reaction_lists=files)
    what = "; ".join(x for x in (ds.attrs["changes_set"], ds.attrs["changes_scale"],
                                 ds.attrs["changes_reactions"]) if x)
    print(f"{ds.attrs.get('title', '')}\nchanged: {what or '(no effective change)'}")
    print(format_band_summary(band_summary(ds, bands)))
    _write(ds, args)
    return 0


def cmd_rank(args):
    """``ionochem rank``: rank the reactions controlling each species; returns 0."""
    from ionochem.analysis.rank import (
        default_species,
        format_ranking,
        parse_altitude_range,
        ranking_dataset,
    )
    _check_outputs(args)
    rng = parse_altitude_range(args.altitudes) if args.altitudes else None
    if args.top < 1:
        raise InputError("--top must be at least 1", file="--top")
    _, model = _baseline(args.scenario)
    sens = model.sensitivity()
    names = list(sens["species"].values)
    species = list(args.species) if args.species else default_species(names)
    unknown = [s for s in species if s not in names]
    if unknown:
        raise InputError(f"no species {', '.join(unknown)} in the result (species: "
                         f"{', '.join(names)})", file="--species")
    print(sens.attrs.get("title", ""))
    print(format_ranking(sens, species, rng, args.top))
    if args.output:
        from ionochem.io.netcdf import write_netcdf
        write_netcdf(ranking_dataset(sens, rng), args.output)
        print(f"wrote {args.output}")
    if args.plot:
        from ionochem.plot.sensitivity import plot_sensitivity
        plot_sensitivity(sens, args.plot, species=species, altitude_range=rng, top=args.top)
        print(f"wrote {args.plot}")
    return 0


def _write(ds, args):
    if args.output:
        from ionochem.io.netcdf import write_netcdf
        write_netcdf(ds, args.output)
        print(f"wrote {args.output}")
    if args.plot:
        from ionochem.plot.compare import plot_compare
        plot_compare(ds, args.plot)
        print(f"wrote {args.plot}")
