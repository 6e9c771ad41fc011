"""Shares of the variance of ln n among the uncertain factors of an ensemble.

From the samples (regression of ln n on the standard normals) and to first order (the exact
sensitivities times the one-sigma log factors). Arrays in, arrays out.
"""

from __future__ import annotations

import numpy as np
from scipy.linalg import cho_factor, cho_solve

from ionochem.analysis.sampling import ENV_EUV, ENV_TE
from ionochem.solve.threads import single_thread_blas


def sample_variance_shares(z_factors, log_dens):
    """Shares of var(ln n) carried by each factor, from the samples.

    Parameters
    ----------
    z_factors : ndarray (N, P)
        The standard-normal draws of the P varied factors.
    log_dens : ndarray (N, M)
        ln n of M outputs (species × altitude, flattened); columns with a non-finite value
        give NaN.

    Returns
    -------
    share : ndarray (P, M)
        Normalised to sum to 1 over the factors.
    explained : ndarray (M,)
        Fraction of var(ln n) the linear model explains (NaN with the correlation method).
    method : str
        ``"regression"`` (least squares of ln n on all ε at once, share_j ∝ β_j² var ε_j)
        when N ≥ 2 (P + 1), else ``"correlation"`` (adjusted squared correlation of ln n
        with each ε_j alone).
    """
    N, P = z_factors.shape
    M = log_dens.shape[1]
    share = np.full((P, M), np.nan)
    explained = np.full(M, np.nan)
    good = np.all(np.isfinite(log_dens), axis=0)
    if N < 3 or P == 0 or not good.any():
        return share, explained, "none"
    X = z_factors - z_factors.mean(axis=0)
    Y = log_dens[:, good] - log_dens[:, good].mean(axis=0)
    sst = np.sum(Y * Y, axis=0)
    live = sst > 1e-30 * np.maximum(np.abs(log_dens[:, good]).max(axis=0), 1.0) ** 2 * N
    if N >= 2 * (P + 1):
        with single_thread_blas():
            beta = _least_squares(X, Y)                     # (P, M_good)
            resid = Y - X @ beta
        contrib = beta ** 2 * np.var(z_factors, axis=0)[:, None] * N
        r2 = 1.0 - np.sum(resid * resid, axis=0) / np.where(live, sst, 1.0)
        method = "regression"
    else:
        xy = X.T @ Y
        rho2 = xy ** 2 / (np.sum(X * X, axis=0)[:, None] * np.where(live, sst, 1.0))
        # Adjusted r² (Ezekiel 1930, Methods of Correlation Analysis): without it the
        # chance correlations of the many unimportant factors, each about 1/(N − 1), would
        # dilute the normalised shares of the important ones.
        contrib = np.clip(1.0 - (1.0 - rho2) * (N - 1) / (N - 2), 0.0, None)
        r2 = np.full(Y.shape[1], np.nan)
        method = "correlation"
    tot = contrib.sum(axis=0)
    with np.errstate(divide="ignore", invalid="ignore"):
        sh = np.where(live & (tot > 0), contrib / tot, np.nan)
    share[:, good] = sh
    explained[good] = np.where(live, r2, np.nan)
    return share, explained, method


def _least_squares(X, Y):
    """β minimising |Y − X β| column by column, (P, M).

    The draws are independent standard normals, so X (N ≥ 2 (P + 1) rows, centred) is well
    conditioned and the normal equations XᵀX β = XᵀY, solved by Cholesky, give the
    coefficients of the orthogonal-factorisation least squares (``np.linalg.lstsq``) to
    ~1e-14 in a fraction of its time (tests/test_uncertainty_fast.py). A factor that is
    not varied (a zero column, XᵀX not positive definite) falls back to ``lstsq``.
    Call with one BLAS thread (the caller's guard): the products are small.
    """
    G = X.T @ X
    try:
        c = cho_factor(G, check_finite=False)
    except np.linalg.LinAlgError:
        return np.linalg.lstsq(X, Y, rcond=None)[0]
    d = np.diag(c[0])
    if d.min() <= 1e-10 * d.max():           # nearly singular: keep the exact solver
        return np.linalg.lstsq(X, Y, rcond=None)[0]
    return cho_solve(c, X.T @ Y, check_finite=False)


def linear_variance_shares(model, kernel, sens, *, units=False):
    """First-order shares S_ij² σ_j² / Σ from the exact local sensitivities.

    The total Σ is that of the sampling: the members of a unit of analysis (a family, a
    tie) are correlated with coefficient ρ = ``kernel.member_correlation``, so a unit
    carries var_u = ρ (Σ_{j∈u} S_ij σ_j)² + (1 − ρ) Σ_{j∈u} (S_ij σ_j)² and Σ = Σ_u var_u +
    the environment's. A reaction's own share S_ij² σ_j² / Σ is what it would carry alone;
    with ρ > 0 the members' shares do not add up to their unit's.

    Parameters
    ----------
    model : ionochem.Model
    kernel : SampleKernel
    sens : xarray.Dataset
        From :func:`ionochem.analysis.sensitivity.sensitivity`.

    Returns
    -------
    reactions : ndarray (species, R, A)
        (``units=True``: the unit shares, (species, U, A), in ``kernel.unit_names`` order.)
    environment : ndarray (species, E, A)
        For the varied environment factors, in ``kernel.environment_columns()`` order:
        ∂ln n/∂ln X is Σ_j S_ij (photo reactions) for ``euv``, Σ_j c_gj S_ij (c_gj the
        count of g among the reactants of j) for a fixed neutral g, and the sensitivity to
        Te for ``Te``.
    """
    S = np.nan_to_num(sens["sensitivity"].values)             # (species, R, A)
    sig = kernel.log_sigma().T                                 # (R, A)
    var_r = S ** 2 * sig[None] ** 2
    rho = kernel.member_correlation
    U = len(kernel.unit_names)
    onehot = np.zeros((U, S.shape[1]))
    onehot[kernel.unit_index, np.arange(S.shape[1])] = 1.0
    var_u = (rho * np.einsum("ur,srA->suA", onehot, S * sig[None]) ** 2
             + (1.0 - rho) * np.einsum("ur,srA->suA", onehot, var_r))
    env_cols = kernel.environment_columns()
    mech = model.mechanism
    env = []
    for name in env_cols:
        if name == ENV_EUV:
            s = S[:, kernel.photo_mask, :].sum(axis=1)
            ln = kernel.ln_euv
        elif name == ENV_TE:
            s = np.nan_to_num(sens["sensitivity_Te"].values)
            ln = kernel.ln_te
        else:
            count = (mech.slots == mech.index(name)).sum(axis=1).astype(float)   # (R,)
            s = np.einsum("srA,r->sA", S, count)
            ln = kernel.ln_given[kernel.given_names.index(name)]
        env.append(s ** 2 * ln ** 2)
    var_e = np.stack(env, axis=1) if env else np.zeros((S.shape[0], 0, S.shape[2]))
    tot = var_u.sum(axis=1) + var_e.sum(axis=1)                # (species, A)
    if units:
        var_r = var_u
    with np.errstate(divide="ignore", invalid="ignore"):
        rs = np.where(tot[:, None] > 0, var_r / tot[:, None], np.nan)
        es = np.where(tot[:, None] > 0, var_e / tot[:, None], np.nan)
    dead = ~np.isfinite(sens["sensitivity"].values).all(axis=1)     # dark levels
    rs[np.broadcast_to(dead[:, None], rs.shape)] = np.nan
    es[np.broadcast_to(dead[:, None], es.shape)] = np.nan
    return rs, es
