"""``discern`` over a 5 × 5 condition grid against the 25 steady solves with sensitivities
it cannot avoid.

The column is the mid-latitude demo scenario (``scenarios/midlatitude_equinox.toml``, an
invented site and date, 256 levels with O+ transport), the change N2+ recombination (both
branches, every level) × 0.5, the grid ``sun.f107`` = 70:230:40 × ``time.local_hour`` =
8:16:2. Timed in one run, interleaved per repeat so the load of the shared machine moves
both alike:

- reference: at every point the baseline model built from its scenario and
  ``Model.sensitivity()`` (one steady solve and the exact sensitivities);
- discern: :func:`ionochem.analysis.discern_sweep.discern` on the same grid (baseline and
  changed model, both with sensitivities, the covariances and separations).

The target (issue 29) is a ratio ≤ 3.

    python benchmarks/bench_discern.py [--repeats 2]
"""

from __future__ import annotations

import argparse
import time
from pathlib import Path

import ionochem
from ionochem.analysis.compare import changed_model
from ionochem.analysis.discern import Observable, Uncertain
from ionochem.analysis.discern_sweep import discern
from ionochem.analysis.sweep import make_spec, point_scenario
from ionochem.analysis.sweep_axes import parse_vary, point_values

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "scenarios" / "midlatitude_equinox.toml"
VARY = ["sun.f107=70:230:40", "time.local_hour=8:16:2"]


def reference(spec):
    for i in range(spec.total):
        scen = point_scenario(spec, point_values(spec.axes, i))
        ionochem.Model(scen, reaction_list=spec.reaction_list).sensitivity()


def run_discern(spec):
    obs = [Observable("N2+"), Observable("e"), Observable("N2+", "O+(total)")]
    return discern(spec, lambda b: changed_model(b, scale={"DR_N2plus_branches": 0.5}),
                   obs, {}, Uncertain())


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeats", type=int, default=2)
    args = ap.parse_args()
    spec = make_spec(ionochem.load_scenario(DEMO), parse_vary(VARY))
    assert spec.total == 25
    ref, dis = [], []
    for _ in range(args.repeats):
        t = time.perf_counter()
        reference(spec)
        ref.append(time.perf_counter() - t)
        t = time.perf_counter()
        run_discern(spec)
        dis.append(time.perf_counter() - t)
    r, d = min(ref), min(dis)
    print(f"25 steady solves with sensitivities: {r:.2f} s; discern 5 x 5: {d:.2f} s; "
          f"ratio {d / r:.2f} (target <= 3)")


if __name__ == "__main__":
    main()
