"""Regenerate the demo scenarios' reference results that tests/test_demo_references.py checks.

    python tests/regression/make_demo_references.py

Writes ``tests/regression/demo_references.npz``: for every scenario in scenarios/, every
numeric data variable of the dataset ``ionochem.run`` returns (steady or transient, as the
scenario says). These are not outside references: they pin the code's own answers across a
refactoring (issue 21: "every demo's outputs equal to 1e-10 relative before and after").
Regenerate only on purpose — after a change that is meant to move the answers (new physics, a
changed default rate) — and say so in the commit message.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))
#: Data variables left out: the solver's bookkeeping, not the column's answer.
SOLVER_INTERNALS = ("residual", "iterations", "solver_method")
OUT = Path(__file__).with_name("demo_references.npz")


def demo_arrays(path):
    """``{variable: array}`` of one demo scenario's result (numeric data variables only)."""
    import ionochem
    try:
        ds = ionochem.run(ionochem.load_scenario(path))
    except AttributeError:      # before the library entry point existed
        from ionochem.model import Model
        scen = ionochem.load_scenario(path)
        model = Model(scen)
        if scen.solve.mode == "transient":
            initial = model.solve() if scen.solve.start == "steady" else None
            ds = model.integrate(np.asarray(scen.solve.times_s, float), initial=initial)
        else:
            ds = model.solve()
    out = {}
    for name, var in ds.data_vars.items():
        # The solver's own residual is not an answer: it moves with the order of
        # floating-point operations while the densities stay within it.
        if name in SOLVER_INTERNALS:
            continue
        if np.issubdtype(var.dtype, np.number) and var.dtype != bool:
            out[name] = np.asarray(var.values, float)
    return out


def scenarios():
    return sorted((ROOT / "scenarios").glob("*.toml"))


def main():
    arrays = {}
    for path in scenarios():
        for name, value in demo_arrays(path).items():
            arrays[f"{path.stem}/{name}"] = value
    np.savez_compressed(OUT, **arrays)
    print(f"wrote {OUT} ({len(arrays)} arrays, {OUT.stat().st_size / 1e3:.0f} kB)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
