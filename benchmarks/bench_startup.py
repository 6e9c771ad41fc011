"""Whole-process start-up of the ``ionochem`` command: ``--help``, ``check`` and ``run``.

What a user waits for when typing a command, imports included: each command is started as
a new process (``python -m ionochem ...``) after one untimed warm-up run (so the bytecode
cache is written and the files are in the page cache), then timed ``--runs`` times; the
median wall and CPU seconds (user + system, from ``os.wait4``) and the peak resident memory
are printed. Goals (issue 13, on an idle two-core machine): ``run`` of the mid-latitude demo
with ``-o`` clearly under 1 s (aim 0.7 s), ``--help`` and ``check`` under 0.5 s.

With ``--vs FOLDER`` (a checkout of another commit, e.g. ``git worktree add /tmp/base
BRANCH``) both trees are timed in turn, A B A B ..., and the median of the pair-by-pair
ratios this/other is printed, which holds when the machine's speed drifts. The import
profile of one command is ``python -X importtime -m ionochem run ...``.

    python benchmarks/bench_startup.py [--runs 7] [--vs /tmp/base]
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def commands(tmp: Path) -> dict[str, list[str]]:
    """The timed commands (arguments after ``python -m ionochem``), relative to a tree."""
    return {
        "--help": ["--help"],
        "check": ["check", "reactions/ionosphere.reactions"],
        "run -o": ["run", "scenarios/midlatitude_equinox.toml", "-o", str(tmp / "out.nc")],
    }


def time_once(tree: Path, args: list[str]) -> tuple[float, float, float]:
    """Wall s, CPU s (user + sys) and peak resident MiB of one ``python -m ionochem`` run."""
    env = dict(os.environ, PYTHONPATH=str(tree))
    env.pop("PYTHONDONTWRITEBYTECODE", None)        # the goal is for a warm bytecode cache
    t0 = time.perf_counter()
    proc = subprocess.Popen([sys.executable, "-m", "ionochem", *args], cwd=tree, env=env,
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    _, status, usage = os.wait4(proc.pid, 0)
    wall = time.perf_counter() - t0
    err = proc.stderr.read().decode(errors="replace")
    proc.stderr.close()
    proc.returncode = os.waitstatus_to_exitcode(status)
    if proc.returncode != 0:
        raise SystemExit(f"{tree}: ionochem {' '.join(args)} failed ({proc.returncode}):\n{err}")
    return wall, usage.ru_utime + usage.ru_stime, usage.ru_maxrss / 1024.0


def main(argv=None):
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--runs", type=int, default=7, help="timed runs of each command")
    p.add_argument("--vs", type=Path, help="another checkout to time in turn with this one")
    a = p.parse_args(argv)
    trees = {"this": ROOT} | ({"other": a.vs.resolve()} if a.vs else {})
    with tempfile.TemporaryDirectory() as tmp:
        cmds = commands(Path(tmp))
        print(f"python {sys.version.split()[0]}, {os.cpu_count()} CPUs, load average "
              f"{os.getloadavg()[0]:.2f}; {a.runs} runs after one warm-up; medians")
        for name, args in cmds.items():
            rows = {t: [] for t in trees}
            for tree in trees.values():
                time_once(tree, args)                       # warm-up: bytecode, page cache
            for _ in range(a.runs):
                for label, tree in trees.items():
                    rows[label].append(time_once(tree, args))
            for label, r in rows.items():
                wall, cpu, mem = (statistics.median(x) for x in zip(*r, strict=True))
                print(f"  {name:8s} {label:5s} wall {wall:6.3f} s  cpu {cpu:6.3f} s  "
                      f"peak {mem:6.1f} MiB  (wall min {min(x[0] for x in r):.3f} s)")
            if a.vs:
                ratio = statistics.median(x[0] / y[0] for x, y in zip(rows["this"],
                                                                       rows["other"],
                                                                       strict=True))
                cpu_ratio = statistics.median(x[1] / y[1] for x, y in zip(rows["this"],
                                                                          rows["other"],
                                                                          strict=True))
                print(f"  {name:8s} this/other: wall {ratio:.2f}, cpu {cpu_ratio:.2f}")


if __name__ == "__main__":
    main()
