"""``ionochem rates table``: a tabulated per-level rate table into the reaction list, as is.

A laboratory or theory group often has k(T) per vibrational level already tabulated (no
cross sections, no wish to fit a form). This job reads that table in either layout

- **wide**: a temperature column (``Te_K``, ``Ti_K``, ``Tn_K``, ``Teff_K`` or ``T_K``), then
  one rate column per level named by its level (``v0``, ``k_v1``, ``v=2``), each with
  optional ``<col>_low``/``<col>_high`` (a one-sigma band) or ``<col>_sigma`` columns;
- **long**: ``v``, a temperature column, one rate column (``k``) and optional
  ``k_low``/``k_high`` or ``k_sigma`` (the level-row layout itself),

checks it, and writes the level-row rate table (docs/reaction-list.md, "Level-row
tables") and the family entries that read it, with ``f`` from the table's band and the
user's own source (``--ref``) in ``ref``, so that they pass ``ionochem check --strict``.

A ``_sigma`` column (an absolute one-sigma error s) becomes the band k/(1 + s/k) ..
k (1 + s/k), a log-symmetric one-sigma range of the same relative width. Without any band,
``--f F`` gives the one-sigma factor. The shared entry writer (:func:`emit_entries`) also
serves ``rates fit`` and ``rates maxwellian --fit``.
"""

from __future__ import annotations

import sys
from pathlib import Path

from ionochem.cli.options import check_output
from ionochem.cli.rates_inputs import (
    TEMP_HEADER,
    check_fit_outputs,
    check_non_negative,
    column_levels,
    entry_specs,
    read_rates,
)
from ionochem.errors import InputError


def register(sub):
    """Add ``rates table`` to the ``rates`` job parsers."""
    t = sub.add_parser("table", help="a tabulated per-level k(T) table (wide or long CSV) to a "
                                     "level-row rate table and its reaction-list entries, "
                                     "without a fit")
    t.add_argument("rates", metavar="RATES.csv",
                   help="wide: a temperature column, then one k column (cm3 s-1) per level "
                        "(v0, v1, ...), optional <col>_low/<col>_high or <col>_sigma; long: "
                        "v, a temperature column, k, optional k_low/k_high or k_sigma")
    t.add_argument("-o", "--output", required=True, metavar="TABLE.csv",
                   help="the level-row rate table to write")
    add_entry_options(t)
    t.add_argument("--f", type=float, metavar="F", dest="f_factor",
                   help="one-sigma factor of the rates when the table has no band columns")
    t.set_defaults(func=cmd_table)


def add_entry_options(p, *, with_ref=True):
    """``--entry``, ``--reaction``, ``--fraction``, ``--write-entry`` (and ``--ref``)."""
    p.add_argument("--entry", metavar="ID", action="append",
                   help="reaction id of the printed family entry (repeatable: one entry per "
                        "product channel)")
    p.add_argument("--reaction", metavar="TEXT", action="append",
                   help="the reaction of the entry, e.g. 'N2+(v) + e -> N + N' (one per "
                        "--entry)")
    p.add_argument("--fraction", metavar="F", action="append", type=float,
                   help="branching fraction of the entry's channel: k = F*table(...) (one "
                        "per --entry)")
    p.add_argument("--write-entry", metavar="FILE.reactions",
                   help="also write the entries to a reaction-list file (for compare "
                        "--reactions)")
    if with_ref:
        add_ref_option(p)


def add_ref_option(p):
    p.add_argument("--ref", metavar="TEXT",
                   help="the data's own source (authors, year, journal or 'unpublished, "
                        "group, date'), written into the entries' ref")


# ------------------------------------------------------------------ reading
def _long(table):
    """Per-level data of a long (level-row) table."""
    import numpy as np

    if len(table.header) < 3 or not TEMP_HEADER.fullmatch(table.header[1]):
        table.fail("a long table has the columns v, a temperature (Te_K, Ti_K, Tn_K, Teff_K "
                   "or T_K), then the rate k")
    tcol = table.header[1]
    rest = table.header[2:]
    main = [h for h in rest if not h.endswith(("_low", "_high", "_sigma"))]
    if len(main) != 1:
        table.fail(f"a long table holds one rate column, found {', '.join(main) or 'none'}")
    col = main[0]
    extra = sorted(set(rest) - {col, f"{col}_low", f"{col}_high", f"{col}_sigma"})
    if extra:
        table.fail(f"column '{extra[0]}' is not {col}_low, {col}_high or {col}_sigma")
    if (f"{col}_low" in rest) != (f"{col}_high" in rest):
        table.fail(f"{col}_low and {col}_high go together")
    v = table["v"]
    bad = (v != np.round(v)) | (v < 0)
    if bad.any():
        table.fail(f"v = {v[bad][0]:g} is not a whole level number ≥ 0",
                   row=int(np.argmax(bad)))
    check_non_negative(table, [tcol, col] + [h for h in rest if h != col], positive=True)
    data = {}
    for level in sorted({int(x) for x in v}):
        rows = np.flatnonzero(v == level)
        T = table[tcol][rows]
        steps = np.diff(T)
        if rows.size < 2 or (steps <= 0).any():
            table.fail(f"level {level} needs at least two rows with strictly increasing "
                       "temperatures", row=int(rows[0]))
        entry = {"T": T, "k": table[col][rows], "low": None, "high": None,
                 "sigma": None, "rows": rows}
        if f"{col}_low" in rest:
            entry["low"], entry["high"] = table[f"{col}_low"][rows], table[f"{col}_high"][rows]
        if f"{col}_sigma" in rest:
            entry["sigma"] = table[f"{col}_sigma"][rows]
        data[level] = entry
    return tcol, data


def _wide(path):
    """Per-level data of a wide table (the layout ``rates fit`` reads)."""
    import numpy as np

    T, tcol, main, rates, errors, bands, table = read_rates(path)
    levels = column_levels(table, main)
    data = {}
    for c, level in zip(main, levels):
        low, high = bands.get(c, (None, None))
        data[int(level)] = {"T": T, "k": rates[c], "low": low, "high": high,
                            "sigma": errors.get(c), "rows": np.arange(T.size)}
    return tcol, table, data


def read_level_rates(path):
    """``(temperature column, table, {v: {"T", "k", "low", "high"}})`` of a wide or long
    per-level rate table, bands made from ``_sigma`` columns and checked to hold k."""
    import numpy as np

    from ionochem.rates.tables import read_numeric_csv
    head = read_numeric_csv(path, min_rows=2)
    if head.header[0] == "v":
        tcol, data = _long(head)
        table = head
    else:
        tcol, table, data = _wide(path)
    for level, d in data.items():
        if d["low"] is None and d["sigma"] is not None:
            rel = 1.0 + d["sigma"] / d["k"]
            d["low"], d["high"] = d["k"] / rel, d["k"] * rel
        if d["low"] is not None:
            wrong = (d["low"] > d["k"]) | (d["high"] < d["k"])
            if wrong.any():
                table.fail(f"level {level}: the band must contain k",
                           row=int(d["rows"][int(np.argmax(wrong))]))
    banded = {d["low"] is not None for d in data.values()}
    if len(banded) > 1:
        table.fail("some levels have a band and others not; give every level its band (or "
                   "none, with --f)")
    return ("Te_K" if tcol == "T_K" else tcol), table, data


# ------------------------------------------------------------------ writing
def write_level_rows(path, tcol, data, comments):
    """The level-row table ``v, <tcol>, k[, k_low, k_high]``, levels in order."""
    import numpy as np

    from ionochem.rates.tables import write_csv
    banded = all(d["low"] is not None for d in data.values())
    header = ["v", tcol, "k", *(["k_low", "k_high"] if banded else [])]
    parts = [[] for _ in header]
    for level in sorted(data):
        d = data[level]
        cols = [np.full(d["T"].size, int(level)), d["T"], d["k"]]
        if banded:
            cols += [d["low"], d["high"]]
        for acc, col in zip(parts, cols):
            acc.extend(col.tolist())
    parts[0] = [int(x) for x in parts[0]]
    return write_csv(path, header, parts, comments)


def entry_ref(user_ref, what):
    """The ``ref`` of written entries: the user's source first, then how the table came."""
    return f"{user_ref}; {what}" if user_ref else what


def emit_entries(args, target, levels, *, ref, f):
    """Print the family entries reading ``target`` (and write them with --write-entry)."""
    from ionochem.io.netcdf import atomic_write_bytes
    from ionochem.rates.tables import family_entry
    entries = entry_specs(args)
    given = [x for _, _, x in entries if x is not None]
    if given and abs(sum(given) - 1.0) > 1e-6:
        print(f"note: the branching fractions sum to {sum(given):.6g}, not 1", file=sys.stderr)

    def lines(table_name):
        return [family_entry(rid, reaction, table_name, list(levels), ref=ref, fraction=frac,
                             f=f) for rid, reaction, frac in entries]

    if args.write_entry:
        rel = Path(target).resolve()
        folder = Path(args.write_entry).resolve().parent
        try:
            name = str(rel.relative_to(folder))
        except ValueError:
            name = str(rel)
        text = "".join(f"{line}\n" for line in lines(name))
        atomic_write_bytes(args.write_entry,
                           (f"# written by ionochem rates from {Path(args.source).name}\n"
                            + text).encode())
        print(f"wrote {args.write_entry}")
    print("reaction-list entr" + ("ies" if len(entries) > 1 else "y")
          + " (the table path resolves against the reaction file's folder):")
    for line in lines(Path(target).name):
        print(f"  {line}")
    if not args.reaction:
        print("note: give --entry ID and --reaction 'N2+(v) + e -> N + N' (your reaction; "
              "repeat both, with --fraction F, for several product channels)")
    if not getattr(args, "ref", None):
        print("note: give --ref 'your source' to put the data's own source into the entries' "
              "ref")


def cmd_table(args):
    """``ionochem rates table``: returns 0."""
    import numpy as np

    from ionochem.rates.tables import band_f_expression, check_ref
    args.form, args.table, args.source = "table", args.output, args.rates
    check_fit_outputs(args, inputs=[args.rates])
    ref = check_ref(args.ref)
    tcol, _, data = read_level_rates(args.rates)
    banded = all(d["low"] is not None for d in data.values())
    if args.f_factor is not None:
        if banded:
            raise InputError("the table's band gives the uncertainty (f is taken from it); "
                             "drop --f or the band columns", file="--f")
        if not (np.isfinite(args.f_factor) and args.f_factor >= 1):
            raise InputError("the one-sigma factor must be a number ≥ 1", file="--f")
        f = f"{args.f_factor:g}"
    elif banded:
        f = band_f_expression({v: (d["k"], d["low"], d["high"]) for v, d in data.items()})
    else:
        raise InputError("the table has no band (<col>_low/<col>_high or <col>_sigma "
                         "columns): give --f F, the one-sigma factor of these rates, so the "
                         "entries carry their uncertainty", file=args.rates)
    source = Path(args.rates).name
    what = f"tabulated in {source}, written as level-row table {Path(args.output).name} by " \
           "ionochem rates table"
    write_level_rows(args.output, tcol, data, [
        f"level-row rate table (cm3 s-1) from {source}, written by ionochem rates table",
        f"source: {ref}" if ref else "source: not given (rates table --ref)",
        "band: " + ("the file's band (_low/_high, or k(1 +- sigma/k) from _sigma)" if banded
                    else f"none; one-sigma factor {f} (--f)")])
    lv = sorted(data)
    T_all = np.concatenate([d["T"] for d in data.values()])
    print(f"{args.rates}: {len(lv)} level(s) v = {lv[0]}..{lv[-1]}, {tcol} "
          f"{T_all.min():g}..{T_all.max():g} K; one-sigma factor f = {f}")
    print(f"wrote {args.output}")
    check_output(args.write_entry, "--write-entry", inputs=[args.rates])
    emit_entries(args, args.output, lv, ref=entry_ref(ref, what), f=f)
    return 0
