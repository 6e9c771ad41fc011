"""The Monte Carlo variance shares after the speed-up (issue 25) against the reference
least squares they replace: numpy's ``np.linalg.lstsq`` (LAPACK gelsd, SVD-based), a
reference library outside the project. Draws are invented (seeded normals)."""

from __future__ import annotations

import numpy as np

from ionochem.analysis.variance import sample_variance_shares


def _reference(z, logd):
    """share and explained of sample_variance_shares, by np.linalg.lstsq."""
    N = z.shape[0]
    X = z - z.mean(axis=0)
    Y = logd - logd.mean(axis=0)
    sst = np.sum(Y * Y, axis=0)
    beta = np.linalg.lstsq(X, Y, rcond=None)[0]
    contrib = beta ** 2 * np.var(z, axis=0)[:, None] * N
    resid = Y - X @ beta
    r2 = 1.0 - np.sum(resid * resid, axis=0) / sst
    return contrib / contrib.sum(axis=0), r2, beta


def _draws(N, P, M, seed=1, zero_column=None):
    rng = np.random.default_rng(seed)
    z = rng.standard_normal((N, P))
    if zero_column is not None:
        z[:, zero_column] = 0.0            # a factor that is not varied
    weights = rng.standard_normal((P, M)) * np.exp(rng.uniform(-6, 0, (P, M)))
    logd = 20.0 + z @ weights + 0.05 * rng.standard_normal((N, M)) + 0.1 * (z[:, :1] ** 2)
    return z, logd


def test_regression_shares_equal_lstsq_to_1e_10():
    """1000 draws of 40 factors, 300 outputs: the Cholesky normal equations give the shares
    and explained variance of lstsq to 1e-10 relative."""
    z, logd = _draws(1000, 40, 300)
    share, explained, method = sample_variance_shares(z, logd)
    ref_share, ref_r2, _ = _reference(z, logd)
    assert method == "regression"
    np.testing.assert_allclose(share, ref_share, rtol=1e-10, atol=1e-14)
    np.testing.assert_allclose(explained, ref_r2, rtol=1e-10)
    assert 0.5 < explained.min() < 1.0


def test_a_factor_that_is_not_varied_falls_back_to_lstsq():
    """A zero column makes XᵀX singular: the result is still lstsq's (minimum-norm: zero
    share for that factor), finite for the others."""
    z, logd = _draws(400, 12, 50, zero_column=3)
    share, explained, method = sample_variance_shares(z, logd)
    ref_share, ref_r2, _ = _reference(z, logd)
    assert np.all(share[3] == 0)
    np.testing.assert_allclose(share, ref_share, rtol=1e-10, atol=1e-14)
    np.testing.assert_allclose(explained, ref_r2, rtol=1e-10)
