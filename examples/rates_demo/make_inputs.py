"""Write the INVENTED inputs of the rates demo (nothing here is a measurement or a published
value): level-resolved dissociative-recombination cross sections of N2+(v = 0..4) with a
+-25 % theory band, a "new merged-beam measurement" of a beam holding an unknown level mix,
level-resolved signals of three detector channels, and a tabulated per-level k(Te) with a
band (as a laboratory group would hand it over).

Run from anywhere:  python examples/rates_demo/make_inputs.py [FOLDER]
The files go into FOLDER (default: this script's folder, where the README's commands expect
them); a caller through runpy may set ``OUT`` in its init_globals instead.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

from ionochem.rates import beam_rate

if "OUT" not in globals():
    OUT = Path(sys.argv[1]) if __name__ == "__main__" and len(sys.argv) > 1 \
        else Path(__file__).resolve().parent
OUT = Path(OUT)

rng = np.random.default_rng(2026)        # fixed seed: the demo files are reproducible

# --- invented cross sections: a 1/E capture law with a level-dependent strength, a
# fall-off above a few tenths of an eV and two narrow invented resonances per level.
E = np.geomspace(1e-6, 20.0, 3000)                    # eV
strength = np.array([4.8, 3.6, 5.4, 2.9, 2.2]) * 1e-16  # eV cm2 (invented)
falloff = np.array([0.30, 0.25, 0.35, 0.20, 0.15])     # eV (invented)
res_E = np.array([[0.012, 0.08], [0.02, 0.11], [0.009, 0.06], [0.03, 0.15], [0.015, 0.2]])
sigma = np.empty((E.size, 5))
for v in range(5):
    s = strength[v] / E / (1.0 + (E / falloff[v]) ** 1.5)
    for er in res_E[v]:
        s = s + 0.15 * strength[v] / er * np.exp(-0.5 * ((E - er) / (0.08 * er)) ** 2)
    sigma[:, v] = s

header = ["energy_eV"]
cols = [E]
for v in range(5):
    header += [f"v{v}", f"v{v}_low", f"v{v}_high"]
    cols += [sigma[:, v], 0.8 * sigma[:, v], 1.25 * sigma[:, v]]
with open(OUT / "sigma_n2plus.csv", "w") as fh:
    fh.write("# INVENTED level-resolved N2+ dissociative recombination cross sections (cm2)\n")
    fh.write("# for the ionochem rates demo; not a calculation and not a measurement.\n")
    fh.write("# vN_low / vN_high: an invented +-25 % theory band.\n")
    fh.write(",".join(header) + "\n")
    for row in zip(*cols):
        fh.write(",".join(f"{x:.6e}" for x in row) + "\n")

# --- an invented "new merged-beam measurement" (site and date invented: the Lindholm
# test ring, 2026): a beam with 60 % v=0, 30 % v=1, 10 % v=2, 3 % noise.
kT_perp, kT_par = 2.0e-3, 5.0e-5                       # eV
Ed = np.geomspace(1e-4, 1.0, 60)
truth = np.array([0.6, 0.3, 0.1, 0.0, 0.0])
curve = beam_rate(E, sigma, Ed, kT_perp, kT_par) @ truth
err = 0.03 * curve
measured = curve + rng.normal(0.0, err)
with open(OUT / "measured_curve.csv", "w") as fh:
    fh.write("# INVENTED merged-beam rate curve (a made-up measurement at an invented ring)\n")
    fh.write(f"# kT_perp = {kT_perp} eV, kT_par = {kT_par} eV; true mix 0.6/0.3/0.1/0/0\n")
    fh.write("detuning_eV,rate_cm3_s,sigma_cm3_s\n")
    for row in zip(Ed, measured, err):
        fh.write(",".join(f"{x:.6e}" for x in row) + "\n")

# --- invented level-resolved signals: three channels with known (invented) responses.
design = np.array([[1.0, 0.2, 0.1, 0.05, 0.0],
                   [0.1, 1.0, 0.3, 0.1, 0.05],
                   [0.05, 0.2, 1.0, 0.4, 0.2],
                   [0.0, 0.1, 0.3, 1.0, 0.5],
                   [0.0, 0.0, 0.1, 0.3, 1.0],
                   [0.5, 0.5, 0.5, 0.5, 0.5]])
signal = 1.0e4 * design @ truth
s_err = np.sqrt(signal + 25.0)                         # counting noise (invented)
signal = signal + rng.normal(0.0, s_err)
with open(OUT / "design.csv", "w") as fh:
    fh.write("# INVENTED response of each detector channel to each level\n")
    fh.write("channel," + ",".join(f"v{v}" for v in range(5)) + "\n")
    for i, row in enumerate(design):
        fh.write(f"{i}," + ",".join(f"{x:g}" for x in row) + "\n")
with open(OUT / "signals.csv", "w") as fh:
    fh.write("# INVENTED detector counts (same invented beam as measured_curve.csv)\n")
    fh.write("channel,signal,sigma\n")
    for i, (s, e) in enumerate(zip(signal, s_err)):
        fh.write(f"{i},{s:.1f},{e:.1f}\n")
# --- an invented tabulated per-level k(Te) (cm3 s-1) with a one-sigma band, in the wide
# layout `ionochem rates table` reads: k_v = A_v (300/Te)^b_v, band k/1.3 .. 1.3 k for v = 0
# and k/2 .. 2 k above (all numbers invented).
Te = np.array([100.0, 200.0, 300.0, 500.0, 1000.0, 2000.0, 3000.0, 5000.0])
A = np.array([2.2e-7, 1.6e-7, 1.5e-7, 1.3e-7, 1.4e-7])
b = np.array([0.39, 0.45, 0.50, 0.50, 0.55])
spread = np.array([1.3, 2.0, 2.0, 2.0, 2.0])
with open(OUT / "dr_rates_tabulated.csv", "w") as fh:
    fh.write("# INVENTED per-level N2+ recombination rate coefficients (cm3 s-1) with an\n")
    fh.write("# invented one-sigma band; not a calculation and not a measurement.\n")
    fh.write("Te_K," + ",".join(f"v{v},v{v}_low,v{v}_high" for v in range(5)) + "\n")
    for T in Te:
        k = A * (300.0 / T) ** b
        fh.write(f"{T:g}," + ",".join(f"{k[v]:.4e},{k[v] / spread[v]:.4e},"
                                      f"{k[v] * spread[v]:.4e}" for v in range(5)) + "\n")
print(f"wrote sigma_n2plus.csv, measured_curve.csv, design.csv, signals.csv, "
      f"dr_rates_tabulated.csv into {OUT} (all invented)")
