"""Shared helpers: write small synthetic columns (invented test data) to a temporary folder."""

from __future__ import annotations

import numpy as np
import pytest


def _csv(path, header, rows):
    lines = [",".join(header)] + [",".join(f"{v:.17g}" for v in row) for row in rows]
    path.write_text("\n".join(lines) + "\n")


@pytest.fixture
def column(tmp_path):
    """Factory writing a tabulated scenario; returns the scenario path.

    ``column(reactions, altitudes, neutrals={name: array}, Tn=..., Te=..., Ti=...,
    production={reaction id: array}, extra="toml text")``. Values are invented test inputs.
    """
    return make_column(tmp_path)


def make_column(tmp_path):
    """The factory of the ``column`` fixture, writing into ``tmp_path`` (for fixtures of a
    wider scope)."""

    def make(reactions, altitudes, *, neutrals, Tn, Te=None, Ti=None, production=None,
             extra="", name="s"):
        alt = np.asarray(altitudes, float)
        (tmp_path / f"{name}.reactions").write_text(reactions)
        names = list(neutrals)
        _csv(tmp_path / f"{name}_neutrals.csv", ["altitude_km", *names, "Tn_K"],
             np.column_stack([alt, *[np.broadcast_to(neutrals[n], alt.shape) for n in names],
                              np.broadcast_to(Tn, alt.shape)]))
        Te = Tn if Te is None else Te
        Ti = Tn if Ti is None else Ti
        _csv(tmp_path / f"{name}_temps.csv", ["altitude_km", "Te_K", "Ti_K"],
             np.column_stack([alt, np.broadcast_to(Te, alt.shape),
                              np.broadcast_to(Ti, alt.shape)]))
        toml = [f'title = "synthetic test column {name}"', f'reactions = "{name}.reactions"',
                "[grid]", f"altitude_km = {list(map(float, alt))}",
                "[neutrals]", 'model = "table"', f'table = "{name}_neutrals.csv"',
                "[temperatures]", 'electron = "table"', 'ion = "table"',
                f'table = "{name}_temps.csv"']
        if production:
            ids = list(production)
            _csv(tmp_path / f"{name}_prod.csv", ["altitude_km", *ids],
                 np.column_stack([alt, *[np.broadcast_to(production[i], alt.shape)
                                         for i in ids]]))
            toml += ["[production]", f'table = "{name}_prod.csv"']
        path = tmp_path / f"{name}.toml"
        path.write_text("\n".join(toml) + "\n" + extra)
        return path

    return make


# ----------------------------------------------------------------------------- time budget
# A change that makes the suite much slower (a solver that needs ten times the iterations, a
# fuzz test with ten times the examples) must be noticed. Wall-clock time is useless for that
# on a shared machine (the same suite takes 1 to 4 minutes depending on the neighbours), so
# the budget is on the CPU time of the pytest process (time.process_time: all its threads,
# not its subprocesses), which the load of other processes barely changes. The limits leave
# room for a slower CI machine and for BLAS threads that spin on a many-core one: about
# five times the CPU time measured when they were last set (about 170 s for the session and
# 25 s for the slowest test, December 2026; docs/internals.md, "Time budget");
# IONOCHEM_TIME_BUDGET=off switches the check off (e.g. under a mutation-testing tool), and
# IONOCHEM_TIME_BUDGET=2.5 multiplies both limits (a slower machine).

import os  # noqa: E402
import time  # noqa: E402

#: CPU seconds one test (setup + call + teardown) may take.
PER_TEST_CPU_BUDGET_S = 120.0
#: CPU seconds the whole session may take.
SUITE_CPU_BUDGET_S = 900.0

_cpu_by_test: dict[str, float] = {}


def _budget_scale() -> float | None:
    """Multiplier of the limits, or None when the check is off (also under mutmut, which
    sets MUTANT_UNDER_TEST and must judge a mutant by the tests alone)."""
    if "MUTANT_UNDER_TEST" in os.environ:
        return None
    value = os.environ.get("IONOCHEM_TIME_BUDGET", "on").strip().lower()
    if value in ("off", "no", "0"):
        return None
    try:
        return float(value)
    except ValueError:
        return 1.0


@pytest.hookimpl(hookwrapper=True)
def pytest_runtest_protocol(item, nextitem):
    t0 = time.process_time()
    yield
    _cpu_by_test[item.nodeid] = time.process_time() - t0


def pytest_sessionstart(session):
    session.config._cpu_start = time.process_time()


def pytest_sessionfinish(session, exitstatus):
    scale = _budget_scale()
    if scale is None or not _cpu_by_test:
        return
    per_test, suite = PER_TEST_CPU_BUDGET_S * scale, SUITE_CPU_BUDGET_S * scale
    total = time.process_time() - session.config._cpu_start
    over = sorted(((t, n) for n, t in _cpu_by_test.items() if t > per_test), reverse=True)
    problems = [f"{n}: {t:.1f} s CPU > {per_test:g} s per test" for t, n in over]
    if total > suite:
        problems.append(f"whole session: {total:.1f} s CPU > {suite:g} s")
    session.config._budget_report = (total, suite, problems)
    if problems and session.exitstatus == 0:
        session.exitstatus = 1


def pytest_terminal_summary(terminalreporter, exitstatus, config):
    report = getattr(config, "_budget_report", None)
    if report is None:
        return
    total, suite, problems = report
    slowest = sorted(_cpu_by_test.items(), key=lambda kv: -kv[1])[:3]
    terminalreporter.write_line(
        f"CPU time budget: session {total:.1f} s of {suite:g} s; slowest tests "
        + ", ".join(f"{n.split('::')[-1]} {t:.1f} s" for n, t in slowest))
    for p in problems:
        terminalreporter.write_line(f"TIME BUDGET EXCEEDED: {p}", red=True)
