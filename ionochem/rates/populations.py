"""Level populations of a beam from level-resolved signals.

Model: signals[channel] = sum_level design[channel, level] * p[level] (+ noise of one-sigma
``sigma[channel]``), p >= 0. ``design`` is the known response of each measured channel to
each level (for instance per-level rate coefficients); an unknown overall scale (beam current,
detection efficiency) is allowed, so the populations are reported normalised to one.

Method: non-negative least squares on the weighted system (scipy.optimize.nnls; the algorithm
of Lawson & Hanson 1974, *Solving Least Squares Problems*, Prentice-Hall, as scipy's
documentation cites it). Errors:

- ``method="linear"`` (default): linearisation on the active set. Levels fitted at zero sit on
  the constraint and get zero variance; the free levels get (A_f^T A_f)^-1 with A the weighted
  design. The normalisation p/sum(p) is propagated with its Jacobian (d n_i/d p_j =
  (delta_ij - n_i)/sum p).
- ``method="bootstrap"``: parametric bootstrap: the fitted signals plus Gaussian noise of
  ``sigma`` are refitted ``n_boot`` times; the covariance of the normalised populations
  over the refits (this sees the constraint at zero, which linearisation does not).

Fit quality: chi-square, degrees of freedom (channels minus free levels) and its p-value.

:func:`beam_populations` fits a measured merged-beam rate curve as a non-negative mix of
per-level theoretical curves (:func:`~ionochem.rates.beam.beam_rate` of each level's cross
section); there the curve is absolute, so ``scale`` = sum(p) should be near one.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import optimize, stats

from ionochem.analysis.bounds import MAX_BOOTSTRAP, check_count
from ionochem.errors import InputError
from ionochem.rates.beam import beam_rate
from ionochem.rates.common import check_positive

__all__ = ["PopulationResult", "level_populations", "beam_populations"]


@dataclass(frozen=True)
class PopulationResult:
    """Result of :func:`level_populations`; unpacks as ``populations, covariance``.

    Attributes
    ----------
    populations : ndarray, shape (level,)
        Populations normalised to one.
    covariance : ndarray, shape (level, level)
        Their covariance.
    scale : float
        Sum of the unnormalised populations (the overall factor).
    chi2 : float
    dof : int
    p_value : float
    method : str
        ``"linear"`` or ``"bootstrap"``.
    upper_limits : ndarray, shape (level,)
        For a level fitted at zero (on the non-negativity bound, where the linearised error
        is zero and means nothing): the normalised population at which chi-square has
        risen by one with the other levels refitted (:func:`upper_limits`); NaN for the
        other levels.
    """

    populations: np.ndarray
    covariance: np.ndarray
    scale: float
    chi2: float
    dof: int
    p_value: float
    method: str
    upper_limits: np.ndarray | None = None

    def __iter__(self):
        yield self.populations
        yield self.covariance

    @property
    def errors(self):
        """One-sigma errors of the normalised populations."""
        return np.sqrt(np.clip(np.diag(self.covariance), 0.0, None))


def _nnls(A, b):
    try:
        x, _ = optimize.nnls(A, b, maxiter=50 * A.shape[1] + 100)
    except RuntimeError as exc:
        raise InputError(f"the non-negative least-squares fit did not converge ({exc})") \
            from None
    return x


def _normalise(p):
    total = p.sum()
    if not total > 0:
        raise InputError("every population came out zero: the signals do not match the "
                         "design (check signs and units)")
    return p / total, total


def level_populations(design, signals, sigma, *, method="linear", n_boot=1000, seed=None):
    """Level populations from level-resolved signals by non-negative least squares.

    Parameters
    ----------
    design : array_like, shape (channel, level)
        Known response of each channel to each level (e.g. per-level rate coefficients).
    signals : array_like, shape (channel,)
        Measured signals, same units as ``design`` times population.
    sigma : array_like, shape (channel,) or float
        One-sigma errors of the signals, > 0.
    method : {"linear", "bootstrap"}
        How the covariance is obtained (module docstring).
    n_boot : int
        Bootstrap refits (``method="bootstrap"``).
    seed : int, optional
        Seed of the bootstrap noise.

    Returns
    -------
    PopulationResult
    """
    A = np.asarray(design, dtype=float)
    b = np.asarray(signals, dtype=float)
    if A.ndim != 2 or b.ndim != 1 or A.shape[0] != b.size:
        raise InputError(f"design must be (channel, level) and signals (channel,); got "
                         f"{A.shape} and {b.shape}")
    if not np.isfinite(A).all() or not np.isfinite(b).all():
        raise InputError("design and signals must be finite numbers")
    if (A < 0).any():
        raise InputError("design responses must be non-negative")
    s = np.broadcast_to(check_positive(sigma, "sigma"), b.shape).astype(float)
    if method not in ("linear", "bootstrap"):
        raise InputError(f"method must be 'linear' or 'bootstrap', not {method!r}")
    Aw, bw = A / s[:, None], b / s
    p = _nnls(Aw, bw)
    n, total = _normalise(p)
    free = p > 0
    chi2 = float(np.sum((Aw @ p - bw) ** 2))
    dof = int(b.size - free.sum())
    pval = float(stats.chi2.sf(chi2, dof)) if dof > 0 else float("nan")
    L = A.shape[1]
    if method == "linear":
        Af = Aw[:, free]
        if np.linalg.matrix_rank(Af) < Af.shape[1]:
            raise InputError("the populated levels cannot be told apart by these channels "
                             "(the design restricted to them is rank deficient)")
        Cp = np.zeros((L, L))
        Cp[np.ix_(free, free)] = np.linalg.inv(Af.T @ Af)
        G = (np.eye(L) - n[:, None]) / total
        C = G @ Cp @ G.T
    else:
        check_count(n_boot, 2, MAX_BOOTSTRAP, "n_boot", "the number of refits")
        rng = np.random.default_rng(seed)
        model = A @ p
        draws = np.empty((int(n_boot), L))
        for i in range(int(n_boot)):
            q = _nnls(Aw, (model + rng.normal(0.0, s)) / s)
            draws[i] = q / q.sum() if q.sum() > 0 else np.nan
        draws = draws[np.isfinite(draws).all(axis=1)]
        C = np.cov(draws, rowvar=False)
    return PopulationResult(n, C, float(total), chi2, dof, pval, method,
                            upper_limits(Aw, bw, p))


def _chi2_with(Aw, bw, i, t):
    """Smallest chi-square with level i held at t (unnormalised), the others >= 0, and the
    populations of that fit."""
    others = np.arange(Aw.shape[1]) != i
    q = _nnls(Aw[:, others], bw - Aw[:, i] * t)
    p = np.empty(Aw.shape[1])
    p[others], p[i] = q, t
    return float(np.sum((Aw @ p - bw) ** 2)), p


def upper_limits(Aw, bw, p):
    """Upper limits of the levels fitted at zero: the normalised population n_i = p_i/sum p
    where chi-square, minimised over the other levels (>= 0), has risen by 1 above the fit
    (the one-sided Delta chi2 = 1 rule for a parameter on its bound, *(common practice)*).
    Found by bisection; NaN for levels not at zero. ``Aw``, ``bw`` are the weighted design
    and signals, ``p`` the unnormalised fit."""
    out = np.full(p.size, np.nan)
    chi0 = float(np.sum((Aw @ p - bw) ** 2))
    for i in np.flatnonzero(p <= 0):
        col = Aw[:, i]
        if not np.any(col > 0):
            continue                       # no channel sees this level: no limit at all
        hi = max(1.0, float(np.max(np.abs(bw)) / np.max(col)))
        for _ in range(200):               # chi-square grows as t^2: a few doublings
            if _chi2_with(Aw, bw, i, hi)[0] >= chi0 + 1.0:
                break
            hi *= 2.0
        lo = 0.0
        for _ in range(60):
            mid = 0.5 * (lo + hi)
            if _chi2_with(Aw, bw, i, mid)[0] < chi0 + 1.0:
                lo = mid
            else:
                hi = mid
        q = _chi2_with(Aw, bw, i, hi)[1]
        out[i] = hi / q.sum() if q.sum() > 0 else np.nan
    return out


def beam_populations(energy_eV, sigma_levels_cm2, detuning_eV, measured_cm3_s,
                     measured_sigma_cm3_s, kT_perp_eV, kT_par_eV, **kw):
    """Level populations from a measured merged-beam rate curve.

    Each level's theoretical curve is :func:`~ionochem.rates.beam.beam_rate` of its cross
    section; the measured curve is fitted as their non-negative mix.

    Parameters
    ----------
    energy_eV : array_like, shape (energy,)
    sigma_levels_cm2 : array_like, shape (energy, level)
        Per-level cross sections (cm2).
    detuning_eV : array_like, shape (point,)
        Detuning energies of the measurement (eV).
    measured_cm3_s, measured_sigma_cm3_s : array_like, shape (point,)
        Measured rate coefficients and their one-sigma errors (cm3 s-1).
    kT_perp_eV, kT_par_eV : float
        Beam temperatures (eV).
    **kw
        Passed to :func:`level_populations` (``method``, ``n_boot``, ``seed``).

    Returns
    -------
    PopulationResult
        ``scale`` is the sum of the unnormalised mix (near one for an absolute curve).
    """
    S = np.asarray(sigma_levels_cm2, float)
    if S.ndim != 2:
        raise InputError("per-level cross sections must be shaped (energy, level)")
    design = beam_rate(energy_eV, S, np.asarray(detuning_eV, float).reshape(-1),
                       kT_perp_eV, kT_par_eV)
    return level_populations(design, measured_cm3_s, measured_sigma_cm3_s, **kw)
