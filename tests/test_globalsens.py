"""Global sensitivity (Sobol, Morris via SALib) against the analytic two-factor column.

The column is synthetic (invented rates and densities): one ion with production q
(f_q = 1.5) and recombination α (f_α = 1.3), n = sqrt(q/α), so ln n = ln n0 + ½ ε_q ln f_q
− ½ ε_α ln f_α is linear and additive in the standard normals ε. Then (Sobol 1993, Math.
Model. Comput. Exp. 1, 407; Saltelli et al. 2010, Comput. Phys. Commun. 181, 259) the
first-order and total indices are equal, S1_j = ST_j = ln² f_j / (ln² f_q + ln² f_α), and
(Morris 1991, Technometrics 33, 161; Campolongo et al. 2007, Environ. Model. Softw. 22, 1509)
every elementary effect per unit ε is the slope ±½ ln f_j, so μ* = ½ ln f_j and σ = 0.
"""

from __future__ import annotations

import numpy as np
import pytest

import ionochem
from ionochem.analysis import globalsens as G
from ionochem.errors import InputError

ALT = np.linspace(100.0, 300.0, 11)
Q = 50.0 * np.exp((ALT - 100.0) / 80.0)                # invented production, cm-3 s-1
TE = np.linspace(250.0, 2500.0, ALT.size)
F_Q, F_A = 1.5, 1.3

TWO_FACTOR = f"""\
P1: O -> O+ + e | k = prescribed | f = {F_Q} | ref = invented test
R1: O+ + e -> O | k = 2.0e-7*(300/Te)^0.7 | f = {F_A} | ref = invented test
"""


@pytest.fixture
def model(column):
    path = column(TWO_FACTOR, ALT, neutrals={"O": 1e10 * np.exp(-(ALT - 100) / 50)},
                  Tn=np.linspace(200, 1000, ALT.size), Te=TE, production={"P1": Q})
    return ionochem.Model(ionochem.load_scenario(path))


def _exact():
    tot = np.log(F_Q) ** 2 + np.log(F_A) ** 2
    return {"P1": np.log(F_Q) ** 2 / tot, "R1": np.log(F_A) ** 2 / tot}


def test_sobol_indices_of_two_factor_column_equal_squared_log_factor_shares(model):
    """S1 and ST of ln n(O+) and ln n(e) equal ln² f_j / Σ (0.705 and 0.295; analytic for
    ln n linear in ε) within SALib's 95 % bootstrap confidence, at three altitudes, with
    N = 1024 base samples (4096 solves)."""
    ds = G.global_sensitivity(model, 1024, method="sobol", seed=1,
                              altitudes_km=[100, 200, 300], species=["O+", "e"])
    assert list(ds["factor"].values) == ["P1", "R1"]
    assert ds.attrs["model_runs"] == 1024 * 4
    for rid, share in _exact().items():
        for key in ("S1", "ST"):
            v = ds[key].sel(factor=rid).values
            conf = ds[f"{key}_conf"].sel(factor=rid).values
            assert np.all(np.abs(v - share) <= np.maximum(conf, 1e-3)), (rid, key, v, conf)
        np.testing.assert_allclose(ds["variance_share_linear"].sel(factor=rid).values, share,
                                   rtol=1e-10)


def test_morris_ranks_the_larger_factor_first_with_mu_star_half_log_factor(model):
    """Morris screening ranks P1 (f = 1.5) above R1 (f = 1.3); per unit ε, μ* = ½ ln f_j,
    μ = +½ ln f_q and −½ ln f_α, σ = 0 (analytic for ln n linear in ε) to 1e-6."""
    ds = G.global_sensitivity(model, 20, method="morris", seed=2, altitudes_km=[150, 250],
                              species=["O+"])
    mu_star = ds["mu_star"].sel(species="O+")
    assert np.all(mu_star.sel(factor="P1").values > mu_star.sel(factor="R1").values)
    np.testing.assert_allclose(mu_star.sel(factor="P1").values, 0.5 * np.log(F_Q), rtol=1e-6)
    np.testing.assert_allclose(mu_star.sel(factor="R1").values, 0.5 * np.log(F_A), rtol=1e-6)
    mu = ds["mu"].sel(species="O+")
    np.testing.assert_allclose(mu.sel(factor="P1").values, 0.5 * np.log(F_Q), rtol=1e-6)
    np.testing.assert_allclose(mu.sel(factor="R1").values, -0.5 * np.log(F_A), rtol=1e-6)
    assert np.all(np.abs(ds["sigma"].values) < 1e-6)
    assert ds.attrs["model_runs"] == 20 * 3


def test_top_reaction_selection_follows_first_order_variance_share(model):
    """With --top 1 only the reaction with the largest S² ln² f (P1: ¼ ln² 1.5 against
    ¼ ln² 1.3, sensitivities ±½ of n = sqrt(q/α)) is a factor; select_top_reactions orders by
    the mean share over the chosen species and levels (a broad share beats one level)."""
    ds = G.global_sensitivity(model, 8, method="morris", top=1, seed=0, species=["O+"])
    assert list(ds["factor"].values) == ["P1"]
    share = np.zeros((2, 3, 4))               # (species, reaction, level)
    share[0, 2, 1] = 0.5                      # one level: mean 0.125
    share[0, 1, :] = 0.2                      # every level: mean 0.2
    share[1, 0, 3] = 0.9                      # species 1 only
    assert G.select_top_reactions(share, [0], [0, 1, 2, 3], 2) == [1, 2]
    assert G.select_top_reactions(share, [0, 1], [0, 1, 2, 3], 3) == [0, 1, 2]
    assert G.select_top_reactions(share, [0], [1], 3) == [2, 1]


def test_global_run_resumes_to_the_uninterrupted_indices(model, tmp_path):
    """A Sobol run interrupted after its first batch and resumed gives the indices of an
    uninterrupted run exactly (same SALib design, same stored solves)."""
    out = tmp_path / "g.nc"

    class Stop(Exception):
        pass

    def stop(a, b, done, total):
        raise Stop

    kw = dict(method="sobol", seed=3, altitudes_km=[200], species=["O+"], batch=100)
    with pytest.raises(Stop):
        G.global_sensitivity(model, 128, output=out, on_batch=stop, **kw)
    resumed = G.global_sensitivity(model, 128, output=out, resume=True, **kw)
    whole = G.global_sensitivity(model, 128, **kw)
    np.testing.assert_array_equal(resumed["S1"].values, whole["S1"].values)
    with pytest.raises(InputError, match="method"):
        G.global_sensitivity(model, 128, output=out, resume=True,
                             **{**kw, "method": "morris"})


def test_bad_global_options_are_input_errors(model):
    """Unknown species, altitudes outside the grid and an unknown method are
    ionochem.InputError (docs/internals.md, errors), raised before any sample is solved."""
    with pytest.raises(InputError, match="species"):
        G.global_sensitivity(model, 8, method="morris", species=["N2+"])
    with pytest.raises(InputError, match="outside the grid"):
        G.global_sensitivity(model, 8, method="morris", altitudes_km=[500])
    with pytest.raises(InputError, match="method"):
        G.global_sensitivity(model, 8, method="fast")
