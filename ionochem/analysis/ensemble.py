"""Execution of an ensemble: batches of samples solved in this process, on a pool of local
worker processes (:func:`worker_pool`, also used by sweeps) or on a dask.distributed
scheduler, with single-threaded BLAS, progress, and a store for resuming.

Every batch goes through one solve path, :func:`ionochem.system.batch.solve_rows` (the same
the model's own steady solve uses). This module works on arrays and a
:class:`~ionochem.analysis.sampling.SampleKernel`; it never reads files.
"""

from __future__ import annotations

import contextlib
import logging
import os
import time

import numpy as np

from ionochem.analysis.sampling import base_rates
from ionochem.errors import InputError, SolverError
from ionochem.solve.threads import single_thread_blas  # noqa: F401 (re-exported)

ROW_TARGET = 1000          # rows (samples × levels) per batch by default (see the benchmark)
INFLIGHT_PER_WORKER = 2    # tasks queued per worker thread on dask (latency hiding)
TASKS_PER_WORKER = 8       # dask tasks per worker thread over a run (load balance)
TASK_BATCHES_MAX = 16      # batches grouped into one dask task at most
STORE_INTERVAL_S = 1.0    # finished batches gathered into one store file this long


def solve_batch(kernel, z, k_base=None, first=0):
    """Steady densities of the samples ``z``: ndarray (B, A, S), cm-3.

    Runs on dask workers as well as in-process. ``first`` is the index of the first sample
    (for error messages).
    """
    k, given = kernel.perturbed(z, k_base)
    S = len(kernel.mechanism.solved)
    A = kernel.altitude_km.size
    B = z.shape[0]
    try:
        return _solve_samples(kernel, k, given, B).reshape(B, A, S)
    except SolverError:
        pass
    # Some sample's column could not be solved (rate factors far in the tails can make a
    # column unsolvable): solve the samples one by one and mark the failed ones (all NaN),
    # so one sample does not cost the batch or the run. Each sample's answer is the same
    # alone as in a batch (the solver decides per row; per column with transport).
    n = np.full((B, A, S), np.nan)
    k3, g3 = k.reshape(B, A, -1), given.reshape(B, A, -1)
    for b in range(B):
        try:
            n[b] = _solve_samples(kernel, k3[b], g3[b], 1)
        except SolverError:
            pass
    return n


def _solve_samples(kernel, k, given, samples):
    """Solved densities (samples × A, S) of stacked sample columns; raises SolverError."""
    from ionochem.system.batch import solve_rows
    transport = getattr(kernel, "transport", None)
    # Samples start from the central column (without transport a warm start, no fixed-point
    # sweeps).
    central = getattr(kernel, "n_central", None)
    n0 = None if central is None else np.tile(central, (samples, 1))
    return solve_rows(kernel.mechanism, k, given, rtol=kernel.rtol, n0=n0,
                      transport=transport).n


def failed_samples(n):
    """Indices of the samples whose column failed (:func:`solve_batch` leaves them NaN)."""
    n = np.asarray(n)
    return np.flatnonzero(~np.isfinite(n.reshape(n.shape[0], -1)).all(axis=1))


def drop_failed(z, n, total):
    """The Monte Carlo keeps the samples that solved: ``(z, n, failed indices)``.

    Raises SolverError when fewer than two samples are left (no spread to report).
    """
    failed = failed_samples(n)
    if failed.size:
        keep = np.ones(n.shape[0], bool)
        keep[failed] = False
        z, n = z[keep], n[keep]
        if n.shape[0] < 2:
            raise SolverError(describe_failed(failed, total) + "; fewer than two are left",
                              levels=failed.tolist())
    return z, n, failed


def failed_attrs(failed, total):
    """Attributes recording the failed samples of a Monte Carlo run."""
    return {"failed_samples": int(len(failed)),
            "failed_sample_indices": ", ".join(str(int(i)) for i in failed),
            "failed_samples_note": (describe_failed(failed, total) + "; the statistics are "
                                    "of the others (failures in the tails narrow them)")
            if len(failed) else ""}


def describe_failed(failed, total):
    """One sentence naming the failed samples (the first few) of ``total``."""
    shown = ", ".join(str(int(i)) for i in failed[:10]) + (" …" if len(failed) > 10 else "")
    return (f"{len(failed)} of {total} samples could not be solved (samples {shown}; rate "
            "factors far in the tails can make a column unsolvable)")


#: Level solves (samples × levels) from which ``workers="auto"`` starts worker processes:
#: below it the pool's start (about 0.6 s) and its transfers cost more than two processes
#: save. Measured with benchmarks/bench_uncertainty.py --break-even on this project's 2-core
#: development machine, idle: two workers 0.77x serial at 100,000 level solves, 1.15x at
#: 200,000, 1.51x at 500,000, 1.67x at 1,000,000 (medians of 3).
AUTO_LEVEL_SOLVES = 500_000


def free_cpus() -> int:
    """CPUs this process may use that no other work keeps busy: the CPUs of its affinity
    mask less the 1-minute load average beyond this process's own (rounded) — a rule of
    thumb *(common practice)*, at least 1."""
    try:
        cpus = len(os.sched_getaffinity(0))
    except AttributeError:                       # not on Linux
        cpus = os.cpu_count() or 1
    try:
        load = os.getloadavg()[0]
    except (AttributeError, OSError):
        load = 0.0
    return max(1, min(cpus, int(cpus - max(0.0, load - 1.0) + 0.5)))


def auto_workers(level_solves: int) -> int:
    """Worker processes for ``workers="auto"``: 1 (this process) for runs under
    :data:`AUTO_LEVEL_SOLVES` level solves or when fewer than two CPUs are free, else the
    free CPUs (a serial run is never the slower choice for small runs)."""
    if level_solves < AUTO_LEVEL_SOLVES:
        return 1
    free = free_cpus()
    return 1 if free < 2 else free


def default_batch(levels: int) -> int:
    """Samples per batch: about ``ROW_TARGET`` rows of the batched Newton."""
    return max(1, ROW_TARGET // max(levels, 1))


# ----------------------------------------------------------------------------- running
@contextlib.contextmanager
def dask_client(workers=None, scheduler=None):
    """A dask.distributed client: on ``scheduler`` (an address) or a new local cluster of
    ``workers`` single-threaded processes; closed (with its cluster) on exit. The commands
    use it for ``--scheduler`` only (local workers are :func:`worker_pool`); a local
    cluster serves the API and benchmarks/bench_sweep.py."""
    from dask.distributed import Client, LocalCluster
    cluster = None
    if scheduler:
        try:
            client = Client(scheduler, timeout=15)
        except (OSError, TimeoutError, ValueError) as exc:
            raise InputError(f"cannot reach the dask scheduler at {scheduler}: {exc}",
                             file="--scheduler") from None
    else:
        import dask
        # distributed sets MALLOC_TRIM_THRESHOLD_ in its workers by default; setting it
        # switches off glibc's adaptive mmap threshold, so every temporary array of the
        # batched Newton (hundreds of kB) is mapped and unmapped anew: measured 3x slower
        # solves. Unset it (None unsets, distributed.nanny docs); BLAS stays single-threaded.
        with dask.config.set({"distributed.nanny.pre-spawn-environ.MALLOC_TRIM_THRESHOLD_":
                              None}):
            cluster = LocalCluster(n_workers=int(workers), threads_per_worker=1,
                                   processes=True, dashboard_address=None,
                                   silence_logs=logging.ERROR)
        client = Client(cluster)
    try:
        yield client
    finally:
        client.close()
        if cluster is not None:
            cluster.close()


def _split(gaps, size):
    for a, b in gaps:
        for s in range(a, b, size):
            yield s, min(s + size, b)


def run_ensemble(model, kernel, rows, total, *, batch=None, workers=1, scheduler=None,
                 store=None, progress=False, on_batch=None, allow_failed=False):
    """Solve ``total`` samples in batches; returns draws ``z`` (total, width) and
    densities ``n`` (total, A, S), in sample order.

    Parameters
    ----------
    model : ionochem.Model
        The driving model (for Te-dependent rates of a batch).
    kernel : SampleKernel
    rows : callable
        ``rows(start, stop) -> z`` (stop − start, width): the draws of those samples.
    total : int
        Number of samples.
    batch : int, optional
        Samples per batch (default :func:`default_batch`).
    workers : int or "auto"
        Local worker processes (:func:`worker_pool`); 1 (or less) solves in this process;
        "auto" chooses (:func:`auto_workers`) from the size of the run and the free CPUs.
    scheduler : str, optional
        Address of an existing dask scheduler (overrides ``workers``).
    store : EnsembleStore, optional
        Finished batches are written there as they complete; stored batches are skipped.
    progress : bool
        Show a tqdm progress bar (on stderr).
    on_batch : callable, optional
        ``on_batch(start, stop, done, total)`` after each batch is stored (a hook for
        progress reports and for tests that interrupt a run).
    allow_failed : bool
        Return samples that could not be solved as NaN (:func:`failed_samples` finds them)
        instead of raising :class:`SolverError` once every batch is done (a design that
        needs every run, Sobol or Morris, cannot use the others).
    """
    from tqdm import tqdm
    total = int(total)
    batch = int(batch) if batch else default_batch(kernel.altitude_km.size)
    if batch < 1:
        raise InputError("--batch must be at least 1", file="--batch")
    results = {}
    gaps = _gaps(store, rows, total)
    todo = list(_split(gaps, batch))
    done = total - sum(b - a for a, b in gaps)
    bar = tqdm(total=total, initial=done, unit="sample", desc="samples",
               disable=not progress, leave=False)

    writer = _StoreWriter(store) if store is not None else None

    def finish(a, b, z, n):
        nonlocal done
        if writer is not None:
            writer.add(a, b, z, n)
        else:
            results[a] = (z, n)
        done += b - a
        bar.update(b - a)
        if on_batch is not None:
            on_batch(a, b, done, total)

    if workers == "auto":
        workers = _auto(kernel, todo, scheduler)
    try:
        if scheduler:
            _run_dask(model, kernel, rows, todo, workers, scheduler, finish)
        elif workers and int(workers) > 1:
            _run_pool(model, kernel, rows, todo, int(workers), finish)
        else:
            with single_thread_blas():
                for a, b in todo:
                    z = rows(a, b)
                    finish(a, b, z, solve_batch(kernel, z, base_rates(model, kernel, z), a))
    finally:
        bar.close()
        if writer is not None:
            writer.flush()          # also when interrupted: no finished sample is lost
    z, n = _collected(kernel, store, results, total)
    failed = failed_samples(n)
    if failed.size and not allow_failed:
        raise SolverError(describe_failed(failed, total) + "; this design needs every run",
                          levels=failed.tolist())
    return z, n


def _auto(kernel, todo, scheduler):
    """The workers of ``--workers auto`` for the batches ``todo`` (logged when > 1)."""
    level_solves = sum(b - a for a, b in todo) * kernel.altitude_km.size
    workers = 1 if scheduler else auto_workers(level_solves)
    if workers > 1:
        logging.getLogger("ionochem").info(
            "solving on %d local worker processes (--workers auto: %d level solves, "
            "%d free CPUs)", workers, level_solves, workers)
    return workers


def _gaps(store, rows, total):
    """The sample ranges still to solve; the stored ones must be this run's draws."""
    if store is None:
        return [(0, total)] if total else []
    for a, b in store.finished():
        z_stored, _ = store.read(a, b)
        if b > total or not np.array_equal(z_stored, rows(a, b)):
            raise InputError(f"stored samples {a}..{b - 1} do not match this run's random "
                             "streams; remove the folder to start again",
                             file=str(store.folder))
    return store.missing(total)


class _StoreWriter:
    """Finished batches to the store, contiguous ones gathered into one file written at
    most every :data:`STORE_INTERVAL_S` (each file is synced to disk, ~5 ms: one per
    batch of a fast ensemble cost a tenth of its time); the first batch is written at
    once, and whatever is gathered when the run ends or is interrupted."""

    def __init__(self, store):
        self.store = store
        self.pending = []
        self.last = float("-inf")

    def add(self, a, b, z, n):
        if self.pending and self.pending[-1][1] != a:
            self.flush()
        self.pending.append((a, b, z, n))
        if time.monotonic() - self.last >= STORE_INTERVAL_S:
            self.flush()

    def flush(self):
        if not self.pending:
            return
        a, b = self.pending[0][0], self.pending[-1][1]
        z = np.concatenate([p[2] for p in self.pending])
        n = np.concatenate([p[3] for p in self.pending])
        self.pending = []
        self.store.write(a, b, z, n)
        self.last = time.monotonic()


def _collected(kernel, store, results, total):
    """Draws and densities of every sample, in sample order (from the store when there is
    one, else from the batches kept in memory)."""
    if store is not None:
        return store.load(total)
    if not results:
        A, S = kernel.altitude_km.size, len(kernel.species)
        return np.empty((0, kernel.width)), np.empty((0, A, S))
    order = sorted(results)
    return (np.concatenate([results[a][0] for a in order]),
            np.concatenate([results[a][1] for a in order]))


def solve_batches(kernel, zs, k_bases, firsts):
    """:func:`solve_batch` over several batches in one task; returns the list of ``n``."""
    return [solve_batch(kernel, z, kb, a) for z, kb, a in zip(zs, k_bases, firsts)]


def _group_size(batches, nthreads):
    """Batches per task: about TASKS_PER_WORKER tasks per worker over the run, at most
    TASK_BATCHES_MAX batches each (so a task is a few hundred ms of work and the cost per
    task stays small)."""
    return max(1, min(TASK_BATCHES_MAX, -(-batches // (TASKS_PER_WORKER * nthreads))))


_POOL_STATE = []


def _keep_freed_memory():
    """glibc: keep freed memory in the process (mallopt(3): M_MMAP_THRESHOLD 32 MiB, its
    64-bit maximum, and M_TRIM_THRESHOLD 128 MiB; setting them fixes glibc's adaptive
    thresholds). A fresh process otherwise maps and unmaps every temporary array of the
    batched Newton (hundreds of kB) anew: measured 25-40 % more CPU per batch in a fresh
    worker than in a forked one, the same figure with this setting. Elsewhere: nothing."""
    import ctypes
    import ctypes.util
    try:
        libc = ctypes.CDLL(ctypes.util.find_library("c") or "libc.so.6")
        libc.mallopt(-3, 32 * 1024 * 1024)      # M_MMAP_THRESHOLD
        libc.mallopt(-1, 128 * 1024 * 1024)     # M_TRIM_THRESHOLD
    except (OSError, AttributeError):
        pass


def _alive(pid):
    """Whether process ``pid`` runs: it exists and, on Linux, is not a zombie (a driver
    that ended but whose own parent has not collected it yet)."""
    try:
        os.kill(pid, 0)
    except (ProcessLookupError, PermissionError):
        return False
    try:
        with open(f"/proc/{pid}/stat") as fh:
            state = fh.read().rsplit(")", 1)[1].split()[0]
    except (OSError, IndexError):
        return True
    return state not in ("Z", "X")


def _end_with_driver(driver):
    """End this worker (at once, quietly) within a second of the driving process's end: a
    driver stopped by SIGTERM or SIGKILL leaves no worker waiting for tasks."""
    import threading
    import time

    def watch():
        while _alive(driver):
            time.sleep(1.0)
        os._exit(0)

    threading.Thread(target=watch, daemon=True, name="ionochem-driver-watch").start()


def _pool_start(state, driver):
    """Initialiser of a local worker process: keep ``state`` (what every task needs: a
    sample kernel, a sweep's specification), one BLAS thread, glibc's freed memory kept
    (:func:`_keep_freed_memory`), ended with the driver, and quiet (a task's errors go back
    to the driver with its result; nothing else is worth printing from a worker that
    outlives an interrupted driver by a moment)."""
    import sys
    _end_with_driver(driver)
    _keep_freed_memory()
    sys.stderr = open(os.devnull, "w")       # noqa: SIM115 (open for the process's life)
    _POOL_STATE[:] = [state]
    single_thread_blas().__enter__()


def pool_state():
    """What :func:`worker_pool` gave this worker process (``state``)."""
    return _POOL_STATE[0]


@contextlib.contextmanager
def worker_pool(workers, state):
    """``workers`` local processes (``concurrent.futures``), started from a fork server
    that has imported the solver once, each holding ``state`` (:func:`pool_state`).

    A pool of plain processes rather than a dask LocalCluster for local work: on the 2-core
    development machine, idle, two processes solved 10,000 samples of a 100-level column
    1.62x faster than one, and started in 0.6 s (benchmarks/bench_uncertainty.py
    --break-even); a LocalCluster took about 3 s to start and reached 1.34x at 20,000
    samples (its scheduler, nannies and transfers share the two CPUs). A worker that dies
    (killed, out of memory) raises :class:`SolverError` in :func:`ordered_results` instead
    of a wait. As with any ``multiprocessing`` code, a script that uses it must guard its
    top level with ``if __name__ == "__main__":`` (the workers import the main module
    again).
    """
    import multiprocessing as mp
    import sys
    from concurrent.futures import ProcessPoolExecutor
    method = "forkserver" if "forkserver" in mp.get_all_start_methods() else "spawn"
    ctx = mp.get_context(method)
    if method == "forkserver":
        ctx.set_forkserver_preload(["ionochem.analysis.ensemble", "ionochem.system.batch",
                                    "ionochem.mechanism.rows"])
    # The resource tracker (a helper process multiprocessing starts once, with this
    # interpreter's -W options) would print two lines about "leaked semaphores" after a
    # driver stopped by a signal; it cleans them up all the same.
    quiet = "ignore::UserWarning:multiprocessing.resource_tracker"
    if quiet not in sys.warnoptions:
        sys.warnoptions.append(quiet)
    with ProcessPoolExecutor(workers, mp_context=ctx, initializer=_pool_start,
                             initargs=(state, os.getpid())) as pool:
        yield pool


def ordered_results(pool, jobs, inflight, finish):
    """Submit ``jobs`` — an iterator of ``(key, function, args)`` — keeping ``inflight`` of
    them in flight, and call ``finish(key, result)`` in the order submitted."""
    import collections
    from concurrent.futures.process import BrokenProcessPool
    pending = collections.deque()

    def submit():
        job = next(jobs, None)
        if job is not None:
            key, fn, args = job
            pending.append((key, pool.submit(fn, *args)))

    try:
        for _ in range(inflight):
            submit()
        while pending:
            key, future = pending.popleft()
            finish(key, future.result())
            submit()
    except BrokenProcessPool:
        raise SolverError("a worker process ended unexpectedly (killed, or out of memory); "
                          "finished batches are kept with -o; try fewer --workers or a "
                          "smaller --batch") from None
    finally:
        for _, future in pending:
            future.cancel()


def _pool_task(zs, kbs, firsts):
    return solve_batches(pool_state(), zs, kbs, firsts)


def _run_pool(model, kernel, rows, todo, workers, finish):
    """Batches on ``workers`` local processes (:func:`worker_pool`). Draws and central
    rates are made here, as on dask, and the batches are stored in order."""
    group = _group_size(len(todo), workers)

    def jobs():
        for i in range(0, len(todo), group):
            ranges = todo[i:i + group]
            zs = [rows(a, b) for a, b in ranges]
            kbs = [base_rates(model, kernel, z) for z in zs]
            yield (ranges, zs), _pool_task, (zs, kbs, [a for a, _ in ranges])

    def store(key, ns):
        ranges, zs = key
        for (a, b), z, n in zip(ranges, zs, ns):
            finish(a, b, z, n)

    with worker_pool(workers, kernel) as pool:
        ordered_results(pool, jobs(), INFLIGHT_PER_WORKER * workers, store)


def _run_dask(model, kernel, rows, todo, workers, scheduler, finish):
    """Batches on dask: a task solves a group of consecutive batches (so that a task is a
    few hundred ms of work and the scheduler's per-task cost stays small), and each batch
    is stored as it is in a serial run (a resume may switch between serial and dask)."""
    from dask.distributed import as_completed
    with dask_client(workers, scheduler) as client:
        kernel_future = client.scatter(kernel, broadcast=True)
        nthreads = max(1, sum(client.nthreads().values()))
        group = _group_size(len(todo), nthreads)
        tasks = [todo[i:i + group] for i in range(0, len(todo), group)]
        queue = iter(tasks)
        meta = {}
        pending = as_completed()

        def submit():
            try:
                ranges = next(queue)
            except StopIteration:
                return
            zs = [rows(a, b) for a, b in ranges]
            kbs = [base_rates(model, kernel, z) for z in zs]
            fut = client.submit(solve_batches, kernel_future, zs, kbs,
                                [a for a, _ in ranges], pure=False)
            meta[fut.key] = (ranges, zs, fut)
            pending.add(fut)

        try:
            for _ in range(INFLIGHT_PER_WORKER * nthreads):   # keep workers busy, bound memory
                submit()
            for fut in pending:
                ranges, zs, _ = meta.pop(fut.key)
                for (a, b), z, n in zip(ranges, zs, fut.result()):
                    finish(a, b, z, n)
                submit()
        finally:
            if meta:
                client.cancel([m[2] for m in meta.values()])
