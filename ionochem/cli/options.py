"""Option parsing and terminal output shared by the ``ionochem`` subcommands.

What every command needs and nothing below the command layer does: ``ID=VALUE`` options
(``--set``, ``--scale``), ``SPECIES@KM`` budgets, checks of output targets before any work,
loading a scenario into a model with command-line changes, and aligned tables on the
terminal (or CSV with ``--csv``). Errors are :class:`ionochem.InputError` naming the option.
"""

from __future__ import annotations

import csv
import os
import stat
import sys
from pathlib import Path

from ionochem.cli.steady_at import analysis_scenario
from ionochem.errors import InputError
from ionochem.species import parse_species_at

#: Heights of the printed tables, km *(common practice: the E, F1 and F2 regions)*.
DEFAULT_REPORT_KM = (100, 120, 150, 200, 250, 300, 400)

#: Figure formats the plots can write (matplotlib's raster and vector back-ends).
FIGURE_FORMATS = ("png", "pdf", "svg", "eps", "ps", "jpg", "jpeg", "tif", "tiff", "webp")


# ------------------------------------------------------------------ ID=VALUE options
def add_rate_change_options(parser, when=""):
    """Add ``--set ID=EXPR`` and ``--scale ID=F`` (repeatable) to a subcommand's parser;
    ``when`` completes their help ("before sampling", "at every point")."""
    tail = f" {when}" if when else ""
    parser.add_argument("--set", action="append", metavar="ID=EXPR",
                        help=f"replace the rate expression of a reaction{tail} (repeatable; "
                             "a family id changes every level; table paths resolve against "
                             "the working directory)")
    parser.add_argument("--scale", action="append", metavar="ID=F",
                        help=f"multiply a rate coefficient by F ≥ 0{tail} (repeatable; 0 "
                             "switches the reaction off)")


#: Help of ``--members``, the one option every analysis command uses to show the members of
#: a unit of analysis (family levels, tied branches) apart (ionochem.analysis.units).
MEMBERS_HELP = ("analyse the members of each unit (family levels, tied branches) one by one "
                "instead of the units (default: units first)")

def assignment_split(item):
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


def parse_assignments(items, what):
    """``["ID=VALUE", ...]`` of option ``--what`` → ``{ID: VALUE}`` (strings)."""
    out = {}
    for item in items or ():
        cut = assignment_split(item)
        if cut is None:
            raise InputError(f"{what} {item!r} must look like ID=VALUE", file=f"--{what}")
        key, value = item[:cut].strip(), item[cut + 1:].strip()
        if not key or not value:
            raise InputError(f"{what} {item!r} must look like ID=VALUE", file=f"--{what}")
        out[key] = value
    return out


def parse_scales(items):
    """``--scale ID=F`` options → ``{ID: F}``; F ≥ 0 (0 switches a reaction off)."""
    import numpy as np
    out = {}
    for key, value in parse_assignments(items, "scale").items():
        try:
            f = float(value)
        except ValueError:
            raise InputError(f"scale factor {value!r} for {key} is not a number",
                             file="--scale") from None
        if not np.isfinite(f) or f < 0:
            raise InputError(f"scale factor for {key} must be a finite number ≥ 0 "
                             "(0 switches the reaction off)", file="--scale")
        # The bounds of changes.scale in a scenario hold on the command line too.
        from ionochem.io.scenario.ranges import RANGES
        bound = RANGES["changes.scale"]
        if f > bound.hard[1]:
            raise InputError(f"scale factor {f:g} for {key} is above {bound.hard[1]:g}, the "
                             "bound of changes.scale in a scenario", file="--scale")
        if f and not bound.soft[0] <= f <= bound.soft[1]:
            import warnings
            warnings.warn(f"--scale: factor {f:g} for {key} is outside the usual "
                          f"{bound.soft[0]:g} to {bound.soft[1]:g} ({bound.basis})",
                          stacklevel=2)
        out[key] = f
    return out


def workers_option(text):
    """``--workers``: a whole number of processes (at least 1) or ``auto``."""
    import argparse
    if text.strip().lower() == "auto":
        return "auto"
    try:
        value = int(text)
    except ValueError:
        value = 0
    if value < 1:
        raise argparse.ArgumentTypeError(f"'{text}' is not a number of processes (a whole "
                                         "number of at least 1, or auto)")
    return value


def parse_budget(item):
    """``"N2+@200"`` → ``("N2+", 200.0)`` (:func:`ionochem.species.parse_species_at`, the
    one reader of ``SPECIES@KM``), refused as ``--budget: ...``."""
    try:
        return parse_species_at(item)
    except ValueError as exc:
        raise InputError(f"budget {exc}", file="--budget") from None


# ------------------------------------------------------------------ output targets
def check_output(path, flag, *, figure=False, inputs=()):
    """Refuse an output target before any work is done.

    The folder must exist and be writable; the target must not be a folder, a device or
    another non-regular file, nor one of the command's input files; a figure needs a
    format the plots can write. Returns the path (or ``None`` when not given).
    """
    if path is None:
        return None
    text = str(path)
    if not text.strip():
        raise InputError("an empty output path was given", file=flag)
    if "\0" in text:
        raise InputError("the output path contains a NUL character", file=flag)
    p = Path(text)
    if figure:
        suffix = p.suffix.lower().lstrip(".")
        if suffix not in FIGURE_FORMATS:
            raise InputError(f"figure format {p.suffix or '(none)'!r} is not supported; use "
                             f"one of {', '.join('.' + f for f in FIGURE_FORMATS)}",
                             file=text, key=flag)
    folder = p.parent if str(p.parent) else Path(".")
    try:
        if not folder.is_dir():
            raise InputError(f"output folder {folder} does not exist", file=text, key=flag)
        if not os.access(folder, os.W_OK | os.X_OK):
            raise InputError(f"output folder {folder} is not writable", file=text, key=flag)
        if p.exists() or p.is_symlink():
            st = p.stat()
            if stat.S_ISDIR(st.st_mode):
                raise InputError("the output path is a folder; give a file name", file=text,
                                 key=flag)
            if not stat.S_ISREG(st.st_mode):
                raise InputError("the output path is not a regular file (a device, pipe or "
                                 "socket); refusing to replace it", file=text, key=flag)
            for other in inputs:
                if other is not None and _same_file(p, other):
                    raise InputError(f"the output would overwrite the input file {other}",
                                     file=text, key=flag)
    except OSError as exc:
        raise InputError(f"output path cannot be used: {exc.strerror or exc}", file=text,
                         key=flag) from None
    return text


def _same_file(a, b):
    try:
        return os.path.samefile(a, b)
    except OSError:
        return False


def check_outputs(args, *, inputs=()):
    """Check ``-o``, ``--plot`` and ``--csv`` of ``args`` before any work.

    Each target passes :func:`check_output` and no two of them (nor any of ``inputs``) name
    the same file.
    """
    targets = [(flag, getattr(args, attr, None)) for flag, attr in
               (("-o", "output"), ("--plot", "plot"), ("--csv", "csv"))]
    for flag, path in targets:
        check_output(path, flag, figure=flag == "--plot", inputs=inputs)
    given = [(flag, path) for flag, path in targets if path]
    for i, (flag_a, a) in enumerate(given):
        for flag_b, b in given[i + 1:]:
            if _resolved(a) == _resolved(b):
                raise InputError(f"{flag_a} and {flag_b} name the same file", file=a)


#: Output targets a command may have: attribute of the parsed arguments → option.
OUTPUT_OPTIONS = {"output": "-o", "plot": "--plot", "plot_levels": "--plot-levels",
                  "csv": "--csv", "table": "--table", "write_entry": "--write-entry"}
#: Input files a command may name: attribute → option (a positional's metavar-like name).
INPUT_OPTIONS = {"scenario": "SCENARIO", "observed": "--observed", "measured": "--measured",
                 "sigma": "SIGMA.csv", "rates": "RATES.csv", "signals": "SIGNALS.csv",
                 "design": "--design", "file": "FILE", "reactions": "--reactions"}


def check_targets(args):
    """Refuse, before any work, two output options naming one file, or an output naming
    one of the command's input files (``-o`` equal to ``--observed``, ``--plot`` equal to
    ``--plot-levels``), whatever the command.

    Every command's arguments pass here (``ionochem.cli.main``), so a new option named in
    :data:`OUTPUT_OPTIONS` or :data:`INPUT_OPTIONS` is covered without a check of its own;
    the commands still check the files a scenario names once it is loaded.
    """
    outputs = []
    for attr, flag in OUTPUT_OPTIONS.items():
        value = getattr(args, attr, None)
        if isinstance(value, (str, os.PathLike)) and str(value).strip():
            outputs.append((flag, str(value)))
    inputs = []
    for attr, flag in INPUT_OPTIONS.items():
        value = getattr(args, attr, None)
        for item in value if isinstance(value, (list, tuple)) else [value]:
            if isinstance(item, (str, os.PathLike)) and str(item).strip():
                inputs.append((flag, str(item)))
    for i, (flag_a, a) in enumerate(outputs):
        if "\0" in a:
            continue                    # check_output names it
        for flag_b, b in outputs[i + 1:]:
            if "\0" not in b and _resolved(a) == _resolved(b):
                raise InputError(f"{flag_a} and {flag_b} name the same file", file=a)
        for flag_b, b in inputs:
            if "\0" not in b and (_resolved(a) == _resolved(b) or _same_file(a, b)):
                raise InputError(f"the output would overwrite the input file {b} "
                                 f"({flag_b}); choose another name", file=a, key=flag_a)


def _resolved(path):
    try:
        return Path(path).resolve()
    except (OSError, RuntimeError, ValueError):
        return Path(path).absolute()


def scenario_inputs(scenario):
    """Files a scenario reads (to keep outputs from overwriting them)."""
    out = [scenario.source, scenario.reactions]
    for value in vars(scenario).values():
        for attr in ("table", "no_table", "spectrum", "extra_spectrum", "electron_table"):
            path = getattr(value, attr, None)
            if path:
                out.append(path)
    return out


# ------------------------------------------------------------------ models
def load_model(args, *, command=None, replacements=(), additions=(), log=None):
    """Scenario and model of ``args.scenario`` with ``--set``/``--scale`` (and replacement
    or added entries, already parsed) applied, the command line taking precedence over the
    scenario's ``[changes]`` (:mod:`ionochem.analysis.changes`); ``log`` receives where
    each change came from. With ``command`` (an analysis of a steady state) a transient
    scenario needs ``--steady-at`` (:mod:`ionochem.cli.steady_at`).

    Table paths inside ``--set`` expressions resolve against the working directory.
    """
    import ionochem
    if command is None:
        scen = ionochem.load_scenario(args.scenario)
    else:
        scen = analysis_scenario(args, command)
    model = ionochem.Model(scen)
    sets = parse_assignments(getattr(args, "set", None), "set")
    scales = parse_scales(getattr(args, "scale", None))
    if sets or scales or replacements or additions:
        from ionochem.analysis.compare import changed_model
        model = changed_model(model, set_dict=sets, scale=scales, replacements=replacements,
                              additions=additions, base_dir=Path.cwd(), log=log)
    return scen, model


def result_species(model):
    """``(names, roles)`` of the species a result of ``model`` reports (solved, electrons,
    fixed neutrals, derived totals), known before any solve: for checks of ``--species``,
    ``--budget`` and ``--observed`` before the work starts."""
    import numpy as np
    _, names, roles = model.species_table(np.zeros((model.altitude_km.size,
                                                   len(model.species))))
    return list(names), list(roles)


def check_budgets(budgets, model):
    """Refuse, before the solve, a ``--budget SPECIES@KM`` whose species the result will not
    have or whose altitude is off the grid."""
    names, _ = result_species(model)
    alt = model.altitude_km
    for name, km in budgets:
        if name not in names:
            raise InputError(f"no species {name!r} in the result (species: "
                             f"{', '.join(names)})", file="--budget")
        if not alt.min() - 1e-9 <= km <= alt.max() + 1e-9:
            raise InputError(f"{km:g} km is outside the grid {alt.min():g}-{alt.max():g} km",
                             file="--budget")


def check_observed(observed, model):
    """Refuse, before the solve, observations of species the result will not have or at
    heights off the grid (:func:`ionochem.io.observations.check_against_model`)."""
    if observed is not None:
        from ionochem.io.observations import check_against_model
        check_against_model(observed, result_species(model)[0], model.altitude_km)


def stamp_history(ds, args):
    """Record the command line that made ``ds`` in its CF ``history`` attribute."""
    import datetime as dt
    when = dt.datetime.now(dt.UTC).isoformat(timespec="seconds")
    ds.attrs["history"] = f"{when} {getattr(args, 'command_line', 'ionochem')}"
    return ds


def write_outputs(args, ds=None, table=None):
    """Write the printed ``table`` to ``--csv`` and ``ds`` to ``-o`` (each atomically, when
    given) and say so; the targets were checked before any work by :func:`check_outputs`."""
    if table is not None and getattr(args, "csv", None):
        table.write_csv(args.csv)
        print(f"wrote {args.csv}")
    if ds is not None and getattr(args, "output", None):
        from ionochem.io.netcdf import write_netcdf
        write_netcdf(ds, args.output)
        print(f"wrote {args.output}")


def print_warnings(warnings, prefix="warning"):
    for w in warnings:
        print(f"{prefix}: {w}", file=sys.stderr)


# ------------------------------------------------------------------ tables
def report_altitudes(altitude_km, wanted=DEFAULT_REPORT_KM):
    """Grid altitudes nearest the ``wanted`` heights inside the grid (km, sorted)."""
    import numpy as np
    alt = np.asarray(altitude_km, float)
    rows = sorted({float(alt[np.argmin(np.abs(alt - a))]) for a in wanted
                   if alt.min() - 1e-9 <= a <= alt.max() + 1e-9})
    if not rows:
        rows = sorted({float(alt[0]), float(alt[len(alt) // 2]), float(alt[-1])})
    return rows



def fmt_value(v, width=11):
    """A density or rate for the terminal: 3 significant digits; below 1e-30 is shown as 0."""
    import numpy as np
    v = float(v)
    if np.isfinite(v) and abs(v) < 1e-30:
        v = 0.0
    return f"{v:{width}.3e}"


class Table:
    """Rows of cells printed aligned (columns as wide as their longest cell) or as CSV."""

    def __init__(self, header, align=None):
        self.header = [str(h) for h in header]
        self.rows = []
        self.align = align or [">"] * len(self.header)

    def add(self, *cells):
        self.rows.append([str(c) for c in cells])

    def text(self, indent="  "):
        widths = [max(len(r[i]) for r in [self.header, *self.rows])
                  for i in range(len(self.header))]
        lines = []
        for row in [self.header, *self.rows]:
            cells = [f"{c:{a}{w}}" for c, a, w in zip(row, self.align, widths)]
            lines.append(indent + "  ".join(cells).rstrip())
        return "\n".join(lines)

    def write_csv(self, path):
        from ionochem.io.netcdf import atomic_path
        with atomic_path(path) as tmp, open(tmp, "w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh)
            w.writerow(self.header)
            w.writerows([c.strip() for c in r] for r in self.rows)
