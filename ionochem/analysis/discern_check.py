"""Monte Carlo check of ``discern``'s linear separation at one condition.

Both models are sampled with the same log-normal factors the linear propagation assumes
(:class:`~ionochem.analysis.sampling.SampleKernel`: one draw per unit of analysis shared by
every level, members correlated with ρ; the changed reactions' units held at their central
values; ``EUV``, ``Te`` and the fixed neutrals ``n(X)`` varied as whole-column multipliers),
each sample solved to steady state. Then, with the sample mean m and variance v of ln y,

    separation_mc = |m_changed − m_baseline| / sqrt(½ (v_baseline + v_changed) + var_meas),

the sampled counterpart of :func:`ionochem.analysis.discern.separate` (the same averaged
covariance and measurement term). Its sampling error is a bootstrap over the samples.
``Ti`` and ``Tn`` are not sampled (the sampling varies Te only): where they carry weight the
two differ by their share, which the result names.

This module calls models; it reads no files.
"""

from __future__ import annotations

import numpy as np

from ionochem.analysis.discern import separate
from ionochem.analysis.discern_sweep import no_fill_on_coordinates, point_models
from ionochem.analysis.ensemble import run_ensemble
from ionochem.analysis.sampling import ENV_EUV, ENV_TE, SampleKernel, draw_normals
from ionochem.analysis.sweep import point_scenario
from ionochem.analysis.sweep_axes import point_values
from ionochem.analysis.uncertainty import species_samples

#: Bootstrap resamples of the sampling error *(common practice: 200 give the standard error
#: to about 5 %)*.
BOOTSTRAP = 200


def kernel_environment(model, spreads):
    """The SampleKernel's environment factors from discern's spreads, and the names that
    the sampling cannot vary (Ti, Tn, a neutral that is not fixed here)."""
    mech = model.mechanism
    allowed = [g for g in mech.given if g in mech.fixed]
    env, skipped = {}, []
    for name, f in spreads.items():
        if name == "EUV":
            env[ENV_EUV] = f
        elif name == "Te":
            env[ENV_TE] = f
        elif name.startswith("n(") and name[2:-1] in allowed:
            env[name[2:-1]] = f
        else:
            skipped.append(name)
    photo = any(e.variables & {"photo", "photoelectron"} for e in model.rate_expressions)
    if ENV_EUV in env and not photo:
        env.pop(ENV_EUV)
    return env, skipped


def log_observable_samples(model, observables, uncertain, exclude, samples, seed):
    """ln y of every sample: (N, O, A), NaN where a density is zero."""
    env, skipped = kernel_environment(model, uncertain.spreads)
    kernel = SampleKernel(model, env, uncertain.member_correlation)
    held = [j for j, r in enumerate(model.reactions) if r in exclude]
    umap_held = {int(kernel.unit_index[j]) for j in held}
    held = [j for j in range(len(model.reactions)) if int(kernel.unit_index[j]) in umap_held]
    kernel.sigma_low[:, held] = 0.0
    kernel.sigma_high[:, held] = 0.0
    z, n = run_ensemble(model, kernel, lambda a, b: draw_normals(seed, a, b, kernel.width),
                        samples)
    dens, names, _ = species_samples(model, kernel, z, n)     # (N, A, species)
    out = []
    with np.errstate(divide="ignore", invalid="ignore"):
        lnd = np.where(dens > 0, np.log(np.where(dens > 0, dens, 1.0)), np.nan)
    for ob in observables:
        y = lnd[:, :, names.index(ob.numerator)]
        if ob.denominator is not None:
            y = y - lnd[:, :, names.index(ob.denominator)]
        out.append(y)
    return np.stack(out, axis=1), skipped


def monte_carlo_check(baseline, changed, observables, uncertain, point, samples, *, seed=0):
    """Sampled separation at one condition beside the linear one.

    Parameters
    ----------
    baseline, changed : ionochem.Model
    observables : list of Observable
    uncertain : Uncertain
    point : PointResult
        The linear result at this condition (its measurement variance and excluded set).
    samples : int
        Samples per model (≥ 20).
    seed : int

    Returns
    -------
    dict
        ``separation`` (O, A) sampled, ``stderr`` (O, A) its bootstrap standard error,
        ``separation_linear`` (O, A), ``not_sampled`` (environment factors the sampling
        cannot vary), ``samples``.
    """
    exclude = set(point.excluded)
    yb, skip = log_observable_samples(baseline, observables, uncertain, exclude, samples, seed)
    yc, _ = log_observable_samples(changed, observables, uncertain, exclude, samples,
                                   seed + 1)
    sep = _separation(yb, yc, point.var_measurement)
    rng = np.random.default_rng(seed)
    boots = np.empty((BOOTSTRAP,) + sep.shape)
    N = yb.shape[0]
    for b in range(BOOTSTRAP):
        i, k = rng.integers(0, N, N), rng.integers(0, N, N)
        boots[b] = _separation(yb[i], yc[k], point.var_measurement)
    return {"separation": sep, "stderr": np.std(boots, axis=0, ddof=1),
            "separation_linear": point.separation, "not_sampled": skip,
            "samples": int(samples)}


def _separation(yb, yc, var_meas):
    with np.errstate(divide="ignore", invalid="ignore"):
        d = np.mean(yc, axis=0) - np.mean(yb, axis=0)
        v = 0.5 * (np.var(yb, axis=0, ddof=1) + np.var(yc, axis=0, ddof=1))
        return np.where(d == 0, 0.0, np.abs(d) / np.sqrt(v + var_meas))


def add_checks(ds, spec, points, make_changed, observables, errors, uncertain, samples, *,
               seed=0, electrons_given=False):
    """Run :func:`monte_carlo_check` at sweep points ``points`` (indices) and add
    ``separation_montecarlo``, ``separation_montecarlo_stderr`` and
    ``separation_check_linear`` (check_point, observable, altitude) to ``ds``."""
    mc, se, lin, skipped = [], [], [], set()
    for i in points:
        values = point_values(spec.axes, i)
        base, changed = point_models(point_scenario(spec, values), spec.reaction_list,
                                     make_changed, electrons_given)
        point = separate(base, changed, observables, errors, uncertain)
        out = monte_carlo_check(base, changed, observables, uncertain, point, samples,
                                seed=seed)
        mc.append(out["separation"])
        se.append(out["stderr"])
        lin.append(out["separation_linear"])
        skipped.update(out["not_sampled"])
    dims = ("check_point", "observable", "altitude")
    one = {"units": "1"}
    ds["separation_montecarlo"] = (dims, np.array(mc), {**one, "long_name": "separation "
                                   "from Monte Carlo samples of both models (sample mean "
                                   "and variance of ln y)"})
    ds["separation_montecarlo_stderr"] = (dims, np.array(se), {**one, "long_name":
                                          "bootstrap standard error of "
                                          "separation_montecarlo"})
    ds["separation_check_linear"] = (dims, np.array(lin), {**one, "long_name": "linear "
                                     "separation at the check point"})
    ds = ds.assign_coords(check_point=("check_point", np.array(points, int),
                                       {"units": "1", "long_name": "sweep point index of "
                                        "the check (C order, first swept dimension "
                                        "outermost)"}))
    for a in spec.axes:
        attrs = {k: v for k, v in ds[a.name].attrs.items() if k == "units"}
        ds.coords[f"check_{a.name}"] = ("check_point", np.array(
            [point_values(spec.axes, i)[a.key] for i in points]),
            {**attrs, "long_name": f"{a.key} at the check point"})
    no_fill_on_coordinates(ds)
    ds.attrs["montecarlo_samples"] = int(samples)
    ds.attrs["montecarlo_seed"] = int(seed)
    ds.attrs["montecarlo_not_sampled"] = ", ".join(sorted(skipped))
    return ds
