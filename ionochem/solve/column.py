"""Steady state of columns whose levels are coupled by transport: Newton on the whole column.

Same contract as :mod:`ionochem.solve.steady` (positivity, convergence rule, fallback,
diagnostics), but the levels are solved together because transport links each level to
its neighbours. The solver sees only callables on arrays shaped (B, S) — B levels (of one
column, or of several columns stacked, level-major within each), S solved species — and
never imports the parser, the environment or the physics of transport:

``tendency(n) -> (B, S)``; ``jacobian(n) -> scipy.sparse matrix (B·S, B·S)`` with entry
``(b·S + i, c·S + j) = ∂f_{b,i}/∂n_{c,j}``, block tridiagonal for a single column (chemistry
in the diagonal blocks, transport between neighbours); and ``gross(n) -> (P, L)``, the
gross production and loss (B, S) including transport in- and outflow, used to scale the
residual.

Method
------
1. Start from the given densities (the photochemical solution of every level is a good
   start: the molecular ions hardly move, O+ relaxes to its transported profile), then a
   few geometric-mean sweeps n ← sqrt(n P/λ), λ = L/n, with transport counted in P and L,
   so species with no production go to zero and levels with none become positive.
2. Damped Newton on the whole column: J Δn = −f solved by one sparse LU factorisation of
   the (B·S)² Jacobian per iteration (SuperLU through ``scipy.sparse.linalg.splu``; the
   matrix has bandwidth ≈ 2S, so the cost is linear in the number of levels). Positivity,
   per level as in the independent solver: the step of a level is cut so no density falls
   below a tenth of its value — nor, here, rises above ten times it, which stops Newton's
   overshoot from far below a recombination-limited density (levels in the Earth's shadow
   fed only by diffusion start from nothing). The step is halved (at most 8 times) only
   while the scaled residual norm of the column would grow more than a thousandfold: a
   non-monotone rule,
   because the first full steps from the photochemical start (O+ falling several-fold
   at the top, the molecular ions following the electrons quadratically) raise the norm
   before Newton converges quadratically, and a monotone line search would creep there.
3. Convergence, per level exactly as in :mod:`ionochem.solve.steady` (docs/validation.md):
   relative residual max_i |f_i|/(P_i + L_i + floor) ≤ rtol before a step (the same floor),
   relative step ≤ 1e-3 (or every residual of the level below ``atol``), residual ≤ rtol
   again at the point reached; the column is converged when every level is. One addition
   for the coupled system: the floor is raised to 1e-20 of the largest gross rate in the
   column at the start, because the errors of the
   column-wide linear solve scale with the column's largest terms. Without it, O+ leaking
   by diffusion into the Earth's shadow at a twilight column (1e-27 cm-3 s-1, making
   molecular ions of 1e-10 cm-3) would have to be resolved to its own relative precision.
4. If Newton does not converge in ``max_newton`` iterations (or meets a singular
   Jacobian), pseudo-transient continuation on the whole column: (diag(1/Δt) − J) Δn = f
   with a local time step per level, starting at a hundredth of the level's fastest time
   (chemistry or transport) and growing with the fall of the column's residual (switched
   evolution relaxation); Newton then polishes.
5. A column still unconverged, negative or not finite raises :class:`SolverError` naming
   the levels that fail the rule.
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

#: Column ordering for SuperLU. The level-major unknowns already give a band of width ≈ 2S,
#: which the natural order keeps (fill stays in the band); COLAMD factorises the 200-level
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


def sparse_solve(J, rhs):
    """Solve J x = rhs with one sparse LU (rhs (N,) or (N, K)); None if that fails.

    An exactly singular J (species with no loss at all where the densities are zero, as in
    a dark column) is shifted to J − ε I, ε = 1e-12 × its largest diagonal entry — a
    pseudo-time step of 1e12 relaxation times, harmless to Newton, which only needs a
    descent direction to reach f = 0.
    """
    from scipy.sparse.linalg import splu  # deferred: scipy.linalg and more, ~50 ms

    J = sp.csc_matrix(J)
    try:
        lu = splu(J, permc_spec=ORDERING)
    except RuntimeError:
        diag = np.abs(J.diagonal())
        eps = 1e-12 * (diag.max() if diag.size and diag.max() > 0 else 1.0)
        try:
            lu = splu(sp.csc_matrix(J - eps * sp.identity(J.shape[0])), permc_spec=ORDERING)
        except RuntimeError:
            return None
    x = lu.solve(np.asarray(rhs, float))
    return x if np.all(np.isfinite(x)) else None


def _regularise(J, f):
    """Give a small negative diagonal to unknowns whose diagonal entry is exactly zero.

    A species with no loss where the densities are zero (a molecular ion in a dark level:
    its recombination vanishes with the electrons) makes J exactly singular. Its diagonal
    becomes −1e-12 × the largest entry of its row (−1 for an empty row): a local
    pseudo-time step far longer than any of its rates, harmless to Newton, which only
    needs a descent direction to reach f = 0. (A global shift would swamp levels whose own
    rates are tiny.)
    """
    J = sp.csr_matrix(J)
    diag = J.diagonal()
    zero = diag == 0
    if zero.any():
        rowmax = np.asarray(abs(J).max(axis=1).todense()).ravel()
        shift = np.where(zero, -np.where(rowmax > 0, 1e-12 * rowmax, 1.0), 0.0)
        J = J + sp.diags(shift)
    return J


def _bounded_step(n, dn):
    """Per-level step fraction keeping every density within [n/10, 10 n].

    The lower bound is the positivity rule of :mod:`steady`; the upper bound stops the
    overshoot of Newton from far below a recombination-limited density (n² α = q gives
    n → q/(2αn)), which in a coupled column would drag every level's step down with it.
    Densities below 1e-12 of the level's largest are not bounded (clipped at zero).
    """
    dn, lam = _positive_step(n, dn)
    floor = 1e-12 * n.max(axis=1, initial=0.0)[:, None]
    with np.errstate(divide="ignore", invalid="ignore"):
        up = np.where((dn > 0) & (n > floor), 9.0 * n / dn, np.inf)
    return dn, np.minimum(lam, up.min(axis=1, initial=np.inf))


def _newton(n, tendency, jacobian, gross, *, rtol, atol, floor, max_iter, iterations):
    """Damped Newton on the column; ``floor`` the rate-scale floor, ``atol`` the absolute
    residual floor (cm-3 s-1) below which a level is converged whatever its step."""
    B, S = n.shape
    res = np.full(B, np.inf)
    f = tendency(n)
    P, L = gross(n)
    for _ in range(max_iter):
        r0 = _relative_residual(f, P, L, floor)
        tiny = _negligible(f, atol)
        J = _regularise(jacobian(n), f)
        dn = sparse_solve(J, -f.ravel())
        if dn is None:
            return n, False, r0
        dn, lam = _bounded_step(n, dn.reshape(B, S))
        lam = np.where(np.isfinite(lam), lam, 0.0)
        scale = _scale(P, L, floor)
        norm0 = np.linalg.norm(f / scale)
        mu = 1.0
        for _ in range(8):
            trial = np.maximum(n + mu * lam[:, None] * dn, 0.0)
            ft = tendency(trial)
            if np.linalg.norm(ft / scale) <= GROWTH_LIMIT * norm0 or mu < 1e-3:
                break
            mu /= 2
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


def solve_column(n0, tendency, jacobian, gross, *, rtol=1e-10, atol=1e-30, max_newton=60,
                 max_continuation=600, level_names=None):
    """Steady state of transport-coupled levels (see the module docstring).

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
    level_names : sequence, optional
        Label of each level for error messages.

    Returns
    -------
    SteadyResult
        Every level carries the column's iteration count and method.
    """
    B, S = n0.shape
    iterations = np.zeros(B, int)
    method = np.zeros(B, int)
    n = initial_guess(np.maximum(np.where(np.isfinite(n0), n0, 0.0), 0.0), gross, sweeps=4)
    n = np.where(np.isfinite(n), n, 0.0)
    P, L = gross(n)
    floor = max(_rate_floor(atol, rtol), COLUMN_FLOOR * float(np.max(P + L, initial=0.0)))
    n, ok, res = _newton(n, tendency, jacobian, gross, rtol=rtol, atol=atol, floor=floor,
                         max_iter=max_newton, iterations=iterations)
    if ok:
        method[:] = METHOD_NEWTON
    else:
        n = _continuation(n, tendency, jacobian, gross, atol=floor, max_iter=max_continuation,
                          iterations=iterations)
        n, ok, res = _newton(n, tendency, jacobian, gross, rtol=rtol, atol=atol, floor=floor,
                             max_iter=max_newton, iterations=iterations)
        method[:] = METHOD_CONTINUATION
    valid = (res <= rtol) & np.all(np.isfinite(n) & (n >= 0), axis=1)
    if not ok or not valid.all():
        labels = np.asarray(level_names if level_names is not None else np.arange(B))
        bad = ~valid if (~valid).any() else np.ones(B, bool)
        failed = labels[bad]
        shown = ", ".join(str(x) for x in failed[:12]) + (" …" if failed.size > 12 else "")
        worst = np.nanmax(np.where(np.isfinite(res), res, np.nan)[bad]) \
            if np.isfinite(res[bad]).any() else float("nan")
        raise SolverError(
            f"steady state with transport not reached at {failed.size} level(s): {shown} "
            f"(largest relative residual {worst:.3g})", levels=failed.tolist())
    return SteadyResult(n=n, residual=res, iterations=iterations, method=method)



def steady_with_transport(tendency, jacobian, gross, transport, n_rows, *, rtol=1e-10,
                          atol=1e-30, level_names=None, n0=None):
    """Steady state of stacked columns: local chemistry plus one species' transport.

    Parameters
    ----------
    tendency, jacobian, gross : callable
        The chemistry of the levels, with the signatures of
        :func:`ionochem.solve.steady.solve_steady`: ``tendency(n, rows) -> (b, S)``,
        ``jacobian(n, rows) -> (b, S, S)``, ``gross(n, rows) -> (P, L)`` on the subset
        ``rows`` of the B = C·A levels.
    transport : ionochem.solve.transport.SpeciesTransport
    n_rows : int
        B, a whole number of columns of ``transport.A`` levels.
    rtol, atol, level_names
        As in :func:`solve_column`.
    n0 : ndarray (B, S), optional
        Start (e.g. the nominal column for the samples of an ensemble). By default the
        photochemical steady state of every level (:mod:`steady`, to a relative residual
        of 1e-6) when it exists, zero otherwise.

    Returns
    -------
    SteadyResult
    """
    from ionochem.solve.steady import solve_steady
    C = n_rows // transport.A
    if C * transport.A != n_rows:
        raise ValueError("the rows are not a whole number of columns")
    S = transport.S
    rows = np.arange(n_rows)

    def col_tendency(n):
        return tendency(n, rows) + transport.tendency(n)

    def col_jacobian(n):
        return block_diagonal(jacobian(n, rows)) + transport.matrix(C)

    def col_gross(n):
        P, L = gross(n, rows)
        Pt, Lt = transport.gross(n)
        return P + Pt, L + Lt

    if n0 is not None:
        start = np.asarray(n0, float)
    else:
        try:
            start = solve_steady(np.zeros((n_rows, S)), tendency, jacobian, gross,
                                 rtol=max(rtol, 1e-6)).n
        except SolverError:
            start = np.zeros((n_rows, S))
    return solve_column(start, col_tendency, col_jacobian, col_gross, rtol=rtol, atol=atol,
                        level_names=level_names)
