"""Fits of k(T) to the standard forms of rate-coefficient compilations.

Forms (T in K, k in cm3 s-1):

- ``"power"``: k = A (T/300)^B
- ``"broken"``: a power law with a break at T_b, continuous there:
  k = A (T/300)^B1 below T_b, A (T_b/300)^B1 (T/T_b)^B2 above
- ``"arrhenius"`` (modified Arrhenius): k = A (T/300)^B exp(-C/T)

The fit is weighted least squares (scipy.optimize.curve_fit, Levenberg-Marquardt). With
``sigma`` (one-sigma errors of k, cm3 s-1) the residuals are (k - model)/sigma and the
covariance is taken as absolute (``absolute_sigma=True``): the parameter intervals are then
honest when the errors are. Without ``sigma`` every point is given the same *relative*
error, the fit is made in log k, and the covariance is scaled by the reduced chi-square
(the scatter of the points sets the error). Goodness of fit: chi-square, degrees of
freedom and the chi-square p-value (meaningful only when ``sigma`` is given).

Bands for a rate table come from the covariance by linear propagation in log k:
k exp(+-sqrt(g C g^T)), g = d log k / d parameters.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import optimize, stats

from ionochem.errors import InputError
from ionochem.rates.common import check_positive, check_temperatures

__all__ = ["FORMS", "FitResult", "fit_rate", "evaluate_form"]

FORMS = {
    "power": ("A_cm3_s", "B"),
    "broken": ("A_cm3_s", "B1", "B2", "T_break_K"),
    "arrhenius": ("A_cm3_s", "B", "C_K"),
}


def _log_model(form, T, p):
    """log k for parameters p (A enters as log A so the fit is well scaled)."""
    x = np.log(T / 300.0)
    if form == "power":
        return p[0] + p[1] * x
    if form == "arrhenius":
        return p[0] + p[1] * x - p[2] / T
    logA, b1, b2, logTb = p
    xb = logTb - np.log(300.0)
    return logA + np.where(x <= xb, b1 * x, b1 * xb + b2 * (x - xb))


def _to_public(form, p):
    q = np.array(p, float)
    q[0] = np.exp(p[0])
    if form == "broken":
        q[3] = np.exp(p[3])
    return q


def _to_internal(form, q):
    p = np.array(q, float)
    p[0] = np.log(q[0])
    if form == "broken":
        p[3] = np.log(q[3])
    return p


def evaluate_form(form, parameters, temperature_K):
    """k(T) (cm3 s-1) of a form with public parameters (A in cm3 s-1, T_break in K)."""
    if form not in FORMS:
        raise InputError(f"unknown form {form!r} (forms: {', '.join(FORMS)})")
    T = check_temperatures(temperature_K)
    return np.exp(_log_model(form, T, _to_internal(form, parameters)))


@dataclass(frozen=True)
class FitResult:
    """Result of :func:`fit_rate`; unpacks as ``parameters, covariance = fit_rate(...)``.

    Attributes
    ----------
    form : str
    names : tuple of str
        Parameter names (``A_cm3_s``, ``B``, ...).
    parameters : ndarray, shape (parameter,)
        Best-fit values (A in cm3 s-1, C and T_break in K).
    covariance : ndarray, shape (parameter, parameter)
        Their covariance.
    chi2 : float
        Chi-square at the optimum (in log k without ``sigma``).
    dof : int
        Degrees of freedom (points minus parameters).
    p_value : float
        Chi-square survival probability (``nan`` without ``sigma``).
    absolute_sigma : bool
        Whether the covariance comes from the given errors (True) or the scatter (False).
    """

    form: str
    names: tuple
    parameters: np.ndarray
    covariance: np.ndarray
    chi2: float
    dof: int
    p_value: float
    absolute_sigma: bool

    def __iter__(self):
        yield self.parameters
        yield self.covariance

    @property
    def errors(self):
        """One-sigma errors of the parameters (square roots of the covariance diagonal)."""
        return np.sqrt(np.diag(self.covariance))

    def __call__(self, temperature_K):
        """k(T) of the fitted form (cm3 s-1)."""
        return evaluate_form(self.form, self.parameters, temperature_K)

    def band(self, temperature_K, n_sigma=1.0):
        """(low, high) of k at ``temperature_K`` from the covariance, in log k."""
        T = check_temperatures(temperature_K)
        p = _to_internal(self.form, self.parameters)
        # Covariance of the internal parameters (log A, log T_b) by the chain rule.
        J = np.eye(p.size)
        J[0, 0] = 1.0 / self.parameters[0]
        if self.form == "broken":
            J[3, 3] = 1.0 / self.parameters[3]
        C = J @ self.covariance @ J.T
        g = np.empty(T.shape + (p.size,))
        f0 = _log_model(self.form, T, p)
        for i in range(p.size):
            step = 1e-6 * max(1.0, abs(p[i]))
            q = p.copy()
            q[i] += step
            g[..., i] = (_log_model(self.form, T, q) - f0) / step
        sd = np.sqrt(np.einsum("...i,ij,...j->...", g, C, g))
        k = np.exp(f0)
        return k * np.exp(-n_sigma * sd), k * np.exp(n_sigma * sd)


def _start(form, T, logk):
    x = np.log(T / 300.0)
    b, a = np.polyfit(x, logk, 1)
    if form == "power":
        return np.array([a, b])
    if form == "arrhenius":
        M = np.column_stack([np.ones_like(x), x, -1.0 / T])
        sol, *_ = np.linalg.lstsq(M, logk, rcond=None)
        return sol
    best = None
    for tb in T[1:-1]:
        xb = np.log(tb / 300.0)
        M = np.column_stack([np.ones_like(x), np.minimum(x, xb), np.maximum(x - xb, 0.0)])
        sol, res, *_ = np.linalg.lstsq(M, logk, rcond=None)
        r = float(np.sum((M @ sol - logk) ** 2))
        if best is None or r < best[0]:
            best = (r, np.array([sol[0], sol[1], sol[2], np.log(tb)]))
    return best[1]


def fit_rate(temperature_K, k, form, sigma=None):
    """Fit k(T) to a standard form.

    Parameters
    ----------
    temperature_K : array_like, shape (point,)
        Temperatures (K), > 0.
    k : array_like, shape (point,)
        Rate coefficients (cm3 s-1), > 0.
    form : {"power", "broken", "arrhenius"}
        See the module docstring.
    sigma : array_like, shape (point,), optional
        One-sigma errors of k (cm3 s-1), > 0. Without it, equal relative errors are
        assumed and estimated from the scatter.

    Returns
    -------
    FitResult
        Unpacks as ``(parameters, covariance)``; also carries chi2, dof and p_value.
    """
    if form not in FORMS:
        raise InputError(f"unknown form {form!r} (forms: {', '.join(FORMS)})")
    T = check_temperatures(temperature_K).reshape(-1)
    y = check_positive(k, "k").reshape(-1)
    if T.size != y.size:
        raise InputError(f"{T.size} temperatures but {y.size} rate coefficients")
    npar = len(FORMS[form])
    need = npar + 1 if form != "broken" else npar + 2
    if T.size < need:
        raise InputError(f"form {form!r} needs at least {need} points, got {T.size}")
    order = np.argsort(T)
    T, y = T[order], y[order]
    if sigma is not None:
        s = check_positive(sigma, "sigma").reshape(-1)
        if s.size != T.size:
            raise InputError(f"{T.size} temperatures but {s.size} errors")
        s = s[order]
    p0 = _start(form, T, np.log(y))

    def model_log(Tv, *p):
        return _log_model(form, Tv, np.asarray(p))

    def model_lin(Tv, *p):
        return np.exp(_log_model(form, Tv, np.asarray(p)))

    try:
        if sigma is None:
            p, C = optimize.curve_fit(model_log, T, np.log(y), p0=p0, maxfev=20000)
            resid = np.log(y) - model_log(T, *p)
        else:
            p, C = optimize.curve_fit(model_lin, T, y, p0=p0, sigma=s, absolute_sigma=True,
                                      maxfev=20000)
            resid = (y - model_lin(T, *p)) / s
    except (RuntimeError, optimize.OptimizeWarning, ValueError) as exc:
        raise InputError(f"the {form} fit did not converge ({exc})") from None
    if not np.isfinite(C).all():
        raise InputError(f"the {form} fit is degenerate (parameters not determined by the "
                         "data; try a simpler form or more temperatures)")
    dof = T.size - npar
    chi2 = float(np.sum(resid ** 2))
    pval = float(stats.chi2.sf(chi2, dof)) if sigma is not None and dof > 0 else float("nan")
    # Public parameters: A = exp(log A) (and T_b); covariance by the chain rule.
    q = _to_public(form, p)
    J = np.eye(p.size)
    J[0, 0] = q[0]
    if form == "broken":
        J[3, 3] = q[3]
    return FitResult(form, FORMS[form], q, J @ C @ J.T, chi2, dof, pval, sigma is not None)
