"""Re-plant, one at a time, the physics mutants that escaped the suite (five in the audit of
issue 9, two more in that of issue 30), and show which tests now kill each.

Each mutant is applied to a throw-away copy of the repository (the working tree is never
touched), then the given test selection runs against the copy. A mutant is *killed* when
pytest fails. Run from the repository root:

    python tests/mutation/replant_escaped.py            # all seven
    python tests/mutation/replant_escaped.py distance   # one by name

Not part of the test run (no ``test_`` prefix); see docs/validation.md, "Mutation testing".
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]

#: name -> (file, original text, mutated text, tests that must kill it)
MUTANTS = {
    "distance": (
        "ionochem/environment/sun.py",
        "spectrum = self.spectrum.scaled(float(flux_distance_factor(self._utc(t))))",
        "spectrum = self.spectrum",
        ["tests/test_pipeline_factors.py"]),
    "n2plus_level_low": (
        "ionochem/environment/n2plus_levels.py",
        'out[f"{base}(v={v})"] = per_level[..., i]',
        'out[f"{base}(v={v})"] = per_level[..., i - 1]',
        ["tests/test_pipeline_factors.py"]),
    "o_plus_2pstar_split": (
        "ionochem/environment/crosssections.py",
        's2d = t["O+_2D"] + 0.5 * t["O+_2Pstar"]\n    s2p = t["O+_2P"] + 0.5 * t["O+_2Pstar"]',
        's2d = t["O+_2D"] + 0.7 * t["O+_2Pstar"]\n    s2p = t["O+_2P"] + 0.3 * t["O+_2Pstar"]',
        ["tests/test_pipeline_factors.py"]),
    # The steady solvers' gross rates now come from mechanism/rows.py (BoundRows); the
    # original site, solve/batch.py, is left only for objects that are not a Mechanism.
    "solver_gross_swapped": (
        "ionochem/mechanism/rows.py",
        "return out[:self.S], out[self.S:]",
        "return out[self.S:], out[:self.S]",
        ["tests/test_engine.py", "tests/test_default_ionosphere.py"]),
    "budget_swapped": (
        "ionochem/analysis/budget.py",
        "ranked(contrib > 0, contrib), ranked(contrib < 0, -contrib), members)",
        "ranked(contrib < 0, -contrib), ranked(contrib > 0, contrib), members)",
        ["tests/test_budget.py"]),
    # The two that escaped the whole suite in the second audit (issue 30).
    "dataset_gross_swapped": (
        "ionochem/mechanism/mechanism.py",
        "return r @ cached[0], r @ cached[1]",
        "return r @ cached[1], r @ cached[0]",
        ["tests/test_dataset_outside.py"]),
    "n2plus_fallback_level_low": (
        "ionochem/model.py",
        "val = val * self._level_fractions[ions[0].base][ions[0].vib]",
        "val = val * self._level_fractions[ions[0].base][max(ions[0].vib - 1, 0)]",
        ["tests/test_n2plus_split_outside.py"]),
}


def _copy_tree(dest: Path) -> None:
    for name in ("ionochem", "tests", "reactions", "scenarios", "pyproject.toml"):
        src = ROOT / name
        if src.is_dir():
            shutil.copytree(src, dest / name,
                            ignore=shutil.ignore_patterns("__pycache__", "*.nc", "*.png"))
        else:
            shutil.copy2(src, dest / name)


def run(name: str) -> bool:
    """Plant one mutant in a copy and run its tests; True when the mutant is killed."""
    rel, old, new, tests = MUTANTS[name]
    with tempfile.TemporaryDirectory(prefix=f"mutant-{name}-") as tmp:
        tmp = Path(tmp)
        _copy_tree(tmp)
        path = tmp / rel
        text = path.read_text()
        if text.count(old) != 1:
            raise SystemExit(f"{name}: the original text is not found once in {rel}; "
                             "update MUTANTS")
        path.write_text(text.replace(old, new))
        env = dict(os.environ, PYTHONPATH=str(tmp))
        t0 = time.perf_counter()
        proc = subprocess.run([sys.executable, "-m", "pytest", "-q", "-x", "-p",
                               "no:cacheprovider", *tests], cwd=tmp, env=env,
                              capture_output=True, text=True)
        dt = time.perf_counter() - t0
    killed = proc.returncode != 0
    failed = [line for line in proc.stdout.splitlines() if line.startswith(("FAILED", "ERROR"))]
    print(f"{name:22s} {'KILLED' if killed else 'SURVIVED'} in {dt:5.1f} s  "
          f"{failed[0] if failed else proc.stdout.strip().splitlines()[-1]}")
    return killed


def main(argv: list[str]) -> int:
    names = argv or list(MUTANTS)
    results = [run(n) for n in names]
    print(f"{sum(results)} of {len(results)} mutants killed")
    return 0 if all(results) else 1


if __name__ == "__main__":
    raise SystemExit(main(sys.argv[1:]))
