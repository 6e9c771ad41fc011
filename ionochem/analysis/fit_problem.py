"""The forward model of a fit: models at trial multipliers, residuals, exact Jacobian, and
the least-squares and profile-likelihood drivers (see :mod:`ionochem.analysis.fit`).

A trial that only scales rate coefficients is the base model with scaled k: its steady state
comes from ``Model.steady_densities(k=...)`` and its sensitivities from
:func:`ionochem.analysis.sensitivity.parameter_sensitivities`, only for the fitted
parameters — no model is rebuilt, no dataset written, no environment factor or temperature
derivative computed that the fit does not use. The scaled k equal those of
``Model.with_changes(scale=...)``: the model zeroes photo and photoelectron rates whose
production is below ``PRODUCTION_FLOOR`` (ionochem/system/rates.py), so the same floor is applied
to the scaled rates, and a trial that would raise a rate the base model zeroed is built as a
model (exact). A free ``Te`` needs a model on a changed environment per trial.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from ionochem.analysis.misfit import interpolation_matrix, log_density, log_sigma
from ionochem.analysis.sensitivity import parameter_sensitivities
from ionochem.errors import InputError, SolverError
from ionochem.io.observations import check_against_model
from ionochem.system.rates import PRODUCTION_FLOOR


# ------------------------------------------------------------------ models
def _extra_changes(model):
    """The model's changes beyond its scenario's (to re-apply on a rebuilt model)."""
    scen = model.scenario.changes
    sets = {k: v for k, v in model.changes["set"].items() if scen.set.get(k) != v}
    scales = {}
    for k, v in model.changes["scale"].items():
        base = float(scen.scale.get(k, 1.0))
        if v != base and base != 0:
            scales[k] = v / base
    return sets, scales


def model_on(model, scenario=None, **environment):
    """The same model on a copy of its environment with some fields replaced (``Te=``,
    ``electron_density=``), and optionally another scenario; its changes are kept."""
    from ionochem.model import Model
    env = dataclasses.replace(model.environment, **environment)
    new = Model(model.scenario if scenario is None else scenario, model.reaction_list,
                environment=env)
    sets, scales = _extra_changes(model)
    return new.with_changes(sets, scale=scales) if (sets or scales) else new


def electron_constrained_model(model, obs, balance_ion="O+"):
    """The model in ``electrons = "table"`` mode with Ne from the observations.

    The observed electron densities are interpolated log-linearly in altitude onto the
    grid; the grid must lie inside the observed range.

    Raises
    ------
    InputError
        No electron-density rows, or a grid level outside their altitudes.
    """
    src = obs.attrs.get("source")
    sel = obs["kind"].values.astype(str) == "electron_density"
    if not sel.any():
        raise InputError("no electron-density rows (species e) to constrain the electrons "
                         "with", file=src)
    a = obs["altitude_km"].values[sel]
    ne = obs["density_cm3"].values[sel]
    order = np.argsort(a)
    a, ne = a[order], ne[order]
    grid = np.asarray(model.altitude_km, float)
    if grid.min() < a[0] - 1e-6 or grid.max() > a[-1] + 1e-6:
        raise InputError(f"the measured electron density covers {a[0]:g} to {a[-1]:g} km but "
                         f"the model grid spans {grid.min():g} to {grid.max():g} km; give the "
                         "scenario a grid inside the measured range", file=src)
    ne_grid = np.exp(np.interp(grid, a, np.log(ne)))
    scen = model.scenario
    solve = dataclasses.replace(scen.solve, electrons="table", balance_ion=balance_ion,
                                electron_table=src)
    return model_on(model, dataclasses.replace(scen, solve=solve), electron_density=ne_grid)


def _source_absorbers(model):
    """Columns of the photo and photoelectron reactions and their absorbers' densities
    (A, n): what the model's floor on source rates multiplies (ionochem/system/rates.py)."""
    def build():
        env = model.environment
        ones = np.ones(model.altitude_km.size)
        cols, dens = [], []
        for j, (r, e) in enumerate(zip(model.reaction_objects, model.rate_expressions)):
            if e.variables & {"photo", "photoelectron"}:
                absorber = [sp.name for sp, _ in r.reactants if sp.charge == 0
                            and sp.name in env.neutrals]
                cols.append(j)
                dens.append(env.neutrals[absorber[0]] if len(absorber) == 1 else ones)
        return np.array(cols, int), (np.stack(dens, -1) if dens else np.zeros((ones.size, 0)))
    return model.structural(("fit", "source_absorbers"), build)


def scaled_rates(model, factors):
    """The rate coefficients of ``model.with_changes(scale=...)`` for per-reaction factors
    ``factors`` (R,), from the model's own; None when a factor above 1 would raise a source
    rate the model zeroed (its unscaled value is not known: build the model instead)."""
    k0 = model.rate_coefficients()
    k = k0 * factors[None, :]
    cols, absorber = _source_absorbers(model)
    if cols.size:
        scaled = factors[cols] != 1.0
        if np.any((k0[:, cols] == 0) & (factors[cols] > 1.0)[None, :] & scaled[None, :]):
            return None
        src = k[:, cols]
        k[:, cols] = np.where(scaled[None, :] & (src * absorber < PRODUCTION_FLOOR), 0.0, src)
    return k


# ------------------------------------------------------------------ the problem
class _Problem:
    """Residuals and exact Jacobian of the misfit as functions of θ (cached per θ)."""

    def __init__(self, model, obs, params, prior_log_f):
        self.model = model
        self.params = params
        self.prior = np.array([np.nan if prior_log_f.get(p.name) is None
                               else prior_log_f[p.name] for p in params])
        self.has_prior = np.isfinite(self.prior)
        base = model.solve()
        self.base_ds = base
        self.species = [str(s) for s in base["species"].values]
        self.altitude = base["altitude"].values
        check_against_model(obs, self.species, self.altitude)
        self.W_all = interpolation_matrix(obs, self.species, self.altitude)
        self.use, self.notes = _usable(model, obs, self.W_all, log_density(base))
        self.W = self.W_all[self.use]
        self.log_y = np.log(obs["density_cm3"].values[self.use])
        self.s = log_sigma(obs)[self.use]
        self._cache = {}
        self.M = np.zeros((len(model.reactions), len(params)))
        for p, par in enumerate(params):
            self.M[list(par.indices), p] = 1.0
        self.te = [p for p, par in enumerate(params) if par.is_te]
        self.rate = [p for p, par in enumerate(params) if not par.is_te]
        dens = base["density"].transpose("species", "altitude").values
        self.n0 = dens[[self.species.index(s) for s in model.species]].T.copy()
        self.observed = np.abs(self.W).sum(axis=0) > 0

    # -- forward model
    def model_at(self, theta):
        """The model at θ (a rebuilt model: for the outputs and the exceptional trials)."""
        m = self.model
        if self.te:
            m = model_on(m, Te=m.environment.Te * np.exp(theta[self.te[0]]))
        scale = {par.name: float(np.exp(t)) for par, t in zip(self.params, theta)
                 if not par.is_te}
        return m.with_changes(scale=scale) if scale else m

    def _trial(self, theta):
        """(model, k, solved densities) at θ; k None means the model's own."""
        if not np.any(theta):
            return self.model, None, self.n0
        m = self.model
        if self.te:
            m = model_on(m, Te=m.environment.Te * np.exp(theta[self.te[0]]))
        k = None
        if self.rate:
            k = scaled_rates(m, np.exp(self.M[:, self.rate] @ theta[self.rate]))
            if k is None:
                m = self.model_at(theta)
        return m, k, m.steady_densities(k=k).n

    def _state(self, theta):
        """Model, solution and ln m at the observations for θ (one kept: least_squares
        asks for the residuals and then the Jacobian at the same point)."""
        theta = np.asarray(theta, float)
        key = tuple(np.round(theta, 14))
        if self._cache.get("key") == key:
            return self._cache
        m, k, n = self._trial(theta)
        dens, names, _ = m.species_table(n)
        dens = dens[:, [names.index(s) for s in self.species]].T      # (species, A)
        with np.errstate(divide="ignore", invalid="ignore"):
            log_n = np.where(dens > 0, np.log(np.where(dens > 0, dens, 1.0)), np.nan).ravel()
        if not np.all(np.isfinite(log_n[self.observed])):
            raise SolverError("a fitted model density went to zero where it is observed; "
                              "bound the multipliers more tightly (--max-factor)")
        self._cache = {"key": key, "model": m, "k": k, "n": n, "density": dens,
                       "names": names, "lm": self.W @ np.nan_to_num(log_n)}
        return self._cache

    def evaluate(self, theta):
        """(densities (species, altitude), ln m at the observations, data Jacobian ∂r/∂θ)
        at θ."""
        st = self._state(theta)
        if "J" not in st:
            cols = self.M[:, self.rate]
            S = parameter_sensitivities(st["model"], st["n"], st["k"], cols, te=bool(self.te))
            S = np.nan_to_num(S[:, [st["names"].index(s) for s in self.species]])
            G = np.empty((len(self.params),) + S.shape[1::-1])         # (P, species, A)
            for i, p in enumerate(self.rate):
                G[p] = S[:, :, i].T
            for p in self.te:
                G[p] = S[:, :, -1].T
            st["J"] = -(self.W @ G.reshape(len(self.params), -1).T) / self.s[:, None]
        return st["density"], st["lm"], st["J"]

    def residuals(self, theta):
        lm = self._state(theta)["lm"]
        r = (self.log_y - lm) / self.s
        prior = np.asarray(theta)[self.has_prior] / self.prior[self.has_prior]
        return np.concatenate([r, prior])

    def jacobian(self, theta):
        _, _, J = self.evaluate(theta)
        P = np.diag(1.0 / np.where(self.has_prior, self.prior, np.inf))[self.has_prior]
        return np.vstack([J, P])


def _usable(model, obs, W_all, log_n):
    """Observations usable (finite model there, not fixed by a constraint) and notes."""
    bad = ~np.isfinite(log_n.ravel())
    usable = ~(np.abs(W_all[:, bad]) > 0).any(axis=1)
    notes = []
    if (~usable).any():
        notes.append(f"{int((~usable).sum())} observation(s) where the model density "
                     "is zero (dark levels) are left out")
    if model.scenario.solve.electrons == "table":
        fixed = obs["kind"].values.astype(str) == "electron_density"
        if (fixed & usable).any():
            notes.append(f"{int((fixed & usable).sum())} electron-density "
                         "observation(s) are the electron constraint, not data: "
                         "left out of the misfit")
        usable &= ~fixed
    if not usable.any():
        raise InputError("no observation can be compared with the model",
                         file=obs.attrs.get("source"))
    return usable, notes


# ------------------------------------------------------------------ drivers
def least_squares_fit(problem, theta0, free_mask, bound):
    """θ minimising Σ r² over the ``free_mask`` parameters (trust-region reflective)."""
    from scipy.optimize import least_squares
    theta0 = np.asarray(theta0, float)
    idx = np.flatnonzero(free_mask)

    def full(x):
        t = theta0.copy()
        t[idx] = x
        return t

    res = least_squares(lambda x: problem.residuals(full(x)),
                        np.clip(theta0[idx], -bound[idx] * 0.999, bound[idx] * 0.999),
                        jac=lambda x: problem.jacobian(full(x))[:, idx],
                        bounds=(-bound[idx], bound[idx]), method="trf", x_scale=1.0,
                        xtol=1e-10, ftol=1e-10, gtol=1e-10, max_nfev=100)
    return full(res.x), res


def profile_likelihood(problem, theta, p, sigma, bound, points):
    """Total χ² with parameter ``p`` held on a grid of values, the others refitted."""
    points = max(3, int(points) | 1)
    width = 3.0 * sigma[p] if np.isfinite(sigma[p]) and sigma[p] > 0 else bound[p]
    width = min(width, bound[p])
    grid = np.clip(theta[p] + np.linspace(-width, width, points), -bound[p] * 0.999,
                   bound[p] * 0.999)
    free = np.ones(theta.size, bool)
    free[p] = False
    chi2 = np.empty(points)
    start = theta.copy()
    mid = points // 2
    order = list(range(mid, points)) + list(range(mid - 1, -1, -1))
    for i in order:
        if i == mid - 1:
            start = theta.copy()
        t0 = start.copy()
        t0[p] = grid[i]
        if free.any():
            t, _ = least_squares_fit(problem, t0, free, bound)
        else:
            t = t0
        chi2[i] = float(np.sum(problem.residuals(t) ** 2))
        start = t
    return grid, chi2


def profile_interval(grid, chi2):
    """Where the profile χ² rises by 1 above its minimum (linear interpolation); NaN if the
    grid does not reach it."""
    d = chi2 - chi2.min()
    i0 = int(np.argmin(d))
    lo = hi = np.nan
    for i in range(i0, 0, -1):
        if d[i - 1] >= 1.0:
            lo = np.interp(1.0, [d[i], d[i - 1]], [grid[i], grid[i - 1]])
            break
    for i in range(i0, len(d) - 1):
        if d[i + 1] >= 1.0:
            hi = np.interp(1.0, [d[i], d[i + 1]], [grid[i], grid[i + 1]])
            break
    return lo, hi
