"""Up-front estimates of a command's work and memory, refused beyond documented bounds.

A transient run over ``times_s = [0, 1e9]`` would integrate for days and an ensemble of
``--samples 1000000000`` would never finish nor fit in memory. Before any work the commands
estimate both and refuse, naming the option and the bound, unless ``--allow-long`` is given.
Memory has a ceiling that ``--allow-long`` does not lift. The bounds (docs/scenario.md, "Long
runs") are round numbers *(common practice)*: a transient run of two simulated days takes a
few minutes on one core for a 200-row column, an ensemble of two million altitude-row solves a
few minutes as well.
"""

from __future__ import annotations

from ionochem.errors import InputError

#: Longest simulated span of a transient run without --allow-long (s): two days.
MAX_TRANSIENT_SPAN_S = 2 * 86400.0
#: Most altitude-row solves (samples × model runs per sample × rows) without --allow-long.
MAX_ROW_SOLVES = 2_000_000
#: The old name, still imported by cli/sweep.py (issue 25 renames its use).
MAX_LEVEL_SOLVES = MAX_ROW_SOLVES
#: Ceiling of the estimated memory of the results (bytes), --allow-long or not.
MAX_RESULT_BYTES = 4 * 1024 ** 3


def _gib(n):
    return f"{n / 1024 ** 3:.1f} GiB"


def check_transient(scenario, n_species, n_reactions, *, allow_long=False):
    """Refuse a transient run whose span or output is beyond the bounds.

    Parameters
    ----------
    scenario : Scenario
        With ``solve.times_s`` (s) and the grid.
    n_species, n_reactions : int
        Sizes of the mechanism (species and reactions stored per output time).
    allow_long : bool
        ``--allow-long``: lift the span bound (not the memory ceiling).
    """
    times = scenario.solve.times_s or ()
    if not times:
        return
    span = float(times[-1])
    rows = len(scenario.grid.altitude_km)
    # density, production, loss (species) and rate coefficients and rates (reactions),
    # float64, per output time and altitude row; times three for the copies made while writing.
    nbytes = 3 * 8 * len(times) * rows * (3 * n_species + 2 * n_reactions)
    if nbytes > MAX_RESULT_BYTES:
        raise InputError(f"{len(times)} output times × {rows} altitude rows would need about "
                         f"{_gib(nbytes)} of memory, above the {_gib(MAX_RESULT_BYTES)} "
                         "ceiling; give fewer output times or altitude rows",
                         file=scenario.source, key="solve.times_s")
    if span > MAX_TRANSIENT_SPAN_S and not allow_long:
        raise InputError(f"the run spans {span:g} s ({span / 86400:.3g} days), beyond the "
                         f"{MAX_TRANSIENT_SPAN_S:g} s (2 days) a transient run may take "
                         "without --allow-long (the solar and geomagnetic indices stay those "
                         "of the scenario's day, so long spans are rarely meant)",
                         file=scenario.source, key="solve.times_s")


def check_ensemble(samples, runs_per_sample, rows, n_species, n_reactions, *,
                   allow_long=False):
    """Refuse an ensemble whose work or memory is beyond the bounds (``--samples``)."""
    solves = samples * runs_per_sample * rows
    nbytes = 8 * samples * runs_per_sample * rows * (n_species + n_reactions)
    if nbytes > MAX_RESULT_BYTES:
        raise InputError(f"{samples} samples would need about {_gib(nbytes)} of memory, above "
                         f"the {_gib(MAX_RESULT_BYTES)} ceiling; use fewer samples or "
                         "altitude rows",
                         file="--samples")
    if solves > MAX_ROW_SOLVES and not allow_long:
        raise InputError(f"{samples} samples mean {solves:.3g} altitude-row solves, beyond the "
                         f"{MAX_ROW_SOLVES:.0e} allowed without --allow-long; use fewer "
                         "samples or add --allow-long", file="--samples")


#: Fewest samples that give a meaningful answer, per method *(common practice)*: a Monte
#: Carlo 68 % band from fewer than 30 draws is itself uncertain by more than 15 %; Saltelli's
#: Sobol' estimators scatter by tens of percent below a base sample of 64 (SALib's examples
#: use 1024); Morris screening needs at least 4 trajectories (Campolongo et al. 2007 use 10).
MEANINGFUL_SAMPLES = {"montecarlo": 30, "sobol": 64, "morris": 4}
#: Largest plausible one-sigma factor of an environment spread (--vary-environment): the
#: solar EUV is uncertain by some 20-30 %, temperatures by some 10 % *(common practice)*;
#: a factor of 5 or more is usually a percentage written as a factor (20 for 20 %).
MAX_PLAUSIBLE_SPREAD = 5.0


def sample_warnings(method, samples, spreads=None):
    """Warnings for settings that run but mean little (``--samples``, ``--vary-environment``).

    Returns a list of str (empty when the settings are sound).
    """
    out = []
    least = MEANINGFUL_SAMPLES.get(method)
    if least is not None and samples < least:
        what = {"montecarlo": "Monte Carlo samples", "sobol": "Sobol' base samples",
                "morris": "Morris trajectories"}[method]
        out.append(f"--samples: {samples} {what} give a meaningless answer; use at least "
                   f"{least}")
    for name, factor in (spreads or {}).items():
        if factor >= MAX_PLAUSIBLE_SPREAD:
            out.append(f"--vary-environment: {name}={factor:g} is a one-sigma factor (x/ "
                       f"{factor:g}), not a percentage; {name}=1.2 means 20 %")
    return out
