"""Monte Carlo over the uncertainties of the rate coefficients (and, optionally, of the
environment), solved in vectorised batches, serially or on dask.distributed, resumable.

Sampling
--------
Every reaction j has a one-sigma multiplicative factor f_j (the reaction list's ``f``,
evaluated at each level's temperature: ``Model.uncertainty_factors()``). Sample s sets

    ln k_j(z, s) = ln k_j(z) + ε_js ln f_j(z),      ε_js ~ N(0, 1),

with **one draw per reaction per sample, shared by every level z**. A rate coefficient's
error is systematic: one laboratory value (or one evaluation) is used at every height, so
if it is 30 % high at 150 km it is 30 % high at 250 km too. Independent draws per level
would average out in column quantities (the column content, the peak height) and
understate their spread; they would also make every profile jagged.

A ``table`` rate with ``_low``/``_high`` band columns (``Model.rate_bands()``) is sampled
between its band instead of with ``f``. The band is read as the **one-sigma (68 %)
range**, the same meaning the reaction-list format gives ``f`` (k/f .. k·f is the 68 %
range, docs/design.md §5): ln k = ln k_mid + ε σ with σ = ln(high/k_mid) for ε > 0 and
σ = ln(k_mid/low) for ε < 0 (a two-piece log-normal whose median is the tabulated value and
whose 16 % and 84 % points are the band edges, so an asymmetric band stays asymmetric).
Its symmetric equivalent (ln high − ln low)/2 is what the first-order variance uses.

Environment factors (``environment={"euv": 1.2, "O": 1.15, "Te": 1.1}``), each a one-sigma
multiplicative factor of a log-normal with one draw per sample:

- ``euv`` scales together the rate coefficients of every reaction whose rate law reads
  ``photo`` or ``photoelectron`` (the EUV flux drives both). Prescribed production tables are
  not scaled.
- a fixed neutral (``O``, ``N2``, …) scales that species' density in the chemistry (the
  ``given`` column). The photo rates keep the optical depth of the unperturbed atmosphere,
  and the third-body density ``M`` is not rescaled.
- ``Te`` multiplies the electron temperature profile and re-evaluates every rate
  coefficient at the new temperatures (``Model.rate_coefficients(temperatures=...)``,
  vectorised over the samples of a batch: one evaluation of the rate laws per batch,
  in the driving process, about 10 ms for 50 samples of 181 levels and 88 reactions).
  The uncertainty factors f and bands stay those of the unperturbed temperatures.

Random streams
--------------
Sample i draws its standard normals from its own stream,
``numpy.random.default_rng(numpy.random.SeedSequence(seed, spawn_key=(i,)))`` — the i-th
child of ``SeedSequence(seed).spawn(N)`` — in a fixed order: one normal per reaction (in
reaction-list order), one per ``given`` column, one for ``euv``, one for ``Te``. So sample i
is the same whichever batch or worker it lands in, and switching an environment factor on
does not change the rate draws. The steady solver works row by row (Newton steps,
backtracking and convergence are decided per row; see :mod:`ionochem.solve.steady`), so a
sample's densities do not depend on the batch either (checked in the tests).

Scale
-----
A batch of B samples is solved as B × A rows of one batched Newton (rows sample-major).
Beyond one process the batches go to ``workers`` local single-threaded processes (a
``multiprocessing`` pool started from a fork server: analysis/ensemble.py) or to an existing
dask.distributed scheduler. The model itself
does not pickle (it holds the scenario's read-only mappings and the built environment, far
more than a worker needs), so the workers receive a
:class:`SampleKernel`: the mechanism's arrays (stoichiometry, reactant slots, Jacobian
kernel) with the central rates, the log-factors and the fixed densities. With ``Te``
varied the driving process evaluates each batch's rates and sends them with the batch.

Resume
------
Given a store (:class:`~ionochem.analysis.ensemble_store.EnsembleStore`), every finished
batch is written as it completes; a resumed run computes only the missing sample ranges,
checks that the stored draws are the ones its own streams give, and builds the result from
all stored samples.

Memory: the driving process keeps every solved sample (N × levels × solved species
float64, 9.6 MB for 1000 samples of 100 levels and 12 species) to take exact quantiles.

This module must not read input files; it works on a built :class:`ionochem.Model`.
"""

from __future__ import annotations

import hashlib

import numpy as np
import xarray as xr

from ionochem.analysis.bounds import MAX_SEED, check_count
from ionochem.errors import InputError

QUANTILES = (0.05, 0.16, 0.5, 0.84, 0.95)

# The parts of an ensemble live in their own modules; their names are re-exported here.
from ionochem.analysis.ensemble import (  # noqa: E402,F401
    ROW_TARGET,
    dask_client,
    default_batch,
    drop_failed,
    failed_attrs,
    failed_samples,
    run_ensemble,
    single_thread_blas,
    solve_batch,
    solve_batches,
)
from ionochem.analysis.sampling import (  # noqa: E402,F401
    ENV_EUV,
    ENV_TE,
    PHOTO_SOURCES,
    SampleKernel,
    base_rates,
    draw_normals,
    parse_spreads,
    photo_reactions,
)
from ionochem.analysis.variance import (  # noqa: E402,F401
    linear_variance_shares,
    sample_variance_shares,
)

# ----------------------------------------------------------------------------- inputs


def open_store(output, manifest, *, resume=False):
    """The sample store of ``output`` (``OUT.nc.samples``), or None without an output."""
    if output is None:
        if resume:
            raise InputError("--resume needs -o OUT.nc (the samples are kept next to it)",
                             file="--resume")
        return None
    from ionochem.analysis.ensemble_store import EnsembleStore, store_path_for
    store = EnsembleStore(store_path_for(output), manifest, resume=resume)
    if store.discarded:
        import warnings
        warnings.warn(f"{store.folder}: {len(store.discarded)} damaged batch file(s) set "
                      f"aside as *.damaged and recomputed: {', '.join(store.discarded)}",
                      stacklevel=2)
    return store


def manifest_for(model, kernel, method, samples, seed, **extra):
    """The resume manifest of a run (see :mod:`ionochem.analysis.ensemble_store`)."""
    return {
        "method": method,
        "samples": int(samples),
        "seed": int(seed),
        "scenario_sha256": getattr(model.scenario, "sha256", ""),
        "reaction_list_sha256": getattr(model.reaction_list, "sha256", ""),
        "reactions_sha256": hashlib.sha256("\n".join(model.reactions).encode()).hexdigest(),
        "changes": {"set": {k: str(v) for k, v in model.changes["set"].items()},
                    "scale": {k: float(v) for k, v in model.changes["scale"].items()}},
        "environment": kernel.environment,
        "inputs_sha256": kernel.digest(),
        **extra,
    }


# ----------------------------------------------------------------------------- results
def species_samples(model, kernel, z, n):
    """Densities of every reported species per sample (N, A, species), names and roles.

    Solved densities map to all species (electrons, derived totals, fixed neutrals) with
    the code path of the result dataset; a varied fixed neutral carries its sample factor.
    """
    dens, names, roles = model.species_table(n)
    for g, name in enumerate(kernel.given_names):
        if kernel.ln_given[g] and name in names:
            col = names.index(name)
            dens[..., col] = dens[..., col] * np.exp(z[:, kernel.R + g]
                                                     * kernel.ln_given[g])[:, None]
    return dens, names, roles


def monte_carlo(model, samples, *, seed=0, environment=None, batch=None, workers=1,
                scheduler=None, output=None, resume=False, progress=False, on_batch=None,
                member_correlation=1.0):
    """Monte Carlo over log-normal rate (and environment) factors.

    Parameters
    ----------
    model : ionochem.Model
    samples : int
        Number of samples N.
    seed : int
        Seed of the sample streams (see the module docstring).
    environment : dict, optional
        One-sigma factors of ``euv``, ``Te`` and fixed neutrals (``{"O": 1.15}``).
    batch, workers, scheduler, progress, on_batch
        See :func:`run_ensemble`.
    output : str or Path, optional
        The result file the caller will write; its sample store ``OUTPUT.samples`` keeps the
        finished batches (the caller removes it with :func:`remove_store` once the output
        is written, or keeps it).
    resume : bool
        Continue the store of ``output``.
    member_correlation : float
        Correlation ρ of the draws of two members of one unit of analysis (levels of a
        family, branches of a tie): 1 (default) one draw per unit, 0 independent members.

    Returns
    -------
    xarray.Dataset
        ``density_quantiles`` (quantile, species, altitude) cm-3, ``density_central``,
        ``pce_doubtful`` (the central solution's equilibrium flag), ``log_density_std``,
        ``variance_share`` and ``variance_share_linear``
        (species, reaction, altitude), their environment counterparts when factors are
        varied, ``explained_variance``, ``log_uncertainty_factor`` (reaction, altitude);
        attributes ``samples``, ``seed``, ``method`` and the provenance of the model.
    """
    samples = int(samples)
    if samples < 2:
        raise InputError("--samples must be at least 2", file="--samples")
    seed = check_count(seed, 0, MAX_SEED, "--seed", "seed")
    kernel = SampleKernel(model, environment, member_correlation)
    store = open_store(output, manifest_for(model, kernel, "montecarlo", samples, seed),
                       resume=resume)

    def rows(a, b):
        return draw_normals(seed, a, b, kernel.width)

    try:
        z, n = run_ensemble(model, kernel, rows, samples, batch=batch, workers=workers,
                            scheduler=scheduler, store=store, progress=progress,
                            on_batch=on_batch, allow_failed=True)
    finally:
        if store is not None:
            store.close()
    z, n, failed = drop_failed(z, n, samples)
    ds = summarise(model, kernel, z, n, seed=seed)
    ds.attrs["batch_samples"] = int(batch or default_batch(kernel.altitude_km.size))
    ds.attrs.update(failed_attrs(failed, samples))
    return ds


def summarise(model, kernel, z, n, *, seed):
    """The Monte Carlo dataset from the draws ``z`` (N, width) and densities ``n``."""
    from ionochem.analysis.sensitivity import sensitivity
    from ionochem.io.dataset import ALTITUDE_ATTRS, provenance, unit_coordinates
    N, A = n.shape[0], kernel.altitude_km.size
    dens, names, roles = species_samples(model, kernel, z, n)      # (N, A, Nsp)
    q = np.quantile(dens, QUANTILES, axis=0)                       # (Q, A, Nsp)
    central = model.solve()
    sens = sensitivity(model, central)
    with np.errstate(divide="ignore", invalid="ignore"):
        logd = np.where(dens > 0, np.log(np.where(dens > 0, dens, 1.0)), np.nan)
    log_std = np.std(logd, axis=0, ddof=1)                         # (A, Nsp)
    env_cols = kernel.environment_columns()
    sampled = kernel.sampled_columns()                             # [(column, unit)]
    cols = [c for c, _ in sampled] + list(env_cols.values())
    share, explained, how = sample_variance_shares(z[:, cols], logd.reshape(N, -1))
    Nsp, R, U = len(names), kernel.R, len(kernel.unit_names)
    share = share.reshape(len(cols), A, Nsp)
    nan_out = np.isnan(share).all(axis=0).T                        # (Nsp, A)
    vs, us = _reaction_and_unit_shares(kernel, sampled, share, (Nsp, R, U, A))
    vs = np.where(nan_out[:, None, :], np.nan, vs)
    us = np.where(nan_out[:, None, :], np.nan, us)
    lin_r, lin_e = linear_variance_shares(model, kernel, sens)
    lin_u, _ = linear_variance_shares(model, kernel, sens, units=True)
    # The sensitivity dataset lists the same species in the same order as Model.species_table.
    sens_names = list(sens["species"].values)
    order = [sens_names.index(s) for s in names]
    lin_r, lin_e, lin_u = lin_r[order], lin_e[order], lin_u[order]
    dens0 = central["density"].values
    data = {
        "density_quantiles": (("quantile", "species", "altitude"),
                              np.transpose(q, (0, 2, 1)),
                              {"units": "cm-3", "long_name": "quantiles of the number density "
                               "over the Monte Carlo samples"}),
        "density_central": (("species", "altitude"), dens0[[list(central["species"].values)
                                                            .index(s) for s in names]],
                            {"units": "cm-3", "long_name": "number density with every "
                             "rate at its central value"}),
        "log_density_std": (("species", "altitude"), log_std.T,
                            {"units": "1", "long_name": "standard deviation of ln(density) "
                             "over the samples"}),
        "variance_share": (("species", "reaction", "altitude"), vs,
                           {"units": "1", "long_name": "share of var(ln density) carried "
                            f"by each reaction's own draw, from the samples ({how}); NaN "
                            "for a member of a unit drawn as one (member_correlation 1)"}),
        "variance_share_unit": (("species", "unit", "altitude"), us,
                                {"units": "1", "long_name": "share of var(ln density) carried "
                                 "by each unit of analysis (a reaction, a family, a tie), "
                                 f"from the samples ({how})"}),
        "variance_share_linear_unit": (("species", "unit", "altitude"), lin_u,
                                       {"units": "1", "long_name": "first-order share of each "
                                        "unit, rho (sum S_j ln f_j)^2 + (1 - rho) sum "
                                        "(S_j ln f_j)^2 over its members, over the total"}),
        "variance_share_linear": (("species", "reaction", "altitude"), lin_r,
                                  {"units": "1", "long_name": "first-order share "
                                   "S_ij^2 ln^2 f_j / sum, from the exact local "
                                   "sensitivities S = dln n/dln k"}),
        "explained_variance": (("species", "altitude"), explained.reshape(A, Nsp).T,
                               {"units": "1", "long_name": "fraction of var(ln density) "
                                "explained by a model linear in the draws"}),
        "log_uncertainty_factor": (("reaction", "altitude"), kernel.log_sigma().T,
                                   {"units": "1", "long_name": "one-sigma ln-factor of each "
                                    "rate: ln f, or (ln high - ln low)/2 for a banded table"}),
    }
    coords = {
        "quantile": ("quantile", np.array(QUANTILES), {"units": "1",
                                                       "long_name": "probability level"}),
        "species": ("species", np.array(names, dtype=object)),
        "role": ("species", np.array(roles, dtype=object),
                 {"long_name": "solved, fixed, electron, balance or derived"}),
        "altitude": ("altitude", kernel.altitude_km, ALTITUDE_ATTRS),
        "reaction": ("reaction", np.array(kernel.reactions, dtype=object)),
        **unit_coordinates(model),
    }
    if env_cols:
        es = np.transpose(share[len(sampled):], (2, 0, 1))
        es = np.where(nan_out[:, None, :], np.nan, es)
        data["variance_share_environment"] = (
            ("species", "environment_factor", "altitude"), es,
            {"units": "1", "long_name": "share of var(ln density) carried by each varied "
             f"environment factor, from the samples ({how})"})
        data["variance_share_linear_environment"] = (
            ("species", "environment_factor", "altitude"), lin_e,
            {"units": "1", "long_name": "first-order share of each varied environment "
             "factor from the exact local sensitivities"})
        coords["environment_factor"] = ("environment_factor",
                                        np.array(list(env_cols), dtype=object))
    if "pce_doubtful" in central:
        flag = central["pce_doubtful"]
        data["pce_doubtful"] = (("species", "altitude"),
                                flag.sel(species=names).values.astype(np.int8),
                                dict(flag.attrs, long_name=flag.attrs.get("long_name", "")
                                     + " (central solution)"))
    ds = xr.Dataset(data, coords=coords, attrs=provenance(model))
    ds.attrs.update({
        "method": "montecarlo",
        "samples": int(N),
        "seed": int(seed),
        "quantiles": ", ".join(f"{x:g}" for x in QUANTILES),
        "sampling": SAMPLING_NOTE,
        "member_correlation": float(kernel.member_correlation),
        "band_interpretation": "a table's _low/_high band is read as the one-sigma (68 %) "
                               "range: two-piece log-normal with median at the tabulated value",
        "banded_reactions": ", ".join(kernel.reactions[j] for j in kernel.banded),
        "environment_spreads": ", ".join(f"{k}={v:g}" for k, v in kernel.environment.items()),
        "variance_share_method": how,
    })
    return ds


SAMPLING_NOTE = (
    "ln k_j = ln k_j + eps_j ln f_j(altitude), one draw per reaction per sample shared by "
    "every altitude (rate errors are systematic); the members of a unit of analysis (levels "
    "of a family, branches of a tie) draw eps_j = sqrt(rho) z_unit + sqrt(1 - rho) z_j with "
    "rho = member_correlation (1: one draw per unit); sample i draws from "
    "SeedSequence(seed, spawn_key=(i,))")


def _reaction_and_unit_shares(kernel, sampled, share, shape):
    """Per-reaction shares (own column; 0 if not varied, NaN if only a shared draw moves it)
    and per-unit shares (the sum over the unit's columns) from the regression shares."""
    Nsp, R, U, A = shape
    vs = np.zeros((Nsp, R, A))
    us = np.zeros((Nsp, U, A))
    own = {c for c, _ in sampled if c < R}
    for j in kernel.varied_reactions():
        if int(j) not in own:
            vs[:, j, :] = np.nan
    for i, (c, u) in enumerate(sampled):
        part = share[i].T                                            # (Nsp, A)
        if c < R:
            vs[:, c, :] = part
        us[:, u, :] += part
    return vs, us


def remove_store(output):
    """Delete the sample store of ``output`` (``OUT.nc.samples``) if there is one."""
    import shutil

    from ionochem.analysis.ensemble_store import store_path_for
    shutil.rmtree(store_path_for(output), ignore_errors=True)
