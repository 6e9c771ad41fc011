"""``ionochem reactions``: list the reactions of a list or a scenario with their rates.

For a reaction list alone the rate coefficients are evaluated at one temperature (every
temperature variable set to it); for a scenario, on its column at the level nearest a chosen
altitude. Rates that come from the environment (``photo``, ``photoelectron``,
``prescribed``) are shown for a scenario and named for a list.
"""

from __future__ import annotations

from pathlib import Path

from ionochem.cli.options import Table, check_output, print_warnings, write_outputs
from ionochem.errors import InputError

SOURCES = ("photo", "photoelectron", "prescribed")

#: References longer than this are cut on the terminal (the CSV keeps them whole).
REF_WIDTH = 60


def register(subparsers):
    r = subparsers.add_parser(
        "reactions", help="list reactions with rate coefficient, uncertainty and source")
    r.add_argument("file", metavar="FILE|SCENARIO",
                   help="a reaction list (*.reactions) or a scenario (*.toml)")
    where = r.add_mutually_exclusive_group()
    where.add_argument("--altitude", type=float, metavar="KM",
                       help="scenario: evaluate at the grid level nearest KM (default: the "
                            "level nearest 200 km)")
    where.add_argument("--temperature", type=float, metavar="K",
                       help="reaction list: evaluate with Te = Ti = Tn = Tv = K (default 1000)")
    r.add_argument("--species", action="append", metavar="NAME",
                   help="only reactions with this species among reactants or products "
                        "(repeatable; 'N2+' matches its levels too)")
    r.add_argument("--csv", metavar="FILE", help="write the table as CSV")
    r.set_defaults(func=cmd_reactions)


#: Marks an uncertainty shown from a rate table's band (what the Monte Carlo samples).
BAND_MARK = "(band)"


def band_factor(k, low, high):
    """The one-sigma factors a band gives around k, as sampled (analysis/sampling.py: the
    band is the 68 % range of a two-piece log-normal): ``x2.17 (band)`` when both sides
    agree to 1 %, else ``/2 x2.36 (band)``; None without a usable band (k or low ≤ 0)."""
    if not (k > 0 and low > 0):
        return None
    below, above = max(k / low, 1.0), max(high / k, 1.0)
    if abs(below / above - 1.0) <= 0.01:
        return f"x{above:.3g} {BAND_MARK}"
    return f"/{below:.3g} x{above:.3g} {BAND_MARK}"


def _involves(r, names):
    if not names:
        return True
    for sp, _ in (*r.reactants, *r.products):
        if sp.name in names or sp.base in names:
            return True
    return False


def _equation(r):
    def side(terms):
        return " + ".join((f"{c} " if c > 1 else "") + sp.name for sp, c in terms) or "0"
    return f"{side(r.reactants)} -> {side(r.products)}"


def cmd_reactions(args):
    check_output(args.csv, "--csv", inputs=[args.file])
    path = Path(args.file)
    is_scenario = path.suffix.lower() == ".toml"
    if is_scenario and args.temperature is not None:
        raise InputError("--temperature is for a reaction list; for a scenario use "
                         "--altitude KM", file="--temperature")
    if not is_scenario and args.altitude is not None:
        raise InputError("--altitude needs a scenario (*.toml); for a reaction list use "
                         "--temperature K", file="--altitude")
    wanted = set(args.species or ())
    if is_scenario:
        title, rows = _scenario_rows(args, wanted)
    else:
        title, rows = _list_rows(args, wanted)
    if not rows:
        raise InputError(f"no reaction involves {', '.join(sorted(wanted))}", file="--species")
    table = Table(["id", "equation", "k", "f", "ref"], align=["<", "<", ">", ">", "<"])
    shown = Table(table.header, align=table.align)
    for row in rows:
        table.add(*row)
        ref = row[-1] if len(row[-1]) <= REF_WIDTH else row[-1][:REF_WIDTH - 1] + "…"
        shown.add(*row[:-1], ref)
    print(title)
    print(shown.text())
    if any(row[3].endswith(BAND_MARK) for row in rows):
        print(f"f: the one-sigma factor `uncertainty` samples; '{BAND_MARK}' marks a rate "
              "table's band (k_low..k_high), which is sampled instead of the entry's f: "
              "/(k/k_low) below k, x(k_high/k) above")
    write_outputs(args, table=table)
    return 0


def _list_rows(args, wanted):
    import numpy as np

    from ionochem.mechanism.parser import parse_reaction_list
    rl = parse_reaction_list(args.file)
    T = 1000.0 if args.temperature is None else float(args.temperature)
    if not (np.isfinite(T) and 1.0 <= T <= 1e5):
        raise InputError("--temperature must lie between 1 and 100000 K", file="--temperature")
    t = np.array([T])
    rows = []
    for r in rl.reactions:
        if not _involves(r, wanted):
            continue
        env = {"Te": t, "Ti": t, "Tn": t, "Tv": t, "Teff": t}
        if r.level is not None:
            env["v"] = float(r.level)
        source = [s for s in SOURCES if s in r.k.variables]
        if source:
            k = f"({source[0]})"
        else:
            k = f"{float(np.ravel(r.k.evaluate(env))[0]):.3e}"
        f_expr = r.f if r.f is not None else rl.default_f
        f = "-" if f_expr is None else f"{float(np.ravel(f_expr.evaluate(env))[0]):.3g}"
        band = None if source else r.k.bands(env)
        if band is not None:
            f = band_factor(float(np.ravel(r.k.evaluate(env))[0]),
                            *(float(np.ravel(b)[0]) for b in band)) or f
        rows.append((r.id, _equation(r), k, f, r.ref or "-"))
    return f"{args.file}: rate coefficients at T = {T:g} K (cm3 s-1, s-1 or cm6 s-1)", rows


def _scenario_rows(args, wanted):
    import numpy as np

    import ionochem
    scen = ionochem.load_scenario(args.file)
    model = ionochem.Model(scen)
    print_warnings(model.warnings)
    alt = model.altitude_km
    target = 200.0 if args.altitude is None else float(args.altitude)
    if not (np.isfinite(target) and alt.min() - 1e-9 <= target <= alt.max() + 1e-9):
        raise InputError(f"{target:g} km is outside the grid {alt.min():g}-{alt.max():g} km",
                         file="--altitude")
    a = int(np.argmin(np.abs(alt - target)))
    k = model.rate_coefficients()[a]
    f = model.uncertainty_factors()[a]
    bands = model.rate_bands()
    rows = []
    for j, r in enumerate(model.reaction_objects):
        if _involves(r, wanted):
            shown = f"{f[j]:.3g}"
            if j in bands:
                shown = band_factor(k[j], float(bands[j][0][a]), float(bands[j][1][a])) or shown
            rows.append((r.id, _equation(r), f"{k[j]:.3e}", shown, r.ref or "-"))
    return (f"{scen.title}: rate coefficients at {alt[a]:g} km (Te {model.environment.Te[a]:.0f}"
            f" K, Ti {model.environment.Ti[a]:.0f} K, Tn {model.environment.Tn[a]:.0f} K; "
            "cm3 s-1, s-1 or cm6 s-1)", rows)
