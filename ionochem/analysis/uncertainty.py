"""Monte Carlo over the uncertainties of the rate coefficients (and, optionally, of the
environment), solved in vectorised batches, serially or on dask.distributed, resumable.

Sampling
--------
Every reaction j has a one-sigma multiplicative factor f_j (the reaction list's ``f``,
evaluated at each level's temperature: ``Model.uncertainty_factors()``). Sample s sets

    ln k_j(z, s) = ln k_j(z) + ε_js ln f_j(z),      ε_js ~ N(0, 1),

with **one draw per reaction per sample, shared by every level z**. A rate coefficient's
error is systematic: one laboratory value (or one evaluation) is used at every height, so
if it is 30 % high at 150 km it is 30 % high at 250 km too. Independent draws per level
would average out in column quantities (the column content, the peak height) and
understate their spread; they would also make every profile jagged.

A ``table`` rate with ``_low``/``_high`` band columns (``Model.rate_bands()``) is sampled
between its band instead of with ``f``. The band is read as the **one-sigma (68 %)
range**, the same meaning the reaction-list format gives ``f`` (k/f .. k·f is the 68 %
range, DESIGN.md §5): ln k = ln k_mid + ε σ with σ = ln(high/k_mid) for ε > 0 and
σ = ln(k_mid/low) for ε < 0 (a two-piece log-normal whose median is the tabulated value and
whose 16 % and 84 % points are the band edges, so an asymmetric band stays asymmetric).
Its symmetric equivalent (ln high − ln low)/2 is what the first-order variance uses.

Environment factors (``environment={"euv": 1.2, "O": 1.15, "Te": 1.1}``), each a one-sigma
multiplicative factor of a log-normal with one draw per sample:

- ``euv`` scales together the rate coefficients of every reaction whose rate law reads
  ``photo`` or ``photoelectron`` (the EUV flux drives both). Prescribed production tables are
  not scaled.
- a fixed neutral (``O``, ``N2``, …) scales that species' density in the chemistry (the
  ``given`` column). The photo rates keep the optical depth of the unperturbed atmosphere,
  and the third-body density ``M`` is not rescaled.
- ``Te`` multiplies the electron temperature profile and re-evaluates every rate
  coefficient at the new temperatures (``Model.rate_coefficients(temperatures=...)``,
  vectorised over the samples of a batch: one evaluation of the rate laws per batch,
  in the driving process, about 10 ms for 50 samples of 181 levels and 88 reactions).
  The uncertainty factors f and bands stay those of the unperturbed temperatures.

Random streams
--------------
Sample i draws its standard normals from its own stream,
``numpy.random.default_rng(numpy.random.SeedSequence(seed, spawn_key=(i,)))`` — the i-th
child of ``SeedSequence(seed).spawn(N)`` — in a fixed order: one normal per reaction (in
reaction-list order), one per ``given`` column, one for ``euv``, one for ``Te``. So sample i
is the same whichever batch or worker it lands in, and switching an environment factor on
does not change the rate draws. The steady solver works row by row (Newton steps,
backtracking and convergence are decided per row; see :mod:`ionochem.solve.steady`), so a
sample's densities do not depend on the batch either (checked in the tests).

Scale
-----
A batch of B samples is solved as B × A rows of one batched Newton (rows sample-major).
Beyond one process the batches go to dask.distributed: a ``LocalCluster`` with
``workers`` single-threaded worker processes, or an existing scheduler. The model itself
does not pickle (its compiled rate laws are closures), so the workers receive a
:class:`SampleKernel`: the mechanism's arrays (stoichiometry, reactant slots, Jacobian
kernel) with the central rates, the log-factors and the fixed densities. With ``Te``
varied the driving process evaluates each batch's rates and sends them with the batch.

Resume
------
Given a store (:class:`~ionochem.analysis.ensemble_store.EnsembleStore`), every finished
batch is written as it completes; a resumed run computes only the missing sample ranges,
checks that the stored draws are the ones its own streams give, and builds the result from
all stored samples.

Memory: the driving process keeps every solved sample (N × levels × solved species
float64, 9.6 MB for 1000 samples of 100 levels and 12 species) to take exact quantiles.

This module must not read input files; it works on a built :class:`ionochem.Model`.
"""

from __future__ import annotations

import contextlib
import hashlib
import logging

import numpy as np
import xarray as xr

from ionochem.errors import InputError, SolverError

QUANTILES = (0.05, 0.16, 0.5, 0.84, 0.95)
ROW_TARGET = 1000          # rows (samples × levels) per batch by default (see the benchmark)
INFLIGHT_PER_WORKER = 2    # tasks queued per worker thread on dask (latency hiding)
TASKS_PER_WORKER = 8       # dask tasks per worker thread over a run (load balance)
TASK_BATCHES_MAX = 16      # batches grouped into one dask task at most
ENV_EUV = "euv"
ENV_TE = "Te"
PHOTO_SOURCES = frozenset({"photo", "photoelectron"})


# ----------------------------------------------------------------------------- inputs
def parse_spreads(text, *, where="--vary-environment"):
    """``"euv=1.2,O=1.15,Te=1.1"`` → ``{"euv": 1.2, "O": 1.15, "Te": 1.1}``.

    Each value is a one-sigma multiplicative factor, ≥ 1. Raises :class:`InputError`.
    """
    out = {}
    if text is None:
        return out
    for item in str(text).split(","):
        item = item.strip()
        if not item:
            continue
        key, sep, value = item.partition("=")
        key, value = key.strip(), value.strip()
        if not sep or not key or not value:
            raise InputError(f"{item!r} must look like NAME=FACTOR (euv=1.2)", file=where)
        try:
            f = float(value)
        except ValueError:
            raise InputError(f"factor {value!r} for {key} is not a number", file=where) from None
        if not np.isfinite(f) or f < 1:
            raise InputError(f"factor for {key} must be a number >= 1 (a one-sigma "
                             "multiplicative factor)", file=where)
        if key.lower() == ENV_EUV:
            key = ENV_EUV
        out[key] = f
    return out


def photo_reactions(model):
    """Boolean mask (R,) of the reactions whose rate law reads ``photo``/``photoelectron``.

    Uses the model's current rate expressions (after ``--set`` changes) when it exposes
    them, else the reaction list's ``k`` expressions.
    """
    exprs = (getattr(model, "rate_expressions", None)
             or [r.k for r in model.reaction_list.reactions])
    return np.array([bool(e.variables & PHOTO_SOURCES) for e in exprs], bool)


def _light_mechanism(mech):
    """A copy of the Mechanism without the reaction list (whose closures do not pickle).

    The tendency, Jacobian and production/loss need only the arrays.
    """
    light = object.__new__(type(mech))
    light.__dict__.update({k: v for k, v in mech.__dict__.items()
                           if k not in ("reaction_list", "reactions")})
    return light


class SampleKernel:
    """Everything a worker needs to solve samples: arrays, no compiled expressions.

    Attributes
    ----------
    mechanism : Mechanism
        Without its reaction list (see :func:`_light_mechanism`).
    k0 : ndarray (A, R)
        Central rate coefficients.
    sigma_low, sigma_high : ndarray (A, R)
        ln of the one-sigma factor below and above the centre (ln f for both, or the band).
    given0 : ndarray (A, G)
        Fixed densities, cm-3.
    photo_mask : ndarray (R,) of bool
        Reactions scaled by the EUV factor.
    ln_given : ndarray (G,)
        ln of the one-sigma factor of each fixed density (0: not varied).
    ln_euv, ln_te : float
        ln of the EUV and electron-temperature factors (0: not varied).
    rtol : float
        Steady-state tolerance.
    altitude_km : ndarray (A,)
    factor_names : list of str
        Names of the columns of the draws ``z``: reactions, given species, ``euv``, ``Te``.
    """

    def __init__(self, model, environment=None):
        environment = dict(environment or {})
        mech = model.mechanism
        self.mechanism = _light_mechanism(mech)
        k0 = np.asarray(model.rate_coefficients(), float)
        A, R = k0.shape
        self.k0 = k0
        lnf = np.log(np.asarray(model.uncertainty_factors(), float))
        lo = lnf.copy()
        hi = lnf.copy()
        self.banded = sorted(model.rate_bands())
        with np.errstate(divide="ignore", invalid="ignore"):
            for j, (low, high) in model.rate_bands().items():
                ok = (k0[:, j] > 0) & (np.asarray(low) > 0)
                hi[:, j] = np.where(ok, np.log(np.asarray(high) / k0[:, j]), 0.0)
                lo[:, j] = np.where(ok, np.log(k0[:, j] / np.asarray(low)), 0.0)
        self.sigma_low = np.clip(lo, 0.0, None)
        self.sigma_high = np.clip(hi, 0.0, None)
        self.given0 = np.asarray(model.given, float)
        self.given_names = list(mech.given)
        self.photo_mask = photo_reactions(model)
        allowed = [g for g in mech.given if g in mech.fixed]
        self.ln_given = np.zeros(len(self.given_names))
        self.ln_euv = 0.0
        self.ln_te = 0.0
        for key, f in environment.items():
            if key == ENV_EUV:
                if not self.photo_mask.any():
                    raise InputError("euv: no reaction of this list uses photo or "
                                     "photoelectron rates", file="--vary-environment")
                self.ln_euv = float(np.log(f))
            elif key == ENV_TE:
                self.ln_te = float(np.log(f))
            elif key in allowed:
                self.ln_given[self.given_names.index(key)] = np.log(f)
            else:
                raise InputError(f"unknown environment factor {key!r}: use euv, Te or a "
                                 f"fixed neutral of this mechanism ({', '.join(allowed)})",
                                 file="--vary-environment")
        self.environment = {k: float(v) for k, v in environment.items()}
        self.rtol = float(getattr(model.scenario.solve, "rtol", 1e-10))
        self.altitude_km = np.asarray(model.altitude_km, float)
        self.reactions = list(model.reactions)
        self.species = list(model.species)
        self.factor_names = self.reactions + self.given_names + [ENV_EUV, ENV_TE]
        self.R, self.G = R, len(self.given_names)

    # -------------------------------------------------------------- layout of the draws
    @property
    def width(self) -> int:
        """Number of standard normals per sample (columns of ``z``)."""
        return self.R + self.G + 2

    @property
    def te_column(self) -> int:
        return self.R + self.G + 1

    def environment_columns(self):
        """``{name: column of z}`` of the varied environment factors."""
        out = {}
        for g, name in enumerate(self.given_names):
            if self.ln_given[g] != 0:
                out[name] = self.R + g
        if self.ln_euv:
            out[ENV_EUV] = self.R + self.G
        if self.ln_te:
            out[ENV_TE] = self.te_column
        return out

    def varied_reactions(self):
        """Indices of the reactions with a non-zero uncertainty at some level."""
        return np.nonzero(np.any((self.sigma_low > 0) | (self.sigma_high > 0), axis=0))[0]

    def log_sigma(self):
        """Symmetric one-sigma ln-factor (A, R): ln f, or the band's (ln high − ln low)/2."""
        return 0.5 * (self.sigma_low + self.sigma_high)

    def digest(self) -> str:
        """SHA-256 of every array the samples depend on (for the resume manifest)."""
        h = hashlib.sha256()
        for arr in (self.k0, self.sigma_low, self.sigma_high, self.given0,
                    self.photo_mask.astype(np.int8), self.ln_given,
                    np.array([self.ln_euv, self.ln_te, self.rtol]), self.altitude_km,
                    self.mechanism.nu_all, self.mechanism.slots):
            a = np.ascontiguousarray(arr)
            h.update(str(a.shape).encode())
            h.update(a.tobytes())
        h.update("\n".join(self.factor_names + self.species).encode())
        return h.hexdigest()

    # -------------------------------------------------------------- perturbed inputs
    def perturbed(self, z, k_base=None):
        """Rate coefficients (B·A, R) and fixed densities (B·A, G) of the samples ``z``.

        Parameters
        ----------
        z : ndarray (B, width)
            Standard-normal draws, one row per sample.
        k_base : ndarray (B, A, R), optional
            Central rates at each sample's temperatures (``Te`` varied); default ``k0``.
        """
        z = np.asarray(z, float)
        B, R, G = z.shape[0], self.R, self.G
        eps = z[:, None, :R]
        d = np.where(eps > 0, eps * self.sigma_high[None], eps * self.sigma_low[None])
        if self.ln_euv:
            d = d + (z[:, R + G] * self.ln_euv)[:, None, None] * self.photo_mask
        base = self.k0[None] if k_base is None else k_base
        k = (base * np.exp(d)).reshape(-1, R)
        given = self.given0[None] * np.exp(z[:, None, R:R + G] * self.ln_given)
        return k, given.reshape(B * self.k0.shape[0], G)


def solve_batch(kernel, z, k_base=None, first=0):
    """Steady densities of the samples ``z``: ndarray (B, A, S), cm-3.

    Runs on dask workers as well as in-process. ``first`` is the index of the first sample
    (for error messages).
    """
    from ionochem.solve.steady import solve_steady
    k, given = kernel.perturbed(z, k_base)
    mech = kernel.mechanism
    S = len(mech.solved)
    A = kernel.altitude_km.size

    B = k.shape[0]

    def take(rows):
        # Newton passes the active rows, sorted and unique: all rows need no copy.
        return (k, given) if rows.size == B else (k[rows], given[rows])

    def tendency(n, rows):
        return mech.tendency(n, *take(rows))

    def jacobian(n, rows):
        return mech.jacobian(n, *take(rows))

    def gross(n, rows):
        P, L = mech.production_loss(n, *take(rows))
        return P[:, :S], L[:, :S]

    try:
        res = solve_steady(np.zeros((k.shape[0], S)), tendency, jacobian, gross,
                           rtol=kernel.rtol)
    except SolverError as exc:
        rows = np.asarray(exc.levels, int)
        where = [f"sample {first + r // A} at {kernel.altitude_km[r % A]:g} km"
                 for r in rows[:6]]
        raise SolverError(f"steady state not reached for {rows.size} level(s) of the "
                          f"ensemble: {', '.join(where)}{' …' if rows.size > 6 else ''} "
                          "(rate factors far in the tails can make a column unsolvable)",
                          levels=[first + int(r) // A for r in rows]) from None
    return res.n.reshape(z.shape[0], A, S)


def draw_normals(seed: int, start: int, stop: int, width: int):
    """Standard normals (stop − start, width) of samples start … stop − 1.

    Sample i uses ``default_rng(SeedSequence(seed, spawn_key=(i,)))`` (the i-th child of
    ``SeedSequence(seed).spawn(N)``), so its draws do not depend on the batching.
    """
    out = np.empty((stop - start, width))
    for row, i in enumerate(range(start, stop)):
        rng = np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(i,)))
        out[row] = rng.standard_normal(width)
    return out


def base_rates(model, kernel, z):
    """Central rates at each sample's electron temperature (B, A, R), or None (Te fixed)."""
    if not kernel.ln_te:
        return None
    env = model.environment
    factor = np.exp(np.asarray(z, float)[:, kernel.te_column] * kernel.ln_te)
    return np.asarray(model.rate_coefficients(
        temperatures={"Te": np.asarray(env.Te, float)[None] * factor[:, None]}), float)


def default_batch(levels: int) -> int:
    """Samples per batch: about ``ROW_TARGET`` rows of the batched Newton."""
    return max(1, ROW_TARGET // max(levels, 1))


# ----------------------------------------------------------------------------- running
@contextlib.contextmanager
def dask_client(workers=None, scheduler=None):
    """A dask.distributed client: on ``scheduler`` (an address) or a new local cluster of
    ``workers`` single-threaded processes; closed (with its cluster) on exit."""
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


def single_thread_blas():
    """Limit BLAS to one thread while solving in this process.

    The batched Newton multiplies many small matrices (rows × reactions by reactions ×
    species); a multi-threaded BLAS spends more on synchronisation than it gains there
    (measured: 2.5 ms against 15 ms for one production/loss evaluation of 1810 rows on two
    cores). dask workers get the same setting from distributed's default
    ``OPENBLAS_NUM_THREADS=1``. Without threadpoolctl this does nothing.
    """
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:  # pragma: no cover - optional
        return contextlib.nullcontext()
    return threadpool_limits(limits=1, user_api="blas")


def _split(gaps, size):
    for a, b in gaps:
        for s in range(a, b, size):
            yield s, min(s + size, b)


def run_ensemble(model, kernel, rows, total, *, batch=None, workers=1, scheduler=None,
                 store=None, progress=False, on_batch=None):
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
    workers : int
        Worker processes of a local dask cluster; 1 (or less) solves in this process.
    scheduler : str, optional
        Address of an existing dask scheduler (overrides ``workers``).
    store : EnsembleStore, optional
        Finished batches are written there as they complete; stored batches are skipped.
    progress : bool
        Show a tqdm progress bar (on stderr).
    on_batch : callable, optional
        ``on_batch(start, stop, done, total)`` after each batch is stored (a hook for
        progress reports and for tests that interrupt a run).
    """
    from tqdm import tqdm
    total = int(total)
    batch = int(batch) if batch else default_batch(kernel.altitude_km.size)
    if batch < 1:
        raise InputError("--batch must be at least 1", file="--batch")
    results = {}
    if store is not None:
        for a, b in store.finished():
            z_stored, _ = store.read(a, b)
            if b > total or not np.array_equal(z_stored, rows(a, b)):
                raise InputError(f"stored samples {a}..{b - 1} do not match this run's random "
                                 "streams; remove the folder to start again",
                                 file=str(store.folder))
        gaps = store.missing(total)
    else:
        gaps = [(0, total)] if total else []
    todo = list(_split(gaps, batch))
    done = total - sum(b - a for a, b in gaps)
    bar = tqdm(total=total, initial=done, unit="sample", desc="samples",
               disable=not progress, leave=False)

    def finish(a, b, z, n):
        nonlocal done
        if store is not None:
            store.write(a, b, z, n)
        else:
            results[a] = (z, n)
        done += b - a
        bar.update(b - a)
        if on_batch is not None:
            on_batch(a, b, done, total)

    try:
        if scheduler or (workers and int(workers) > 1):
            _run_dask(model, kernel, rows, todo, workers, scheduler, finish)
        else:
            with single_thread_blas():
                for a, b in todo:
                    z = rows(a, b)
                    finish(a, b, z, solve_batch(kernel, z, base_rates(model, kernel, z), a))
    finally:
        bar.close()
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


def _run_dask(model, kernel, rows, todo, workers, scheduler, finish):
    """Batches on dask: a task solves a group of consecutive batches (so that a task is a
    few hundred ms of work and the scheduler's per-task cost stays small), and each batch
    is stored as it is in a serial run (a resume may switch between serial and dask)."""
    from dask.distributed import as_completed
    with dask_client(workers, scheduler) as client:
        kernel_future = client.scatter(kernel, broadcast=True)
        nthreads = max(1, sum(client.nthreads().values()))
        group = max(1, min(TASK_BATCHES_MAX,
                           -(-len(todo) // (TASKS_PER_WORKER * nthreads))))
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


def open_store(output, manifest, *, resume=False):
    """The sample store of ``output`` (``OUT.nc.samples``), or None without an output."""
    if output is None:
        if resume:
            raise InputError("--resume needs -o OUT.nc (the samples are kept next to it)",
                             file="--resume")
        return None
    from ionochem.analysis.ensemble_store import EnsembleStore, store_path_for
    return EnsembleStore(store_path_for(output), manifest, resume=resume)


def manifest_for(model, kernel, method, samples, seed, **extra):
    """The resume manifest of a run (see :mod:`ionochem.analysis.ensemble_store`)."""
    return {
        "method": method,
        "samples": int(samples),
        "seed": int(seed),
        "scenario_sha256": getattr(model.scenario, "sha256", ""),
        "reaction_list_sha256": getattr(model.reaction_list, "sha256", ""),
        "reactions_sha256": hashlib.sha256("\n".join(model.reactions).encode()).hexdigest(),
        "changes": {"set": {k: str(v) for k, v in model.changes["set"].items()},
                    "scale": {k: float(v) for k, v in model.changes["scale"].items()}},
        "environment": kernel.environment,
        "inputs_sha256": kernel.digest(),
        **extra,
    }


# ----------------------------------------------------------------------------- results
def species_samples(model, kernel, z, n):
    """Densities of every reported species per sample (N, A, species), names and roles.

    Solved densities map to all species (electrons, derived totals, fixed neutrals) with
    the code path of the result dataset; a varied fixed neutral carries its sample factor.
    """
    dens, names, roles = model.species_table(n)
    for g, name in enumerate(kernel.given_names):
        if kernel.ln_given[g] and name in names:
            col = names.index(name)
            dens[..., col] = dens[..., col] * np.exp(z[:, kernel.R + g]
                                                     * kernel.ln_given[g])[:, None]
    return dens, names, roles


def sample_variance_shares(z_factors, log_dens):
    """Shares of var(ln n) carried by each factor, from the samples.

    Parameters
    ----------
    z_factors : ndarray (N, P)
        The standard-normal draws of the P varied factors.
    log_dens : ndarray (N, M)
        ln n of M outputs (species × altitude, flattened); columns with a non-finite value
        give NaN.

    Returns
    -------
    share : ndarray (P, M)
        Normalised to sum to 1 over the factors.
    explained : ndarray (M,)
        Fraction of var(ln n) the linear model explains (NaN with the correlation method).
    method : str
        ``"regression"`` (least squares of ln n on all ε at once, share_j ∝ β_j² var ε_j)
        when N ≥ 2 (P + 1), else ``"correlation"`` (adjusted squared correlation of ln n
        with each ε_j alone).
    """
    N, P = z_factors.shape
    M = log_dens.shape[1]
    share = np.full((P, M), np.nan)
    explained = np.full(M, np.nan)
    good = np.all(np.isfinite(log_dens), axis=0)
    if N < 3 or P == 0 or not good.any():
        return share, explained, "none"
    X = z_factors - z_factors.mean(axis=0)
    Y = log_dens[:, good] - log_dens[:, good].mean(axis=0)
    sst = np.sum(Y * Y, axis=0)
    live = sst > 1e-30 * np.maximum(np.abs(log_dens[:, good]).max(axis=0), 1.0) ** 2 * N
    if N >= 2 * (P + 1):
        beta = np.linalg.lstsq(X, Y, rcond=None)[0]          # (P, M_good)
        contrib = beta ** 2 * np.var(z_factors, axis=0)[:, None] * N
        resid = Y - X @ beta
        r2 = 1.0 - np.sum(resid * resid, axis=0) / np.where(live, sst, 1.0)
        method = "regression"
    else:
        xy = X.T @ Y
        rho2 = xy ** 2 / (np.sum(X * X, axis=0)[:, None] * np.where(live, sst, 1.0))
        # Adjusted r² (Ezekiel 1930, Methods of Correlation Analysis): without it the
        # chance correlations of the many unimportant factors, each about 1/(N − 1), would
        # dilute the normalised shares of the important ones.
        contrib = np.clip(1.0 - (1.0 - rho2) * (N - 1) / (N - 2), 0.0, None)
        r2 = np.full(Y.shape[1], np.nan)
        method = "correlation"
    tot = contrib.sum(axis=0)
    with np.errstate(divide="ignore", invalid="ignore"):
        sh = np.where(live & (tot > 0), contrib / tot, np.nan)
    share[:, good] = sh
    explained[good] = np.where(live, r2, np.nan)
    return share, explained, method


def linear_variance_shares(model, kernel, sens):
    """First-order shares S_ij² σ_j² / Σ from the exact local sensitivities.

    Parameters
    ----------
    model : ionochem.Model
    kernel : SampleKernel
    sens : xarray.Dataset
        From :func:`ionochem.analysis.sensitivity.sensitivity`.

    Returns
    -------
    reactions : ndarray (species, R, A)
    environment : ndarray (species, E, A)
        For the varied environment factors, in ``kernel.environment_columns()`` order:
        ∂ln n/∂ln X is Σ_j S_ij (photo reactions) for ``euv``, Σ_j c_gj S_ij (c_gj the
        count of g among the reactants of j) for a fixed neutral g, and the sensitivity to
        Te for ``Te``.
    """
    S = np.nan_to_num(sens["sensitivity"].values)             # (species, R, A)
    sig = kernel.log_sigma().T                                 # (R, A)
    var_r = S ** 2 * sig[None] ** 2
    env_cols = kernel.environment_columns()
    mech = model.mechanism
    env = []
    for name in env_cols:
        if name == ENV_EUV:
            s = S[:, kernel.photo_mask, :].sum(axis=1)
            ln = kernel.ln_euv
        elif name == ENV_TE:
            s = np.nan_to_num(sens["sensitivity_Te"].values)
            ln = kernel.ln_te
        else:
            count = (mech.slots == mech.index(name)).sum(axis=1).astype(float)   # (R,)
            s = np.einsum("srA,r->sA", S, count)
            ln = kernel.ln_given[kernel.given_names.index(name)]
        env.append(s ** 2 * ln ** 2)
    var_e = np.stack(env, axis=1) if env else np.zeros((S.shape[0], 0, S.shape[2]))
    tot = var_r.sum(axis=1) + var_e.sum(axis=1)                # (species, A)
    with np.errstate(divide="ignore", invalid="ignore"):
        rs = np.where(tot[:, None] > 0, var_r / tot[:, None], np.nan)
        es = np.where(tot[:, None] > 0, var_e / tot[:, None], np.nan)
    dead = ~np.isfinite(sens["sensitivity"].values).all(axis=1)     # dark levels
    rs[np.broadcast_to(dead[:, None], rs.shape)] = np.nan
    es[np.broadcast_to(dead[:, None], es.shape)] = np.nan
    return rs, es


def monte_carlo(model, samples, *, seed=0, environment=None, batch=None, workers=1,
                scheduler=None, output=None, resume=False, progress=False, on_batch=None):
    """Monte Carlo over log-normal rate (and environment) factors.

    Parameters
    ----------
    model : ionochem.Model
    samples : int
        Number of samples N.
    seed : int
        Seed of the sample streams (see the module docstring).
    environment : dict, optional
        One-sigma factors of ``euv``, ``Te`` and fixed neutrals (``{"O": 1.15}``).
    batch, workers, scheduler, progress, on_batch
        See :func:`run_ensemble`.
    output : str or Path, optional
        The result file the caller will write; its sample store ``OUTPUT.samples`` keeps the
        finished batches (the caller removes it with :func:`remove_store` once the output
        is written, or keeps it).
    resume : bool
        Continue the store of ``output``.

    Returns
    -------
    xarray.Dataset
        ``density_quantiles`` (quantile, species, altitude) cm-3, ``density_central``,
        ``pce_doubtful`` (the central solution's equilibrium flag), ``log_density_std``,
        ``variance_share`` and ``variance_share_linear``
        (species, reaction, altitude), their environment counterparts when factors are
        varied, ``explained_variance``, ``log_uncertainty_factor`` (reaction, altitude);
        attributes ``samples``, ``seed``, ``method`` and the provenance of the model.
    """
    samples = int(samples)
    if samples < 2:
        raise InputError("--samples must be at least 2", file="--samples")
    seed = int(seed)
    if seed < 0:
        raise InputError("--seed must be a non-negative integer", file="--seed")
    kernel = SampleKernel(model, environment)
    store = open_store(output, manifest_for(model, kernel, "montecarlo", samples, seed),
                       resume=resume)

    def rows(a, b):
        return draw_normals(seed, a, b, kernel.width)

    z, n = run_ensemble(model, kernel, rows, samples, batch=batch, workers=workers,
                        scheduler=scheduler, store=store, progress=progress,
                        on_batch=on_batch)
    ds = summarise(model, kernel, z, n, seed=seed)
    ds.attrs["batch_samples"] = int(batch or default_batch(kernel.altitude_km.size))
    return ds


def summarise(model, kernel, z, n, *, seed):
    """The Monte Carlo dataset from the draws ``z`` (N, width) and densities ``n``."""
    from ionochem.analysis.sensitivity import sensitivity
    from ionochem.io.dataset import _provenance
    N, A = n.shape[0], kernel.altitude_km.size
    dens, names, roles = species_samples(model, kernel, z, n)      # (N, A, Nsp)
    q = np.quantile(dens, QUANTILES, axis=0)                       # (Q, A, Nsp)
    central = model.solve()
    sens = sensitivity(model, central)
    with np.errstate(divide="ignore", invalid="ignore"):
        logd = np.where(dens > 0, np.log(np.where(dens > 0, dens, 1.0)), np.nan)
    log_std = np.std(logd, axis=0, ddof=1)                         # (A, Nsp)
    env_cols = kernel.environment_columns()
    react = kernel.varied_reactions()
    cols = list(react) + list(env_cols.values())
    share, explained, how = sample_variance_shares(z[:, cols], logd.reshape(N, -1))
    Nsp, R = len(names), kernel.R
    share = share.reshape(len(cols), A, Nsp)
    vs = np.zeros((Nsp, R, A))
    vs[:, react, :] = np.transpose(share[:len(react)], (2, 0, 1))
    nan_out = np.isnan(share).all(axis=0).T                        # (Nsp, A)
    vs = np.where(nan_out[:, None, :], np.nan, vs)
    lin_r, lin_e = linear_variance_shares(model, kernel, sens)
    # The sensitivity dataset lists the same species in the same order as Model.species_table.
    sens_names = list(sens["species"].values)
    order = [sens_names.index(s) for s in names]
    lin_r, lin_e = lin_r[order], lin_e[order]
    dens0 = central["density"].values
    data = {
        "density_quantiles": (("quantile", "species", "altitude"),
                              np.transpose(q, (0, 2, 1)),
                              {"units": "cm-3", "long_name": "quantiles of the number density "
                               "over the Monte Carlo samples"}),
        "density_central": (("species", "altitude"), dens0[[list(central["species"].values)
                                                            .index(s) for s in names]],
                            {"units": "cm-3", "long_name": "number density with every "
                             "rate at its central value"}),
        "log_density_std": (("species", "altitude"), log_std.T,
                            {"units": "1", "long_name": "standard deviation of ln(density) "
                             "over the samples"}),
        "variance_share": (("species", "reaction", "altitude"), vs,
                           {"units": "1", "long_name": "share of var(ln density) carried "
                            f"by each reaction's uncertainty, from the samples ({how})"}),
        "variance_share_linear": (("species", "reaction", "altitude"), lin_r,
                                  {"units": "1", "long_name": "first-order share "
                                   "S_ij^2 ln^2 f_j / sum, from the exact local "
                                   "sensitivities S = dln n/dln k"}),
        "explained_variance": (("species", "altitude"), explained.reshape(A, Nsp).T,
                               {"units": "1", "long_name": "fraction of var(ln density) "
                                "explained by a model linear in the draws"}),
        "log_uncertainty_factor": (("reaction", "altitude"), kernel.log_sigma().T,
                                   {"units": "1", "long_name": "one-sigma ln-factor of each "
                                    "rate: ln f, or (ln high - ln low)/2 for a banded table"}),
    }
    coords = {
        "quantile": ("quantile", np.array(QUANTILES), {"units": "1",
                                                       "long_name": "probability level"}),
        "species": ("species", np.array(names, dtype=object)),
        "role": ("species", np.array(roles, dtype=object)),
        "altitude": ("altitude", kernel.altitude_km, {"units": "km", "positive": "up",
                                                      "standard_name": "altitude"}),
        "reaction": ("reaction", np.array(kernel.reactions, dtype=object)),
    }
    if env_cols:
        es = np.transpose(share[len(react):], (2, 0, 1))
        es = np.where(nan_out[:, None, :], np.nan, es)
        data["variance_share_environment"] = (
            ("species", "environment_factor", "altitude"), es,
            {"units": "1", "long_name": "share of var(ln density) carried by each varied "
             f"environment factor, from the samples ({how})"})
        data["variance_share_linear_environment"] = (
            ("species", "environment_factor", "altitude"), lin_e,
            {"units": "1", "long_name": "first-order share of each varied environment "
             "factor from the exact local sensitivities"})
        coords["environment_factor"] = ("environment_factor",
                                        np.array(list(env_cols), dtype=object))
    if "pce_doubtful" in central:
        flag = central["pce_doubtful"]
        data["pce_doubtful"] = (("species", "altitude"),
                                flag.sel(species=names).values.astype(np.int8),
                                dict(flag.attrs, long_name=flag.attrs.get("long_name", "")
                                     + " (central solution)"))
    ds = xr.Dataset(data, coords=coords, attrs=_provenance(model))
    ds.attrs.update({
        "method": "montecarlo",
        "samples": int(N),
        "seed": int(seed),
        "quantiles": ", ".join(f"{x:g}" for x in QUANTILES),
        "sampling": "ln k_j = ln k_j + eps_j ln f_j(level), one standard normal per reaction "
                    "per sample shared by every level (rate errors are systematic); sample i "
                    "draws from SeedSequence(seed, spawn_key=(i,))",
        "band_interpretation": "a table's _low/_high band is read as the one-sigma (68 %) "
                               "range: two-piece log-normal with median at the tabulated value",
        "banded_reactions": ", ".join(kernel.reactions[j] for j in kernel.banded),
        "environment_spreads": ", ".join(f"{k}={v:g}" for k, v in kernel.environment.items()),
        "variance_share_method": how,
    })
    ds.attrs["history"] = ds.attrs.get("history", "").replace("ionochem run",
                                                              "ionochem uncertainty")
    return ds


def remove_store(output):
    """Delete the sample store of ``output`` (``OUT.nc.samples``) if there is one."""
    import shutil

    from ionochem.analysis.ensemble_store import store_path_for
    shutil.rmtree(store_path_for(output), ignore_errors=True)
