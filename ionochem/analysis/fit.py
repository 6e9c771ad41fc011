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

Modules: this one holds the parameters, the priors and the summary of a fit;
:mod:`ionochem.analysis.fit_problem` the forward model (trials, residuals, Jacobian), the
models on changed environments and the least-squares and profile drivers. A trial that only
scales rates is the base model with scaled rate coefficients (no model rebuilt; only the
fitted parameters' sensitivities computed); for ``Te`` and the electron constraint a model
is rebuilt on a copy of its environment.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import xarray as xr

from ionochem.analysis.bounds import MAX_PROFILE_POINTS, check_count
from ionochem.analysis.fit_problem import (  # noqa: F401 (re-exported)
    _Problem,
    electron_constrained_model,
    least_squares_fit,
    model_on,
    profile_interval,
    profile_likelihood,
)
from ionochem.analysis.misfit import band_rows, log_density
from ionochem.errors import InputError
from ionochem.io.dataset import ALTITUDE_ATTRS

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
    params, bound = _checked(model, free, max_factor, profile, profile_points)
    names = [p.name for p in params]
    given = parse_priors({k: v for k, v in (priors or {}).items()}, params)
    prior = default_priors(model, params, observations["altitude_km"].values)
    prior.update(given)
    problem = _Problem(model, observations, params, prior)
    theta, res = least_squares_fit(problem, np.zeros(len(params)), np.ones(len(params), bool),
                                   bound)
    dens_fit, lm_fit, J_data = problem.evaluate(theta)
    cov, sigma, corr = _covariance(problem.jacobian(theta))
    sd_full, Vd, degenerate = _identifiability(J_data, names)
    warnings, dof = _fit_warnings(problem, params, theta, bound, corr, res, prior, given)
    out = _fit_dataset(problem, observations, params, theta, prior, given,
                       dict(cov=cov, sigma=sigma, corr=corr, sd=sd_full, Vd=Vd,
                            dens_fit=dens_fit, lm_fit=lm_fit, dof=dof))
    if profile is not None:
        _add_profile(out, problem, theta, names.index(profile), profile, sigma, bound,
                     profile_points)
    out.attrs.update({
        "analysis": "fit: least squares on ln multipliers, exact sensitivities as Jacobian",
        "observations": str(observations.attrs.get("source", "")),
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
    r_fit = (problem.log_y - lm_fit) / problem.s
    out.attrs["bands_fitted"] = _bands_text(observations, problem.use, r_fit, lm_fit)
    return out


def _checked(model, free, max_factor, profile, profile_points):
    """The parameters and their bounds (ln); bad options refused before any solve."""
    if profile is not None:
        check_count(profile_points, 3, MAX_PROFILE_POINTS, "--profile-points", "points")
    params = resolve_parameters(model, free)
    if not (np.isfinite(max_factor) and max_factor > 1):
        raise InputError("the bound on the multipliers must be a number > 1",
                         file="--max-factor")
    names = [p.name for p in params]
    if profile is not None and profile not in names:
        raise InputError(f"--profile {profile}: not a free parameter (free: "
                         f"{', '.join(names)})", file="--profile")
    bound = np.array([np.log(min(max_factor, TE_MAX_FACTOR)) if p.is_te
                      else np.log(max_factor) for p in params])
    return params, bound


def _add_profile(out, problem, theta, p, name, sigma, bound, points):
    """The profile likelihood of parameter ``p`` into ``out`` (variables and interval)."""
    prof = profile_likelihood(problem, theta, p, sigma, bound, points)
    out["profile_log_multiplier"] = ("profile_point", prof[0], {
        "units": "1", "long_name": f"ln multiplier of {name} held fixed"})
    out["profile_chi2"] = ("profile_point", prof[1], {
        "units": "1", "long_name": "total chi-square (data and priors) minimised over "
        "the other parameters"})
    out.attrs["profile_parameter"] = name
    lo, hi = profile_interval(*prof)
    out.attrs["profile_interval_68"] = f"{np.exp(lo):.4g} to {np.exp(hi):.4g}"


def _covariance(J_full):
    """Covariance (Jᵀ J)⁻¹ of θ from the whitened Jacobian with priors (by SVD, so a null
    direction shows as infinite variance), the one-sigma errors and the correlations."""
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
    return cov, sigma, corr


def _identifiability(J_data, names):
    """Singular values (P,) and right singular vectors of the data-only Jacobian, and the
    degenerate directions in words."""
    P = len(names)
    _, sd, Vd = np.linalg.svd(J_data, full_matrices=True)
    sd_full = np.zeros(P)
    sd_full[:sd.size] = sd
    smax = sd_full.max() if sd_full.size else 0.0
    degenerate = []
    for k in range(P):
        ratio = sd_full[k] / smax if smax > 0 else 0.0
        if ratio < DEGENERATE_RATIO:
            degenerate.append(_direction_text(Vd[k], names, ratio))
    return sd_full, Vd, degenerate


def _fit_warnings(problem, params, theta, bound, corr, res, prior, given):
    """The fit's warnings (correlated pairs, bounds reached, convergence, flat priors, no
    degrees of freedom) and its degrees of freedom."""
    names = [p.name for p in params]
    P = len(params)
    warnings = list(problem.notes)
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
    return warnings, dof


def _fit_dataset(problem, obs, params, theta, prior, given, f):
    """The fit's dataset (without the profile and the summary attributes); ``f`` holds
    the covariance, singular vectors and fitted densities."""
    names = [p.name for p in params]
    P = len(params)
    data = _parameter_variables(problem, params, theta, prior, given, f)
    data.update(_observation_variables(problem, obs, theta, f))
    use = problem.use
    coords = {
        "parameter": ("parameter", np.array(names, dtype=object)),
        "parameter_b": ("parameter_b", np.array(names, dtype=object)),
        "parameter_equation": ("parameter", np.array(
            [_equation(problem.base_ds, p) for p in params], dtype=object),
            {"long_name": "what the parameter multiplies"}),
        "direction": ("direction", np.arange(P), {
            "units": "1", "long_name": "index of the singular direction"}),
        "species": ("species", np.array(problem.species, dtype=object)),
        "altitude": ("altitude", np.asarray(problem.altitude), ALTITUDE_ATTRS),
        "observation_altitude": ("observation", obs["altitude_km"].values[use],
                                 {"units": "km", "long_name": "altitude of the "
                                  "observation"}),
        "observation_species": ("observation", obs["species"].values[use]),
        "observation_kind": ("observation", obs["kind"].values[use]),
    }
    out = xr.Dataset(data, coords=coords, attrs=dict(problem.base_ds.attrs))
    if "warnings" in out.attrs:
        out.attrs["model_warnings"] = out.attrs.pop("warnings")
    return out


def _parameter_variables(problem, params, theta, prior, given, f):
    """Variables along ``parameter`` and ``direction``."""
    names = [p.name for p in params]
    return {
        "log_multiplier": ("parameter", theta, {
            "units": "1", "long_name": "fitted ln of the rate (or Te) multiplier"}),
        "multiplier": ("parameter", np.exp(theta), {
            "units": "1", "long_name": "fitted multiplier on the rate coefficient (or Te)"}),
        "log_multiplier_sigma": ("parameter", f["sigma"], {
            "units": "1", "long_name": "one-sigma error of ln multiplier (68 % range "
            "multiplier/exp(sigma) to multiplier*exp(sigma))"}),
        "log_covariance": (("parameter", "parameter_b"), f["cov"], {
            "units": "1", "long_name": "covariance of the ln multipliers "
            "(Gauss-Newton, priors included, not rescaled by chi2/dof)"}),
        "correlation": (("parameter", "parameter_b"), f["corr"], {
            "units": "1", "long_name": "correlation of the ln multipliers"}),
        "prior_log_sigma": ("parameter", np.array([np.nan if prior[n] is None
                                                   else prior[n] for n in names]), {
            "units": "1", "long_name": "one-sigma width of the log-normal prior, ln f "
            "(NaN: flat)"}),
        "prior_source": ("parameter", np.array([_prior_source(p, prior, given)
                                                for p in params], dtype=object), {
            "long_name": "where the prior comes from"}),
        "singular_value": ("direction", f["sd"], {
            "units": "1", "long_name": "singular values of the data-only whitened "
            "Jacobian d residual / d ln multiplier"}),
        "singular_vector": (("direction", "parameter"), f["Vd"][:len(params)], {
            "units": "1", "long_name": "right singular vectors (combinations of ln "
            "multipliers), one per direction"}),
    }


def _observation_variables(problem, obs, theta, f):
    """Densities, per-observation variables and the χ² scalars."""
    use = problem.use
    lm_fit = f["lm_fit"]
    r_fit = (problem.log_y - lm_fit) / problem.s
    lm_base = problem.W @ np.nan_to_num(log_density(problem.base_ds).ravel())
    r_base = (problem.log_y - lm_base) / problem.s
    base = problem.base_ds["density"].transpose("species", "altitude").values
    return {
        "density_baseline": (("species", "altitude"), base,
                             {"units": "cm-3", "long_name": "number density, baseline"}),
        "density_fitted": (("species", "altitude"), f["dens_fit"],
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
        "degrees_of_freedom": ((), f["dof"], {
            "units": "1", "long_name": "observations minus free parameters"}),
    }


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
