"""Cost of the exact sensitivities against one steady solve and against brute force.

On the mid-latitude demo scenario (invented site and date; the default reaction list, the
full grid of the scenario, at least 150 levels):

1. ``model.sensitivity()`` — every species × every reaction (and Te) × every level, which
   includes its own steady solve — against one ``model.solve()`` and against the Newton
   iteration alone. Target: at most 2 steady solves (issue 25; was 3).
2. Brute-force finite differences, on the demo without its [transport] section (the
   photochemical column: integrating the transported column from zero takes tens of
   minutes): for each reaction, re-integrate the whole column to steady state with scipy
   ``solve_ivp`` (BDF, finite-difference Jacobian with the block
   sparsity given, from zero to 1e7 s) at k·exp(+h) and k·exp(−h). Only a few reactions are
   timed; the total for all reactions and Te (2 (R + 1) integrations) is extrapolated from
   their mean, and printed as such. Target: the exact method at least 1000× faster.
3. On the transported demo column, the exact sensitivities of the same reactions against
   central differences of steady re-solves (``Model.with_changes(scale=...)``, Newton).

    python benchmarks/bench_sensitivity.py [--reactions 3] [--repeats 7]
"""

from __future__ import annotations

import argparse
import re
import tempfile
import time
from pathlib import Path

import numpy as np
import scipy.sparse as sp
from scipy.integrate import solve_ivp

import ionochem

DEMO = Path(__file__).resolve().parents[1] / "scenarios" / "midlatitude_equinox.toml"
STEP = 1e-3          # ln-k step of the brute-force differences


def best_of(fn, repeats):
    """Smallest wall time of ``repeats`` calls (the machine may be shared) and the result."""
    times, out = [], None
    for _ in range(repeats):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return min(times), out


def integrate_to_steady(model, k):
    """Steady solved densities (A, S) by integrating dn/dt from zero to 1e7 s (BDF)."""
    mech, given = model.mechanism, model.given
    A, S = model.altitude_km.size, len(model.species)
    block = sp.block_diag([np.ones((S, S))] * A, format="csc")

    def rhs(t, y):
        return mech.tendency(y.reshape(A, S), k, given).ravel()

    sol = solve_ivp(rhs, (0.0, 1e7), np.zeros(A * S), method="BDF", rtol=1e-10, atol=1e-12,
                    jac_sparsity=block)
    return sol.y[:, -1].reshape(A, S)


def photochemical(folder):
    """The demo scenario without its [transport] section, written to ``folder``."""
    text = re.sub(r"(?ms)^\[transport\].*?(?=^\[|\Z)", "", DEMO.read_text())
    text = text.replace('"../reactions/', f'"{DEMO.parents[1] / "reactions"}/')
    path = Path(folder) / "demo_photochemical.toml"
    path.write_text(text)
    return ionochem.Model(ionochem.load_scenario(path))


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--reactions", type=int, default=3,
                    help="reactions timed by brute force (the rest extrapolated)")
    ap.add_argument("--repeats", type=int, default=7)
    args = ap.parse_args()

    model = ionochem.Model(ionochem.load_scenario(DEMO))
    A, S, R = model.altitude_km.size, len(model.species), len(model.reactions)
    print(f"demo scenario: {A} levels, {S} solved species, {R} reactions")
    model.sensitivity()                                   # warm-up (imports, caches)

    t_solve, ds = best_of(model.solve, args.repeats)
    t_newton, _ = best_of(model.steady_densities, args.repeats)
    t_sens, sens = best_of(model.sensitivity, args.repeats)
    t_sens_given, _ = best_of(lambda: model.sensitivity(result=ds), args.repeats)
    n_coef = sens["sensitivity"].size + sens["sensitivity_Te"].size
    print(f"model.solve()                    {t_solve * 1e3:8.1f} ms "
          f"(Newton alone {t_newton * 1e3:.1f} ms)")
    print(f"model.sensitivity()              {t_sens * 1e3:8.1f} ms for {n_coef} coefficients "
          f"(with a given solution: {t_sens_given * 1e3:.1f} ms)")
    print(f"  ratio sensitivity()/solve()        {t_sens / t_solve:6.2f}  (target <= 2)")
    print(f"  ratio sensitivity()/Newton solve   {t_sens / t_newton:6.2f}")

    # Exact against steady re-solves on the transported column.
    picks = np.linspace(0, R - 1, args.reactions).round().astype(int)
    for j in picks:
        rid = model.reactions[j]
        ln = {sign: np.log(np.maximum(np.stack(
            [model.with_changes(scale={rid: float(np.exp(sign * STEP))}).solve()["density"]
             .sel(species=s_).values for s_ in model.species], -1), 1e-300)) for sign in (1, -1)}
        fd = (ln[1] - ln[-1]) / (2 * STEP)
        ex = np.stack([sens["sensitivity"].sel(species=s_, reaction=rid).values
                       for s_ in model.species], -1)
        big = np.stack([ds["density"].sel(species=s_).values for s_ in model.species], -1)
        keep = big > 1e-6 * big.max(axis=1, keepdims=True)
        print(f"  transported column {rid:<24} largest |S_fd - S_exact| "
              f"{np.abs(fd - ex)[keep].max():.1e} (steady re-solves)")

    # Brute force on a few reactions spread through the list, photochemical column.
    tmp = tempfile.TemporaryDirectory()
    model = photochemical(tmp.name)
    ds = model.solve()
    sens = model.sensitivity(result=ds)
    t_sens, _ = best_of(model.sensitivity, args.repeats)
    print(f"photochemical column: model.sensitivity() {t_sens * 1e3:.1f} ms")
    k0 = model.rate_coefficients()
    exact = sens["sensitivity"]
    ln_ne = {}
    times = []
    worst = 0.0
    for j in picks:
        rid = model.reactions[j]
        for sign in (+1, -1):
            k = k0.copy()
            k[:, j] *= np.exp(sign * STEP)
            t0 = time.perf_counter()
            n = integrate_to_steady(model, k)
            times.append(time.perf_counter() - t0)
            ln_ne[sign] = np.log(np.maximum(n, 1e-300))
        fd = (ln_ne[1] - ln_ne[-1]) / (2 * STEP)          # (A, S)
        ex = np.stack([exact.sel(species=s, reaction=rid).values for s in model.species], -1)
        big = np.stack([ds["density"].sel(species=s).values for s in model.species], -1)
        keep = big > 1e-6 * big.max(axis=1, keepdims=True)
        diff = np.abs(fd - ex)[keep].max()
        worst = max(worst, diff)
        print(f"  brute force {rid:<24} 2 integrations {times[-2] + times[-1]:7.2f} s, "
              f"largest |S_fd - S_exact| {diff:.1e}")
    per_run = float(np.mean(times))
    total = per_run * 2 * (R + 1)
    print(f"brute force: {len(times)} solve_ivp integrations timed, mean {per_run:.2f} s each;"
          f" extrapolated to all {R} reactions + Te (2 x {R + 1} integrations): "
          f"{total:.0f} s")
    print(f"  ratio brute force (extrapolated) / sensitivity()  {total / t_sens:8.0f}x "
          "(target >= 1000x)")
    print(f"  largest difference of the timed finite differences from the exact values "
          f"{worst:.1e}")


if __name__ == "__main__":
    main()
