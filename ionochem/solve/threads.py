"""One BLAS thread around the batched solves.

The batched Newton, the sensitivity solves and the ensemble multiply and factorise many
small matrices (rows × species × species, rows × reactions by reactions × species); a
multi-threaded BLAS spends more on synchronisation than it gains there. Measured on a
shared two-core machine (benchmarks/bench_perf.py, medians): Newton on the demo column with
200 rows 40 ms with the default threads against 17 ms with one, with 1,000 rows 456 ms
against 62 ms; ``sensitivity()`` 137 against 73 ms (200 rows) and 215 against 150 ms
(1,000 rows); one production/loss evaluation of 1,810 rows 15 ms against 2.5 ms. dask
workers get the same setting from distributed's default ``OPENBLAS_NUM_THREADS=1``.
"""

from __future__ import annotations

import contextlib

__all__ = ["single_thread_blas"]


_CONTROLLER = []


def single_thread_blas():
    """Context manager limiting BLAS to one thread (does nothing without threadpoolctl).

    The libraries are looked up once per process (a ``ThreadpoolController`` made on first
    use, after numpy is loaded): ``threadpool_limits`` scans ``/proc/self/maps`` on every
    call, 1.5 ms each, a sixth of a 200-row Newton.
    """
    try:
        from threadpoolctl import ThreadpoolController
    except ImportError:  # pragma: no cover - optional
        return contextlib.nullcontext()
    if not _CONTROLLER:
        _CONTROLLER.append(ThreadpoolController())
    return _CONTROLLER[0].limit(limits=1, user_api="blas")
