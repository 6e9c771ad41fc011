"""Steady state of many independent chemical columns at once: batched damped Newton.

The solver sees only three callables on arrays shaped (B, S) — B independent rows (or
sample × row), S solved species — and never imports the parser or the environment:

``tendency(n) -> (B, S)``, ``jacobian(n) -> (B, S, S)`` with ``J[b, i, j] = ∂f_i/∂n_j``, and
``gross(n) -> (P, L)``, the gross production and loss (B, S) used to scale the residual.

Method
------
1. Start from a geometric-mean fixed point, n ← sqrt(n · P(n) / λ(n)) with λ = L/n the loss
   frequency, :data:`START_SWEEPS` sweeps. For one ion with q and α n_e this lands on
   sqrt(q/α) at once; a species with no production goes to zero exactly. A warm start
   (``warm=True``: the samples of an ensemble start from the central column) skips these
   sweeps.
2. Damped Newton on all rows together: J Δn = −f solved by batched LU (numpy.linalg.solve).
   Positivity: per row, the step is cut so no density falls below a tenth of its value
   (a species at exactly zero with a negative step stays at zero). The step is then halved
   until the scaled residual norm does not grow (at most 8 halvings).
3. Convergence, per row (documented in docs/validation.md): the relative residual
   max_i |f_i| / (P_i + L_i + floor_r) ≤ rtol before a Newton step, that step's relative
   size max_i |Δn_i| / (n_i + floor_n) ≤ 1e-3 (floor_n = 1e-12 × the largest density of the
   row), and the relative residual ≤ rtol again at the point the step reached. P_i and L_i
   are the gross production and loss. Or, one iteration sooner: the residual ≤ rtol at the
   point a step reached, that step ≤ sqrt(rtol) and at most a tenth of the one before it —
   Newton in its quadratic regime, where the error left is about the square of the last
   step (Deuflhard, *Newton Methods for Nonlinear Problems*, 2004, ch. 2: the a-posteriori
   error estimate from the contraction of successive steps; *from memory*), so below rtol.
   floor_r is the larger of atol / max(rtol, 1e-10) and
   1e-20 × the row's fastest gross rate. ``atol`` is an absolute floor (cm-3 s-1): a row
   whose every residual |f_i| is below it is converged whatever its step (a dark row with
   production of 1e-160 cm-3 s-1 cannot be resolved further and holds nothing physical).
   Densities below 1e-12 of the row's largest are negligible: they neither limit the
   row's step (step 2 clips each on its own) nor enter the step test. Without that, in a
   twilight column a species at 1e-200 cm-3 that must fall to 1e-260 held the whole row to
   tenfold steps, and the row never converged.
4. Rows Newton does not bring to convergence in ``max_newton`` iterations go to
   pseudo-transient continuation: (I/Δt − J) Δn = f with Δt growing as the residual falls
   (switched evolution relaxation), which follows the physical relaxation and cannot jump
   to a non-physical root; Newton then polishes the result.
5. Anything still unconverged, negative or not finite raises :class:`SolverError` naming
   the rows and, per row, the species with the largest relative residual
   (``SolverError.species``); the caller adds the input file and advice. Rows with no
   production at all solve to zero.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ionochem.errors import SolverError

#: Relative Newton step below which a row whose residual already met rtol is converged.
STEP_TOL = 1e-3
#: Densities below this fraction of the largest density of their row are negligible: they
#: do not limit the row's Newton step and their relative step is not tested
#: *(common practice: far below double precision relative to the row's main species)*.
NEGLIGIBLE = 1e-12
#: Floor of each species' rate scale as a fraction of the row's fastest gross rate
#: (see :func:`_scale`); 1e-20 lies four orders below double-precision rounding of the main
#: species' balance *(common practice)*.
LEVEL_FLOOR = 1e-20

#: Fixed-point sweeps of the start (step 1 of the module docstring). Each costs about a
#: tenth of a Newton iteration; measured on the demo column at 200 and 1,000 rows
#: (benchmarks/bench_perf.py), 16 sweeps gave the fastest solve (12: 7 % slower, 8: 15 %;
#: 2–3 leave rows Newton cannot bring in).
START_SWEEPS = 16

METHOD_NEWTON = 1
METHOD_CONTINUATION = 2
METHOD_NAMES = {0: "none", METHOD_NEWTON: "newton", METHOD_CONTINUATION: "continuation"}


@dataclass
class SteadyResult:
    """Solution and per-row diagnostics (arrays of length B)."""

    n: np.ndarray            # (B, S) cm-3
    residual: np.ndarray     # (B,) max relative residual
    iterations: np.ndarray   # (B,) Newton + continuation iterations
    method: np.ndarray       # (B,) METHOD_* code of the method that converged


def _scale(P, L, atol, axis=1):
    """Rate scale of each species' residual, cm-3 s-1 (the shape of P; ``axis`` is the
    species axis: 1 for (rows, species), 0 for the rows-last (species, rows)).

    Its gross rate P + L plus a floor: ``atol`` (the absolute residual floor divided by
    rtol, see :func:`solve_steady`) or, when larger, the :data:`LEVEL_FLOOR` fraction of the
    fastest gross rate of the row — a species whose whole turnover lies that far below the
    row's main one cannot change anything that matters, and its residual is rounding noise
    of the others.
    """
    gross = P + L
    turnover = np.max(gross, axis=axis, keepdims=True, initial=0.0)
    gross += np.maximum(atol, LEVEL_FLOOR * turnover)
    return gross


def _relative_residual(f, P, L, atol):
    """max_i |f_i| / scale_i per row, shape (B,)."""
    if not f.shape[1]:
        return np.zeros(f.shape[0])
    return np.max(np.abs(f) / _scale(P, L, atol), axis=1)


def _rate_floor(atol, rtol):
    """Floor of the rate scale (cm-3 s-1): atol / rtol, with rtol taken ≥ 1e-10 so that a
    very small rtol cannot blow the floor up."""
    return atol / max(rtol, 1e-10)


def _negligible(f, floor, axis=1):
    """Rows whose every residual is below the absolute floor (cm-3 s-1)."""
    return np.max(np.abs(f), axis=axis, initial=0.0) <= floor


def _norms(x):
    """Euclidean norm of each column of x (species, rows)."""
    return np.sqrt(np.einsum("ij,ij->j", x, x))


def _solve(J, rhs):
    """Batched linear solve of J (B, S, S) with rhs (B, S), and a least-squares retry for
    singular blocks."""
    try:
        return np.linalg.solve(J, rhs[..., None])[..., 0]
    except np.linalg.LinAlgError:
        out = np.empty(rhs.shape)
        for b in range(J.shape[0]):   # rare: only when some block is exactly singular
            try:
                out[b] = np.linalg.solve(J[b], rhs[b])
            except np.linalg.LinAlgError:
                out[b] = np.linalg.lstsq(J[b], rhs[b], rcond=None)[0]
        return out


def _positive_step(n, dn, axis=1):
    """Per-row fraction of the step that keeps every density at least n/10.

    ``axis`` is the species axis (1 for (rows, species), 0 for rows last). Only densities
    above :data:`NEGLIGIBLE` times the row's largest set the fraction; a negligible
    density (one that cannot change any other species' rates measurably) is clipped on its
    own, so that a species at 1e-200 cm-3 falling towards 1e-260 does not shrink the step
    of the whole row to a crawl. Returns the step and the fraction (one per row).
    """
    dn = np.where((n <= 0) & (dn < 0), 0.0, dn)
    if not n.shape[axis]:
        return dn, np.ones(n.shape[1 - axis])
    big = n.max(axis=axis, keepdims=True)
    significant = n > NEGLIGIBLE * big
    with np.errstate(divide="ignore", invalid="ignore"):
        limit = np.where((dn < 0) & significant, -0.9 * n / dn, np.inf)
        lam = np.minimum(1.0, limit.min(axis=axis, keepdims=True))
        floor = np.where(lam > 0, -0.9 * n / lam, 0.0)
    dn = np.where(~significant & (dn < floor), floor, dn)
    return dn, lam.reshape(-1)


def initial_guess(n0, gross, sweeps=None):
    """Geometric-mean fixed-point sweeps n ← sqrt(n P / λ) (see the module docstring).

    Element by element, so ``n0`` may be (rows, species) or rows last (species, rows):
    ``gross(n) -> (P, L)`` gives them in the layout of ``n``.
    """
    n = n0.copy()
    if not n.size:
        return n
    for _ in range(START_SWEEPS if sweeps is None else sweeps):
        P, L = gross(n)
        with np.errstate(divide="ignore", invalid="ignore"):
            # Where n > 0 and L > 0 (nearly everywhere after the first sweep):
            # sqrt(n · P/(L/n)) = n · sqrt(P/L).
            fast = P / L
            np.sqrt(fast, out=fast)
            fast *= n
            if n.min() > 0 and L.min() > 0:
                n = fast
                continue
            usual = (n > 0) & (L > 0)
            freq = np.where(n > 0, L / n, 0.0)
            target = np.where(freq > 0, P / freq, n + P)   # no loss yet: grow by P·1 s
        target = np.where(P > 0, target, 0.0)
        n = np.where(usual, fast, np.where(n > 0, np.sqrt(n * target), target))
    return n


class RowsCallables:
    """The solver's rows-last interface (species, rows) over callables on (rows, species).

    :func:`newton` works rows last: every per-row reduction (largest residual, step
    size) then runs along the first axis, where numpy vectorises it, instead of along a
    short last axis (measured 4× faster for 12 species). A kernel that works rows last
    natively (:class:`ionochem.mechanism.rows.BoundRows`) has the same three methods.
    """

    def __init__(self, tendency, jacobian, gross, both=None):
        self._tendency, self._jacobian, self._gross, self._both = (tendency, jacobian,
                                                                   gross, both)

    def both_t(self, n_t, rows):
        n = np.ascontiguousarray(n_t.T)
        if self._both is not None:
            f, P, L = self._both(n, rows)
        else:
            f = self._tendency(n, rows)
            P, L = self._gross(n, rows)
        return f.T, P.T, L.T

    def gross_t(self, n_t, rows):
        P, L = self._gross(np.ascontiguousarray(n_t.T), rows)
        return P.T, L.T

    def jacobian_t(self, n_t, rows):
        return self._jacobian(np.ascontiguousarray(n_t.T), rows)


class _SubsetRows:
    """A rows-last kernel restricted to some of its rows (``rows`` index into ``subset``)."""

    def __init__(self, kernel, subset):
        self._kernel, self._subset = kernel, subset

    def both_t(self, n_t, rows):
        return self._kernel.both_t(n_t, self._subset[rows])

    def gross_t(self, n_t, rows):
        return self._kernel.gross_t(n_t, self._subset[rows])

    def jacobian_t(self, n_t, rows):
        return self._kernel.jacobian_t(n_t, self._subset[rows])


def _measured(f, P, L, floor, atol):
    """Rate scale, norm of the scaled residual, largest relative residual and the
    absolute-floor test of the rows at one point (reused by the next iteration from that
    point); arrays rows last."""
    scale = _scale(P, L, floor, axis=0)
    scaled = f / scale
    return (scale, _norms(scaled), np.abs(scaled).max(axis=0), _negligible(f, atol, axis=0))


def _damped_step(kernel, na, dn, active, scale, norm0):
    """The point a Newton step ``dn`` reaches from ``na`` (species, rows), kept positive and
    halved (at most 8 times) on rows whose scaled residual grew; returns the point and its
    tendency and gross rates ``(trial, f, P, L)``."""
    if (dn >= -0.9 * na).all():
        # The usual case near the solution: no density falls below a tenth of its value,
        # so the whole step is taken everywhere (what _positive_step gives then).
        lam = np.ones(active.size)
        trial = na + dn
    else:
        dn, lam = _positive_step(na, dn, axis=0)
        lam = np.where(np.isfinite(lam), lam, 0.0)
        trial = lam * dn
        trial += na
        np.maximum(trial, 0.0, out=trial)
    # Backtracking: halve the step on rows whose scaled residual grew (the scale of the
    # point the step starts from); only those rows are evaluated again.
    ft, Pt, Lt = kernel.both_t(trial, active)
    normt = _norms(ft / scale)
    worse = ~(normt <= norm0 * (1 - 1e-4 * lam)) & (lam > 1e-3)
    check = np.nonzero(worse)[0]
    for _ in range(8):
        if not check.size:
            break
        lam[check] /= 2
        trial[:, check] = np.maximum(na[:, check] + lam[check] * dn[:, check], 0.0)
        ft[:, check], Pt[:, check], Lt[:, check] = kernel.both_t(trial[:, check],
                                                                 active[check])
        normt = _norms(ft[:, check] / scale[:, check])
        worse = ~(normt <= norm0[check] * (1 - 1e-4 * lam[check])) & (lam[check] > 1e-3)
        check = check[worse]
    return trial, ft, Pt, Lt


def newton(n, kernel, *, rtol, atol, max_iter, iterations):
    """Damped Newton on the rows of ``n`` (species, rows: rows last); returns
    (n, converged mask, residual).

    ``kernel`` has ``both_t(n, rows) -> (f, P, L)`` (the tendency and the gross production
    and loss from one evaluation of the rates) and ``jacobian_t(n, rows) -> (b, S, S)``,
    on the rows ``rows`` with ``n`` rows last (:class:`RowsCallables`). ``atol`` is the
    absolute residual floor (cm-3 s-1): residuals below it are noise.

    One evaluation of the rates per iteration (plus one per halving of a step): the
    tendency and gross rates at the point a step reaches serve both the backtracking test
    and, unchanged, the next iteration's residual and right-hand side — and, for a row
    whose step was small, the confirming residual of step 3 in the module docstring.
    """
    S, B = n.shape
    floor = _rate_floor(atol, rtol)
    quadratic_step = np.sqrt(rtol)
    converged = np.zeros(B, bool)
    res = np.full(B, np.inf)
    if not B:
        return n, converged, res
    if not S:                       # nothing to solve: every row is converged as it is
        iterations += 1
        converged[:] = True
        res[:] = 0.0
        return n, converged, res

    active = np.arange(B)
    f, P, L = kernel.both_t(n, active)
    scale, norm0, r0, tiny = _measured(f, P, L, floor, atol)
    last_step = np.zeros(B)     # no step yet: only a zero step shows contraction
    for _ in range(max_iter):
        if active.size == 0:
            break
        na = n if active.size == B else n[:, active]
        dn = np.ascontiguousarray(_solve(kernel.jacobian_t(na, active), -f.T).T)
        trial, ft, Pt, Lt = _damped_step(kernel, na, dn, active, scale, norm0)
        step = np.abs(trial - na)
        small = NEGLIGIBLE * np.maximum(trial.max(axis=0), 1e-300)
        rel_step = (step / (trial + small)).max(axis=0)
        if active.size == B:
            n = trial
        else:
            n[:, active] = trial
        iterations[active] += 1
        # Residual met before the step and the step itself small: Newton converges
        # quadratically, so the point after it is far inside the tolerance; confirmed by
        # the residual at that point. A row whose every residual is already below the
        # absolute floor (a dark row with production of 1e-160 cm-3 s-1, say) is
        # converged whatever the step: its densities are known to within floor / loss
        # frequency, physically nothing.
        scale_t, norm_t, rt, tiny_t = _measured(ft, Pt, Lt, floor, atol)
        met = (rt <= rtol) | tiny_t
        # Or: the step that reached the point was below sqrt(rtol) and at most a tenth of
        # the one before (Newton in its quadratic regime: the error left is about the
        # square of the step, below rtol), with the residual met there.
        candidate = (((r0 <= rtol) & ((rel_step <= STEP_TOL) | tiny))
                     | ((rel_step <= quadratic_step) & (rel_step <= 0.1 * last_step)))
        res[active] = np.where(candidate, rt, r0)
        done = candidate & met
        if done.any():
            converged[active[done]] = True
            keep = ~done
            active = active[keep]
            f, scale, norm0 = ft[:, keep], scale_t[:, keep], norm_t[keep]
            r0, tiny, last_step = rt[keep], tiny_t[keep], rel_step[keep]
        else:
            f, scale, norm0, r0, tiny, last_step = ft, scale_t, norm_t, rt, tiny_t, rel_step
    return n, converged, res


def continuation(n, tendency, jacobian, gross, *, rtol, atol, max_iter, iterations):
    """Pseudo-transient continuation (switched evolution relaxation) on rows of ``n``."""
    atol = _rate_floor(atol, rtol)          # the rate-scale floor, as in newton()
    B, S = n.shape
    rows = np.arange(B)
    f = tendency(n, rows)
    P, L = gross(n, rows)
    with np.errstate(divide="ignore", invalid="ignore"):
        freq = np.where(n > 0, L / np.maximum(n, 1e-300), 0.0)
    # Start at a hundredth of the fastest chemical time of each row.
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
                 max_newton=60, max_continuation=400, row_labels=None, species_names=None,
                 both=None, kernel=None, warm=False):
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
    row_labels : sequence, optional
        Label of each row for error messages (for example altitudes in km).
    species_names : sequence, optional
        Name of each of the S species, to say which one stalled.
    both : callable, optional
        ``both(n, rows) -> (f, P, L)`` from one evaluation of the rates (a speed-up).
    kernel : optional
        The same rows last, for Newton: ``both_t``, ``gross_t`` and ``jacobian_t`` on
        densities shaped (S, b) (:class:`ionochem.mechanism.rows.BoundRows`); by default
        :class:`RowsCallables` over the callables.
    warm : bool
        ``n0`` is already close to the solution (a Monte Carlo sample started from the
        central column): the fixed-point sweeps of step 1 are skipped.

    Returns
    -------
    SteadyResult
    """
    B, S = n0.shape
    iterations = np.zeros(B, int)
    method = np.zeros(B, int)
    all_rows = np.arange(B)

    if kernel is None:
        kernel = RowsCallables(tendency, jacobian, gross, both)

    def g_all(n_t):
        return kernel.gross_t(n_t, all_rows)

    # Newton and its start work rows last (see RowsCallables); the result is (B, S).
    n_t = initial_guess(np.maximum(n0, 0.0).T, g_all, sweeps=0 if warm else START_SWEEPS)
    n_t = np.where(np.isfinite(n_t), n_t, 0.0)
    n_t, conv, res = newton(n_t, kernel, rtol=rtol, atol=atol, max_iter=max_newton,
                            iterations=iterations)
    n = np.ascontiguousarray(n_t.T)
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
        nb_t, conv_b, res_b = newton(np.ascontiguousarray(nb.T), _SubsetRows(kernel, bad),
                                     rtol=rtol, atol=atol, max_iter=max_newton,
                                     iterations=sub_iter)
        n[bad] = nb_t.T
        res[bad] = res_b
        iterations[bad] += sub_iter
        method[bad[conv_b]] = METHOD_CONTINUATION
        conv[bad] = conv_b
    valid = conv & np.all(np.isfinite(n) & (n >= 0), axis=1)
    if not valid.all():
        raise _failure(n, res, valid, tendency, gross, _rate_floor(atol, rtol), row_labels,
                       species_names)
    return SteadyResult(n=n, residual=res, iterations=iterations, method=method)


def _failure(n, res, valid, tendency, gross, floor, row_labels, species_names):
    """The ``SolverError`` naming the rows that fail the rule and their stalled species."""
    labels = np.asarray(row_labels if row_labels is not None else np.arange(n.shape[0]))
    bad = np.nonzero(~valid)[0]
    failed = labels[bad]
    shown = ", ".join(str(x) for x in failed[:12]) + (" …" if failed.size > 12 else "")
    stalled = _stalled_species(n[bad], bad, tendency, gross, floor, species_names)
    worst = ", ".join(dict.fromkeys(stalled))
    return SolverError(
        f"steady state not reached at {failed.size} altitude(s): {shown} "
        f"(largest relative residual {np.nanmax(res[~valid]):.3g}"
        + (f"; stalled: {worst}" if worst else "") + ")",
        levels=failed.tolist(), species=stalled)


def _stalled_species(n, rows, tendency, gross, floor, names):
    """Per failed row, the species with the largest relative residual (or not finite)."""
    if names is None or not n.shape[1]:
        return []
    with np.errstate(all="ignore"):
        f = tendency(n, rows)
        P, L = gross(n, rows)
        rel = np.abs(f) / _scale(P, L, floor)
    rel = np.where(np.isfinite(rel) & np.isfinite(n) & (n >= 0), rel, np.inf)
    return [str(names[j]) for j in np.argmax(rel, axis=1)]
