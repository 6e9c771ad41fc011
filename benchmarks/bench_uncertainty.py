"""Monte Carlo throughput: 1000 samples of a 100-level column against the linear-algebra
floor, serially and on two local worker processes.

The column is the mid-latitude demo scenario (``scenarios/midlatitude_equinox.toml``, an
invented site and date) with its grid replaced by 100 levels from 90 to 450 km; the default
reaction list with its uncertainty factors. By default its [transport] section is removed
(independent levels, as the floor assumes); ``--transport`` keeps it (coupled columns).
``--synthetic`` uses the invented benchmark column of ``bench_solve.py`` instead (no
neutral model needed).

The floor is four batched LU solves (``numpy.linalg.solve``) of the Jacobian blocks of
every sample and level, in the batches the ensemble uses — what a four-iteration Newton
cannot avoid. The floor and the serial ensemble are timed in turn within each repeat, and
their ratio is the median of the per-repeat ratios (issue 13 target: within 4x). Prints
wall times, samples per second, the batch size, the agreement of the serial and cluster
runs, and the cluster's speed-up (target: >= 1.6x on an idle machine for long runs).

    python benchmarks/bench_uncertainty.py [--samples 1000] [--levels 100] [--workers 2]

``--cli`` (issue 25) times the whole command ``ionochem uncertainty`` (a new process: start-up,
ensemble, summary and the output file) on the same column, ``--workers 1``, against the
floor measured in the same run, in turn with it: the ratio is the median of the per-repeat
ratios (target: 1000 samples x 63 levels within 6x the floor).

    python benchmarks/bench_uncertainty.py --cli --levels 63 --samples 1000 --repeat 3
"""

from __future__ import annotations

import argparse
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

ROOT = Path(__file__).resolve().parents[1]


def demo_column(folder: Path, levels: int, transport: bool = False) -> Path:
    """The demo scenario on ``levels`` levels from 90 to 450 km, written to ``folder``
    (without its [transport] section unless ``transport``)."""
    text = (ROOT / "scenarios" / "midlatitude_equinox.toml").read_text()
    if not transport:
        text = re.sub(r"(?ms)^\[transport\].*?(?=^\[|\Z)", "", text)
    alt = np.linspace(90.0, 450.0, levels)
    grid = "altitude_km = [" + ", ".join(f"{a:.6f}" for a in alt) + "]"
    text = re.sub(r"(?m)^altitude_km\s*=.*$", grid, text)
    reactions = (ROOT / "reactions" / "ionosphere.reactions").as_posix()
    text = re.sub(r"(?m)^reactions\s*=.*$", f'reactions = "{reactions}"', text)
    path = folder / "demo100.toml"
    path.write_text(text)
    return path


def synthetic_column(folder: Path, levels: int, transport: bool = False) -> Path:
    sys.path.insert(0, str(ROOT / "benchmarks"))
    from bench_solve import write_column
    return write_column(folder, levels)


def timed(fn, repeat):
    best, out = np.inf, None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t0)
    return best, out


def break_even(model, kernel, batch, sizes, workers, repeat):
    """Serial and worker-pool wall times per sample count (each pool started anew; the two
    timed in turn, ``repeat`` times; medians and the median of the per-pair ratios)."""
    A = kernel.altitude_km.size
    for samples in sizes:
        def ensemble(w, samples=samples):
            return U.run_ensemble(model, kernel,
                                  lambda lo, hi: U.draw_normals(0, lo, hi, kernel.width),
                                  samples, batch=batch, workers=w)
        ser, par = [], []
        for _ in range(repeat):
            ser.append(timed(lambda: ensemble(1), 1)[0])
            par.append(timed(lambda: ensemble(workers), 1)[0])
        ratio = statistics.median(a / b for a, b in zip(ser, par))
        print(f"{samples:7d} samples ({samples * A:9d} level solves): serial "
              f"{statistics.median(ser):7.2f} s, {workers} workers {statistics.median(par):7.2f}"
              f" s, speed-up {ratio:.2f}x (median of {repeat})")


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--samples", type=int, default=1000)
    ap.add_argument("--levels", type=int, default=100)
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--batch", type=int, default=None)
    ap.add_argument("--repeat", type=int, default=2)
    ap.add_argument("--synthetic", action="store_true",
                    help="the invented column of bench_solve.py instead of the demo scenario")
    ap.add_argument("--transport", action="store_true",
                    help="keep the demo's [transport] section (coupled levels)")
    ap.add_argument("--serial-only", action="store_true", help="skip the cluster run")
    ap.add_argument("--cli", action="store_true",
                    help="time the ionochem uncertainty command against the floor only")
    ap.add_argument("--break-even", type=int, nargs="+", metavar="N",
                    help="only time serial against --workers for these sample counts "
                         "(cluster start included), to place ensemble.AUTO_LEVEL_SOLVES")
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        path = (synthetic_column if args.synthetic else demo_column)(folder, args.levels,
                                                                     args.transport)
        t0 = time.perf_counter()
        model = ionochem.Model(ionochem.load_scenario(path))
        t_build = time.perf_counter() - t0
        kernel = U.SampleKernel(model)
        A, S, R = model.altitude_km.size, len(model.species), len(model.reactions)
        batch = args.batch or U.default_batch(A)
        print(f"{model.scenario.title}: {A} levels, {S} solved species, {R} reactions "
              f"({kernel.varied_reactions().size} uncertain); model built in {t_build:.2f} s")
        print(f"{args.samples} samples in batches of {batch} ({batch * A} Newton rows)")
        U.monte_carlo(model, 20, seed=0, batch=batch)                 # warm-up (imports)
        if args.break_even:
            break_even(model, kernel, batch, args.break_even, args.workers, args.repeat)
            return

        # The ensemble alone (draws + solves), then the whole analysis with its summary.
        def ensemble(workers):
            def rows(a, b):
                return U.draw_normals(0, a, b, kernel.width)
            return U.run_ensemble(model, kernel, rows, args.samples, batch=batch,
                                  workers=workers)

        # The floor: four batched LU solves of every sample's Jacobian blocks, per batch.
        with U.single_thread_blas():
            n_c = model.steady_densities().n
            J = np.tile(model.jacobian(n_c), (batch, 1, 1))
            f = np.tile(model.tendency(n_c), (batch, 1))[..., None]
        batches = -(-args.samples // batch)

        def floor():
            with U.single_thread_blas():
                for _ in range(batches * 4):
                    np.linalg.solve(J, f)

        if args.cli:
            cli_against_floor(path, folder, args, floor)
            return

        t_floor, t_ens = [], []
        n_ser = None
        for _ in range(args.repeat):
            t, _ = timed(floor, 1)
            t_floor.append(t)
            t, (_, n_ser) = timed(lambda: ensemble(1), 1)
            t_ens.append(t)
        t_ser = min(t_ens)
        ratio = statistics.median(a / b for a, b in zip(t_ens, t_floor))
        t_mc, ds = timed(lambda: U.monte_carlo(model, args.samples, seed=0, batch=batch),
                         args.repeat)
        print(f"floor    : {min(t_floor):6.2f} s (4 batched LU solves of {batches} batches "
              f"of {batch * A} blocks)")
        print(f"serial   : ensemble {t_ser:6.2f} s = {args.samples / t_ser:7.1f} samples/s "
              f"= {ratio:.1f}x the floor (median of {args.repeat}); monte_carlo() with "
              f"summary {t_mc:6.2f} s")
        if args.serial_only:
            return
        t_par, (_, n_par) = timed(lambda: ensemble(args.workers), args.repeat)
        print(f"{args.workers} workers: ensemble {t_par:6.2f} s = {args.samples / t_par:7.1f} "
              "samples/s (includes starting the worker processes)")
        big = n_ser > 0
        diff = np.max(np.abs(n_par[big] - n_ser[big]) / n_ser[big])
        print(f"speed-up {t_ser / t_par:.2f}x; largest relative difference serial vs "
              f"cluster {diff:.1e}")
        e = ds["density_quantiles"].sel(species="e")
        i = int(np.argmin(np.abs(ds["altitude"].values - 200.0)))
        print(f"Ne at {ds['altitude'].values[i]:.0f} km: median {float(e[2, i]):.3e} cm-3, "
              f"68 % range x{np.sqrt(float(e[3, i] / e[1, i])):.3f}")


def cli_against_floor(path, folder, args, floor):
    """The uncertainty command as a whole process, in turn with the floor."""
    cmd = [sys.executable, "-m", "ionochem", "uncertainty", str(path), "--samples",
           str(args.samples), "--workers", "1", "--no-progress", "-o",
           str(folder / "mc.nc")]
    ratios, t_cli, t_floor = [], [], []
    for _ in range(args.repeat):
        t, _ = timed(floor, 1)
        t_floor.append(t)
        t0 = time.perf_counter()
        subprocess.run(cmd, check=True, cwd=folder, stdout=subprocess.DEVNULL)
        t_cli.append(time.perf_counter() - t0)
        ratios.append(t_cli[-1] / t)
    print(f"floor    : {min(t_floor):6.2f} s")
    print(f"command  : {min(t_cli):6.2f} s (ionochem uncertainty, start-up and output "
          f"included) = {statistics.median(ratios):.1f}x the floor (median of "
          f"{args.repeat}; target <= 6x)")


if __name__ == "__main__":
    main()
