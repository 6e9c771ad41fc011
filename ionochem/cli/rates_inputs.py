"""Option values and input files of ``ionochem rates``: temperature and detuning ranges,
the toolkit's CSV files (cross sections, k(T) columns, measured curves, level signals) with
their checks, and the checks of the entry options (``--entry``, ``--reaction``,
``--fraction``, ``--table``, ``--write-entry``) made before any work.

Shared by :mod:`ionochem.cli.rates` and :mod:`ionochem.cli.rates_table`; a bad file is
reported as ``file:line: message`` by the table reader of :mod:`ionochem.rates.tables`.
"""

from __future__ import annotations

import re
from pathlib import Path

from ionochem.cli.options import check_output
from ionochem.errors import InputError

#: Header of the temperature column of a k(T) table.
TEMP_HEADER = re.compile(r"(Te|Ti|Tn|Teff|T)(_K)?")
_MAX_POINTS = 1_000_000
#: Columns of a k(T) table that are read by other tools and ignored here.
IGNORED_COLUMNS = ("missing_weight",)


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


def column_levels(table, names):
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


def check_non_negative(table, cols, positive=False):
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
    check_non_negative(t, t.header)
    for c, (lo, hi) in bands.items():
        wrong = (lo > t[c]) | (hi < t[c])
        if wrong.any():
            t.fail(f"the band {c}_low .. {c}_high must contain {c}", row=int(np.argmax(wrong)))
    return t["energy_eV"], main, {c: t[c] for c in main}, bands, t


def relabel(exc, path):
    """A library InputError (no file) re-raised at the input file."""
    return InputError(exc.message, file=exc.file or path, line=exc.line)


def check_fit_outputs(args, inputs):
    if not args.form:
        for flag in ("table", "entry", "reaction", "fraction", "write_entry"):
            if getattr(args, flag, None):
                raise InputError(f"--{flag.replace('_', '-')} needs --fit FORM",
                                 file=f"--{flag.replace('_', '-')}")
        return
    entry_specs(args)
    target = table_target(args)
    check_output(target, "--table", inputs=inputs)
    check_output(args.write_entry, "--write-entry", inputs=inputs)
    if args.write_entry and not args.reaction:
        raise InputError("--write-entry needs --reaction TEXT (the reaction of the entry)",
                         file="--write-entry")
    if args.write_entry and not target:
        raise InputError("--write-entry needs a table to refer to (--table or -o)",
                         file="--write-entry")


def entry_specs(args):
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


def table_target(args):
    if getattr(args, "table", None):
        return args.table
    if getattr(args, "rates_command", None) == "fit":
        return args.output
    if args.output:
        p = Path(args.output)
        return str(p.with_name(p.stem + "_table" + (p.suffix or ".csv")))
    return None


def read_rates(path):
    """RATES.csv → (T, temperature column name for tables, main, rates, errors, bands, table)."""
    from ionochem.rates.tables import read_numeric_csv
    t = read_numeric_csv(path, min_rows=2)
    m = TEMP_HEADER.fullmatch(t.header[0])
    if not m:
        t.fail(f"the first column must be the temperature (Te_K, Ti_K, Tn_K, Teff_K or "
               f"T_K), found '{t.header[0]}'")
    var = "Te" if m.group(1) == "T" else m.group(1)
    main, bands, errors = _columns(t, skip=IGNORED_COLUMNS)
    _increasing(t, t.header[0], "temperatures")
    band_cols = [f"{c}_{s}" for c in bands for s in ("low", "high")]
    check_non_negative(t, [t.header[0], *main, *band_cols, *[f"{c}_sigma" for c in errors]],
                       positive=True)
    return t[t.header[0]], f"{var}_K", main, {c: t[c] for c in main}, errors, bands, t


def read_measured(path):
    """CURVE.csv → (detuning_eV, rate_cm3_s, sigma_cm3_s or None)."""
    from ionochem.rates.tables import read_numeric_csv
    t = read_numeric_csv(path, first="detuning_eV", required=("rate_cm3_s",), min_rows=1)
    check_non_negative(t, ["detuning_eV"])
    check_non_negative(t, ["rate_cm3_s"])
    s = None
    if "sigma_cm3_s" in t.header:
        check_non_negative(t, ["sigma_cm3_s"], positive=True)
        s = t["sigma_cm3_s"]
    return t["detuning_eV"], t["rate_cm3_s"], s


def channels_of(table):
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
