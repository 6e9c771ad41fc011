"""Steady solve of a 200-level column against scipy solve_ivp(BDF) with a finite-difference
Jacobian (block sparsity given) integrated to steady state.

The column is synthetic (invented rates and densities): 16 solved ions and excited states,
a vibrational family, 60+ reactions. Prints wall times, their ratio and the agreement.

    python benchmarks/bench_solve.py [--levels 200]
"""

from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path

import numpy as np
import scipy.sparse as sp
from scipy.integrate import solve_ivp

import ionochem

NEUTRALS = ("N2", "O2", "O", "NO", "N", "H", "He")


def synthetic_reactions(top_level=7):
    """An invented mechanism: 16+ solved species, 60+ reactions (rates are invented)."""
    lines = [
        "P_O: O -> O+ + e | k = prescribed | ref = invented benchmark",
        "P_O2D: O -> O+(2D) + e | k = prescribed | ref = invented benchmark",
        "P_O2P: O -> O+(2P) + e | k = prescribed | ref = invented benchmark",
        "P_O2: O2 -> O2+ + e | k = prescribed | ref = invented benchmark",
        "P_NP: N2 -> N+ + N + e | k = prescribed | ref = invented benchmark",
        "P_He: He -> He+ + e | k = prescribed | ref = invented benchmark",
        "P_H: H -> H+ + e | k = prescribed | ref = invented benchmark",
        f"P_N2(v): N2 -> N2+(v) + e | k = prescribed | levels v = 0..{top_level} "
        "| ref = invented benchmark",
        f"R_N2(v): N2+(v) + N2 -> N2+(v=0) + N2 | k = 5e-10 | levels v = 1..{top_level} "
        "| ref = invented benchmark",
        f"C1(v): N2+(v) + O -> NO+ + N | k = 1.4e-10*(300/Teff)^0.44 | levels v = 0..{top_level}"
        " | ref = invented benchmark",
        f"C2(v): N2+(v) + O -> O+ + N2 | k = 1e-11*(300/Teff)^0.23 | levels v = 0..{top_level}"
        " | ref = invented benchmark",
        f"C3(v): N2+(v) + O2 -> O2+ + N2 | k = 5e-11*(300/Teff) | levels v = 0..{top_level}"
        " | ref = invented benchmark",
        f"D1(v): N2+(v) + e -> N(2D) + N | k = 2.2e-7*(300/Te)^0.39*(1 + 0.05*v) "
        f"| levels v = 0..{top_level} | ref = invented benchmark",
        "C4: O+ + N2 -> NO+ + N | k = 1.2e-12*(300/Teff)^0.45 | ref = invented benchmark",
        "C5: O+ + O2 -> O2+ + O | k = 2.1e-11*(300/Teff)^0.8 | ref = invented benchmark",
        "C6: O+ + NO -> NO+ + O | k = 8e-13 | ref = invented benchmark",
        "C7: O+ + H -> H+ + O | k = 6e-10 | ref = invented benchmark",
        "C8: H+ + O -> O+ + H | k = 5.3e-10 | ref = invented benchmark",
        "C9: O+(2D) + N2 -> N2+(v=1) + O | k = 8e-10 | ref = invented benchmark",
        "C10: O+(2D) + O -> O+ + O | k = 1e-11 | ref = invented benchmark",
        "C11: O+(2D) + O2 -> O2+ + O | k = 7e-10 | ref = invented benchmark",
        "C12: O+(2D) + e -> O+ + e | k = 7.8e-8*(300/Te)^0.5 | ref = invented benchmark",
        "C13: O+(2D) -> O+ | k = 7.7e-5 | ref = invented benchmark",
        "C14: O+(2P) + N2 -> N2+(v=2) + O | k = 4.8e-10 | ref = invented benchmark",
        "C15: O+(2P) + O -> O+ + O | k = 5.2e-11 | ref = invented benchmark",
        "C16: O+(2P) + e -> O+(2D) + e | k = 1.5e-7*(300/Te)^0.5 | ref = invented benchmark",
        "C17: O+(2P) + e -> O+ + e | k = 4e-8*(300/Te)^0.5 | ref = invented benchmark",
        "C18: O+(2P) -> O+(2D) | k = 0.17 | ref = invented benchmark",
        "C19: O+(2P) -> O+ | k = 0.047 | ref = invented benchmark",
        "C20: O2+ + NO -> NO+ + O2 | k = 4.4e-10 | ref = invented benchmark",
        "C21: O2+ + N -> NO+ + O | k = 1.2e-10 | ref = invented benchmark",
        "C22: O2+ + N(2D) -> N+ + O2 | k = 2.5e-10 | ref = invented benchmark",
        "C23: N+ + O2 -> O2+ + N | k = 3.1e-10 | ref = invented benchmark",
        "C24: N+ + O2 -> NO+ + O | k = 2.6e-10 | ref = invented benchmark",
        "C25: N+ + O -> O+ + N | k = 2.2e-12 | ref = invented benchmark",
        "C26: He+ + N2 -> N+ + N + He | k = 7.8e-10 | ref = invented benchmark",
        "C27: He+ + O2 -> O+ + O + He | k = 1.1e-9 | ref = invented benchmark",
        "C28: N(2D) + O2 -> NO + O | k = 5.3e-12 | ref = invented benchmark",
        "C29: N(2D) + O -> N + O | k = 2e-12 | ref = invented benchmark",
        "C30: N(2D) + e -> N + e | k = 3.9e-10*(Te/300)^0.81 | ref = invented benchmark",
        "C31: N(2D) -> N | k = 1.07e-5 | ref = invented benchmark",
        "C32: O+ + N(2D) -> N+ + O | k = 1.3e-10 | ref = invented benchmark",
        "D2: O2+ + e -> O + O | k = 1.95e-7*(300/Te)^0.7 | ref = invented benchmark",
        "D3: NO+ + e -> N(2D) + O | k = 3.4e-7*(300/Te)^0.5 | ref = invented benchmark",
        "D4: NO+ + e -> N + O | k = 0.6e-7*(300/Te)^0.5 | ref = invented benchmark",
        "D5: O+ + e -> O | k = 3.7e-12*(250/Te)^0.7 | ref = invented benchmark",
        "D6: N+ + e -> N | k = 3.6e-12*(250/Te)^0.7 | ref = invented benchmark",
        "D7: H+ + e -> H | k = 4e-12*(250/Te)^0.7 | ref = invented benchmark",
        "D8: He+ + e -> He | k = 4.8e-12*(250/Te)^0.7 | ref = invented benchmark",
    ]
    return "\n".join(lines) + "\n"


def write_column(folder: Path, levels: int):
    alt = np.linspace(100.0, 500.0, levels)
    h = np.exp(-(alt - 100) / 30)
    dens = {"N2": 1e13 * h, "O2": 2e12 * h ** 1.1, "O": 4e11 * np.exp(-(alt - 100) / 55),
            "NO": 1e8 * h, "N": 2e8 * np.exp(-(alt - 100) / 60),
            "H": 1e5 * np.ones_like(alt), "He": 1e7 * np.exp(-(alt - 100) / 150)}
    Tn = 1000 - 800 * np.exp(-(alt - 100) / 40)
    Te = Tn + 1500 * (1 - np.exp(-(alt - 100) / 80))
    q = 3e3 * np.exp(1 - (alt - 160) / 30 - np.exp(-(alt - 160) / 30))
    (folder / "b.reactions").write_text(synthetic_reactions())
    head = "altitude_km," + ",".join(NEUTRALS) + ",Tn_K\n"
    (folder / "n.csv").write_text(head + "\n".join(
        f"{a}," + ",".join(f"{dens[s][i]:.6e}" for s in NEUTRALS) + f",{Tn[i]}"
        for i, a in enumerate(alt)) + "\n")
    (folder / "t.csv").write_text("altitude_km,Te_K,Ti_K\n" + "\n".join(
        f"{a},{Te[i]},{0.5 * (Te[i] + Tn[i])}" for i, a in enumerate(alt)) + "\n")
    share = {"P_O": 0.4, "P_O2D": 0.25, "P_O2P": 0.1, "P_O2": 0.1, "P_NP": 0.02,
             "P_He": 0.001, "P_H": 0.001}
    fc = [0.6, 0.25, 0.08, 0.04, 0.015, 0.008, 0.004, 0.003]
    cols = dict(share)
    for v, f in enumerate(fc):
        cols[f"P_N2(v={v})"] = 0.12 * f
    (folder / "p.csv").write_text("altitude_km," + ",".join(cols) + "\n" + "\n".join(
        f"{a}," + ",".join(f"{q[i] * s:.6e}" for s in cols.values()) for i, a in enumerate(alt))
        + "\n")
    (folder / "b.toml").write_text(
        'title = "benchmark column (invented)"\nreactions = "b.reactions"\n[grid]\n'
        f"altitude_km = {list(map(float, alt))}\n"
        '[neutrals]\nmodel = "table"\ntable = "n.csv"\n'
        '[temperatures]\nelectron = "table"\nion = "table"\ntable = "t.csv"\n'
        '[production]\ntable = "p.csv"\n')
    return folder / "b.toml"


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--levels", type=int, default=200)
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        model = ionochem.Model(ionochem.load_scenario(write_column(Path(tmp), args.levels)))
        A, S = model.altitude_km.size, len(model.species)
        print(f"{A} levels, {S} solved species, {len(model.reactions)} reactions")
        model.solve()                                  # warm-up (imports, caches)
        # Best of several repeats: the machine may be shared, the minimum is the cost.
        times = []
        for _ in range(7):
            t0 = time.perf_counter()
            ds = model.solve()
            times.append(time.perf_counter() - t0)
        t_solve = min(times)
        n = np.stack([ds["density"].sel(species=s).values for s in model.species], -1)
        newton = []
        for _ in range(7):
            t0 = time.perf_counter()
            res = model.steady_densities()
            newton.append(time.perf_counter() - t0)
        t_newton = min(newton)
        print(f"solve(): {t_solve * 1e3:.1f} ms (of which Newton {t_newton * 1e3:.1f} ms, "
              f"max iterations {res.iterations.max()})")

        block = sp.block_diag([np.ones((S, S))] * A, format="csc")

        def rhs(t, y):
            return model.tendency(y.reshape(A, S)).ravel()

        t0 = time.perf_counter()
        sol = solve_ivp(rhs, (0.0, 1e7), np.zeros(A * S), method="BDF", rtol=1e-10,
                        atol=1e-12, jac_sparsity=block)
        t_ivp = time.perf_counter() - t0
        y = sol.y[:, -1].reshape(A, S)
        big = n > 1e-6 * n.max(axis=1, keepdims=True)
        agree = np.max(np.abs(y[big] - n[big]) / n[big])
        print(f"solve_ivp(BDF, FD Jacobian, block sparsity) to 1e7 s: {t_ivp:.2f} s, "
              f"{sol.nfev} evaluations")
        print(f"ratio solve_ivp / solve(): {t_ivp / t_solve:.0f}x; largest relative "
              f"difference {agree:.2e}")


if __name__ == "__main__":
    main()
