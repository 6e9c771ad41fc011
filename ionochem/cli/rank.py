"""``ionochem rank``: the reactions (and environment factors) that control each species.

The analysis is :mod:`ionochem.analysis.rank` on the exact sensitivities of
:func:`ionochem.analysis.sensitivity.sensitivity`.
"""

from __future__ import annotations

from ionochem.cli.compare import baseline_model
from ionochem.cli.options import (
    MEMBERS_HELP,
    Table,
    check_output,
    check_outputs,
    result_species,
    scenario_inputs,
    stamp_history,
    write_outputs,
)
from ionochem.cli.steady_at import add_steady_at_option
from ionochem.errors import InputError


def register(subparsers):
    r = subparsers.add_parser(
        "rank", help="rank the reactions (and Te) that control each species")
    r.add_argument("scenario")
    r.add_argument("--species", action="append", metavar="NAME",
                   help="species to rank for (repeatable; any species of the result, family "
                        "levels such as 'N2+(v=1)' included; default N2+, O2+, NO+, "
                        "O+(total) or O+, e)")
    r.add_argument("--altitudes", metavar="LO:HI", help="altitude range, km (default: all)")
    r.add_argument("--min-share", type=float, default=None, metavar="F",
                   help="rank over the altitudes where the species is at least F of its own "
                        "peak density in the range (default 0.01; 0: every altitude)")
    r.add_argument("--top", type=int, default=10, metavar="N",
                   help="reactions listed per species (default 10)")
    r.add_argument("--members", action="store_true", help=MEMBERS_HELP)
    r.add_argument("-o", "--output", help="write sensitivities and rankings (netCDF)")
    r.add_argument("--plot", help="write the heat map and bar chart (PNG, PDF, SVG)")
    r.add_argument("--csv", metavar="FILE", help="write the printed ranking as CSV")
    add_steady_at_option(r)
    r.set_defaults(func=cmd_rank)


def cmd_rank(args):
    from ionochem.analysis.rank import (
        DEFAULT_MIN_SHARE,
        default_species,
        parse_altitude_range,
        rank_reactions,
        ranking_dataset,
    )
    check_outputs(args, inputs=[args.scenario])
    check_output(args.csv, "--csv", inputs=[args.scenario])
    rng = parse_altitude_range(args.altitudes) if args.altitudes else None
    if args.top < 1:
        raise InputError("--top must be at least 1", file="--top")
    share = DEFAULT_MIN_SHARE if args.min_share is None else args.min_share
    if not 0.0 <= share < 1.0:
        raise InputError("--min-share must be at least 0 and below 1", file="--min-share")
    scen, model = baseline_model(args, "rank")
    check_outputs(args, inputs=scenario_inputs(scen))
    names, roles = result_species(model)
    species = list(args.species) if args.species else default_species(names)
    unknown = [s for s in species if s not in names]
    if unknown:
        raise InputError(f"no species {', '.join(unknown)} in the result (species: "
                         f"{', '.join(names)})", file="--species")
    refuse_fixed(dict(zip(names, roles, strict=True)), species)
    sens = model.sensitivity()
    print(sens.attrs.get("title", ""))
    alt = sens["altitude"].values
    lo, hi = rng if rng is not None else (alt.min(), alt.max())
    print(f"normalized sensitivities S = d ln n / d ln k over {lo:g}-{hi:g} km, at the altitudes "
          f"where each species is at least {share:g} of its peak (factors other than "
          "reactions: d ln n / d ln factor)")
    print("rows are reactions one by one (family levels apart)" if args.members else
          "rows are units of analysis: a reaction, a whole family of levels (ID(v)) or a "
          "tie of the list, S = d ln n / d ln (one multiplier of all members); --members "
          "ranks the members apart")
    csv_table = None
    for s in species:
        for by, what in (("max", "largest |S|"), ("mean", "altitude-mean |S|")):
            rows = rank_reactions(sens, s, rng, args.top, by=by, min_share=share,
                                  members=args.members)
            table = ranking_table(rows, by, args.members)
            print(f"{s}: top {len(rows)} by {what}")
            print(table.text())
            if by == "max":
                csv_table = _extend(csv_table, s, table)
    _print_effective(model, sens, species, rng, min(args.top, 3))
    out = (stamp_history(ranking_dataset(sens, rng, min_share=share), args)
           if args.output else None)
    write_outputs(args, out, csv_table)
    if args.plot:
        from ionochem.plot.sensitivity import plot_sensitivity
        plot_sensitivity(sens, args.plot, species=species, altitude_range=rng, top=args.top,
                         min_share=share, members=args.members)
        print(f"wrote {args.plot}")
    return 0


def refuse_fixed(roles, species):
    """A fixed neutral's density comes from the neutral source: no reaction changes it, so
    its sensitivities are zero by construction; refuse to rank it rather than print zeros.
    ``roles`` maps each species of the result to its role."""
    fixed = [s for s in species if roles.get(s) == "fixed"]
    if fixed:
        solved = [str(s) for s, r in roles.items() if r != "fixed"]
        what = "is a fixed neutral" if len(fixed) == 1 else "are fixed neutrals"
        raise InputError(f"{', '.join(fixed)} {what} (given by the scenario's neutral "
                         "source): no reaction changes it, so every sensitivity is 0; "
                         f"rank one of {', '.join(solved)}", file="--species")


def ranking_table(rows, by, by_members=False):
    table = Table(["#", "reaction" if by_members else "unit", "S at max", "at km",
                   "mean |S|", "equation"],
                  align=[">", "<", ">", ">", ">", "<"])
    for r in rows:
        place = r.rank_max if by == "max" else r.rank_mean
        table.add(place, r.reaction, f"{r.signed_at_max:+.4f}", f"{r.altitude_km:g}",
                  f"{r.mean_abs:.4f}", r.equation)
    return table


def _extend(acc, species, table):
    """One CSV table over every species (a leading species column)."""
    if acc is None:
        acc = Table(["species", *table.header])
    for row in table.rows:
        acc.rows.append([species, *row])
    return acc


#: |S_eff| below this is round-off of a family whose levels react alike: not listed.
SHOWN = 1e-6


def _print_effective(model, sens, species, rng, top):
    """For the level species asked for (or their family totals): how each family's own
    levels, and the other units of analysis, move the effective rate coefficient of each
    family that consumes the levels."""
    import numpy as np

    from ionochem.analysis.levels import effective_rate_sensitivity
    from ionochem.analysis.units import sum_over_units, unit_map
    totals = {s.split("(v=")[0] if "(v=" in s else s for s in species}
    eff = effective_rate_sensitivity(model, sens)
    if eff is None:
        return
    fams = [f for f, t in zip(eff["family_reaction"].values, eff["family_species"].values,
                              strict=True) if t in totals]
    if not fams:
        return
    var = eff["effective_rate_sensitivity"]
    if rng is not None:
        var = var.sel(altitude=slice(*rng))
    alt = var["altitude"].values
    umap = unit_map(model)
    ids = [str(r) for r in var["reaction"].values]
    own_of = model.reaction_list.families
    table = Table(["family", "rate changed", "S_eff at max", "at km"],
                  align=["<", "<", ">", ">"])

    def at_max(vals):
        mx = np.nanmax(np.where(np.isfinite(vals), np.abs(vals), -1.0), axis=-1)
        i = np.nanargmax(np.where(np.isfinite(vals), np.abs(vals), -1.0), axis=-1)
        return mx, i

    k = model.rate_coefficients()
    shown = []
    for fam in fams:
        vals = var.sel(family_reaction=fam).values                 # (R, A)
        own = [ids.index(m) for m in own_of.get(fam, ())]
        if own and np.allclose(k[:, own], k[:, own[:1]], rtol=1e-12, atol=0.0):
            continue            # every level at one rate: k_eff is that rate
        shown.append(fam)
        for j in own:
            mx, i = at_max(vals[j])
            if mx > SHOWN:
                table.add(fam, ids[j], f"{vals[j, i]:+.4f}", f"{alt[i]:g}")
        others = sum_over_units(np.where(np.isin(np.arange(len(ids)), own)[:, None], 0.0,
                                         vals), umap, 0)           # (U, A)
        mx, at = at_max(others)
        for u in np.argsort(-mx, kind="stable")[:top]:
            if mx[u] > SHOWN:
                table.add(fam, f"{umap.names[u]} (unit)", f"{others[u, at[u]]:+.4f}",
                          f"{alt[at[u]]:g}")
    if not shown:
        return
    print("effective (population-weighted) rate coefficients of the families consuming "
          f"{', '.join(sorted(totals & set(eff['family_species'].values)))} whose levels "
          "react at different rates: "
          "S_eff = d ln k_eff / d ln k of each family's own levels, then the other units "
          "with the largest |S_eff| (the family's own levels left out of its unit)")
    print(table.text())
