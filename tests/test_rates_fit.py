"""Fits of k(T) to standard forms (ionochem.rates.fit_rate).

References: synthetic data drawn from known parameters with numpy's Gaussian generator;
the coverage of one-sigma intervals is checked against the normal 68.27 % rate with its
binomial spread over repeated noise (a frequentist check of the covariance); the power-law
band is checked against the closed-form variance of log k = log A + B log(T/300).
"""

from __future__ import annotations

import numpy as np
import pytest

from ionochem.errors import InputError
from ionochem.rates import fit_rate
from ionochem.rates.fit import evaluate_form

T = np.geomspace(100.0, 5000.0, 20)
TRUE = {
    "power": np.array([2.2e-7, -0.39]),
    "arrhenius": np.array([1.5e-10, 0.5, 600.0]),
    "broken": np.array([1.95e-7, -0.70, -0.56, 1200.0]),
}


def _noisy(form, rng, rel=0.05):
    k = evaluate_form(form, TRUE[form], T)
    s = rel * k
    return k + rng.normal(0, s), s


@pytest.mark.parametrize("form", ["power", "arrhenius", "broken"])
def test_fit_recovers_known_parameters(form):
    """Parameters of 5 %-noise synthetic data lie within 4 stated sigma of the truth and
    the chi-square is plausible (p > 1e-3)."""
    rng = np.random.default_rng(11)
    k, s = _noisy(form, rng)
    res = fit_rate(T, k, form, sigma=s)
    p, C = res                                   # unpacks as parameters, covariance
    z = (p - TRUE[form]) / np.sqrt(np.diag(C))
    assert np.all(np.abs(z) < 4), z
    assert res.p_value > 1e-3
    assert res.dof == T.size - len(TRUE[form])


@pytest.mark.parametrize("form, index", [("power", 1), ("arrhenius", 2), ("power", 0)])
def test_intervals_cover_the_truth_at_the_stated_rate(form, index):
    """Over 400 noise draws the one-sigma interval of a parameter contains the truth in
    68.27 % of fits, within 4 binomial standard deviations (+-0.093)."""
    rng = np.random.default_rng(5 + index)
    n = 400
    hits = 0
    for _ in range(n):
        k, s = _noisy(form, rng)
        p, C = fit_rate(T, k, form, sigma=s)
        hits += abs(p[index] - TRUE[form][index]) <= np.sqrt(C[index, index])
    rate = hits / n
    assert abs(rate - 0.6827) < 4 * np.sqrt(0.6827 * 0.3173 / n), rate


def test_without_sigma_the_scatter_sets_the_errors():
    """Without sigma the covariance scales with the scatter: ten times the noise gives about
    ten times the error of B (within a factor 2)."""
    rng = np.random.default_rng(3)
    k0 = evaluate_form("power", TRUE["power"], T)
    e1 = fit_rate(T, k0 * np.exp(rng.normal(0, 0.01, T.size)), "power").errors[1]
    e2 = fit_rate(T, k0 * np.exp(rng.normal(0, 0.10, T.size)), "power").errors[1]
    assert 5 < e2 / e1 < 20
    assert np.isnan(fit_rate(T, k0 * 1.01, "power").p_value)


def test_power_law_band_matches_closed_form_variance():
    """band(T) of a power law is k exp(+-sqrt(var log A + x^2 var B + 2 x cov)), x = log(T/300)."""
    rng = np.random.default_rng(8)
    k, s = _noisy("power", rng)
    res = fit_rate(T, k, "power", sigma=s)
    A, _ = res.parameters
    C = res.covariance
    x = np.log(T / 300.0)
    var = C[0, 0] / A ** 2 + x ** 2 * C[1, 1] + 2 * x * C[0, 1] / A
    lo, hi = res.band(T)
    np.testing.assert_allclose(np.log(hi / res(T)), np.sqrt(var), rtol=1e-4)
    np.testing.assert_allclose(np.log(res(T) / lo), np.sqrt(var), rtol=1e-4)


@pytest.mark.parametrize("args, words", [
    ((T, np.ones(T.size), "cubic"), "unknown form"),
    ((T, -np.ones(T.size), "power"), "positive"),
    ((T[:2], np.ones(2), "power"), "at least"),
    ((T, np.ones(T.size - 1), "power"), "temperatures but"),
])
def test_bad_inputs_are_refused(args, words):
    """Unknown forms, non-positive rates, too few points, mismatched lengths: InputError."""
    with pytest.raises(InputError, match=words):
        fit_rate(*args)
