"""A fit's trials without rebuilt models (issue 25) against rebuilt models.

References: ``Model.with_changes(scale=...)`` (the model's own evaluation of scaled rates,
with its floor on source rates) and, for the misfit and its Jacobian, the rebuilt model's
``solve()`` and ``sensitivity()`` — the former method of the fit. Scenario: the invented
tabulated column of scenarios/ and the mid-latitude demo (invented site and date).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

import ionochem
from ionochem.analysis.fit import resolve_parameters
from ionochem.analysis.fit_problem import _Problem, scaled_rates
from ionochem.analysis.misfit import log_density
from ionochem.io.scenario import Grid

ROOT = Path(__file__).resolve().parents[1]
OBS = ROOT / "scenarios" / "observations" / "brackenfold_n2plus_ne.csv"


@pytest.fixture(scope="module")
def column():
    return ionochem.Model(ionochem.load_scenario(ROOT / "scenarios" / "tabulated_column.toml"))


def test_scaled_rates_equal_the_rebuilt_models(column):
    """Scaled rates (a photo rate among them, one rate off) equal those of
    ``with_changes(scale=...)`` to 1e-15, the floor on small source rates included."""
    R = list(column.reactions)
    k0 = column.rate_coefficients()
    photo = [j for j, e in enumerate(column.rate_expressions) if "photo" in e.variables
             and np.all(k0[:, j] > 0)]
    j = photo[0]
    # A factor that pushes the smallest production of this photo rate (k times its
    # absorber's density) below the model's floor of 1e-20 cm-3 s-1, not the largest.
    absorber = [sp.name for sp, _ in column.reaction_objects[j].reactants if sp.charge == 0]
    prod = k0[:, j] * column.environment.neutrals[absorber[0]]
    f_low = 0.5e-20 / prod.min()
    assert prod.max() * f_low > 1e-20
    for scale in ({R[j]: 0.37, R[5]: 2.5, R[7]: 0.0}, {R[j]: f_low}):
        factors = np.ones(len(R))
        for rid, f in scale.items():
            factors[R.index(rid)] = f
        got = scaled_rates(column, factors)
        ref = column.with_changes(scale=scale).rate_coefficients()
        np.testing.assert_allclose(got, ref, rtol=1e-15, atol=0)
    assert np.any(ref[:, j] == 0) and np.any(ref[:, j] > 0)     # the floor acted


def test_scaled_rates_refuse_to_raise_a_rate_the_model_zeroed(column):
    """A source rate the model zeroed (below its floor) cannot be scaled up from k: the
    caller must build the model."""
    k0 = column.rate_coefficients()
    zeroed = [j for j, e in enumerate(column.rate_expressions)
              if e.variables & {"photo", "photoelectron"} and np.any(k0[:, j] == 0)]
    assert zeroed
    factors = np.ones(k0.shape[1])
    factors[zeroed[0]] = 3.0
    assert scaled_rates(column, factors) is None
    factors[zeroed[0]] = 0.5
    assert scaled_rates(column, factors) is not None


@pytest.mark.parametrize("case", ["photochemical", "transported"])
def test_trials_equal_rebuilt_models_solve_and_sensitivity(case, column):
    """ln m at the observations and the data Jacobian at a trial θ equal those of the
    rebuilt model (``model_at(θ).solve()``, ``.sensitivity()``) to 1e-10."""
    if case == "photochemical":
        model = column
    else:
        scen = ionochem.load_scenario(ROOT / "scenarios" / "midlatitude_equinox.toml")
        grid = tuple(float(a) for a in np.linspace(95.0, 400.0, 41))
        model = ionochem.Model(scen.replace(grid=Grid(altitude_km=grid)))
    obs = ionochem.load_observations(OBS)
    params = resolve_parameters(model, ["PI_N2", "N2plus_O_NOplus", "DR_N2plus"])
    problem = _Problem(model, obs, params, {p.name: None for p in params})
    theta = np.array([0.3, -0.4, 0.2])
    dens, lm, J = problem.evaluate(theta)
    rebuilt = problem.model_at(theta)
    ds = rebuilt.solve()
    sens = rebuilt.sensitivity(result=ds)
    lm_ref = problem.W @ np.nan_to_num(log_density(ds).ravel())
    S = np.nan_to_num(sens["sensitivity"].transpose("species", "reaction", "altitude").values)
    G = np.einsum("sra,rp->psa", S, problem.M)
    J_ref = -(problem.W @ G.reshape(len(params), -1).T) / problem.s[:, None]
    np.testing.assert_allclose(dens, ds["density"].transpose("species", "altitude").values,
                               rtol=1e-10)
    np.testing.assert_allclose(lm, lm_ref, rtol=1e-12)
    np.testing.assert_allclose(J, J_ref, rtol=1e-10, atol=1e-10 * np.abs(J_ref).max())
    assert np.abs(J_ref).max() > 1.0
