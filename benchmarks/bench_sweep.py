"""Sweep throughput: columns per second of a 100-level column, serially and on a
two-worker dask LocalCluster, and the cost dask adds per column.

The column is the mid-latitude demo scenario (``scenarios/midlatitude_equinox.toml``, an
invented site and date) on 100 levels from 90 to 450 km, swept over ``sun.f107``. A column
is built and solved from its scenario each time (neutral model, photo rates, Newton), as a
sweep point is. Reported:

- serial: columns per second in this process (``run_sweep`` without a store);
- dask: columns per second on ``--workers`` single-threaded workers of a warm cluster
  (start-up and the workers' first imports, paid once per sweep, are timed apart);
- dask overhead per column: one worker's time per column minus the serial time per column
  (scatter of the sweep's spec, task submission, result transfer), and the round trip of
  an empty task;
- the store: the same serial sweep written to netCDF through the resumable store, per
  column.

    python benchmarks/bench_sweep.py [--points 16] [--levels 100] [--workers 2]
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

import ionochem
from ionochem.analysis.ensemble import dask_client
from ionochem.analysis.sweep import make_spec, run_sweep
from ionochem.analysis.sweep_axes import parse_vary

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "benchmarks"))
from bench_uncertainty import demo_column  # noqa: E402


def _noop(x):
    return x


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--points", type=int, default=16)
    ap.add_argument("--levels", type=int, default=100)
    ap.add_argument("--workers", type=int, default=2)
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        scen = ionochem.load_scenario(demo_column(tmp, args.levels))
        f107 = ",".join(f"{v:g}" for v in np.linspace(70, 250, args.points))
        spec = make_spec(scen, parse_vary([f"sun.f107={f107}"]))
        run_sweep(make_spec(scen, parse_vary(["sun.f107=100"])))        # warm imports

        t0 = time.perf_counter()
        serial = run_sweep(spec).dataset
        t_serial = time.perf_counter() - t0

        t0 = time.perf_counter()
        run_sweep(spec, output=tmp / "s.nc")
        t_store = time.perf_counter() - t0

        t0 = time.perf_counter()
        with dask_client(args.workers) as client:
            t_start = time.perf_counter() - t0
            n = 200
            t1 = time.perf_counter()
            for i in range(n):
                client.submit(_noop, i, pure=False).result()
            t_task = (time.perf_counter() - t1) / n
        from ionochem.analysis import sweep as S
        from ionochem.io.sweep_file import _unpack, layout_of
        layout = layout_of(S.point_dataset(spec, 0))
        ref = serial["density"].values
        todo = [(i, i + 1) for i in range(spec.total)]
        times, same = {}, True
        warm = [(i, i + 1) for i in range(min(spec.total, 4))]
        for w in sorted({1, args.workers}):
            with dask_client(w) as client:
                address = client.scheduler.address
                # warm the workers (imports, the neutral model's first call) on a few
                # columns, then time the sweep on the same warm cluster
                S._run_dask(spec, layout, warm, None, address, lambda a, b, r: None)
                rows = {}
                t0 = time.perf_counter()
                S._run_dask(spec, layout, todo, None, address,
                            lambda a, b, r, rows=rows: rows.__setitem__(a, r[0]))
                times[w] = time.perf_counter() - t0
            got = np.concatenate([rows[i] for i in range(spec.total)])
            same = same and bool(np.array_equal(_unpack(got, layout)["density"], ref))
    per_serial = t_serial / spec.total
    per1 = times[1] / spec.total
    perw = times[args.workers] / spec.total
    print(f"column: {args.levels} levels, {len(serial['reaction'])} reactions, "
          f"{int((serial['role'] == 'solved').sum())} solved species; {spec.total} columns")
    print(f"serial            {spec.total / t_serial:7.2f} columns/s  "
          f"({per_serial * 1e3:.0f} ms per column)")
    print(f"serial + store    {spec.total / t_store:7.2f} columns/s  (netCDF through the "
          "resumable store)")
    print(f"dask, {args.workers} workers   {1 / perw:7.2f} columns/s  (cluster start-up "
          f"{t_start:.1f} s apart; identical to serial: {same})")
    print(f"dask, 1 worker    {1 / per1:7.2f} columns/s  -> overhead per column "
          f"{(per1 - per_serial) * 1e3:+.0f} ms ({(per1 / per_serial - 1):+.0%})")
    print(f"empty dask task round trip: {t_task * 1e3:.1f} ms")
    print(f"speed-up {args.workers} workers / serial: {per_serial / perw:.2f}")


if __name__ == "__main__":
    main()
