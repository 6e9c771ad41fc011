"""The sensitivities after the speed-up (issue 25) against the method they replace, and the
transported column's Te sensitivity against central differences of re-solved columns.

References outside the code under test:
- the former algorithm, kept here as a plain reference: one LAPACK solve per level
  (``np.linalg.solve``, or one SuperLU factorisation of the whole transported column) with
  every reaction's ν_j r_j as a right-hand side, then each reported species as its row of
  the mechanism's affine map (docs/physics.md §6);
- central differences (h = 3e-4 in ln Te) of steady states re-solved with the whole
  electron-temperature profile scaled (numerical differentiation; on
  ``Model.steady_densities`` of independently built models).

Scenario: the mid-latitude demo (invented site and date) on coarser grids.
"""

from __future__ import annotations

import dataclasses
from pathlib import Path

import numpy as np
import pytest
from scipy.sparse.linalg import splu

import ionochem
from ionochem.analysis.sensitivity import _dlnk, _transport_te_column, environment_factors
from ionochem.analysis.units import sum_over_units, unit_map
from ionochem.io.scenario import Grid

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "scenarios" / "midlatitude_equinox.toml"
STEP = 3e-4


def _model(n_levels, transport):
    scen = ionochem.load_scenario(DEMO)
    grid = tuple(float(a) for a in np.linspace(90.0, 450.0, n_levels))
    scen = scen.replace(grid=Grid(altitude_km=grid))
    if not transport:
        scen = scen.replace(transport=None)
    return ionochem.Model(scen)


def _reference(model, ds):
    """The former algorithm: (species, R + F, altitude) normalized sensitivities."""
    mech = model.mechanism
    n = np.stack([ds["density"].sel(species=s).values for s in model.species], -1)
    k = model.rate_coefficients()
    rhs = mech.rate_sensitivity_columns(n, k, model.given)          # (A, S, R)
    factors, dln = environment_factors(model, _dlnk(model, "Te"))
    B = np.concatenate([rhs, np.einsum("asr,arf->asf", rhs, dln)], axis=-1)
    A, S, K = B.shape
    R = rhs.shape[-1]
    if model.transport is None:
        dn = -np.linalg.solve(mech.jacobian(n, k, model.given), B)
    else:
        B[..., R] += _transport_te_column(model, n)
        lu = splu(model.column_jacobian(n).tocsc())
        dn = -lu.solve(B.reshape(-1, K)).reshape(A, S, K)
    names = list(ds["species"].values)
    roles = ds["role"].values
    out = np.zeros((len(names), A, K))
    for i, name in enumerate(names):
        if name in mech.all_species and roles[i] != "fixed":
            out[i] = np.einsum("s,asp->ap", mech.E[mech.index(name)], dn)
    for tot in mech.derived:
        out[names.index(tot.name)] = sum(out[names.index(m)] for m in tot.members)
    dens = ds["density"].values
    with np.errstate(divide="ignore", invalid="ignore"):
        norm = np.where(dens[:, :, None] > 0, out / dens[:, :, None], 0.0)
    by_unit = sum_over_units(norm[:, :, :R], unit_map(model), axis=2)
    return norm.transpose(0, 2, 1), by_unit.transpose(0, 2, 1), R


@pytest.mark.parametrize("transport", [False, True], ids=["photochemical", "transported"])
def test_sensitivities_equal_the_former_lu_solves_to_1e_10(transport):
    """Every sensitivity (reactions, Te and the environment factors, units) equals the former
    per-level LAPACK solve / whole-column SuperLU solve to 1e-10 (relative, with an absolute
    floor of 1e-10 on these dimensionless numbers of order one)."""
    model = _model(46, transport)
    ds = model.solve()
    sens = model.sensitivity(result=ds)
    norm, by_unit, R = _reference(model, ds)
    assert np.isfinite(norm).all()
    np.testing.assert_allclose(sens["sensitivity"].values, norm[:, :R], rtol=1e-10,
                               atol=1e-10)
    np.testing.assert_allclose(sens["sensitivity_Te"].values, norm[:, R], rtol=1e-10,
                               atol=1e-10)
    np.testing.assert_allclose(sens["sensitivity_environment"].values, norm[:, R:],
                               rtol=1e-10, atol=1e-10)
    np.testing.assert_allclose(sens["sensitivity_unit"].values, by_unit, rtol=1e-10,
                               atol=1e-10)
    assert np.abs(norm).max() > 0.5        # not a comparison of zeros


def _with_te(model, tmp_path, factor, tag):
    """The same scenario with its temperatures given as a table, Te scaled by ``factor``."""
    env = model.environment
    path = tmp_path / f"temps_{tag}.csv"
    rows = ["altitude_km,Te_K,Ti_K"] + [f"{z:.17g},{te * factor:.17g},{ti:.17g}" for z, te, ti in
                                        zip(env.altitude_km, env.Te, env.Ti, strict=True)]
    path.write_text("\n".join(rows) + "\n")
    scen = model.scenario
    temps = dataclasses.replace(scen.temperatures, electron="table", ion="table", table=path)
    return ionochem.Model(scen.replace(temperatures=temps))


def test_transported_te_sensitivity_matches_central_differences(tmp_path):
    """With O+ transport, ∂ln n/∂ln Te (rates and the transport coefficients, which depend on
    the plasma temperature) equals the central difference of steady columns re-solved with
    the whole Te profile scaled by exp(±h), h = 3e-4, to 2e-4 absolute wherever the species
    is above 1e-6 of its column maximum (numerical differentiation, O(h²) plus the solver
    tolerance divided by h)."""
    model = _with_te(_model(36, True), tmp_path, 1.0, "base")
    assert model.transport is not None
    sens = model.sensitivity()
    ln = {}
    for sign in (1, -1):
        m = _with_te(model, tmp_path, float(np.exp(sign * STEP)), f"s{sign}")
        ln[sign] = np.log(np.maximum(m.steady_densities().n, 1e-300))
    fd = (ln[1] - ln[-1]) / (2 * STEP)                          # (A, S)
    n = np.stack([sens["density"].sel(species=s).values for s in model.species], -1)
    exact = np.stack([sens["sensitivity_Te"].sel(species=s).values for s in model.species],
                     -1)
    keep = n > 1e-6 * n.max(axis=0, keepdims=True)
    err = np.abs(fd - exact)[keep]
    assert err.max() < 2e-4, err.max()
    i = model.species.index("O+")
    assert np.abs(exact[:, i]).max() > 0.05      # transport makes O+ depend on Te


def test_temperature_derivatives_shared_by_changed_models_are_their_own():
    """Models with scaled rates, one rate switched off, or one replaced expression, on the
    same environment, reuse the base model's ∂ln k/∂ln T columns only where they are their
    own: equal to central differences of their own rate coefficients (h = 1e-5 in ln T,
    numerical differentiation; equal to its rounding) for Te, Ti and Tn."""
    from ionochem.analysis import sensitivity as S
    base = _model(21, False)
    R = list(base.reactions)
    te_dep = [r for r, e in zip(R, base.rate_expressions, strict=True) if "Te" in e.variables]
    for name in ("Te", "Ti", "Tn"):
        S._dlnk(base, name)                               # fills the shared columns
    models = {"scaled": base.with_changes(scale={te_dep[0]: 3.0, R[0]: 0.5}),
              "set": base.with_changes({te_dep[1]: "2.0e-7"}),
              "off": base.with_changes(scale={te_dep[2]: 0.0})}
    for what, changed in models.items():
        assert changed.environment is base.environment
        for name in ("Te", "Ti", "Tn"):
            got = S._dlnk(changed, name)
            T = getattr(changed.environment, name)
            up = changed.rate_coefficients(temperatures={name: T * np.exp(1e-5)})
            dn = changed.rate_coefficients(temperatures={name: T * np.exp(-1e-5)})
            with np.errstate(divide="ignore", invalid="ignore"):
                ref = np.where((up > 0) & (dn > 0), (np.log(up) - np.log(dn)) / 2e-5, 0.0)
            # 1e-9: the rounding of ln k (|ln k| ~ 30, 2e-16 relative) over the step 2e-5.
            np.testing.assert_allclose(got, ref, rtol=0, atol=1e-9, err_msg=what)
    assert np.all(S._dlnk(models["set"], "Te")[:, R.index(te_dep[1])] == 0)   # a constant
    assert np.all(S._dlnk(models["off"], "Te")[:, R.index(te_dep[2])] == 0)   # off
    assert np.abs(S._dlnk(models["scaled"], "Te")[:, R.index(te_dep[0])]).max() > 0.1
