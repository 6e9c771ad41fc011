"""Steady column with O+ transport on 200 levels: against the photochemical solve, against
scipy's solve_ivp (BDF, the same analytic sparse Jacobian) run to steady state, and the
cost of all exact sensitivities against one steady solve.

The column is the demo scenario (an invented site: scenarios/midlatitude_equinox.toml) on
200 levels from 90 to 587.5 km with a [transport] section. Prints wall times, their ratios
and the agreement of the two steady states.

    python benchmarks/bench_transport.py [--repeat 3]
"""

from __future__ import annotations

import argparse
import time
from pathlib import Path

import numpy as np

import ionochem
from ionochem.io.scenario import Grid, Transport
from ionochem.solve.transient import integrate

ROOT = Path(__file__).resolve().parents[1]


def _best(fn, repeat):
    times = []
    out = None
    for _ in range(repeat):
        t = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t)
    return min(times), out


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args(argv)

    base = ionochem.load_scenario(ROOT / "scenarios" / "midlatitude_equinox.toml")
    grid = Grid(tuple(90.0 + 2.5 * np.arange(200)))
    scen = base.replace(grid=grid, transport=Transport())
    t0 = time.perf_counter()
    model = ionochem.Model(scen)
    t_build = time.perf_counter() - t0
    A, S = model.altitude_km.size, len(model.species)
    print(f"column: {A} levels x {S} solved species, {len(model.reactions)} reactions; "
          f"model built in {t_build:.2f} s")

    transport = model.transport
    model.transport = None
    t_photo, photo = _best(model.steady_densities, args.repeat)
    model.transport = transport
    t_steady, res = _best(model.steady_densities, args.repeat)
    print(f"photochemical steady solve:         {t_photo * 1e3:8.1f} ms")
    print(f"steady solve with transport:        {t_steady * 1e3:8.1f} ms "
          f"({t_steady / t_photo:.1f}x photochemical; Newton iterations "
          f"{int(res.iterations.max())}, largest residual {res.residual.max():.1e})")

    def ivp():
        return integrate([3e6], photo.n, lambda t, n: model.tendency(n),
                         lambda t, n: model.column_jacobian(n), rtol=1e-8, atol=1e-6)[-1]
    t_ivp, n_ivp = _best(ivp, 1)
    i = transport.index
    top = model.altitude_km >= 150.0
    diff = np.abs(n_ivp[top, i] / res.n[top, i] - 1).max()
    print(f"solve_ivp BDF to t = 3e6 s:         {t_ivp * 1e3:8.1f} ms "
          f"({t_ivp / t_steady:.0f}x the steady solve; O+ agrees to {diff:.1e} above 150 km)")

    ds = model.solve()
    t_sens, _ = _best(lambda: model.sensitivity(result=ds), args.repeat)
    print(f"all sensitivities (given solution): {t_sens * 1e3:8.1f} ms "
          f"({t_sens / t_steady:.2f} steady solves; target <= 3)")


if __name__ == "__main__":
    main()
