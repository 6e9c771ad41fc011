"""Steady state of columns whose rows are coupled by transport: Newton on the whole column.

Same contract as :mod:`ionochem.solve.steady` (positivity, convergence rule, fallback,
diagnostics), but the rows are solved together because transport links each row to
its neighbours. The solver sees only callables on arrays shaped (B, S) — B rows (of one
column, or of several columns stacked, row-major within each), S solved species — and
never imports the parser, the environment or the physics of transport:

``tendency(n) -> (B, S)``; ``jacobian(n) -> scipy.sparse matrix (B·S, B·S)`` with entry
``(b·S + i, c·S + j) = ∂f_{b,i}/∂n_{c,j}``, block tridiagonal for a single column (chemistry
in the diagonal blocks, transport between neighbours); and ``gross(n) -> (P, L)``, the
gross production and loss (B, S) including transport in- and outflow, used to scale the
residual.

Method
------
1. Start from the given densities (the photochemical solution of every row is a good
   start: the molecular ions hardly move, O+ relaxes to its transported profile), then a
   few geometric-mean sweeps n ← sqrt(n P/λ), λ = L/n, with transport counted in P and L,
   so species with no production go to zero and rows with none become positive.
2. Damped Newton on the whole column: J Δn = −f solved by one LU factorisation of the
   (B·S)² Jacobian per iteration (:func:`factorise`: LAPACK's banded ``dgbtrf`` when the
   band is narrow, as for the demo's 12 species, else SuperLU through
   ``scipy.sparse.linalg.splu``; the matrix has bandwidth ≈ 2S, so the cost is linear in
   the number of rows) — or, from
   :data:`CHORD_FROM` = 10,000 unknowns, a chord Newton that keeps the LU while every step
   cuts the scaled residual norm tenfold and refactorises otherwise (see "Linear solver"
   below). The Jacobian's CSC structure is built once per column
   (:class:`ColumnJacobian`); each iteration only fills its values. Positivity,
   per row as in the independent solver: the step of a row is cut so no density falls
   below a tenth of its value — nor, here, rises above ten times it, which stops Newton's
   overshoot from far below a recombination-limited density (rows in the Earth's shadow
   fed only by diffusion start from nothing). The step is halved (at most 8 times) only
   while the scaled residual norm of the column would grow more than a thousandfold: a
   non-monotone rule,
   because the first full steps from the photochemical start (O+ falling several-fold
   at the top, the molecular ions following the electrons quadratically) raise the norm
   before Newton converges quadratically, and a monotone line search would creep there.
3. Convergence, per row exactly as in :mod:`ionochem.solve.steady` (docs/validation.md):
   relative residual max_i |f_i|/(P_i + L_i + floor) ≤ rtol before a step (the same floor),
   relative step ≤ 1e-3 (or every residual of the row below ``atol``), residual ≤ rtol
   again at the point reached; the column is converged when every row is. One addition
   for the coupled system: the floor is raised to 1e-20 of the largest gross rate in the
   column at the start, because the errors of the
   column-wide linear solve scale with the column's largest terms. Without it, O+ leaking
   by diffusion into the Earth's shadow at a twilight column (1e-27 cm-3 s-1, making
   molecular ions of 1e-10 cm-3) would have to be resolved to its own relative precision.
4. If Newton does not converge in ``max_newton`` iterations (or meets a singular
   Jacobian), pseudo-transient continuation on the whole column: (diag(1/Δt) − J) Δn = f
   with a local time step per row, starting at a hundredth of the row's fastest time
   (chemistry or transport) and growing with the fall of the column's residual (switched
   evolution relaxation); Newton then polishes.
5. A column still unconverged, negative or not finite raises :class:`SolverError` naming
   the rows that fail the rule.

Linear solver (issue 13)
------------------------
Measured with benchmarks/bench_column_solver.py (the demo column with O+ transport, 12
solved species, resampled over 90–600 km; one BLAS thread, interleaved repeats, medians of
15, a shared 2-core machine), the column solve from the photochemical start:

=========  ================  ================  ================
rows     200 (2,400 unk.)  1,000 (12,000)    5,000 (60,000)
=========  ================  ================  ================
newton     9.5 ms, 6 LU      54 ms, 7 LU       350 ms, 7 LU
chord      7.7 ms, 3 LU      40 ms, 4 LU       258 ms, 4 LU
ratio      1.24× (1.20–1.28  1.35× (≥ 1.3 in   1.36× (≥ 1.3 in
           every repeat)     12 of 15)         10 of 15)
=========  ================  ================  ================

The chord takes one iteration more (8 against 7; its densities differ from Newton's by
≤ 2e-11 relative, both within the same convergence rule), so the default is the chord from
10,000 unknowns and plain Newton below, where its gain stays under 1.3×. Newton–Krylov
(GMRES on the scaled rows, incomplete-LU preconditioner) is 0.5–0.9× Newton at every size:
the exact LU of this banded matrix fills only 30 % beyond the Jacobian (900,083 against
689,997 entries at 5,000 rows), so ``spilu`` costs as much as ``splu`` and GMRES adds 4–5
products per iteration; a block-diagonal preconditioner (chemistry blocks alone) does not
converge in 1,000 GMRES iterations, because transport couples the O+ of neighbouring rows
more strongly than chemistry at fine grids. Both variants stay selectable (``linear=``) and
a variant that does not converge is followed by plain Newton from the same start.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from ionochem.errors import SolverError
from ionochem.solve.steady import (
    METHOD_CONTINUATION,
    METHOD_NEWTON,
    STEP_TOL,
    SteadyResult,
    _negligible,
    _positive_step,
    _rate_floor,
    _relative_residual,
    _scale,
    initial_guess,
)

#: Rates below this fraction of the largest gross rate of the whole column are noise of the
#: coupled linear solve (its errors scale with the column's largest terms): the absolute
#: floor ``atol`` of the convergence rule is raised to it (see the module docstring).
COLUMN_FLOOR = 1e-20

#: Column ordering for SuperLU. The row-major unknowns already give a band of width ≈ 2S,
#: which the natural order keeps (fill stays in the band); COLAMD factorises the 200-row
#: demo column about twice as slowly (measured with benchmarks/bench_transport.py).
ORDERING = "NATURAL"

#: A Newton step is halved only while it would raise the column's scaled residual norm more
#: than this factor (non-monotone: see the module docstring).
GROWTH_LIMIT = 1e3


def block_diagonal(J):
    """Sparse CSC block-diagonal matrix from blocks J shaped (B, S, S)."""
    B, S, _ = J.shape
    rows = (np.arange(B)[:, None, None] * S + np.arange(S)[None, :, None])
    cols = (np.arange(B)[:, None, None] * S + np.arange(S)[None, None, :])
    rows = np.broadcast_to(rows, J.shape).ravel()
    cols = np.broadcast_to(cols, J.shape).ravel()
    return sp.csc_matrix((J.ravel(), (rows, cols)), shape=(B * S, B * S))


class ColumnJacobian:
    """The column's sparse Jacobian from its blocks, with the CSC structure built once.

    The matrix is block diagonal (dense (S, S) chemistry blocks of B rows) plus a
    sparse coupling (transport, conduction) whose structure is fixed; only the values
    change between Newton iterations. The index arrays (rows of every column, column
    starts) and the place of every block entry and coupling entry in them are computed
    here once; each call fills the values: the same matrix as
    ``block_diagonal(blocks) + coupling`` (entries that are zero kept as explicit zeros),
    without a COO→CSC sort and a sparse sum per iteration
    (measured with benchmarks/bench_column_solver.py).

    Parameters
    ----------
    n_rows, n_species : int
        B and S.
    coupling : scipy.sparse matrix (B·S, B·S)
        Coupling part, e.g. :meth:`SpeciesTransport.matrix`: its values are used unless a
        call gives others; its stored entries are the structure a call's coupling must fit.
    """

    def __init__(self, n_rows, n_species, coupling):
        B, S = int(n_rows), int(n_species)
        N = B * S
        T = sp.coo_matrix(coupling)
        T.sum_duplicates()
        base = np.arange(B)[:, None, None] * S
        rows = np.broadcast_to(base + np.arange(S)[None, :, None], (B, S, S)).ravel()
        cols = np.broadcast_to(base + np.arange(S)[None, None, :], (B, S, S)).ravel()
        # CSC order: by column, then row.
        key = np.concatenate([cols.astype(np.int64) * N + rows,
                              T.col.astype(np.int64) * N + T.row])
        unique, where = np.unique(key, return_inverse=True)
        self.shape = (N, N)
        self._blocks = where[:rows.size]
        self._coupling = where[rows.size:]
        self._values = T.data.astype(float)
        self._keys = unique
        self._indices = (unique % N).astype(np.int32)
        self._indptr = np.searchsorted(unique // N, np.arange(N + 1)).astype(np.int32)

    def __call__(self, blocks, coupling=None):
        """CSC (B·S, B·S) matrix for chemistry blocks shaped (B, S, S), with the coupling
        given at construction or, when given, ``coupling`` (same shape, entries within the
        structure given at construction)."""
        data = np.zeros(self._indices.size)
        data[self._blocks] = np.asarray(blocks, float).ravel()
        if coupling is None:
            data[self._coupling] += self._values
        else:
            C = sp.coo_matrix(coupling)
            np.add.at(data, self._places(C), C.data)
        J = sp.csc_matrix((data, self._indices, self._indptr), shape=self.shape)
        J.has_sorted_indices = True
        return J

    def _places(self, coupling):
        """Where each stored entry of the COO matrix ``coupling`` goes in the CSC values."""
        N = self.shape[0]
        key = coupling.col.astype(np.int64) * N + coupling.row
        place = np.searchsorted(self._keys, key)
        if np.any(place >= self._keys.size) or np.any(self._keys[np.minimum(
                place, self._keys.size - 1)] != key):
            raise ValueError("the coupling has an entry outside the structure it declared")
        return place


#: Largest total bandwidth (kl + ku + 1) for which the LU is banded (LAPACK ``dgbtrf``)
#: rather than sparse (SuperLU). The column's Jacobian has kl = ku ≈ S + 1 (the chemistry
#: blocks and the transported species' neighbours); measured with the demo column (12
#: species, kl = ku = 13) on one BLAS thread, factorisation and one solve, best of 7: banded
#: 0.78× SuperLU's time at 100 rows, 0.80× at 256, 0.82× at 1,000, 0.95× at 5,000 (issue 25).
#: A much wider band (many species) fills the band densely, where SuperLU's sparsity wins.
BANDED_MAX_WIDTH = 64


def _bandwidths(J):
    """(kl, ku) of the sparse matrix J."""
    c = J.tocoo()
    if not c.nnz:
        return 0, 0
    return int(max(np.max(c.row - c.col), 0)), int(max(np.max(c.col - c.row), 0))


def _banded_lu(J, kl, ku):
    """LU of J in LAPACK band storage (``dgbtrf``, partial pivoting): a function
    x = solve(rhs) (rhs (N,) or (N, K)), or None if J is exactly singular."""
    from scipy.linalg import lapack  # deferred with scipy.sparse.linalg (start-up)

    c = J.tocoo()
    N = J.shape[0]
    ab = np.zeros((2 * kl + ku + 1, N))
    ab[kl + ku + c.row - c.col, c.col] = c.data
    lub, piv, info = lapack.dgbtrf(ab, kl, ku, overwrite_ab=True)
    if info != 0:
        return None

    def solve(rhs):
        x, _ = lapack.dgbtrs(lub, kl, ku, np.asarray(rhs, float), piv)
        return x

    return solve


def factorise(J):
    """LU of J: a function x = solve(rhs), or None.

    Banded (LAPACK) when the band is narrow (:data:`BANDED_MAX_WIDTH`), else sparse (SuperLU,
    :data:`ORDERING`). An exactly singular J (species with no loss at all where the
    densities are zero, as in a dark column) is shifted to J − ε I, ε = 1e-12 × its largest
    diagonal entry — a pseudo-time step of 1e12 relaxation times, harmless to Newton, which
    only needs a descent direction to reach f = 0.
    """
    from scipy.sparse.linalg import splu  # deferred: scipy.linalg and more, ~50 ms

    J = sp.csc_matrix(J)
    kl, ku = _bandwidths(J)
    banded = kl + ku + 1 <= BANDED_MAX_WIDTH

    def lu(M):
        if banded:
            return _banded_lu(M, kl, ku)
        try:
            return splu(M, permc_spec=ORDERING).solve
        except RuntimeError:
            return None

    solve = lu(J)
    if solve is None:
        diag = np.abs(J.diagonal())
        eps = 1e-12 * (diag.max() if diag.size and diag.max() > 0 else 1.0)
        solve = lu(sp.csc_matrix(J - eps * sp.identity(J.shape[0])))
    return solve


def _finite(x):
    return x if x is not None and np.all(np.isfinite(x)) else None


def sparse_solve(J, rhs):
    """Solve J x = rhs with one sparse LU (rhs (N,) or (N, K)); None if that fails
    (see :func:`factorise`)."""
    solve = factorise(J)
    return None if solve is None else _finite(solve(np.asarray(rhs, float)))


def _regularise(J, f):
    """Give a small negative diagonal to unknowns whose diagonal entry is exactly zero.

    A species with no loss where the densities are zero (a molecular ion in a dark row:
    its recombination vanishes with the electrons) makes J exactly singular. Its diagonal
    becomes −1e-12 × the largest entry of its row (−1 for an empty row): a local
    pseudo-time step far longer than any of its rates, harmless to Newton, which only
    needs a descent direction to reach f = 0. (A global shift would swamp rows whose own
    rates are tiny.)
    """
    J = sp.csc_matrix(J)
    diag = J.diagonal()
    zero = diag == 0
    if zero.any():
        rowmax = np.asarray(abs(J).max(axis=1).todense()).ravel()
        shift = np.where(zero, -np.where(rowmax > 0, 1e-12 * rowmax, 1.0), 0.0)
        J = J + sp.diags(shift)
    return J


def _bounded_step(n, dn):
    """Per-row step fraction keeping every density within [n/10, 10 n].

    The lower bound is the positivity rule of :mod:`steady`; the upper bound stops the
    overshoot of Newton from far below a recombination-limited density (n² α = q gives
    n → q/(2αn)), which in a coupled column would drag every row's step down with it.
    Densities below 1e-12 of the row's largest are not bounded (clipped at zero).
    """
    dn, lam = _positive_step(n, dn)
    floor = 1e-12 * n.max(axis=1, initial=0.0)[:, None]
    with np.errstate(divide="ignore", invalid="ignore"):
        up = np.where((dn > 0) & (n > floor), 9.0 * n / dn, np.inf)
    return dn, np.minimum(lam, up.min(axis=1, initial=np.inf))


class DirectLU:
    """Newton's linear solve: the Jacobian at every iterate, one sparse LU each (today's
    default and the fallback of the other variants)."""

    name = "newton"

    def __init__(self, jacobian):
        self.jacobian = jacobian
        self.factorisations = 0

    def _fresh(self, n, f):
        self.factorisations += 1
        return factorise(_regularise(self.jacobian(n), f))

    def direction(self, n, f, scale):
        """Δn solving J Δn = −f, flat (B·S,); None if the solve fails."""
        solve = self._fresh(n, f)
        return None if solve is None else _finite(solve(-f.ravel()))

    def observe(self, ratio, damped):
        """The step's fall of the scaled residual norm (new / old) and whether it was cut."""


class Chord(DirectLU):
    """Chord Newton: the LU of the last Jacobian is reused while every step cuts the scaled
    residual norm of the column at least by :data:`CHORD_RATE` without being damped, and
    refactorised at the current point otherwise (or when the old factors give no finite
    step)."""

    name = "chord"

    def __init__(self, jacobian):
        super().__init__(jacobian)
        self._solve = None
        self._stale = True

    def direction(self, n, f, scale):
        fresh = self._solve is None or self._stale
        if fresh:
            self._solve = self._fresh(n, f)
            self._stale = False
        dn = None if self._solve is None else _finite(self._solve(-f.ravel()))
        if dn is None and not fresh:
            self._solve = self._fresh(n, f)
            dn = None if self._solve is None else _finite(self._solve(-f.ravel()))
        return dn

    def observe(self, ratio, damped):
        self._stale = damped or not ratio <= CHORD_RATE


class NewtonKrylov(DirectLU):
    """Inexact Newton: J Δn = −f by GMRES on the rows scaled by P + L (the norm of the
    convergence rule), preconditioned by an incomplete LU of the Jacobian at the iterate
    (``spilu``, drop tolerance :data:`ILU_DROP`), Jacobian–vector products with the sparse
    matrix; relative tolerance :data:`KRYLOV_RTOL`. A failed ILU or GMRES falls back to
    the complete LU for that iteration."""

    name = "krylov"

    def __init__(self, jacobian):
        super().__init__(jacobian)
        self.krylov_iterations = 0

    def direction(self, n, f, scale):
        from scipy.sparse.linalg import LinearOperator, gmres, spilu
        J = sp.csc_matrix(_regularise(self.jacobian(n), f))
        self.factorisations += 1
        try:
            ilu = spilu(J, drop_tol=ILU_DROP, fill_factor=10, permc_spec=ORDERING)
        except RuntimeError:
            solve = factorise(J)
            self.factorisations += 1
            return None if solve is None else _finite(solve(-f.ravel()))
        w = 1.0 / scale.ravel()
        rows = LinearOperator(J.shape, lambda v: w * (J @ v.ravel()))
        M = LinearOperator(J.shape, lambda v: ilu.solve(v.ravel() / w))
        count = [0]

        def tick(_):
            count[0] += 1

        with np.errstate(all="ignore"):
            dn, info = gmres(rows, -f.ravel() * w, M=M, rtol=KRYLOV_RTOL, atol=0.0,
                             restart=30, maxiter=10, callback=tick, callback_type="pr_norm")
        self.krylov_iterations += count[0]
        if info != 0 or not np.all(np.isfinite(dn)):
            self.factorisations += 1
            solve = factorise(J)
            return None if solve is None else _finite(solve(-f.ravel()))
        return dn


#: Linear solvers of the Newton iteration, by name (see the module docstring).
LINEAR_SOLVERS = {cls.name: cls for cls in (DirectLU, Chord, NewtonKrylov)}

#: Chord: the factors are kept while each step leaves at most this fraction of the scaled
#: residual norm (the chord method: Kelley 2003, *Solving Nonlinear Equations with Newton's
#: Method*, SIAM, ch. 2 (from memory)). Measured on the demo column (bench_column_solver):
#: with 0.5 or 0.3 the factors of the third iterate are kept at a contraction of 0.2 per
#: step and the chord needs 15–16 iterations; with 0.1 it refactorises there and then
#: contracts by 0.005 per step, 8 iterations with 4 factorisations (200 to 5,000 rows).
CHORD_RATE = 0.1

#: Newton–Krylov: drop tolerance of the incomplete LU and relative tolerance of GMRES on
#: the scaled rows (tight, so the outer iteration stays Newton's).
ILU_DROP = 1e-4
KRYLOV_RTOL = 1e-8


def _newton(n, tendency, jacobian, gross, *, rtol, atol, floor, max_iter, iterations,
            linear=None):
    """Damped Newton on the column; ``floor`` the rate-scale floor, ``atol`` the absolute
    residual floor (cm-3 s-1) below which a row is converged whatever its step;
    ``linear`` the solver of J Δn = −f (default :class:`DirectLU`, a fresh LU per
    iteration)."""
    B, S = n.shape
    linear = DirectLU(jacobian) if linear is None else linear
    res = np.full(B, np.inf)
    f = tendency(n)
    P, L = gross(n)
    for _ in range(max_iter):
        r0 = _relative_residual(f, P, L, floor)
        tiny = _negligible(f, atol)
        scale = _scale(P, L, floor)
        dn = linear.direction(n, f, scale)
        if dn is None:
            return n, False, r0
        dn, lam = _bounded_step(n, dn.reshape(B, S))
        lam = np.where(np.isfinite(lam), lam, 0.0)
        norm0 = np.linalg.norm(f / scale)
        mu = 1.0
        for _ in range(8):
            trial = np.maximum(n + mu * lam[:, None] * dn, 0.0)
            ft = tendency(trial)
            norm = np.linalg.norm(ft / scale)
            if norm <= GROWTH_LIMIT * norm0 or mu < 1e-3:
                break
            mu /= 2
        linear.observe(norm / norm0 if norm0 > 0 else 0.0, mu < 1.0 or np.any(lam < 1.0))
        step = np.abs(trial - n)
        small = 1e-12 * np.maximum(trial.max(axis=1, initial=0.0), 1e-300)
        rel_step = np.max(step / (trial + small[:, None]), axis=1, initial=0.0)
        n, f = trial, ft
        P, L = gross(n)
        iterations += 1
        res = r0
        if np.all((r0 <= rtol) & ((rel_step <= STEP_TOL) | tiny)):
            # The residual at the point reached confirms it (quadratic convergence puts
            # it far inside the tolerance).
            res = _relative_residual(f, P, L, floor)
            if np.all(res <= rtol):
                return n, True, res
    return n, False, res


def _continuation(n, tendency, jacobian, gross, *, atol, max_iter, iterations):
    B, S = n.shape
    f = tendency(n)
    P, L = gross(n)
    with np.errstate(divide="ignore", invalid="ignore"):
        freq = np.where(n > 0, L / np.maximum(n, 1e-300), 0.0)
    fastest = np.max(freq, axis=1, initial=0.0)
    dt = np.where(fastest > 0, 0.01 / np.maximum(fastest, 1e-300), 1.0)
    norm = np.linalg.norm(f / _scale(P, L, atol))
    for _ in range(max_iter):
        J = _regularise(jacobian(n), f)
        A = sp.diags(np.repeat(1.0 / dt, S)) - J
        dn = sparse_solve(A, f.ravel())
        if dn is None:
            dt = dt / 10
            continue
        dn, lam = _positive_step(n, dn.reshape(B, S))
        n = np.maximum(n + np.where(np.isfinite(lam), lam, 0.0)[:, None] * dn, 0.0)
        iterations += 1
        f = tendency(n)
        P, L = gross(n)
        new_norm = np.linalg.norm(f / _scale(P, L, atol))
        growth = np.clip(norm / max(new_norm, 1e-300), 0.2, 10.0)
        dt = np.minimum(dt * growth, 1e12)
        norm = new_norm
        if np.all(_relative_residual(f, P, L, atol) <= 1e-3):
            break
    return n


#: From this many unknowns (B·S) the column Newton reuses its LU (:class:`Chord`); below
#: it, a fresh LU per iteration (see the module docstring for the figures).
CHORD_FROM = 10_000


def default_linear(n_unknowns):
    """Name of the default linear solver of the column Newton for B·S unknowns."""
    return Chord.name if n_unknowns >= CHORD_FROM else DirectLU.name


def solve_column(n0, tendency, jacobian, gross, *, rtol=1e-10, atol=1e-30, max_newton=60,
                 max_continuation=600, row_labels=None, linear=None, stats=None):
    """Steady state of transport-coupled rows (see the module docstring).

    Parameters
    ----------
    n0 : ndarray (B, S)
        Starting densities, cm-3 (non-negative), e.g. the photochemical solution.
    tendency : callable ``(n) -> (B, S)``
    jacobian : callable ``(n) -> sparse (B·S, B·S)``
    gross : callable ``(n) -> (P, L)``, each (B, S)
    rtol : float
        Relative residual target.
    atol : float
        Absolute floor on rates, cm-3 s-1.
    row_labels : sequence, optional
        Label of each row for error messages.
    linear : {"newton", "chord", "krylov"}, optional
        Linear solver of the Newton iteration (:data:`LINEAR_SOLVERS`); by default
        :func:`default_linear` of the column's size. A variant that does not converge is
        followed by the plain Newton from the same start.
    stats : dict, optional
        Filled with ``factorisations`` (sparse LU or ILU of the Jacobian),
        ``krylov_iterations`` and ``solvers``, the names of the linear solvers run (the
        variant, then ``"newton"`` if it fell back).

    Returns
    -------
    SteadyResult
        Every row carries the column's iteration count and method.
    """
    B, S = n0.shape
    iterations = np.zeros(B, int)
    method = np.zeros(B, int)
    n = initial_guess(np.maximum(np.where(np.isfinite(n0), n0, 0.0), 0.0), gross, sweeps=4)
    n = np.where(np.isfinite(n), n, 0.0)
    P, L = gross(n)
    floor = max(_rate_floor(atol, rtol), COLUMN_FLOOR * float(np.max(P + L, initial=0.0)))
    name = default_linear(B * S) if linear is None else linear
    solvers = [LINEAR_SOLVERS[name](jacobian)]
    start = n
    n, ok, res = _newton(start, tendency, jacobian, gross, rtol=rtol, atol=atol, floor=floor,
                         max_iter=max_newton, iterations=iterations, linear=solvers[-1])
    if not ok and name != DirectLU.name:
        solvers.append(DirectLU(jacobian))
        n, ok, res = _newton(start, tendency, jacobian, gross, rtol=rtol, atol=atol,
                             floor=floor, max_iter=max_newton, iterations=iterations,
                             linear=solvers[-1])
    if ok:
        method[:] = METHOD_NEWTON
    else:
        n = _continuation(n, tendency, jacobian, gross, atol=floor, max_iter=max_continuation,
                          iterations=iterations)
        n, ok, res = _newton(n, tendency, jacobian, gross, rtol=rtol, atol=atol, floor=floor,
                             max_iter=max_newton, iterations=iterations)
        method[:] = METHOD_CONTINUATION
    if stats is not None:
        stats["factorisations"] = sum(s.factorisations for s in solvers)
        stats["krylov_iterations"] = sum(getattr(s, "krylov_iterations", 0) for s in solvers)
        stats["solvers"] = [s.name for s in solvers]
    valid = (res <= rtol) & np.all(np.isfinite(n) & (n >= 0), axis=1)
    if not ok or not valid.all():
        labels = np.asarray(row_labels if row_labels is not None else np.arange(B))
        bad = ~valid if (~valid).any() else np.ones(B, bool)
        failed = labels[bad]
        shown = ", ".join(str(x) for x in failed[:12]) + (" …" if failed.size > 12 else "")
        worst = np.nanmax(np.where(np.isfinite(res), res, np.nan)[bad]) \
            if np.isfinite(res[bad]).any() else float("nan")
        raise SolverError(
            f"steady state with transport not reached at {failed.size} altitude(s): {shown} "
            f"(largest relative residual {worst:.3g})", levels=failed.tolist())
    return SteadyResult(n=n, residual=res, iterations=iterations, method=method)
