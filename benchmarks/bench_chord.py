"""Newton against a chord variant (the Jacobian's inverse reused for several iterations).

An experiment for choosing the default, not a second solver: on the demo column with 200
and 1,000 levels, the project's damped Newton (``Model.steady_densities``) against a bare
chord iteration from the same start (fixed-point sweeps), the Jacobian inverted every
``refresh`` iterations, no backtracking, stopping at the residual test alone. ``refresh 1``
is a bare Newton, so the rows separate the cost of Newton's safeguards (backtracking, step
test, active set) from what reusing the Jacobian saves. One BLAS thread, medians.

    python benchmarks/bench_chord.py [--levels 200 1000]
"""

from __future__ import annotations

import argparse
import statistics
import tempfile
import time

import numpy as np
from bench_perf import scenario

import ionochem
from ionochem.solve import steady as St
from ionochem.solve.threads import single_thread_blas


def chord(mech, k, given, n, rtol, refresh):
    """Bare chord iteration; returns (n, iterations, Jacobians built)."""
    floor = St._rate_floor(1e-30, rtol)
    inv, it, jac = None, 0, 0
    for i in range(200):
        f, P, L = mech.tendency_production_loss(n, k, given)
        if i > 0 and np.all(St._relative_residual(f, P, L, floor) <= rtol):
            break
        if inv is None or i % refresh == 0:
            inv = np.linalg.inv(mech.jacobian(n, k, given))
            jac += 1
        dn, lam = St._positive_step(n, -np.einsum("bij,bj->bi", inv, f))
        n = np.maximum(n + np.where(np.isfinite(lam), lam, 0.0)[:, None] * dn, 0.0)
        it += 1
    return n, it, jac


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--levels", type=int, nargs="+", default=[200, 1000])
    ap.add_argument("--repeats", type=int, default=5)
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp, single_thread_blas():
        for levels in args.levels:
            m = ionochem.Model(scenario(levels, tmp))
            mech, k, g = m.mechanism, m.rate_coefficients(), m.given
            ref = m.steady_densities()

            def start(ref=ref, mech=mech, k=k, g=g):
                return St.initial_guess(np.zeros_like(ref.n),
                                        lambda x: mech.solved_production_loss(x, k, g))

            ts = []
            for _ in range(args.repeats):
                t0 = time.perf_counter()
                m.steady_densities()
                ts.append(time.perf_counter() - t0)
            tn = statistics.median(ts)
            print(f"{levels} levels: Newton {tn * 1e3:.1f} ms "
                  f"({ref.iterations.max()} iterations at most)")
            big = ref.n > 1e-12 * ref.n.max(axis=1, keepdims=True)
            for refresh in (1, 2, 3, 5):
                ts = []
                for _ in range(args.repeats):
                    t0 = time.perf_counter()
                    n, it, jac = chord(mech, k, g, start(), 1e-10, refresh)
                    ts.append(time.perf_counter() - t0)
                err = np.max(np.abs(n[big] - ref.n[big]) / ref.n[big])
                tc = statistics.median(ts)
                print(f"  chord, Jacobian every {refresh}: {tc * 1e3:.1f} ms ({tc / tn:.2f}x "
                      f"Newton), {it} iterations, {jac} Jacobians, largest relative "
                      f"difference {err:.1e}")


if __name__ == "__main__":
    main()
