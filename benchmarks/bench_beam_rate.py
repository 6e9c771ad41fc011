"""Cost of ``ionochem.rates.beam_rate`` against a direct scipy quadrature.

Case (invented): a 10^4-point cross section on a log grid from 1e-6 to 20 eV (a 1/E capture
law with a fall-off and two narrow resonances), a cooler-like flattened distribution
(kT_perp = 2 meV, kT_par = 50 micro-eV), 10^4 detuning energies from 1e-5 to 10 eV.

1. ``beam_rate`` on all 10^4 detunings (best of ``--repeats``).
2. The direct way: for each detuning, scipy ``dblquad`` of sigma(v) v f(v) over speed and
   polar angle (the azimuth is 2 pi), sigma interpolated with ``numpy.interp``, relative
   tolerance 1e-6, the speed range split at the resonances. Only ``--sample`` detunings are
   integrated; the cost for all 10^4 is extrapolated from their mean and printed as such.
   The two methods' values at the sampled detunings are compared (largest relative
   difference).

The figure of merit is the ratio of the two times (no absolute timing target; the machine
is shared).

    python benchmarks/bench_beam_rate.py [--sample 12] [--repeats 3]
"""

from __future__ import annotations

import argparse
import time
import warnings

import numpy as np
from scipy import integrate

from ionochem.rates import beam_rate
from ionochem.rates.common import ELECTRON_MASS_G, EV_ERG, speed_cm_s

KT_PERP, KT_PAR = 2e-3, 5e-5
RESONANCES = (0.012, 0.08)


def cross_section(n=10_000):
    """Invented cross section (cm2) on an n-point log grid (eV)."""
    E = np.geomspace(1e-6, 20.0, n)
    s = 4.8e-16 / E / (1.0 + (E / 0.3) ** 1.5)
    for er in RESONANCES:
        s = s + 0.15 * 4.8e-16 / er * np.exp(-0.5 * ((E - er) / (0.08 * er)) ** 2)
    return E, s


def direct(E, S, Ed):
    """alpha(E_d) by scipy dblquad over speed and polar angle (cm3 s-1)."""
    m = ELECTRON_MASS_G
    a = m / (2 * np.pi * KT_PERP * EV_ERG)
    b = np.sqrt(m / (2 * np.pi * KT_PAR * EV_ERG))
    vd = float(speed_cm_s(Ed))
    v_all = speed_cm_s(E)

    def f(mu, v):
        sig = np.interp(v, v_all, S, left=0.0, right=0.0)
        return 2 * np.pi * v ** 3 * sig * a * b * np.exp(
            -m * v * v * (1 - mu * mu) / (2 * KT_PERP * EV_ERG)
            - m * (v * mu - vd) ** 2 / (2 * KT_PAR * EV_ERG))

    spread = 10 * (np.sqrt(KT_PERP * EV_ERG / m) + np.sqrt(KT_PAR * EV_ERG / m))
    lo, hi = max(v_all[0], vd - spread), min(v_all[-1], vd + spread)
    cuts = [lo] + [float(speed_cm_s(e)) for e in RESONANCES
                   if lo < speed_cm_s(e) < hi] + [hi]
    total = 0.0
    for v0, v1 in zip(cuts[:-1], cuts[1:]):
        total += integrate.dblquad(f, v0, v1, -1, 1, epsabs=0, epsrel=1e-6)[0]
    return total


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--sample", type=int, default=12)
    ap.add_argument("--repeats", type=int, default=3)
    args = ap.parse_args()
    E, S = cross_section()
    Ed = np.geomspace(1e-5, 10.0, 10_000)
    times = []
    for _ in range(args.repeats):
        t0 = time.perf_counter()
        fast = beam_rate(E, S, Ed, KT_PERP, KT_PAR)
        times.append(time.perf_counter() - t0)
    t_fast = min(times)
    pick = np.unique(np.linspace(0, Ed.size - 1, args.sample).round().astype(int))
    t0 = time.perf_counter()
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", integrate.IntegrationWarning)
        slow = np.array([direct(E, S, Ed[i]) for i in pick])
    t_slow_each = (time.perf_counter() - t0) / pick.size
    diff = np.max(np.abs(fast[pick] / slow - 1))
    print(f"beam_rate, {Ed.size} detunings x {E.size}-point cross section: {t_fast:.3f} s "
          f"(best of {args.repeats})")
    print(f"scipy dblquad: {t_slow_each:.3f} s per detuning over {pick.size} sampled; "
          f"extrapolated to {Ed.size}: {t_slow_each * Ed.size:.0f} s")
    print(f"ratio (direct / beam_rate, extrapolated): {t_slow_each * Ed.size / t_fast:.0f}x")
    print(f"largest relative difference at the sampled detunings: {diff:.2e}"
          + (f" ({len(caught)} quadrature warnings from scipy)" if caught else ""))


if __name__ == "__main__":
    main()
