"""Global sensitivity of the column to its most uncertain reactions: Sobol indices and
Morris screening, with SALib, on the batched solver of :mod:`ionochem.analysis.uncertainty`.

Factors
-------
The inputs are the same standard normals ε_j as in the Monte Carlo (ln k_j = ln k_j +
ε_j ln f_j, one draw per reaction shared by every altitude row), for the ``top`` reactions with the
largest first-order variance share S_ij² ln² f_j / Σ (its mean over the chosen species
and altitudes), plus any varied environment factor (``euv``, ``Te``, a fixed neutral).
Every other rate stays at its central value.

- Sobol (``SALib.sample.sobol`` with ``dists = "norm"``, bounds (mean 0, sd 1): the Sobol'
  sequence is mapped to ε through the normal quantile function; ``SALib.analyze.sobol``
  without second-order terms): first-order and total indices S1, ST of ln n for each
  species at each chosen altitude, with their 95 % bootstrap confidence half-widths. N base
  samples cost N (M + 2) solves of the column. For ln n linear in the ε's S1 = ST =
  S_ij² ln² f_j / Σ exactly.
- Morris (``SALib.sample.morris``, ``SALib.analyze.morris``, 4 levels): ε_j on the uniform
  grid over −2 … +2 (the ±2σ range; elementary effects need a bounded range). μ*, μ and σ
  are reported **per unit of ε** (SALib's effects divided by the range 4), so for ln n
  linear in ε, μ*_j = |∂ln n/∂ε_j| = |S_ij| ln f_j and σ_j = 0. N trajectories cost
  N (M + 1) solves.

The solves run through :func:`ionochem.analysis.uncertainty.run_ensemble`: batched,
serial or on dask.distributed, resumable from a sample store. This module must not read
input files.
"""

from __future__ import annotations

import warnings

import numpy as np
import xarray as xr

from ionochem.analysis.sensitivity import sensitivity
from ionochem.analysis.uncertainty import (
    SampleKernel,
    linear_variance_shares,
    manifest_for,
    open_store,
    run_ensemble,
    species_samples,
)
from ionochem.errors import InputError
from ionochem.io.dataset import ALTITUDE_ATTRS, provenance

MAIN_SPECIES = ("N2+", "O2+", "NO+", "O+(total)", "O+", "e")
DEFAULT_ALTITUDES_KM = (100.0, 120.0, 150.0, 200.0, 250.0, 300.0, 400.0)
MORRIS_RANGE = (-2.0, 2.0)
MORRIS_LEVELS = 4
METHODS = ("sobol", "morris")


def default_species(names):
    """N2+, O2+, NO+, O+(total) (else O+), e: those among ``names``."""
    out = [s for s in MAIN_SPECIES if s in names]
    if "O+(total)" in out and "O+" in out:
        out.remove("O+")
    return out


def nearest_rows(altitude_km, wanted_km=None):
    """Indices of the altitude rows nearest to ``wanted_km`` (default a standard set inside
    the grid; the bottom, middle and top row if none falls inside)."""
    alt = np.asarray(altitude_km, float)
    if wanted_km is None:
        wanted_km = [a for a in DEFAULT_ALTITUDES_KM if alt.min() <= a <= alt.max()]
        if not wanted_km:
            wanted_km = [alt[0], alt[alt.size // 2], alt[-1]]
    out = []
    for a in wanted_km:
        a = float(a)
        if not (alt.min() - 1e-9 <= a <= alt.max() + 1e-9):
            raise InputError(f"altitude {a:g} km is outside the grid "
                             f"({alt.min():g}..{alt.max():g} km)", file="altitudes_km")
        i = int(np.argmin(np.abs(alt - a)))
        if i not in out:
            out.append(i)
    return sorted(out)


def select_top_reactions(linear_share, species_idx, row_idx, top, candidates=None):
    """The ``top`` reactions with the largest mean first-order variance share.

    Parameters
    ----------
    linear_share : ndarray (species, R, A)
        From :func:`~ionochem.analysis.uncertainty.linear_variance_shares`.
    species_idx, row_idx : sequence of int
        The species and altitude rows that count.
    top : int
    candidates : sequence of int, optional
        Reactions allowed (the varied ones).

    Returns
    -------
    list of int
        Reaction indices, largest share first.
    """
    sub = np.nan_to_num(linear_share[np.ix_(list(species_idx), np.arange(linear_share.shape[1]),
                                            list(row_idx))])
    # The mean share over the chosen species and altitude rows: a reaction that carries a large part
    # of the variance over a wide height range outranks one that dominates a single altitude.
    score = sub.mean(axis=(0, 2))
    allowed = np.arange(score.size) if candidates is None else np.asarray(candidates, int)
    allowed = allowed[score[allowed] > 0]
    order = allowed[np.argsort(-score[allowed], kind="stable")]
    return [int(j) for j in order[:int(top)]]


def _problem(names, method, groups=None):
    M = len(names)
    if method == "sobol":
        out = {"num_vars": M, "names": list(names), "bounds": [[0.0, 1.0]] * M,
               "dists": ["norm"] * M}
    else:
        out = {"num_vars": M, "names": list(names), "bounds": [list(MORRIS_RANGE)] * M}
    if groups is not None and len(set(groups)) < M:
        out["groups"] = list(groups)
    return out


def design(names, samples, method, seed, groups=None):
    """The SALib sample matrix of ε (runs, M) for ``method``.

    ``groups`` (one name per factor) makes SALib treat the factors of one name as one group
    (Sobol: the group's indices; Morris: the group moved as one); the indices then come per
    group, in order of first appearance.
    """
    problem = _problem(names, method, groups)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        if method == "sobol":
            from SALib.sample import sobol
            X = sobol.sample(problem, int(samples), calc_second_order=False, scramble=True,
                             seed=int(seed))
        else:
            from SALib.sample import morris
            X = morris.sample(problem, int(samples), num_levels=MORRIS_LEVELS,
                              seed=int(seed))
    return problem, np.asarray(X, float)


def global_sensitivity(model, samples, *, method="sobol", top=10, seed=0, altitudes_km=None,
                       species=None, environment=None, batch=None, workers=1,
                       scheduler=None, output=None, resume=False, progress=False,
                       on_batch=None, num_resamples=100, member_correlation=1.0,
                       members=False):
    """Sobol indices or Morris screening of ln n for the most uncertain units of analysis.

    A factor is a unit (a reaction, a whole family, a tie): with ``member_correlation`` 1
    one normal moves all its members; below 1 the unit's shared normal and its members' own
    normals form one SALib group (Sobol and Morris indices per group). With ``members`` the
    reactions are the factors, drawn independently (needs ``member_correlation`` 0).

    Parameters
    ----------
    model : ionochem.Model
    samples : int
        Sobol: base sample size N (N (M + 2) solves; a power of 2 keeps the Sobol'
        sequence balanced). Morris: number of trajectories (N (M + 1) solves).
    method : {"sobol", "morris"}
    top : int
        Number M of units (reactions with ``members``) taken as factors (default 10).
    seed : int
        Seed of the SALib design and of its bootstrap.
    altitudes_km : sequence of float, optional
        Altitudes analysed (nearest altitude rows; default a standard set inside the grid).
    species : sequence of str, optional
        Species analysed (default N2+, O2+, NO+, O+(total) or O+, e).
    environment : dict, optional
        Varied environment factors (see :class:`~ionochem.analysis.uncertainty.SampleKernel`);
        each becomes one more factor.
    batch, workers, scheduler, output, resume, progress, on_batch
        As for :func:`ionochem.analysis.uncertainty.monte_carlo`.
    num_resamples : int
        Bootstrap resamples of SALib's confidence intervals.

    Returns
    -------
    xarray.Dataset
        dims (species, factor, altitude): ``S1``, ``S1_conf``, ``ST``, ``ST_conf`` (sobol)
        or ``mu_star``, ``mu_star_conf``, ``mu``, ``sigma`` (morris), and
        ``variance_share_linear`` of the same factors for comparison.
    """
    samples = _check_arguments(method, samples, top, members, member_correlation)
    kernel = SampleKernel(model, environment, member_correlation)
    central = model.solve()
    names = list(central["species"].values)
    species, sp_idx = _species_of(species, names)
    lv_idx = nearest_rows(model.altitude_km, altitudes_km)
    factor_names, columns, groups, lin_sel = _choose_factors(
        model, kernel, central, names, sp_idx, lv_idx, top, members)
    column_names = [kernel.factor_names[c] for c in columns]
    problem, X = design(column_names, samples, method, seed, groups)
    runs = X.shape[0]
    Z = np.zeros((runs, kernel.width))
    Z[:, columns] = X
    store = open_store(output, manifest_for(model, kernel, method, samples, seed,
                                            factors=factor_names, runs=runs),
                       resume=resume)
    z, n = _solve_design(model, kernel, Z, store, batch=batch, workers=workers,
                         scheduler=scheduler, progress=progress, on_batch=on_batch)
    dens, _, _ = species_samples(model, kernel, z, n)                 # (runs, A, Nsp)
    sub = dens[:, lv_idx][:, :, sp_idx]                               # (runs, L, Ns)
    with np.errstate(divide="ignore", invalid="ignore"):
        Y = np.where(sub > 0, np.log(np.where(sub > 0, sub, 1.0)), np.nan)
    indices = _indices(problem, X, Y, method, seed, num_resamples, len(factor_names))
    ds = _global_dataset(model, kernel, central, indices, lin_sel, species, sp_idx, lv_idx,
                         factor_names)
    ds.attrs.update({"method": method, "samples": samples, "model_runs": int(runs),
                     "seed": int(seed), "top": int(top),
                     "member_correlation": float(kernel.member_correlation),
                     "factor_kind": "reaction" if members else "unit of analysis",
                     "factor_columns": ", ".join(f"{n} ({g})" for n, g in
                                                 zip(column_names, groups))})
    if method == "morris":
        ds.attrs["morris_design"] = (f"{MORRIS_LEVELS} levels of eps on the uniform grid "
                                     f"{MORRIS_RANGE[0]:g}..{MORRIS_RANGE[1]:g}; effects "
                                     "divided by the range, i.e. per unit eps")
    return ds


def _solve_design(model, kernel, Z, store, **ensemble):
    """Solve every run of the design ``Z`` (runs, factor columns) as one ensemble, stored
    in ``store`` (closed afterwards) when there is one."""
    def rows(a, b):
        return Z[a:b]

    try:
        return run_ensemble(model, kernel, rows, Z.shape[0], store=store, **ensemble)
    finally:
        if store is not None:
            store.close()


def _species_of(species, names):
    """The species asked for (default the main ones) and their indices in ``names``."""
    species = list(species) if species else default_species(names)
    unknown = [s for s in species if s not in names]
    if unknown or not species:
        raise InputError(f"unknown species {', '.join(unknown) or '(none)'}; the column has "
                         f"{', '.join(names)}", file="species")
    return species, [names.index(s) for s in species]


def _check_arguments(method, samples, top, members, member_correlation):
    """Refuse bad arguments before any solve; returns ``samples`` as an int."""
    if method not in METHODS:
        raise InputError(f"unknown method {method!r} (sobol or morris)", file="method")
    samples = int(samples)
    if samples < 2:
        raise InputError(f"must be at least 2, not {samples}", file="samples")
    if int(top) < 1:
        raise InputError(f"must be at least 1, not {top}", file="top")
    if members and member_correlation != 0:
        raise InputError("ranking the members of a unit apart needs independent members: "
                         "give `member_correlation` 0", file="members")
    return samples


def _choose_factors(model, kernel, central, names, sp_idx, lv_idx, top, members=False):
    """The ``top`` units (reactions with ``members``) by first-order variance share, plus
    the varied environment.

    Returns the factor names, the columns of the draws that SALib varies with the group
    (factor) of each, and the first-order shares (species, factor, altitude) of the factors at
    the chosen altitude rows.
    """
    sens = sensitivity(model, central)
    lin_r, lin_e = linear_variance_shares(model, kernel, sens, units=not members)
    sens_names = list(sens["species"].values)
    order = [sens_names.index(s) for s in names]
    lin_r, lin_e = lin_r[order], lin_e[order]
    env_cols = kernel.environment_columns()
    sampled = kernel.sampled_columns()
    if members:
        chosen = select_top_reactions(lin_r, sp_idx, lv_idx, top, kernel.varied_reactions())
        factor_names = [kernel.reactions[j] for j in chosen]
        columns = list(chosen)
        groups = list(factor_names)
    else:
        live_units = sorted({u for _, u in sampled})
        chosen = select_top_reactions(lin_r, sp_idx, lv_idx, top, live_units)
        factor_names = [kernel.unit_names[u] for u in chosen]
        columns, groups = [], []
        for u in chosen:
            for c, owner in sampled:
                if owner == u:
                    columns.append(c)
                    groups.append(kernel.unit_names[u])
    factor_names += list(env_cols)
    columns += list(env_cols.values())
    groups += list(env_cols)
    if not columns:
        raise InputError("no uncertain reaction or environment factor to analyse (every f "
                         "is 1)", file="method")
    lin_all = np.concatenate([lin_r[:, chosen], lin_e], axis=1)       # (Nsp, F, A)
    return factor_names, columns, groups, lin_all[sp_idx][:, :, lv_idx]


def _indices(problem, X, Y, method, seed, num_resamples, n_factors):
    """SALib indices of ln n, {key: (species, factor, altitude)}; NaN where ln n is flat."""
    keys = (("S1", "S1_conf", "ST", "ST_conf") if method == "sobol"
            else ("mu_star", "mu_star_conf", "mu", "sigma"))
    L, Ns = Y.shape[1], Y.shape[2]
    out = {key: np.full((Ns, n_factors, L), np.nan) for key in keys}
    for li in range(L):
        for si in range(Ns):
            y = Y[:, li, si]
            if not np.all(np.isfinite(y)) or np.ptp(y) <= 1e-14 * max(abs(y).max(), 1.0):
                continue
            res = _analyze(problem, X, y, method, seed, num_resamples)
            for key in keys:
                out[key][si, :, li] = np.asarray(res[key], float)
    if method == "morris":
        width = MORRIS_RANGE[1] - MORRIS_RANGE[0]
        for key in keys:
            out[key] = out[key] / width
    return out


LONG_NAMES = {
    "S1": "first-order Sobol index of ln density",
    "S1_conf": "95 % bootstrap half-width of S1",
    "ST": "total Sobol index of ln density",
    "ST_conf": "95 % bootstrap half-width of ST",
    "mu_star": "Morris mean absolute elementary effect of ln density per unit eps",
    "mu_star_conf": "95 % bootstrap half-width of mu_star",
    "mu": "Morris mean elementary effect of ln density per unit eps",
    "sigma": "standard deviation of the Morris elementary effects per unit eps",
}


def _global_dataset(model, kernel, central, indices, lin_sel, species, sp_idx, lv_idx,
                    factor_names):
    """The result dataset of :func:`global_sensitivity` (without the method attributes)."""
    data = {key: (("species", "factor", "altitude"), val,
                  {"units": "1", "long_name": LONG_NAMES[key]})
            for key, val in indices.items()}
    data["variance_share_linear"] = (("species", "factor", "altitude"), lin_sel,
                                     {"units": "1", "long_name": "first-order share "
                                      "S_ij^2 ln^2 f_j / sum over all factors, from the "
                                      "exact local sensitivities"})
    data["density_central"] = (("species", "altitude"),
                               central["density"].values[sp_idx][:, lv_idx],
                               {"units": "cm-3", "long_name": "number density with every "
                                "rate at its central value"})
    ds = xr.Dataset(
        data,
        coords={"species": ("species", np.array(species, dtype=object)),
                "factor": ("factor", np.array(factor_names, dtype=object)),
                "altitude": ("altitude", model.altitude_km[lv_idx], ALTITUDE_ATTRS)},
        attrs=provenance(model))
    ds.attrs.update({
        "factors": ", ".join(factor_names),
        "factor_definition": "a unit of analysis (or a reaction, members apart): its "
                             "members' ln k_j = ln k_j + eps_j ln f_j(altitude) with eps_j = "
                             "sqrt(rho) z_unit + sqrt(1 - rho) z_j, z standard normals shared "
                             "by every altitude; the z of one factor form one SALib group; "
                             "other rates at their central values",
        "environment_spreads": ", ".join(f"{k}={v:g}" for k, v in kernel.environment.items()),
    })
    return ds


def _analyze(problem, X, y, method, seed, num_resamples):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        if method == "sobol":
            from SALib.analyze import sobol
            return sobol.analyze(problem, y, calc_second_order=False,
                                 num_resamples=num_resamples, conf_level=0.95, seed=int(seed))
        from SALib.analyze import morris
        return morris.analyze(problem, X, y, num_resamples=num_resamples, conf_level=0.95,
                              num_levels=MORRIS_LEVELS, seed=int(seed))
