"""The ``--steady-at SECONDS`` option of the analyses that work on a steady state.

``compare``, ``rank``, ``uncertainty`` and ``fit`` analyse a steady state (exact
sensitivities, ensembles of steady columns). A transient scenario (``[solve] mode =
"transient"``) describes a column through time instead; analysing its steady state at the
start time would answer for another moment than the one the scenario is about (a
"midnight" run whose start is in the afternoon). So these commands refuse a transient
scenario unless ``--steady-at SECONDS`` names the moment: the steady state with the sun,
neutrals and temperatures at ``[time] utc`` + SECONDS. That is the column in photochemical
(or, with ``[transport]``, transport) equilibrium at that moment — not the transient
column, which remembers the hours before (after sunset, O+ decays for hours while its
steady state at night is far lower): compare it with ``ionochem run`` at that time before
trusting it where lifetimes are long.
"""

from __future__ import annotations

import copy
import datetime as dt
import math

from ionochem.errors import InputError, ScenarioError


def add_steady_at_option(parser):
    """Add ``--steady-at SECONDS`` to an analysis command's parser."""
    parser.add_argument("--steady-at", type=float, metavar="SECONDS", dest="steady_at",
                        help="for a transient scenario: analyse the steady state with the "
                             "sun at SECONDS after its [time] utc (e.g. one of its times_s); "
                             "without it a transient scenario is refused")


def analysis_scenario(args, command):
    """The scenario of ``args.scenario`` as the analysis ``command`` works on it: a steady
    scenario as it is; a transient one only with ``--steady-at`` (then its steady state at
    that moment), else refused with a message that says how to ask for a time."""
    import ionochem
    scen = ionochem.load_scenario(args.scenario)
    at = getattr(args, "steady_at", None)
    if scen.solve.mode == "steady":
        if at is not None:
            raise InputError("the scenario is steady already (its moment is [time] utc); "
                             "--steady-at is for transient scenarios", file="--steady-at")
        return scen
    if at is None:
        start = f" after {scen.time.utc.isoformat()}" if scen.time is not None else ""
        if scen.solve.mode == "diurnal":
            span = f"{scen.solve.days} day(s) from local midnight"
            last, which = 0.0, "the scenario's moment [time] utc"
        else:
            times = scen.solve.times_s or (0.0,)
            span = f"output times {times[0]:g} to {times[-1]:g} s{start}"
            last, which = times[-1], "the last output time"
        raise ScenarioError(
            f"is {scen.solve.mode!r} ({span}), and "
            f"{command} analyses a steady state: it does not follow the run through time. "
            f"Give --steady-at SECONDS for the steady state at that moment (e.g. "
            f"--steady-at {last:g} for {which}), or use `ionochem run` "
            "for the column through time", file=scen.source, key="solve.mode")
    return steady_at(scen, at)


def steady_at(scen, seconds):
    """The steady scenario of a transient one at ``[time] utc`` + ``seconds``."""
    from ionochem.io.scenario import scenario_from_dict
    if not (math.isfinite(seconds) and seconds >= 0):
        raise InputError(f"{seconds:g} is not a time of the run (seconds ≥ 0 after [time] "
                         "utc)", file="--steady-at")
    raw = copy.deepcopy(scen.raw)
    solve = raw.setdefault("solve", {})
    solve["mode"] = "steady"
    for key in ("times_s", "start", "days", "step_minutes"):
        solve.pop(key, None)
    when = ""
    if scen.time is not None:
        utc = scen.time.utc + dt.timedelta(seconds=float(seconds))
        raw.setdefault("time", {})["utc"] = utc
        when = f", {utc.isoformat()}"
    raw["title"] = f"{scen.title} (steady state at t = {seconds:g} s{when})"
    return scenario_from_dict(raw, path=scen.path, base_dir=scen.base_dir)
