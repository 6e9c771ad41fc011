"""The figures of issue 25, each as a ratio against its floor or baseline measured in the
same run (the machine may be shared: the ratios matter, not the absolute times).

In this process (one BLAS thread, medians of paired repeats):

- sensitivities: ``model.sensitivity()`` / ``model.solve()`` on the mid-latitude demo
  (invented site and date, 256 levels), photochemical (its [transport] removed) and
  transported (target: <= 2 steady solves);
- ``monte_carlo()`` of 1000 samples x 63 levels / the floor of four batched LU solves of
  every sample's Jacobian blocks (benchmarks/bench_uncertainty.py);
- ``Model()`` at 5,000 levels / the same floor at 5,000 levels (slant columns, issue 25).

As whole processes (``python -m ionochem ...``, start-up included), A B A B ... with the
median of the pair ratios:

- the bundled fit with ``--profile`` (docs/observations.md) / ``ionochem run`` of the same
  scenario ("run equivalents");
- ``ionochem uncertainty`` 1000 x 63 levels / the floor above (target: <= 6x);
- the sunset transient (``scenarios/midlatitude_sunset.toml``) and ``run`` of the smallest
  demo, each against the same command of another checkout with ``--vs FOLDER``.

    python benchmarks/bench_issue25.py [--repeats 5] [--vs /tmp/base] [--skip-commands]
"""

from __future__ import annotations

import argparse
import os
import re
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

import ionochem
from ionochem.analysis import uncertainty as U
from ionochem.io.scenario import Grid

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "scenarios" / "midlatitude_equinox.toml"
FIT = ["fit", str(ROOT / "scenarios" / "tabulated_column.toml"), "--observed",
       str(ROOT / "scenarios" / "observations" / "brackenfold_n2plus_ne.csv"),
       "--free", "PI_N2", "--free", "N2plus_O_NOplus", "--free", "DR_N2plus",
       "--constrain-electrons", "--profile", "N2plus_O_NOplus", "--profile-points", "9"]


def _t(fn):
    t0 = time.perf_counter()
    fn()
    return time.perf_counter() - t0


def _median_ratio(a, b, repeats):
    """Median over repeats of time(a) / time(b), each the best of two, in turn."""
    out = []
    for _ in range(repeats):
        tb = min(_t(b) for _ in range(2))
        out.append(min(_t(a) for _ in range(2)) / tb)
    return statistics.median(out)


def _photochemical(folder):
    text = re.sub(r"(?ms)^\[transport\].*?(?=^\[|\Z)", "", DEMO.read_text())
    text = text.replace('"../reactions/', f'"{ROOT / "reactions"}/')
    path = Path(folder) / "photochemical.toml"
    path.write_text(text)
    return ionochem.Model(ionochem.load_scenario(path))


def _floor(model, batch, batches):
    """Four batched LU solves of ``batches`` batches of ``batch`` copies of the blocks."""
    with U.single_thread_blas():
        n = model.steady_densities().n
        J = np.tile(model.jacobian(n), (batch, 1, 1))
        f = np.tile(model.tendency(n), (batch, 1))[..., None]

    def run():
        with U.single_thread_blas():
            for _ in range(4 * batches):
                np.linalg.solve(J, f)
    return run


def library(args, folder):
    for name, model in (("photochemical", _photochemical(folder)),
                        ("transported", ionochem.Model(ionochem.load_scenario(DEMO)))):
        model.sensitivity()
        r = _median_ratio(model.sensitivity, model.solve, args.repeats)
        print(f"sensitivity() / solve(), {name} 256 levels: {r:5.2f} solves (target <= 2)")
    sys.path.insert(0, str(ROOT / "benchmarks"))
    from bench_uncertainty import demo_column
    path = demo_column(Path(folder), 63)
    model = ionochem.Model(ionochem.load_scenario(path))
    batch = U.default_batch(63)
    floor = _floor(model, batch, -(-args.samples // batch))
    U.monte_carlo(model, 20, seed=0)
    r = _median_ratio(lambda: U.monte_carlo(model, args.samples, seed=0), floor,
                      max(1, args.repeats // 2))
    print(f"monte_carlo() {args.samples} x 63 levels / floor: {r:5.2f}x")
    scen = ionochem.load_scenario(DEMO)
    big = scen.replace(grid=Grid(altitude_km=tuple(np.linspace(90.0, 600.0, 5000))))
    m5 = ionochem.Model(big)
    floor5 = _floor(m5, 1, 1)
    r = _median_ratio(lambda: ionochem.Model(big), floor5, max(1, args.repeats // 2))
    print(f"Model() at 5000 levels / floor at 5000 levels: {r:5.1f}x")
    return path, floor


def _command(argv, cwd, code=None):
    env = dict(os.environ)
    if code is not None:
        env["PYTHONPATH"] = str(code)
    cmd = [sys.executable, "-m", "ionochem", *argv]

    def run():
        subprocess.run(cmd, check=True, cwd=cwd, env=env, stdout=subprocess.DEVNULL,
                       stderr=subprocess.DEVNULL)
    return run


def commands(args, folder, mc_path, floor):
    here = ROOT
    out = str(Path(folder) / "o.nc")
    fit = _command(FIT + ["-o", out], folder, here)
    run = _command(["run", FIT[1], "-o", out], folder, here)
    fit()
    r = _median_ratio(fit, run, max(1, args.repeats // 2))
    print(f"fit --profile (bundled example) / run of the same scenario: {r:5.1f} runs")
    mc = _command(["uncertainty", str(mc_path), "--samples", str(args.samples), "--workers",
                   "1", "--no-progress", "-o", out], folder, here)
    r = _median_ratio(mc, floor, max(1, args.repeats // 2))
    print(f"ionochem uncertainty {args.samples} x 63 levels / floor: {r:5.1f}x "
          "(target <= 6x)")
    if args.vs:
        for what, argv in (("sunset transient",
                            ["run", str(ROOT / "scenarios" / "midlatitude_sunset.toml"),
                             "-o", out]),
                           ("run, smallest demo", ["run", FIT[1], "-o", out]),
                           ("fit --profile", FIT + ["-o", out])):
            a, b = _command(argv, folder, here), _command(argv, folder, args.vs)
            r = _median_ratio(a, b, max(1, args.repeats // 2))
            print(f"{what}: this tree / {args.vs}: {r:5.2f}")


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeats", type=int, default=5)
    ap.add_argument("--samples", type=int, default=1000)
    ap.add_argument("--vs", help="another checkout: its commands timed in turn with these")
    ap.add_argument("--skip-commands", action="store_true")
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as folder:
        mc_path, floor = library(args, folder)
        if not args.skip_commands:
            commands(args, folder, mc_path, floor)


if __name__ == "__main__":
    main()
