"""Fit rate multipliers (and an electron-temperature factor) to measured profiles.

Method. The parameters are θ_p = ln m_p, the logarithms of multipliers on the rate
coefficients of chosen reactions (a family id scales all its levels together) or on the
electron temperature (``Te``). The misfit is that of :mod:`ionochem.analysis.misfit`:
residuals r_i = (ln y_i − ln m_i(θ))/s_i of every observation, plus one residual θ_p/ln f_p
per parameter with a log-normal prior of one-sigma factor f_p (default: the reaction's own
``f`` from the reaction list, its median over the observed altitudes; ``Te`` and reactions
without ``f`` are unconstrained unless a prior is given). ``scipy.optimize.least_squares``
(trust-region reflective, bounds |θ_p| ≤ ln F, F = 100 by default, and at most a factor
:data:`TE_MAX_FACTOR` on Te) minimises Σ r².

Jacobian. ∂ln m_i/∂θ_p = W S_p, where S_p = ∂ln n/∂ln k_p (summed over a family's
members, or ∂ln n/∂ln Te) are the exact steady-state sensitivities (Model.sensitivity(),
one LU factorisation per level) and W the linear interpolation from the grid to the
observations: no finite differences.

Uncertainty. At the optimum the covariance of θ is (Jᵀ J)⁻¹ with J the whitened Jacobian
including the prior rows (the Laplace/Gauss–Newton approximation, exact for a model linear
in θ with Gaussian errors in ln y); it is not rescaled by χ²/dof, so a χ² far above the
degrees of freedom says the stated errors or the model are wrong, not that the intervals
should widen. Degrees of freedom: observations minus free parameters.

Identifiability. The singular values of the data-only Jacobian (no priors) show which
combinations of parameters the data constrain; a direction whose singular value is below
:data:`DEGENERATE_RATIO` of the largest is reported as degenerate, written as a combination
of the reaction ids. Parameter pairs with |correlation| above :data:`CORRELATED` are named
too.

Profile likelihood (optional): the total χ² (data and priors) minimised over the other
parameters with one parameter held at each point of a grid.

Electron-density constraint: :func:`electron_constrained_model` turns the observed Ne into
the scenario's ``[solve] electrons = "table"`` mode (the balance ion, O+ by default, is then
Ne minus the other ions); electron-density rows are then constraints, not data.

Uses only the public Model surface (with_changes, solve, sensitivity, uncertainty_factors,
reactions, reaction_objects, species); for ``Te`` and the electron constraint a model is
rebuilt on a copy of its environment.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import xarray as xr

from ionochem.analysis.bounds import MAX_PROFILE_POINTS, check_count
from ionochem.analysis.misfit import (
    band_rows,
    interpolation_matrix,
    log_density,
    log_sigma,
)
from ionochem.errors import InputError, SolverError
from ionochem.io.dataset import ALTITUDE_ATTRS
from ionochem.io.observations import check_against_model

#: A singular direction below this fraction of the largest singular value is degenerate.
DEGENERATE_RATIO = 1e-2
#: Parameter pairs with |correlation| above this are reported as strongly correlated.
CORRELATED = 0.9
#: Default bound on each multiplier: 1/F ≤ m ≤ F.
MAX_FACTOR = 100.0
#: Bound on the Te factor: rate laws fitted over a few thousand kelvin, and rate tables,
#: are not to be evaluated at a hundred times the electron temperature *(common practice)*.
TE_MAX_FACTOR = 2.0
TE = "Te"


# ------------------------------------------------------------------ parameters
@dataclasses.dataclass(frozen=True)
class Parameter:
    """One free parameter: a reaction, a family or ``Te``; ``indices`` into model.reactions."""

    name: str
    indices: tuple

    @property
    def is_te(self):
        return self.name == TE


def resolve_parameters(model, free):
    """Free ids → :class:`Parameter` (reaction id, family id with or without ``(v)``, Te).

    Raises InputError (``--free``) for an unknown id, or one named twice or overlapping.
    """
    if not free:
        raise InputError("give at least one --free ID (a reaction id, a family id or Te)",
                         file="--free")
    ids = list(model.reactions)
    out, used = [], {}
    for key in free:
        key = str(key).strip()
        if key == TE:
            idx = ()
        elif key in ids:
            idx = (ids.index(key),)
        else:
            idx = tuple(j for j, r in enumerate(model.reaction_objects)
                        if r.family is not None and key in (r.family, r.family.split("(")[0]))
            tied = [u for u in model.units if u.kind == "tied" and u.name == key]
            if not idx and tied:
                idx = tuple(ids.index(m) for m in tied[0].members)
            if not idx:
                near = [u.name for u in model.units if key.lower() in u.name.lower()]
                near += [i for i in ids if key.lower() in i.lower() and i not in near]
                near = near[:6]
                hint = f" (did you mean {', '.join(near)}?)" if near else ""
                raise InputError(f"no reaction or family with id {key!r}{hint}; Te is the "
                                 "electron temperature", file="--free")
        for j in idx or (-1,):
            if j in used:
                raise InputError(f"{key} overlaps {used[j]} (a reaction is free only once)",
                                 file="--free")
            used[j] = key
        out.append(Parameter(key, idx))
    return out


def parse_priors(items, params):
    """``{ID: text}`` of ``--prior`` → {name: ln f or None (flat)}; checks the values."""
    names = [p.name for p in params]
    out = {}
    for key, text in (items or {}).items():
        if key not in names:
            raise InputError(f"--prior {key}: not a free parameter (free: {', '.join(names)})",
                             file="--prior")
        if str(text).strip().lower() in ("none", "flat"):
            out[key] = None
            continue
        try:
            f = float(text)
        except ValueError:
            raise InputError(f"prior factor {text!r} for {key} is not a number (a one-sigma "
                             "factor > 1, or 'none')", file="--prior") from None
        if not np.isfinite(f) or f <= 1.0:
            raise InputError(f"prior factor for {key} must be a finite number > 1 (a "
                             "one-sigma multiplicative factor) or 'none'", file="--prior")
        out[key] = float(np.log(f))
    return out


def default_priors(model, params, altitude_km=None, rates=None):
    """ln f of each parameter from the reaction list; ``None`` (flat) for Te and for
    reactions without an uncertainty.

    A reaction's prior is its ln f, median over the observed levels. A unit of several
    members (a family, a tie) takes its own f: the mean of its members' ln f weighted by
    their rates r_j over the observed levels (``rates`` (altitude, reaction), cm-3 s-1;
    default from a steady solve), so the prior is that of the process as it acts — a family
    whose v = 0 carries most of the rate takes v = 0's f, not the median over its levels.
    """
    if rates is None and any(len(p.indices) > 1 for p in params):
        rates = model.solve()["reaction_rate"].transpose("altitude", "reaction").values
    f = np.log(model.uncertainty_factors())                 # (altitude, reaction)
    alt = np.asarray(model.altitude_km, float)
    rows = np.ones(alt.size, bool)
    if altitude_km is not None and len(altitude_km):
        rows = (alt >= np.min(altitude_km) - 1e-9) & (alt <= np.max(altitude_km) + 1e-9)
        if not rows.any():
            rows[np.argmin(np.abs(alt - np.median(altitude_km)))] = True
    out = {}
    for p in params:
        if p.is_te:
            out[p.name] = None
            continue
        cols = list(p.indices)
        val = float(np.median(f[np.ix_(rows, cols)]))
        if len(cols) > 1:
            w = np.nan_to_num(np.abs(np.asarray(rates, float)[np.ix_(rows, cols)]))
            if w.sum() > 0:
                val = float(np.sum(w * f[np.ix_(rows, cols)]) / w.sum())
        out[p.name] = val if val > 1e-12 else None
    return out


def _prior_source(param, prior, given):
    """Words for ``prior_source``: what a parameter's prior is."""
    if param.name in given:
        return "given (--prior)" if given[param.name] is not None else "flat (--prior none)"
    if prior.get(param.name) is None:
        return "flat (no uncertainty factor)"
    if len(param.indices) > 1:
        return (f"the unit's own f: rate-weighted mean ln f of its {len(param.indices)} "
                "members over the observed altitudes")
    return "the reaction's f, median over the observed altitudes"


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


# ------------------------------------------------------------------ the fit
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
        log_n = log_density(base)
        # Observations usable: finite model there, and not fixed by a constraint.
        bad = ~np.isfinite(log_n.ravel())
        usable = ~(np.abs(self.W_all[:, bad]) > 0).any(axis=1)
        self.notes = []
        if (~usable).any():
            self.notes.append(f"{int((~usable).sum())} observation(s) where the model density "
                              "is zero (dark levels) are left out")
        if model.scenario.solve.electrons == "table":
            fixed = obs["kind"].values.astype(str) == "electron_density"
            if (fixed & usable).any():
                self.notes.append(f"{int((fixed & usable).sum())} electron-density "
                                  "observation(s) are the electron constraint, not data: "
                                  "left out of the misfit")
            usable &= ~fixed
        if not usable.any():
            raise InputError("no observation can be compared with the model",
                             file=obs.attrs.get("source"))
        self.use = usable
        self.W = self.W_all[usable]
        self.log_y = np.log(obs["density_cm3"].values[usable])
        self.s = log_sigma(obs)[usable]
        self._cache = {}
        self.M = np.zeros((len(model.reactions), len(params)))
        for p, par in enumerate(params):
            self.M[list(par.indices), p] = 1.0

    # -- forward model
    def model_at(self, theta):
        m = self.model
        te = [p for p, par in enumerate(self.params) if par.is_te]
        if te:
            env = m.environment
            m = model_on(m, Te=env.Te * np.exp(theta[te[0]]))
        scale = {par.name: float(np.exp(t)) for par, t in zip(self.params, theta)
                 if not par.is_te}
        return m.with_changes(scale=scale) if scale else m

    def _state(self, theta):
        """Model, solution and ln m at the observations for θ (one kept: least_squares
        asks for the residuals and then the Jacobian at the same point)."""
        key = tuple(np.round(np.asarray(theta, float), 14))
        if self._cache.get("key") == key:
            return self._cache
        if not np.any(theta):
            m, ds = self.model, self.base_ds
        else:
            m = self.model_at(np.asarray(theta, float))
            ds = m.solve()
        log_n = log_density(ds).ravel()
        if not np.all(np.isfinite(log_n[np.abs(self.W).sum(axis=0) > 0])):
            raise SolverError("a fitted model density went to zero where it is observed; "
                              "bound the multipliers more tightly (--max-factor)")
        self._cache = {"key": key, "model": m, "ds": ds,
                       "lm": self.W @ np.nan_to_num(log_n)}
        return self._cache

    def evaluate(self, theta):
        """(solution, ln m at the observations, data Jacobian ∂r/∂θ) at θ."""
        st = self._state(theta)
        if "J" not in st:
            sens = st["model"].sensitivity(result=st["ds"])
            S = sens["sensitivity"].transpose("species", "reaction", "altitude").values
            G = np.einsum("sra,rp->psa", np.nan_to_num(S), self.M)
            for p, par in enumerate(self.params):
                if par.is_te:
                    G[p] = np.nan_to_num(
                        sens["sensitivity_Te"].transpose("species", "altitude").values)
            st["J"] = -(self.W @ G.reshape(len(self.params), -1).T) / self.s[:, None]
        return st["ds"], st["lm"], st["J"]

    def residuals(self, theta):
        lm = self._state(theta)["lm"]
        r = (self.log_y - lm) / self.s
        prior = np.asarray(theta)[self.has_prior] / self.prior[self.has_prior]
        return np.concatenate([r, prior])

    def jacobian(self, theta):
        _, _, J = self.evaluate(theta)
        P = np.diag(1.0 / np.where(self.has_prior, self.prior, np.inf))[self.has_prior]
        return np.vstack([J, P])


def _least_squares(problem, theta0, free_mask, bound):
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


def fit(model, observations, free, *, priors=None, max_factor=MAX_FACTOR, profile=None,
        profile_points=13):
    """Fit log multipliers of reactions (or families, or Te) to observations.

    Parameters
    ----------
    model : ionochem.Model
        The baseline (use :func:`electron_constrained_model` first to fit at measured Ne).
    observations : xarray.Dataset
        From :func:`ionochem.load_observations`.
    free : sequence of str
        Reaction ids, family ids (``DR_N2plus(v)`` or ``DR_N2plus``), tie names (a unit of
        the list's ``@unit`` lines: one multiplier for all its members) or ``Te``.
    priors : dict, optional
        Parameter → one-sigma factor f > 1 (float or text) or ``"none"`` (flat); the
        others take :func:`default_priors`.
    max_factor : float
        Bounds 1/F ≤ multiplier ≤ F (> 1).
    profile : str, optional
        A free parameter whose profile likelihood is computed.
    profile_points : int
        Points of the profile (odd: the best fit is one of them).

    Returns
    -------
    xarray.Dataset
        ``log_multiplier(parameter)``, ``multiplier(parameter)``,
        ``log_multiplier_sigma(parameter)``, ``log_covariance(parameter, parameter_b)``,
        ``correlation(parameter, parameter_b)``, ``prior_log_sigma(parameter)``,
        ``density_fitted`` and ``density_baseline`` (species, altitude), per observation
        ``observed``, ``observed_sigma``, ``model_baseline``, ``model_fitted``,
        ``residual`` and ``residual_baseline``, scalars ``chi2``, ``chi2_baseline``,
        ``chi2_prior``, ``degrees_of_freedom``, the identifiability analysis
        ``singular_value(direction)`` and ``singular_vector(direction, parameter)``, and
        with ``profile`` ``profile_log_multiplier(profile_point)`` and
        ``profile_chi2(profile_point)``. Attributes: ``warnings``, ``degenerate``, ...
    """
    if profile is not None:
        check_count(profile_points, 3, MAX_PROFILE_POINTS, "--profile-points", "points")
    params = resolve_parameters(model, free)
    if not (np.isfinite(max_factor) and max_factor > 1):
        raise InputError("the bound on the multipliers must be a number > 1",
                         file="--max-factor")
    bound = np.array([np.log(min(max_factor, TE_MAX_FACTOR)) if p.is_te
                      else np.log(max_factor) for p in params])
    given = parse_priors({k: v for k, v in (priors or {}).items()}, params)
    prior = default_priors(model, params, observations["altitude_km"].values)
    prior.update(given)
    problem = _Problem(model, observations, params, prior)
    P = len(params)
    theta0 = np.zeros(P)
    theta, res = _least_squares(problem, theta0, np.ones(P, bool), bound)
    ds_fit, lm_fit, J_data = problem.evaluate(theta)
    J_full = problem.jacobian(theta)
    r_fit = (problem.log_y - lm_fit) / problem.s
    lm_base = problem.W @ np.nan_to_num(log_density(problem.base_ds).ravel())
    r_base = (problem.log_y - lm_base) / problem.s

    # Covariance from the whitened Jacobian with priors; SVD so a null direction shows.
    U, sv, Vt = np.linalg.svd(J_full, full_matrices=False)
    with np.errstate(divide="ignore"):
        inv = np.where(sv > sv.max() * 1e-12, 1.0 / sv ** 2, np.inf) if sv.size else sv
    finite = np.isfinite(inv)
    cov = (Vt[finite].T * inv[finite]) @ Vt[finite]
    if not finite.all():
        # Unconstrained directions: infinite variance along them.
        null = Vt[~finite]
        touched = (np.abs(null) > 1e-8).any(axis=0)
        cov[np.ix_(touched, touched)] = np.inf
    sigma = np.sqrt(np.diag(cov))
    with np.errstate(invalid="ignore", divide="ignore"):
        corr = cov / np.outer(sigma, sigma)
    np.fill_diagonal(corr, 1.0)

    # Identifiability from the data alone.
    _, sd, Vd = np.linalg.svd(J_data, full_matrices=True)
    sd_full = np.zeros(P)
    sd_full[:sd.size] = sd
    smax = sd_full.max() if sd_full.size else 0.0
    warnings = list(problem.notes)
    degenerate = []
    names = [p.name for p in params]
    for k in range(P):
        ratio = sd_full[k] / smax if smax > 0 else 0.0
        if ratio < DEGENERATE_RATIO:
            degenerate.append(_direction_text(Vd[k], names, ratio))
    for i in range(P):
        for j in range(i + 1, P):
            if np.isfinite(corr[i, j]) and abs(corr[i, j]) > CORRELATED:
                warnings.append(f"{names[i]} and {names[j]} are strongly "
                                f"{'correlated' if corr[i, j] > 0 else 'anti-correlated'} "
                                f"(correlation {corr[i, j]:+.3f}): the data constrain "
                                "mainly their combination")
    for i, t in enumerate(theta):
        if abs(t) > bound[i] * (1 - 1e-6):
            limit = (f"Te is bounded to a factor {TE_MAX_FACTOR:g}" if params[i].is_te
                     else "see --max-factor")
            warnings.append(f"{names[i]} stopped at its bound (multiplier {np.exp(t):.3g}): "
                            f"the data push it further ({limit})")
    if not res.success:
        warnings.append(f"the optimiser did not converge: {res.message}")
    for name, lf in prior.items():
        if lf is None and name not in given and name != TE:
            warnings.append(f"{name} has no uncertainty factor f in the reaction list: its "
                            "prior is flat (give --prior ID=F)")
    n_obs = int(problem.use.sum())
    dof = n_obs - P
    if dof <= 0:
        warnings.append(f"{n_obs} observations for {P} parameters: no degrees of freedom "
                        "left, so the priors carry the fit")

    prof = None
    if profile is not None:
        if profile not in names:
            raise InputError(f"--profile {profile}: not a free parameter (free: "
                             f"{', '.join(names)})", file="--profile")
        prof = _profile(problem, theta, names.index(profile), sigma, bound, profile_points)

    obs = observations
    use = problem.use
    alt = np.asarray(problem.altitude)
    out = xr.Dataset(
        {
            "log_multiplier": ("parameter", theta, {
                "units": "1", "long_name": "fitted ln of the rate (or Te) multiplier"}),
            "multiplier": ("parameter", np.exp(theta), {
                "units": "1", "long_name": "fitted multiplier on the rate coefficient (or Te)"}),
            "log_multiplier_sigma": ("parameter", sigma, {
                "units": "1", "long_name": "one-sigma error of ln multiplier (68 % range "
                "multiplier/exp(sigma) to multiplier*exp(sigma))"}),
            "log_covariance": (("parameter", "parameter_b"), cov, {
                "units": "1", "long_name": "covariance of the ln multipliers "
                "(Gauss-Newton, priors included, not rescaled by chi2/dof)"}),
            "correlation": (("parameter", "parameter_b"), corr, {
                "units": "1", "long_name": "correlation of the ln multipliers"}),
            "prior_log_sigma": ("parameter", np.array([np.nan if prior[n] is None
                                                       else prior[n] for n in names]), {
                "units": "1", "long_name": "one-sigma width of the log-normal prior, ln f "
                "(NaN: flat)"}),
            "prior_source": ("parameter", np.array([_prior_source(p, prior, given)
                                                    for p in params], dtype=object), {
                "long_name": "where the prior comes from"}),
            "singular_value": ("direction", sd_full, {
                "units": "1", "long_name": "singular values of the data-only whitened "
                "Jacobian d residual / d ln multiplier"}),
            "singular_vector": (("direction", "parameter"), Vd[:P], {
                "units": "1", "long_name": "right singular vectors (combinations of ln "
                "multipliers), one per direction"}),
            "density_baseline": (("species", "altitude"),
                                 problem.base_ds["density"].transpose("species",
                                                                      "altitude").values,
                                 {"units": "cm-3", "long_name": "number density, baseline"}),
            "density_fitted": (("species", "altitude"),
                               ds_fit["density"].transpose("species", "altitude").values,
                               {"units": "cm-3", "long_name": "number density with the "
                                "fitted multipliers"}),
            "observed": ("observation", obs["density_cm3"].values[use], {
                "units": "cm-3", "long_name": "measured value (ratios dimensionless)"}),
            "observed_sigma": ("observation", obs["sigma_cm3"].values[use], {
                "units": "cm-3", "long_name": "one-sigma error of the measurement"}),
            "model_baseline": ("observation", np.exp(lm_base), {
                "units": "cm-3", "long_name": "baseline model at the observation"}),
            "model_fitted": ("observation", np.exp(lm_fit), {
                "units": "cm-3", "long_name": "fitted model at the observation"}),
            "residual": ("observation", r_fit, {
                "units": "1", "long_name": "(ln observed - ln fitted) / sigma_ln"}),
            "residual_baseline": ("observation", r_base, {
                "units": "1", "long_name": "(ln observed - ln baseline) / sigma_ln"}),
            "chi2": ((), float(np.sum(r_fit ** 2)), {
                "units": "1", "long_name": "chi-square of the data at the fit"}),
            "chi2_baseline": ((), float(np.sum(r_base ** 2)), {
                "units": "1", "long_name": "chi-square of the data for the baseline"}),
            "chi2_prior": ((), float(np.sum((theta[problem.has_prior]
                                             / problem.prior[problem.has_prior]) ** 2)), {
                "units": "1", "long_name": "chi-square of the priors at the fit"}),
            "degrees_of_freedom": ((), dof, {
                "units": "1", "long_name": "observations minus free parameters"}),
        },
        coords={
            "parameter": ("parameter", np.array(names, dtype=object)),
            "parameter_b": ("parameter_b", np.array(names, dtype=object)),
            "parameter_equation": ("parameter", np.array(
                [_equation(problem.base_ds, p) for p in params], dtype=object),
                {"long_name": "what the parameter multiplies"}),
            "direction": ("direction", np.arange(P), {
                "units": "1", "long_name": "index of the singular direction"}),
            "species": ("species", np.array(problem.species, dtype=object)),
            "altitude": ("altitude", alt, ALTITUDE_ATTRS),
            "observation_altitude": ("observation", obs["altitude_km"].values[use],
                                     {"units": "km", "long_name": "altitude of the "
                                      "observation"}),
            "observation_species": ("observation", obs["species"].values[use]),
            "observation_kind": ("observation", obs["kind"].values[use]),
        },
        attrs=dict(problem.base_ds.attrs),
    )
    if "warnings" in out.attrs:
        out.attrs["model_warnings"] = out.attrs.pop("warnings")
    if prof is not None:
        out["profile_log_multiplier"] = ("profile_point", prof[0], {
            "units": "1", "long_name": f"ln multiplier of {profile} held fixed"})
        out["profile_chi2"] = ("profile_point", prof[1], {
            "units": "1", "long_name": "total chi-square (data and priors) minimised over "
            "the other parameters"})
        out.attrs["profile_parameter"] = profile
        lo, hi = _profile_interval(*prof)
        out.attrs["profile_interval_68"] = f"{np.exp(lo):.4g} to {np.exp(hi):.4g}"
    out.attrs.update({
        "analysis": "fit: least squares on ln multipliers, exact sensitivities as Jacobian",
        "observations": str(obs.attrs.get("source", "")),
        "free": "; ".join(names),
        "priors": "; ".join(f"{n}: " + ("flat" if prior[n] is None
                                        else f"f = {np.exp(prior[n]):.3g}") for n in names),
        "max_factor": float(max_factor),
        "electrons": model.scenario.solve.electrons,
        "optimizer": f"scipy.optimize.least_squares trf, {res.nfev} evaluations, "
                     f"status {res.status}",
        "converged": int(bool(res.success)),
        "degenerate": "\n".join(degenerate),
        "warnings": "\n".join(warnings),
    })
    out.attrs["bands_fitted"] = _bands_text(obs, use, r_fit, lm_fit)
    return out


def _equation(ds, par):
    """Readable text of what a parameter multiplies (the reaction's equation)."""
    if par.is_te:
        return "electron temperature Te (every Te-dependent rate)"
    eq = ds["equation"].values if "equation" in ds.coords or "equation" in ds else None
    text = str(eq[par.indices[0]]) if eq is not None else ""
    if len(par.indices) > 1:
        import re
        text = re.sub(r"\(v=\d+\)", "(v)", text) + f" (all {len(par.indices)} levels)"
    return text


def observations_of_fit(ds):
    """The observations a fit dataset used, in the form of :func:`ionochem.load_observations`
    (without line numbers)."""
    return xr.Dataset({
        "altitude_km": ("observation", ds["observation_altitude"].values),
        "species": ("observation", ds["observation_species"].values.astype(object)),
        "kind": ("observation", ds["observation_kind"].values.astype(object)),
        "density_cm3": ("observation", ds["observed"].values),
        "sigma_cm3": ("observation", ds["observed_sigma"].values),
    }, attrs={"source": ds.attrs.get("observations", "")})


def _bands_text(obs, use, r, lm):
    sub = obs.isel(observation=np.flatnonzero(use))
    return "; ".join(f"{b.species} {b.band}: chi2 {b.chi2:.2f} ({b.points})"
                     for b in band_rows(sub, r, lm))


def _direction_text(v, names, ratio):
    v = v / np.max(np.abs(v))
    terms = [f"{c:+.2f} ln m({n})" for c, n in zip(v, names) if abs(c) > 0.05]
    involved = [n for c, n in zip(v, names) if abs(c) > 0.05]
    what = (f"the data cannot separate {', '.join(involved)}" if len(involved) > 1
            else f"the data do not constrain {involved[0]}")
    return (f"{what}: the combination {' '.join(terms)} is not constrained (relative "
            f"singular value {ratio:.1e})")


def _profile(problem, theta, p, sigma, bound, points):
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
            t, _ = _least_squares(problem, t0, free, bound)
        else:
            t = t0
        chi2[i] = float(np.sum(problem.residuals(t) ** 2))
        start = t
    return grid, chi2


def _profile_interval(grid, chi2):
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
