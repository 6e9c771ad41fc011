"""Mutation runs in parts that fit a small shared machine, resumable, with a table for
docs/validation.md ("Mutation testing, second pass"). On demand only, never in CI.

Each *part* is a few modules of ``ionochem/`` with the test files that check them. A part is
run by mutmut (3.x, the ``mutation`` extra of pyproject.toml) in its own throw-away copy of
the repository under a work folder (default ``$TMPDIR/ionochem-mutation/<part>``), whose
``pyproject.toml`` gets a ``[tool.mutmut]`` section for that part alone; the worktree is
never touched. mutmut runs under ``nice -n 19``. When a part finishes, its counts per module
and the diffs of its surviving mutants are written to ``tests/mutation/results/<part>.json``
(kept in git): a part with a results file is skipped on the next call (``--force`` re-runs
it), and a part stopped half-way resumes where mutmut stopped (its work folder is kept).

    python tests/mutation/run_parts.py --list                 # parts, their modules and tests
    python tests/mutation/run_parts.py mechanism n2plus       # run (or resume) these parts
    python tests/mutation/run_parts.py --all --budget-min 60  # in order, until 60 CPU-min
    python tests/mutation/run_parts.py --recheck mechanism    # survivors only, current tests
    python tests/mutation/run_parts.py --table                # rewrite the docs section

``--recheck`` copies the current tests into the part's work folder and re-runs its
surviving mutants not judged harmless on the part's whole current selection (after a test
was added to close them); the results file is updated.

Each survivor is judged by hand in ``tests/mutation/judgements.toml``: mutant name ->
``"harmless: why"`` (equivalent, or changes no physical number: a message, a guard that
cannot trigger, a speed knob), ``"closed: test name"`` (killed by that test on recheck) or
``"open: why"`` (a real gap left). The table counts killed / run, and the kill rate over the
non-equivalent mutants (killed / (run − harmless)). See DEVELOPERS.md, "Mutation testing".
"""

from __future__ import annotations

import argparse
import json
import os
import re
import resource
import shutil
import subprocess
import sys
import tempfile
import time
import tomllib
from collections import Counter
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
HERE = Path(__file__).resolve().parent
RESULTS = HERE / "results"
JUDGEMENTS = HERE / "judgements.toml"
DOC = ROOT / "docs" / "validation.md"
BEGIN = "<!-- mutation-second-pass: begin (written by tests/mutation/run_parts.py --table) -->"
END = "<!-- mutation-second-pass: end -->"

#: part -> (modules to mutate, test files). Ordered most physics-heavy first; ``--all`` runs
#: them in this order. solve/ is last: it is being rewritten (issue 21).
PARTS: dict[str, tuple[list[str], list[str]]] = {
    "mechanism": (
        ["ionochem/mechanism/mechanism.py", "ionochem/mechanism/rows.py"],
        ["tests/test_dataset_outside.py", "tests/test_engine.py", "tests/test_default_list.py",
         "tests/test_budget.py", "tests/test_mechanism_outside.py"]),
    "n2plus": (
        ["ionochem/environment/n2plus_levels.py"],
        ["tests/test_n2plus_production.py", "tests/test_n2plus_split_outside.py",
         "tests/test_pipeline_factors.py", "tests/test_photorates.py",
         "tests/test_vibrational_data.py", "tests/test_n2plus_levels_outside.py"]),
    "secondary": (
        ["ionochem/environment/secondary.py", "ionochem/environment/xrays.py"],
        ["tests/test_secondary.py", "tests/test_xrays.py", "tests/test_photorates.py",
         "tests/test_pipeline_factors.py"]),
    "crosssections": (
        ["ionochem/environment/crosssections.py"],
        ["tests/test_photorates.py", "tests/test_pipeline_factors.py", "tests/test_secondary.py",
         "tests/test_xrays.py", "tests/test_night_sources.py"]),
    "night": (
        ["ionochem/environment/night_sources.py", "ionochem/environment/lyman_alpha.py"],
        ["tests/test_night_sources.py", "tests/test_photorates.py",
         "tests/test_n2plus_split_outside.py"]),
    "temperatures": (
        ["ionochem/environment/temperatures.py", "ionochem/environment/n2_vibrational.py",
         "ionochem/environment/magnetisation.py"],
        ["tests/test_temperatures.py", "tests/test_magnetisation.py",
         "tests/test_environment_column.py", "tests/test_tv_scenario.py"]),
    "diffusion": (
        ["ionochem/environment/diffusion.py"],
        ["tests/test_transport.py"]),
    "sun": (
        ["ionochem/environment/sun.py", "ionochem/environment/slant.py"],
        ["tests/test_pipeline_factors.py", "tests/test_slant.py", "tests/test_transient_sun.py",
         "tests/test_user_spectrum.py", "tests/test_n2plus_split_outside.py"]),
    "budget": (
        ["ionochem/analysis/budget.py", "ionochem/analysis/units.py"],
        ["tests/test_budget.py", "tests/test_units.py", "tests/test_dataset_outside.py"]),
    "expressions": (
        ["ionochem/mechanism/expressions.py", "ionochem/mechanism/ratetables.py"],
        ["tests/test_expressions.py", "tests/test_level_tables.py"]),
    "rates": (
        ["ionochem/rates/*"],
        ["tests/test_rates_beam.py", "tests/test_rates_fit.py", "tests/test_rates_maxwellian.py",
         "tests/test_rates_populations.py", "tests/test_rates_tables.py"]),
    "uncertainty": (
        ["ionochem/analysis/uncertainty.py", "ionochem/analysis/variance.py"],
        ["tests/test_uncertainty.py"]),
    "fit": (
        ["ionochem/analysis/fit.py", "ionochem/analysis/misfit.py"],
        ["tests/test_fit.py"]),
    "sweep": (
        ["ionochem/analysis/sweep.py", "ionochem/analysis/sweep_axes.py"],
        ["tests/test_sweep.py"]),
    "discern": (
        ["ionochem/analysis/discern.py", "ionochem/analysis/discern_check.py"],
        ["tests/test_discern.py"]),
    "sensitivity": (
        ["ionochem/analysis/sensitivity.py"],
        ["tests/test_sensitivity.py"]),
    "solve": (
        ["ionochem/solve/*"],
        ["tests/test_engine.py", "tests/test_column_solver.py", "tests/test_steady_floor.py"]),
}

#: Why a part may be left out of a pass (shown in the table); others: the CPU budget.
NOT_RUN_REASON = {"solve": "rewritten by the column-system work (issue 21) during this pass"}

COPY = ("ionochem", "tests", "scenarios", "reactions", "pyproject.toml")


def _mutmut_section(modules, tests):
    q = lambda xs: "[" + ", ".join(json.dumps(x) for x in xs) + "]"  # noqa: E731
    return ("[tool.mutmut]\nsource_paths = [\"ionochem\"]\n"
            "also_copy = [\"scenarios\", \"reactions\"]\n"
            f"only_mutate = {q(modules)}\n"
            "pytest_add_cli_args = [\"-p\", \"no:cacheprovider\", \"-q\", \"-m\", \"not slow\"]\n"
            f"pytest_add_cli_args_test_selection = {q(tests)}\n")


def _prepare(part, work):
    """A copy of the repository in ``work`` with this part's mutmut section."""
    modules, tests = PARTS[part]
    work.mkdir(parents=True, exist_ok=True)
    for name in COPY:
        src, dst = ROOT / name, work / name
        if dst.exists():
            continue
        if src.is_dir():
            shutil.copytree(src, dst, ignore=shutil.ignore_patterns(
                "__pycache__", "*.nc", "*.png", "results"))
        else:
            shutil.copy2(src, dst)
    py = work / "pyproject.toml"
    text = re.sub(r"\[tool\.mutmut\].*?(?=^\[|\Z)", "", py.read_text(), flags=re.S | re.M)
    py.write_text(text.rstrip() + "\n\n" + _mutmut_section(modules, tests))


def _sync_tests(work):
    """Current tests into the work copy and mutmut's own copy of it (for --recheck)."""
    for dst in (work / "tests", work / "mutants" / "tests"):
        if dst.exists():
            shutil.rmtree(dst)
        shutil.copytree(ROOT / "tests", dst, ignore=shutil.ignore_patterns(
            "__pycache__", "results"))


def _mutmut(work, args, children):
    env = dict(os.environ, IONOCHEM_TIME_BUDGET="off", OMP_NUM_THREADS="1",
               OPENBLAS_NUM_THREADS="1", MKL_NUM_THREADS="1")
    env.pop("PYTHONPATH", None)
    cmd = ["nice", "-n", "19", sys.executable, "-m", "mutmut", *args]
    if args[0] == "run":
        cmd += ["--max-children", str(children)]
    return subprocess.run(cmd, cwd=work, env=env, capture_output=True, text=True)


def _verify(work, names, tests):
    """Survivors killed by the part's whole test selection (mutmut runs, per mutant, only
    the tests it saw call the mutated function; a call made while a module-scoped fixture is
    built is credited to the first test using it, so the other tests of that fixture never
    see the mutant). The mutant is switched on by MUTANT_UNDER_TEST in mutmut's copy."""
    killed = []
    env = dict(os.environ, IONOCHEM_TIME_BUDGET="off", OMP_NUM_THREADS="1",
               OPENBLAS_NUM_THREADS="1", MKL_NUM_THREADS="1")
    env.pop("PYTHONPATH", None)
    for name in names:
        env["MUTANT_UNDER_TEST"] = name
        p = subprocess.run(["nice", "-n", "19", sys.executable, "-m", "pytest", "-x", "-q",
                            "-p", "no:cacheprovider", "-m", "not slow", *tests],
                           cwd=work / "mutants", env=env, capture_output=True, text=True)
        if p.returncode == 1:  # a test failed (2-5: pytest itself could not run)
            killed.append(name)
    return killed


def _status(code):
    from mutmut.__main__ import status_by_exit_code
    return "not checked" if code is None else status_by_exit_code.get(code, f"exit {code}")


def _collect(part, work, cpu_s, wall_s):
    """Counts per module and the survivors' diffs, from mutmut's .meta files, after the
    survivors were re-run on the whole selection (:func:`_verify`). ``cpu_s``/``wall_s``:
    the time spent before; the verification's own is added."""
    cpu0, t0 = _children_cpu(), time.perf_counter()
    old = _load(part) or {}
    out = {"part": part, "modules": {}, "tests": PARTS[part][1],
           "date": time.strftime("%Y-%m-%d"), "mutmut": _mutmut_version()}
    for meta in sorted((work / "mutants").glob("ionochem/**/*.py.meta")):
        codes = json.loads(meta.read_text()).get("exit_code_by_key", {})
        rel = str(meta.relative_to(work / "mutants")).removesuffix(".meta")
        c = Counter(_status(v) for v in codes.values())
        surv = sorted(k for k, v in codes.items() if _status(v) == "survived")
        diffs = {}
        for name in surv:
            p = _mutmut(work, ["show", name], 1)
            diffs[name] = "\n".join(line for line in p.stdout.splitlines()
                                    if line.startswith(("+", "-", "@@"))
                                    and not line.startswith(("+++", "---")))
        # Survivors a [rules] entry judges harmless are not re-run (CPU).
        judged = _judgements()
        full = _verify(work, [n for n in surv if not _judge(n, diffs[n], judged)
                              .startswith("harmless")], PARTS[part][1])
        for name in full:
            del diffs[name]
        c["killed"] += len(full)
        c["survived"] -= len(full)
        before = old.get("modules", {}).get(rel, {})
        first = sorted(set(before.get("first_survivors", before.get("survivors", {})))
                       | set(diffs))
        out["modules"][rel] = {"counts": dict(c), "survivors": diffs,
                               "killed_by_whole_selection": len(full),
                               "first_survivors": first}
    # A recheck or re-collection adds to the time of the first run.
    cpu_s += _children_cpu() - cpu0
    wall_s += time.perf_counter() - t0
    out["cpu_minutes"] = round(old.get("cpu_minutes", 0) + cpu_s / 60, 1)
    out["wall_minutes"] = round(old.get("wall_minutes", 0) + wall_s / 60, 1)
    return out


def _mutmut_version():
    try:
        from importlib.metadata import version
        return version("mutmut")
    except Exception:  # pragma: no cover
        return "?"


def _load(part):
    p = RESULTS / f"{part}.json"
    return json.loads(p.read_text()) if p.exists() else None


def _save(part, data):
    RESULTS.mkdir(exist_ok=True)
    tmp = RESULTS / f".{part}.json.tmp"
    tmp.write_text(json.dumps(data, indent=1, sort_keys=True, ensure_ascii=False) + "\n")
    tmp.replace(RESULTS / f"{part}.json")


def _children_cpu():
    r = resource.getrusage(resource.RUSAGE_CHILDREN)
    return r.ru_utime + r.ru_stime


def run_part(part, work_root, children, *, recheck=False, force=False):
    """Run (or resume, or recheck) one part; returns the CPU seconds it took."""
    work = work_root / part
    if not recheck and _load(part) and not force:
        print(f"{part}: done before (tests/mutation/results/{part}.json); --force re-runs")
        return 0.0
    if force and work.exists():
        shutil.rmtree(work)
    _prepare(part, work)
    names = []
    if recheck:
        data = _load(part)
        if not data or not work.exists():
            raise SystemExit(f"{part}: nothing to recheck (run the part first)")
        judged = _judgements()
        names = [n for m in data["modules"].values() for n, d in m["survivors"].items()
                 if not _judge(n, d, judged).startswith("harmless")]
        if not names:
            print(f"{part}: no survivors")
            return 0.0
        _sync_tests(work)
    cpu0, t0 = _children_cpu(), time.perf_counter()
    if recheck:
        # The survivors are re-run on the part's whole (current) selection only: mutmut's
        # own re-run would keep its old map of which tests call which function.
        print(f"{part}: recheck of {len(names)} survivors on the whole selection", flush=True)
        data = _collect(part, work, 0.0, 0.0)
        _save(part, data)
        print(f"{part}: {(_children_cpu() - cpu0) / 60:.1f} CPU-min")
        return _children_cpu() - cpu0
    print(f"{part}: mutmut on {', '.join(PARTS[part][0])} "
          f"({'recheck of ' + str(len(names)) + ' survivors' if recheck else 'run'})",
          flush=True)
    proc = _mutmut(work, ["run", *names], children)
    (work / "mutmut-run.log").write_text(proc.stdout[-20000:] + proc.stderr[-20000:])
    if proc.returncode != 0:
        print(f"{part}: mutmut exited {proc.returncode}; see {work / 'mutmut-run.log'}")
        print((proc.stdout + proc.stderr)[-2000:])
        return _children_cpu() - cpu0
    if recheck:  # only the survivors ran: the others keep their verdicts
        data = _collect(part, work, _children_cpu() - cpu0, time.perf_counter() - t0)
    else:
        _save(part, {})  # the time of this run, not of an earlier --force'd one
        data = _collect(part, work, _children_cpu() - cpu0, time.perf_counter() - t0)
    cpu = _children_cpu() - cpu0
    _save(part, data)
    for mod, m in data["modules"].items():
        c = m["counts"]
        print(f"  {mod:48s} killed {c.get('killed', 0):4d}  survived {c.get('survived', 0):4d}"
              f"  other {sum(v for k, v in c.items() if k not in ('killed', 'survived')):4d}")
    print(f"{part}: {cpu / 60:.1f} CPU-min", flush=True)
    return cpu


# --------------------------------------------------------------------------- the table

def _judgements():
    """``[mutants]`` name -> judgement, and ``[rules]`` regular expression -> judgement for
    the mechanical kinds (message text, zip strictness, ...), tried on the mutant's diff
    when its name has no judgement of its own."""
    data = tomllib.loads(JUDGEMENTS.read_text()) if JUDGEMENTS.exists() else {}
    return data.get("mutants", {}), [(re.compile(k, re.M), v)
                                     for k, v in data.get("rules", {}).items()]


def _judge(name, diff, judged):
    by_name, rules = judged
    if name in by_name:
        return by_name[name]
    for pattern, verdict in rules:
        if pattern.search(diff):
            return verdict
    return ""


def _short(name):
    """``ionochem.x.y.xǁCǁf__mutmut_3`` -> ``C.f #3``."""
    tail = name.rsplit(".", 1)[-1]
    m = re.match(r"x[ǁ_](.*)__mutmut_(\d+)$", tail)
    if not m:
        return tail
    return f"{m.group(1).replace('ǁ', '.')} #{m.group(2)}"


def table():
    """The markdown section: one row per module of every part with results."""
    judged = _judgements()
    rows, tot = [], Counter()
    ran, notrun = [], []
    for part in PARTS:
        data = _load(part)
        if not data:
            notrun.append(part)
            continue
        ran.append(f"`{part}` ({data['cpu_minutes']} CPU-min)")
        for mod, m in data["modules"].items():
            c = m["counts"]
            killed, surv = c.get("killed", 0), c.get("survived", 0)
            other = sum(v for k, v in c.items() if k not in ("killed", "survived", "not checked"))
            verdict = {n: _judge(n, d, judged) for n, d in m["survivors"].items()}
            harmless = [n for n in m["survivors"] if verdict[n].startswith("harmless")]
            # Closed: judged so, whether still listed (not rechecked yet) or killed by now.
            dotted = mod.removesuffix(".py").replace("/", ".") + "."
            first = set(m.get("first_survivors", m["survivors"]))
            closed = sorted({n for n, v in judged[0].items()
                             if n.startswith(dotted) and v.startswith("closed") and n in first}
                            | {n for n in m["survivors"] if verdict[n].startswith("closed")})
            verdict.update({n: judged[0][n] for n in closed})
            open_ = [n for n in m["survivors"] if n not in harmless and n not in closed]
            run = killed + surv
            nonequiv = run - len(harmless)
            rate = f"{100 * killed / nonequiv:.0f} %" if nonequiv else "–"
            notes = []
            for label, names in (("harmless", harmless), ("closed", closed)):
                by_reason = {}
                for n in names:
                    by_reason.setdefault(verdict[n].split(":", 1)[1].strip(), []).append(_short(n))
                for why, ns in by_reason.items():
                    funcs = sorted({n.rsplit(" #", 1)[0] for n in ns})
                    notes.append(f"{len(ns)} {label}: {why} (in {', '.join(funcs)})")
            if open_:
                notes.append("not judged: " + ", ".join(
                    _short(n) + (f" ({verdict[n].split(':', 1)[1].strip()})" if verdict[n]
                                 else "") for n in open_))
            rows.append(f"| `{mod.removeprefix('ionochem/')}` | {killed} / {run} | {rate} | "
                        f"{other} | {'; '.join(notes) or '–'} |")
            tot.update(killed=killed, run=run, harmless=len(harmless), other=other,
                       closed=len(closed), open=len(open_))
            # a closed survivor still listed is not killed yet: it stays out of "killed"
    nonequiv = tot["run"] - tot["harmless"]
    rate = f"{100 * tot['killed'] / nonequiv:.0f} %" if nonequiv else "–"
    lines = [
        BEGIN,
        "## Mutation testing, second pass",
        "",
        "Written by `python tests/mutation/run_parts.py --table` from "
        "`tests/mutation/results/*.json` and the judgements in "
        "`tests/mutation/judgements.toml`; runs by `run_parts.py` (mutmut "
        f"{_mutmut_version()}, under `nice -n 19`, each part with its own test selection, "
        "`-m \"not slow\"`). *killed / run*: mutants a test killed, of those that ran to a "
        "verdict (a survivor closed later by a new test is counted killed once its part is "
        "rechecked); *non-equiv.*: killed / (run − judged harmless); *other*: timeouts, "
        "mutants no test of the selection reaches, and the like.",
        "",
        "| module | killed / run | non-equiv. killed | other | surviving mutants, judged |",
        "|---|---|---|---|---|",
        *rows,
        f"| all (second pass) | {tot['killed']} / {tot['run']} | {rate} | {tot['other']} | "
        f"{tot['harmless']} judged harmless, {tot['closed']} closed by a new test, "
        f"{tot['open']} open |",
        "",
        "Survivors are re-run on the part's whole test selection before they are counted "
        "(mutmut runs, per mutant, only the tests it saw call the mutated function, and a "
        "call made while a shared fixture is built is credited to one test only).",
        "",
        "The two physics mutants that escaped the whole suite in the audit of issue 30 are "
        "re-planted by `tests/mutation/replant_escaped.py` and killed: production and loss "
        "swapped in `Mechanism.gross_rates` (`dataset_gross_swapped`, by "
        "`test_dataset_outside.py::test_production_and_loss_of_every_species_equal_an_"
        "independent_sum`) and the fallback N2+ level fraction read one level low "
        "(`n2plus_fallback_level_low`, by `test_n2plus_split_outside.py::test_fallback_split_"
        "gives_each_level_its_published_share`).",
        "",
        f"Parts run: {', '.join(ran) or 'none'}. Not run this pass: "
        f"{', '.join(f'`{p}`' for p in notrun if p not in NOT_RUN_REASON) or 'none'} "
        "(the CPU budget of the pass on the shared machine; `run_parts.py --all` resumes "
        "with them)"
        + "".join(f"; `{p}`: {why}" for p, why in NOT_RUN_REASON.items() if p in notrun)
        + ".",
        END,
    ]
    return "\n".join(lines)


def write_table():
    text = DOC.read_text()
    section = table()
    if BEGIN in text and END in text:
        pre, rest = text.split(BEGIN, 1)
        post = rest.split(END, 1)[1]
        new = pre + section + post
    else:
        new = text.rstrip() + "\n\n" + section + "\n"
    fd, tmp = tempfile.mkstemp(dir=DOC.parent, prefix=".validation.")
    with os.fdopen(fd, "w") as f:
        f.write(new)
    os.replace(tmp, DOC)
    print(f"wrote the section into {DOC.relative_to(ROOT)}")


def main(argv):
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("parts", nargs="*", help="parts to run (default: none; --all: every one)")
    ap.add_argument("--all", action="store_true", help="every part, in order")
    ap.add_argument("--list", action="store_true", help="list the parts")
    ap.add_argument("--table", action="store_true", help="rewrite the docs section")
    ap.add_argument("--recheck", action="store_true", help="re-run the survivors only")
    ap.add_argument("--force", action="store_true", help="re-run parts with results")
    ap.add_argument("--collect", action="store_true",
                    help="only re-read the work folder of each part named (verify survivors)")
    ap.add_argument("--children", type=int, default=1, help="mutmut workers (default 1)")
    ap.add_argument("--budget-min", type=float, default=None,
                    help="stop starting parts after this many CPU-minutes")
    ap.add_argument("--work", type=Path,
                    default=Path(tempfile.gettempdir()) / "ionochem-mutation",
                    help="work folder (default $TMPDIR/ionochem-mutation)")
    a = ap.parse_args(argv)
    if a.list:
        for p, (mods, tests) in PARTS.items():
            done = "done" if _load(p) else "    "
            print(f"{done} {p:13s} {' '.join(mods)}\n{'':19s}tests: {' '.join(tests)}")
        return 0
    unknown = [p for p in a.parts if p not in PARTS]
    if unknown:
        print(f"run_parts: unknown part(s) {', '.join(unknown)}; --list shows them",
              file=sys.stderr)
        return 2
    if a.collect:
        for part in a.parts:
            _save(part, _collect(part, a.work / part, 0.0, 0.0))
        a.parts = []
    spent = 0.0
    for part in (list(PARTS) if a.all else a.parts):
        if a.budget_min is not None and spent / 60 >= a.budget_min:
            print(f"budget of {a.budget_min:g} CPU-min reached; stopping before {part}")
            break
        spent += run_part(part, a.work, a.children, recheck=a.recheck, force=a.force)
    if a.table:
        write_table()
    return 0


if __name__ == "__main__":
    raise SystemExit(main(sys.argv[1:]))
