"""Steady state of many independent chemical columns at once: batched damped Newton.

The solver sees only three callables on arrays shaped (B, S) — B independent levels (or
sample × level), S solved species — and never imports the parser or the environment:

``tendency(n) -> (B, S)``, ``jacobian(n) -> (B, S, S)`` with ``J[b, i, j] = ∂f_i/∂n_j``, and
``gross(n) -> (P, L)``, the gross production and loss (B, S) used to scale the residual.

Method
------
1. Start from a geometric-mean fixed point, n ← sqrt(n · P(n) / λ(n)) with λ = L/n the loss
   frequency, a few sweeps. For one ion with q and α n_e this lands on sqrt(q/α) at once; a
   species with no production goes to zero exactly.
2. Damped Newton on all levels together: J Δn = −f solved by batched LU (numpy.linalg.solve).
   Positivity: per level, the step is cut so no density falls below a tenth of its value
   (a species at exactly zero with a negative step stays at zero; one below 1e-12 of the
   level's largest density is clipped at zero rather than cutting the step). The step is then halved
   until the scaled residual norm does not grow (at most 8 halvings).
3. Convergence, per level (documented in docs/validation.md): the relative residual
   max_i |f_i| / (P_i + L_i + a) ≤ rtol before a Newton step, that step's relative size
   max_i |Δn_i| / (n_i + floor) ≤ 1e-3 (floor = 1e-12 × the largest density of the level),
   and the relative residual ≤ rtol again at the point the step reached. P_i and L_i are the
   gross production and loss; a = max(atol, 1e-4 × the level's largest P_j + L_j) is the
   floor below which a residual is noise: ``atol`` an absolute one (cm-3 s-1), the second
   the round-off of the level's balance. A species carrying less than 1e-4 of the level's
   largest flow is thus resolved to rtol × 1e-4 of that flow (1e-14 of it by default) —
   the linear solve cannot do better, as its errors scale with the level's largest
   densities — while every species carrying more keeps a relative residual ≤ 2 rtol. Near
   the terminator, trace species fed at 1e-25 cm-3 s-1 next to 1e-5 would otherwise
   never converge.
4. Levels Newton does not bring to convergence in ``max_newton`` iterations go to
   pseudo-transient continuation: (I/Δt − J) Δn = f with Δt growing as the residual falls
   (switched evolution relaxation), which follows the physical relaxation and cannot jump
   to a non-physical root; Newton then polishes the result.
5. Anything still unconverged, negative or not finite raises :class:`SolverError` naming
   the levels. Levels with no production at all solve to zero.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ionochem.errors import SolverError

#: Relative Newton step below which a level whose residual already met rtol is converged.
STEP_TOL = 1e-3
#: Fraction of a level's largest gross rate below which a species' rates are resolved in
#: absolute, not relative, terms (see the convergence rule in the module docstring).
LEVEL_FLOOR = 1e-4

METHOD_NEWTON = 1
METHOD_CONTINUATION = 2
METHOD_NAMES = {0: "none", METHOD_NEWTON: "newton", METHOD_CONTINUATION: "continuation"}


@dataclass
class SteadyResult:
    """Solution and per-level diagnostics (arrays of length B)."""

    n: np.ndarray            # (B, S) cm-3
    residual: np.ndarray     # (B,) max relative residual
    iterations: np.ndarray   # (B,) Newton + continuation iterations
    method: np.ndarray       # (B,) METHOD_* code of the method that converged


def _scale(P, L, atol):
    """Residual scale P_i + L_i + a, a = max(atol, LEVEL_FLOOR × the level's largest P + L)."""
    gross = P + L
    return gross + np.maximum(atol, LEVEL_FLOOR * gross.max(axis=1, initial=0.0)[:, None])


def _relative_residual(f, P, L, atol):
    """max_i |f_i| / (P_i + L_i + a) per level (see :func:`_scale`)."""
    if not f.shape[1]:
        return np.zeros(f.shape[0])
    return np.max(np.abs(f) / _scale(P, L, atol), axis=1)


def _solve(J, rhs):
    """Batched linear solve with a least-squares retry for singular blocks."""
    try:
        return np.linalg.solve(J, rhs[..., None])[..., 0]
    except np.linalg.LinAlgError:
        out = np.empty_like(rhs)
        for b in range(J.shape[0]):   # rare: only when some block is exactly singular
            try:
                out[b] = np.linalg.solve(J[b], rhs[b])
            except np.linalg.LinAlgError:
                out[b] = np.linalg.lstsq(J[b], rhs[b], rcond=None)[0]
        return out


def _positive_step(n, dn):
    """Per-level fraction of the step that keeps every density at least n/10.

    Densities below 1e-12 of the level's largest (the step-size floor of the convergence
    rule) do not limit the step: they are clipped at zero instead, so round-off of the
    linear solve in a trace species cannot stall the whole level.
    """
    dn = np.where((n <= 0) & (dn < 0), 0.0, dn)
    floor = 1e-12 * n.max(axis=1, initial=0.0)[:, None]
    with np.errstate(divide="ignore", invalid="ignore"):
        limit = np.where((dn < 0) & (n > floor), -0.9 * n / dn, np.inf)
    lam = np.minimum(1.0, limit.min(axis=1)) if n.shape[1] else np.ones(n.shape[0])
    return dn, lam


def initial_guess(n0, gross, sweeps=12):
    """Geometric-mean fixed-point sweeps n ← sqrt(n P / λ) (see the module docstring)."""
    n = n0.copy()
    for _ in range(sweeps):
        P, L = gross(n)
        with np.errstate(divide="ignore", invalid="ignore"):
            freq = np.where(n > 0, L / n, 0.0)
            target = np.where(freq > 0, P / freq, n + P)   # no loss yet: grow by P·1 s
        target = np.where(P > 0, target, 0.0)
        n = np.where(n > 0, np.sqrt(n * target), target)
    return n


def newton(n, tendency, jacobian, gross, *, rtol, atol, max_iter, iterations):
    """Damped Newton on the rows of ``n``; returns (n, converged mask, residual)."""
    converged = np.zeros(n.shape[0], bool)
    res = np.full(n.shape[0], np.inf)
    active = np.arange(n.shape[0])
    for _ in range(max_iter):
        if active.size == 0:
            break
        na = n[active]
        f = tendency(na, active)
        P, L = gross(na, active)
        r0 = _relative_residual(f, P, L, atol)
        J = jacobian(na, active)
        dn = _solve(J, -f)
        dn, lam = _positive_step(na, dn)
        lam = np.where(np.isfinite(lam), lam, 0.0)
        # Backtracking: halve the step on levels whose scaled residual grew.
        trial = na + lam[:, None] * dn
        scale = _scale(P, L, atol)
        norm0 = np.linalg.norm(f / scale, axis=1)
        for _ in range(8):
            ft = tendency(trial, active)
            normt = np.linalg.norm(ft / scale, axis=1)
            worse = ~(normt <= norm0 * (1 - 1e-4 * lam)) & (lam > 1e-3)
            if not worse.any():
                break
            lam = np.where(worse, lam / 2, lam)
            trial = na + lam[:, None] * dn
        trial = np.maximum(trial, 0.0)
        step = np.abs(trial - na)
        floor = 1e-12 * np.maximum(trial.max(axis=1, initial=0.0), 1e-300)
        rel_step = np.max(step / (trial + floor[:, None]), axis=1, initial=0.0)
        n[active] = trial
        iterations[active] += 1
        res[active] = r0
        # Residual met before the step and the step itself small: Newton converges
        # quadratically, so the point after it is far inside the tolerance. Confirmed below.
        done = (r0 <= rtol) & (rel_step <= STEP_TOL)
        # Final residual at the accepted point for the rows marked done.
        if done.any():
            idx = active[done]
            fd = tendency(n[idx], idx)
            Pd, Ld = gross(n[idx], idx)
            rd = _relative_residual(fd, Pd, Ld, atol)
            res[idx] = rd
            ok = rd <= rtol
            converged[idx[ok]] = True
            done_ok = np.zeros_like(done)
            done_ok[np.nonzero(done)[0][ok]] = True
            done = done_ok
        active = active[~done]
    return n, converged, res


def continuation(n, tendency, jacobian, gross, *, rtol, atol, max_iter, iterations):
    """Pseudo-transient continuation (switched evolution relaxation) on rows of ``n``."""
    B, S = n.shape
    rows = np.arange(B)
    f = tendency(n, rows)
    P, L = gross(n, rows)
    with np.errstate(divide="ignore", invalid="ignore"):
        freq = np.where(n > 0, L / np.maximum(n, 1e-300), 0.0)
    # Start at a hundredth of the fastest chemical time of each level.
    fastest = np.max(freq, axis=1, initial=0.0)
    dt = np.where(fastest > 0, 0.01 / np.maximum(fastest, 1e-300), 1.0)
    eye = np.eye(S)
    norm = np.linalg.norm(f / _scale(P, L, atol), axis=1)
    for _ in range(max_iter):
        J = jacobian(n, rows)
        A = eye[None] / dt[:, None, None] - J
        dn = _solve(A, f)
        dn, lam = _positive_step(n, dn)
        n = np.maximum(n + np.where(np.isfinite(lam), lam, 0.0)[:, None] * dn, 0.0)
        iterations += 1
        f = tendency(n, rows)
        P, L = gross(n, rows)
        new_norm = np.linalg.norm(f / _scale(P, L, atol), axis=1)
        growth = np.clip(norm / np.maximum(new_norm, 1e-300), 0.2, 10.0)
        dt = np.minimum(dt * growth, 1e12)
        norm = new_norm
        if np.all(_relative_residual(f, P, L, atol) <= 1e-3):
            break
    return n


def solve_steady(n0, tendency, jacobian, gross, *, rtol=1e-10, atol=1e-30,
                 max_newton=60, max_continuation=400, level_names=None):
    """Steady state of B independent chemical systems.

    Parameters
    ----------
    n0 : ndarray (B, S)
        Starting densities, cm-3 (non-negative).
    tendency, jacobian, gross : callable
        ``tendency(n, rows)``, ``jacobian(n, rows)``, ``gross(n, rows)`` evaluated on the
        subset ``rows`` of the B systems (``n`` holds just those rows).
    rtol : float
        Relative residual target (see the module docstring).
    atol : float
        Absolute floor on rates, cm-3 s-1.
    level_names : sequence, optional
        Label of each row for error messages (for example altitudes in km).

    Returns
    -------
    SteadyResult
    """
    B, S = n0.shape
    iterations = np.zeros(B, int)
    method = np.zeros(B, int)
    all_rows = np.arange(B)

    def g_all(n):
        return gross(n, all_rows)

    n = initial_guess(np.maximum(n0, 0.0), g_all)
    n = np.where(np.isfinite(n), n, 0.0)
    n, conv, res = newton(n, tendency, jacobian, gross, rtol=rtol, atol=atol,
                          max_iter=max_newton, iterations=iterations)
    method[conv] = METHOD_NEWTON
    if not conv.all():
        bad = np.nonzero(~conv)[0]
        sub_iter = np.zeros(bad.size, int)

        def t_sub(x, rows):
            return tendency(x, bad[rows])

        def j_sub(x, rows):
            return jacobian(x, bad[rows])

        def g_sub(x, rows):
            return gross(x, bad[rows])

        nb = continuation(n[bad], t_sub, j_sub, g_sub, rtol=rtol, atol=atol,
                          max_iter=max_continuation, iterations=sub_iter)
        nb, conv_b, res_b = newton(nb, t_sub, j_sub, g_sub, rtol=rtol, atol=atol,
                                   max_iter=max_newton, iterations=sub_iter)
        n[bad] = nb
        res[bad] = res_b
        iterations[bad] += sub_iter
        method[bad[conv_b]] = METHOD_CONTINUATION
        conv[bad] = conv_b
    valid = conv & np.all(np.isfinite(n) & (n >= 0), axis=1)
    if not valid.all():
        labels = np.asarray(level_names if level_names is not None else all_rows)
        failed = labels[~valid]
        shown = ", ".join(str(x) for x in failed[:12]) + (" …" if failed.size > 12 else "")
        raise SolverError(
            f"steady state not reached at {failed.size} level(s): {shown} "
            f"(largest relative residual {np.nanmax(res[~valid]):.3g})",
            levels=failed.tolist())
    return SteadyResult(n=n, residual=res, iterations=iterations, method=method)
