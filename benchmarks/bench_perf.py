"""Per-column cost against the linear-algebra floor, measured in one run (ratios).

For the mid-latitude demo column resampled to N levels (90–450 km): the floor is four
batched LU solves (``numpy.linalg.solve``) of the (levels, species, species) Jacobian
blocks — what a four-iteration Newton cannot avoid. Printed per size: the floor, the
Newton alone (``Model.steady_densities``), ``Model.solve()`` (Newton plus the result
dataset), all with one BLAS thread, as medians of several repeats and as ratios to the
floor; and ``Model()`` at 500 and 5,000 levels (target: under 10x).

Targets (issue 13): Newton within 3x and solve() within 5x of the floor at 200 and 1,000
levels; Model() linear in levels. The machine may be shared: the ratios matter, not the
absolute times.

    python benchmarks/bench_perf.py [--levels 200 1000] [--repeats 5] [--model]
"""

from __future__ import annotations

import argparse
import re
import statistics
import tempfile
import time
from pathlib import Path

import numpy as np

import ionochem
from ionochem.analysis.ensemble import single_thread_blas

DEMO = Path(__file__).resolve().parents[1] / "scenarios" / "midlatitude_equinox.toml"


def scenario(levels, tmp):
    """The demo scenario, photochemistry only (its [transport] section removed: the floor
    assumes independent levels), with ``levels`` levels from 90 to 450 km (a temporary
    copy)."""
    text = DEMO.read_text()
    text = re.sub(r"(?ms)^\[transport\].*?(?=^\[|\Z)", "", text)
    step = (450.0 - 90.0) / (levels - 1)
    text = re.sub(r"(?m)^altitude_km\s*=.*$",
                  f"altitude_km = {{ start = 90.0, stop = 450.0, step = {step!r} }}", text)
    text = text.replace('"../reactions/', f'"{DEMO.parents[1] / "reactions"}/')
    path = Path(tmp) / f"demo_{levels}.toml"
    path.write_text(text)
    return ionochem.load_scenario(path)


def median_time(fn, repeats):
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def column(levels, repeats, tmp):
    model = ionochem.Model(scenario(levels, tmp))
    n = model.steady_densities().n
    J = model.jacobian(n)
    f = model.tendency(n)

    def floor():
        for _ in range(4):
            np.linalg.solve(J, -f[..., None])

    # solve() and steady_densities() pin one BLAS thread themselves (solve/threads.py);
    # the floor is measured the same way. The three are timed in turn within each repeat
    # (interleaved), so a change of load on a shared machine moves all three alike; the
    # ratios are the medians of the per-repeat ratios.
    times = {"floor": [], "newton": [], "solve": []}
    with single_thread_blas():
        for fn in (floor, model.steady_densities, model.solve):   # warm-up
            fn()
        for _ in range(repeats):
            for name, fn in (("floor", floor), ("newton", model.steady_densities),
                             ("solve", model.solve)):
                t0 = time.perf_counter()
                fn()
                times[name].append(time.perf_counter() - t0)
    fl, nt, sv = (statistics.median(times[k]) for k in ("floor", "newton", "solve"))
    rn = statistics.median(a / b for a, b in zip(times["newton"], times["floor"]))
    rs = statistics.median(a / b for a, b in zip(times["solve"], times["floor"]))
    print(f"{levels} levels, {len(model.species)} solved species: floor {fl * 1e3:7.2f} ms, "
          f"Newton {nt * 1e3:7.2f} ms ({rn:5.1f}x), solve() {sv * 1e3:7.2f} ms "
          f"({rs:5.1f}x)")


def model_scaling(repeats, tmp):
    scen = {n: scenario(n, tmp) for n in (500, 5000)}
    t = {n: median_time(lambda s=s: ionochem.Model(s), repeats) for n, s in scen.items()}
    print(f"Model(): 500 levels {t[500]:.3f} s, 5,000 levels {t[5000]:.3f} s, "
          f"ratio {t[5000] / t[500]:.1f}x (target < 10x)")


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--levels", type=int, nargs="+", default=[200, 1000])
    ap.add_argument("--repeats", type=int, default=5)
    ap.add_argument("--model", action="store_true", help="also time Model() at 500/5,000")
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        for levels in args.levels:
            column(levels, args.repeats, tmp)
        if args.model:
            model_scaling(3, tmp)


if __name__ == "__main__":
    main()
