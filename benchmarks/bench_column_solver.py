"""Steady column with O+ transport: Newton against chord and Newton–Krylov, and the floor.

The demo scenario (an invented site: scenarios/midlatitude_equinox.toml, with its
[transport] section) resampled to N levels from 90 to 600 km. For each size, from the same
photochemical start (computed once, as :func:`ionochem.solve.column.steady_with_transport`
does), the column solve (``solve_column``: start sweeps, Newton, convergence rule) is timed
with each linear solver of :mod:`ionochem.solve.column`:

(a) ``newton``: a fresh sparse LU (SuperLU) of the Jacobian every iteration (today's path),
    and ``before``, the same with the Jacobian assembled as it was before
    :class:`~ionochem.solve.column.ColumnJacobian` (a sparse sum and two conversions per
    iteration);
(b) ``chord``: the LU reused while each step cuts the scaled residual at least in half;
(c) ``krylov``: GMRES on the scaled rows, preconditioned by an incomplete LU (spilu),
    Jacobian–vector products with the sparse Jacobian;
(d) the floor: as many sparse LU factorisations + solves of the converged Jacobian as
    Newton does.

Also printed: the whole ``Model.steady_densities`` (photochemical start included) with the
default, iteration and factorisation counts, the largest relative difference of each
variant from Newton (densities above 1e-12 of their level's largest), and at the largest
size the peak of Python/numpy memory (tracemalloc) of each solve and the size of the LU
factors (SuperLU allocates them outside tracemalloc's view). One BLAS thread, medians of
``--repeats`` runs, all in one process: the ratios matter, not the absolute times.

    python benchmarks/bench_column_solver.py [--levels 200 1000 5000] [--repeats 5]
        [--variants before newton chord krylov]

Measured (issue 13, a shared 2-core machine, load average ~2; milliseconds, medians):

- ``--variants newton chord --repeats 15``: newton 9.5 / 54 / 350 ms at 200 / 1,000 /
  5,000 levels (6, 7, 7 iterations and LU), chord 7.7 / 40 / 258 ms (8 iterations, 3, 4,
  4 LU): 1.24× (1.20–1.28 in every repeat), 1.35× (≥ 1.3 in 12 of 15 repeats), 1.36×
  (10 of 15); largest relative difference from Newton 1.3e-11. The chord became the
  default from 10,000 unknowns (ionochem/solve/column.py).
- all variants, ``--repeats 7`` and ``9`` (two runs, noisier): the prebuilt Jacobian
  structure (newton) against the per-iteration assembly (before) 1.38× / 1.33× / 1.21×
  and 0.85× / 1.20× / 1.16× (200 levels are within noise); krylov 0.5–0.9× newton at every
  size (4–5 GMRES iterations per Newton iteration; the ILU costs as much as the LU). The
  floor (7 LU + solve at 5,000 levels) 181–325 ms: Newton 1.1–1.8× it, chord 0.8–1.2×.
- peak traced memory of one 5,000-level solve 44 MiB for every variant, plus the LU
  factors outside tracemalloc (900,083 entries, ~10 MiB).
"""

from __future__ import annotations

import argparse
import statistics
import time
import tracemalloc
from pathlib import Path

import numpy as np
import scipy.sparse as sp
from bench_perf import median_time

import ionochem
from ionochem.io.scenario import Grid
from ionochem.solve import column as C
from ionochem.solve.steady import solve_steady
from ionochem.solve.threads import single_thread_blas

DEMO = Path(__file__).resolve().parents[1] / "scenarios" / "midlatitude_equinox.toml"
BEFORE = "before"
VARIANTS = (BEFORE, "newton", "chord", "krylov")


def model_at(levels):
    """The demo column (with transport) on ``levels`` levels from 90 to 600 km."""
    base = ionochem.load_scenario(DEMO)
    return ionochem.Model(base.replace(grid=Grid(tuple(np.linspace(90.0, 600.0, levels)))))


def bound(model):
    """The mechanism's (tendency, jacobian, gross) on the model's rows, as the column
    system's chemistry binds them (ionochem/system/chemistry.py)."""
    rows = model.system.row_processes[0].bound
    return rows.tendency, rows.jacobian, rows.gross


def column_callables(model, before=False):
    """(tendency, jacobian, gross) of the whole column, as the column system assembles them
    (ionochem/system/column.py); ``before``: the Jacobian assembled as before the prebuilt
    structure (block_diagonal + transport, then the CSR and CSC conversions of the old
    ``_regularise`` and ``sparse_solve``)."""
    tend, jac, gross = bound(model)
    B = model.altitude_km.size
    tr = model.transport
    system = model.system
    col_tendency, jacobian, col_gross = system.tendency, system.jacobian, system.gross
    if before:
        rows = np.arange(B)

        def jacobian(n):
            return sp.csc_matrix(sp.csr_matrix(C.block_diagonal(jac(n, rows))
                                               + tr.matrix(1)))
    return col_tendency, jacobian, col_gross


def column(levels, repeats, memory, variants=VARIANTS):
    model = model_at(levels)
    tend, jac, gross = bound(model)
    B, S = model.altitude_km.size, len(model.species)
    start = solve_steady(np.zeros((B, S)), tend, jac, gross, rtol=1e-6).n

    fast = column_callables(model)
    slow = column_callables(model, before=True)

    def run(name, stats=None):
        linear, fns = (name, fast) if name != BEFORE else ("newton", slow)
        return C.solve_column(start, *fns, linear=linear, stats=stats)

    print(f"{levels} levels x {S} species ({B * S} unknowns), default "
          f"{C.default_linear(B * S)!r}:")
    t_model = median_time(model.steady_densities, repeats)
    stats = {name: {} for name in variants}
    results = {name: run(name, stats[name]) for name in variants}
    # Interleaved repeats (before, newton, chord, krylov, before, ...): a shared machine's drift
    # falls on every variant alike.
    times = {name: [] for name in variants}
    for _ in range(repeats):
        for name in variants:
            t0 = time.perf_counter()
            run(name)
            times[name].append(time.perf_counter() - t0)
    out = {name: (statistics.median(t), min(t), max(t), results[name], stats[name])
           for name, t in times.items()}
    ref = out["newton"][3]
    big = ref.n > 1e-12 * ref.n.max(axis=1, keepdims=True)
    J = C._regularise(fast[1](ref.n), None)
    f = model.tendency(ref.n).ravel()
    k = out["newton"][4]["factorisations"]

    def floor():
        for _ in range(k):
            C.factorise(J)(-f)

    t_floor = median_time(floor, repeats)
    tn = out["newton"][0]
    tb = out[BEFORE][0] if BEFORE in out else float("nan")
    print(f"  Model.steady_densities (start + column): {t_model * 1e3:8.1f} ms")
    for name, (med, lo, hi, res, stats) in out.items():
        diff = np.max(np.abs(res.n[big] - ref.n[big]) / ref.n[big])
        extra = (f", {stats['krylov_iterations']} GMRES iterations"
                 if name == "krylov" else "")
        print(f"  {name:7s} {med * 1e3:8.1f} ms [{lo * 1e3:.1f}-{hi * 1e3:.1f}] "
              f"(speed-up {tb / med:4.2f}x on before, {tn / med:4.2f}x on newton; "
              f"{med / t_floor:4.2f}x floor); "
              f"{int(res.iterations.max())} iterations, {stats['factorisations']} "
              f"factorisations{extra}; max rel. diff. from newton {diff:.1e}; largest "
              f"residual {res.residual.max():.1e}")
    print(f"  floor   {t_floor * 1e3:8.1f} ms ({k} sparse LU + solve of the converged "
          f"Jacobian)")
    for name in [v for v in ("chord", "krylov") if v in times]:
        r = np.array(times["newton"]) / np.array(times[name])
        print(f"  newton / {name} per repeat: {r.min():.2f}-{r.max():.2f} "
              f"(>= 1.3 in {int(np.sum(r >= 1.3))} of {r.size})")
    if memory:
        from scipy.sparse.linalg import splu
        lu = splu(J.tocsc(), permc_spec=C.ORDERING)
        print(f"  Jacobian nnz {J.nnz}, LU factors nnz {lu.L.nnz + lu.U.nnz} "
              f"(~{(lu.L.nnz + lu.U.nnz) * 12 / 2**20:.1f} MiB outside tracemalloc)")
        for name in variants:
            tracemalloc.start()
            run(name)
            peak = tracemalloc.get_traced_memory()[1]
            tracemalloc.stop()
            print(f"  peak traced memory, {name:7s}: {peak / 2**20:6.1f} MiB")


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--levels", type=int, nargs="+", default=[200, 1000, 5000])
    ap.add_argument("--repeats", type=int, default=5)
    ap.add_argument("--variants", nargs="+", default=list(VARIANTS),
                    choices=VARIANTS, help="newton is always run (the reference)")
    args = ap.parse_args(argv)
    variants = tuple(dict.fromkeys(["newton", *args.variants]))
    with single_thread_blas():
        for levels in args.levels:
            column(levels, args.repeats, memory=levels == max(args.levels),
                   variants=variants)


if __name__ == "__main__":
    main()
