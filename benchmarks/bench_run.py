"""Wall time of `ionochem run` on the mid-latitude demo after import (target: under 3 s).

Measures, after the package is imported: building the model (NRLMSIS, temperatures, slant
columns, photo and photoelectron rates, rate coefficients), the steady solve with the result
dataset, and writing the netCDF file. Best of five on a possibly shared machine.

    python benchmarks/bench_run.py
"""

from __future__ import annotations

import tempfile
import time
from pathlib import Path

import ionochem
from ionochem.io.netcdf import write_netcdf

SCENARIO = Path(__file__).resolve().parents[1] / "scenarios" / "midlatitude_equinox.toml"


def main():
    best = None
    with tempfile.TemporaryDirectory() as tmp:
        for _ in range(5):
            t0 = time.perf_counter()
            scen = ionochem.load_scenario(SCENARIO)
            model = ionochem.Model(scen)
            t1 = time.perf_counter()
            ds = model.solve()
            t2 = time.perf_counter()
            write_netcdf(ds, Path(tmp) / "out.nc")
            t3 = time.perf_counter()
            row = (t3 - t0, t1 - t0, t2 - t1, t3 - t2)
            best = row if best is None or row[0] < best[0] else best
    print(f"{model.altitude_km.size} levels, {len(model.species)} solved species, "
          f"{len(model.reactions)} reactions")
    print(f"total {best[0]:.2f} s: environment and rates {best[1]:.2f} s, "
          f"solve and dataset {best[2]:.2f} s, netCDF {best[3]:.2f} s (target < 3 s)")


if __name__ == "__main__":
    main()
