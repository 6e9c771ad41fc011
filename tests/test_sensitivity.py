"""Exact local sensitivities (ionochem.analysis.sensitivity) against analytic values and
against central finite differences of re-solved columns.

The one-ion column is synthetic (invented rates); the finite-difference checks run on the
mid-latitude demo scenario (invented site and date) on a coarser grid, with the default
reaction list.
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest

import ionochem
from ionochem.io.scenario import Grid

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "scenarios" / "midlatitude_equinox.toml"

ALT = np.linspace(100.0, 300.0, 21)
Q = 50.0 * np.exp((ALT - 100.0) / 80.0)          # invented production, cm-3 s-1
TE = np.linspace(250.0, 2500.0, ALT.size)        # invented electron temperature, K

ONE_ION = """\
P1: O -> O+ + e | k = prescribed | ref = invented test
R1: O+ + e -> O | k = 2.0e-7*(300/Te)^0.7 | ref = invented test
"""

STEP = 3e-4          # finite-difference step in ln k and ln Te


def _one_ion_model(column):
    path = column(ONE_ION, ALT, neutrals={"O": 1e10 * np.exp(-(ALT - 100) / 50)},
                  Tn=np.linspace(200, 1000, ALT.size), Te=TE, production={"P1": Q})
    return ionochem.Model(ionochem.load_scenario(path))


def test_one_ion_sensitivities_are_plus_and_minus_one_half(column):
    """n = sqrt(q/α) gives S(n, q) = +1/2 and S(n, α) = −1/2 exactly, for O+ and e, at
    every level, to 1e-8 (analytic balance q = α n²)."""
    sens = _one_ion_model(column).sensitivity()
    for s in ("O+", "e"):
        S = sens["sensitivity"].sel(species=s)
        np.testing.assert_allclose(S.sel(reaction="P1").values, 0.5, atol=1e-8)
        np.testing.assert_allclose(S.sel(reaction="R1").values, -0.5, atol=1e-8)


def test_one_ion_te_sensitivity_is_half_the_recombination_exponent(column):
    """α ∝ Te^-0.7 and n = sqrt(q/α) ∝ Te^0.35, so ∂ln n/∂ln Te = 0.35 exactly (analytic;
    the rate difference in ln Te is exact for a power law)."""
    sens = _one_ion_model(column).sensitivity()
    np.testing.assert_allclose(sens["sensitivity_Te"].sel(species="O+").values, 0.35,
                               atol=1e-8)


# ----------------------------------------------------------------------- the demo column
@pytest.fixture(scope="module")
def demo():
    """The demo scenario, photochemical (no [transport]), on a 21-level grid (90-450 km),
    with its exact sensitivities (test_transport.py checks them with transport)."""
    scen = ionochem.load_scenario(DEMO)
    grid = tuple(float(a) for a in np.linspace(90.0, 450.0, 21))
    model = ionochem.Model(scen.replace(grid=Grid(altitude_km=grid), transport=None))
    return model, model.sensitivity()


def _log_densities(model, sens, n, given):
    """ln of every non-fixed reported species (solved, e, derived totals), (name → (B,))."""
    mech = model.mechanism
    full = mech.full_densities(n, given)
    out = {}
    for s, role in zip(sens["species"].values, sens["role"].values, strict=True):
        if s in mech.all_species and role != "fixed":
            out[s] = full[:, mech.index(s)]
    for tot in mech.derived:
        out[tot.name] = sum(full[:, mech.index(m)] for m in tot.members)
    with np.errstate(divide="ignore"):
        return {s: np.log(v) for s, v in out.items()}


def test_exact_sensitivities_match_central_differences_on_demo(demo):
    """Every S = ∂ln n/∂ln k of the default list, every species and level, equals the
    central difference of re-solved steady states with k_j scaled by exp(±h), h = 3e-4,
    to 1e-4 absolute (numerical differentiation of independent Newton solves)."""
    model, sens = demo
    k0 = model.rate_coefficients()
    A, R = k0.shape
    # One batched solve: rows = (reaction, sign, altitude).
    K = np.broadcast_to(k0, (R, 2, A, R)).copy()
    idx = np.arange(R)
    K[idx, 0, :, idx] *= np.exp(STEP)
    K[idx, 1, :, idx] *= np.exp(-STEP)
    given = np.tile(model.given, (2 * R, 1))
    res = model.steady_densities(k=K.reshape(-1, R), given=given)
    logs = _log_densities(model, sens, res.n, given)
    assert len(logs) >= 10
    largest = 0.0
    for s, ln in logs.items():
        ln = ln.reshape(R, 2, A)
        fd = (ln[:, 0] - ln[:, 1]) / (2 * STEP)                    # (R, A)
        exact = sens["sensitivity"].sel(species=s).values           # (R, A)
        assert np.all(np.isfinite(fd)), s
        np.testing.assert_allclose(exact, fd, rtol=0, atol=1e-4, err_msg=s)
        largest = max(largest, np.abs(exact).max())
    assert largest > 0.5      # the check is not comparing zeros


def _te_breakpoints(model):
    """Te values where a rate expression of the list switches branch (``Te < 1200`` …)."""
    number = r"([0-9]+(?:\.[0-9]*)?(?:[eE][-+]?[0-9]+)?)"
    found = set()
    for r in model._rxns:
        text = r.k.text
        for m in re.finditer(r"\bTe\s*(?:<=|>=|<|>)\s*" + number, text):
            found.add(float(m.group(1)))
        for m in re.finditer(number + r"\s*(?:<=|>=|<|>)\s*Te\b", text):
            found.add(float(m.group(1)))
    return sorted(found)


def test_te_sensitivity_matches_central_differences_away_from_breakpoints(demo):
    """∂ln n/∂ln Te equals the central difference of steady states re-solved with every
    rate at Te·exp(±h), h = 3e-4, to 1e-4 absolute, at every level more than one grid step
    from a piecewise rate's Te breakpoint (numerical differentiation; on
    breakpoints)."""
    model, sens = demo
    Te = model.environment.Te
    breaks = _te_breakpoints(model)
    assert 1200.0 in breaks           # DR_O2plus switches at Te = 1200 K
    lo = np.minimum.reduce([Te, np.r_[Te[:1], Te[:-1]], np.r_[Te[1:], Te[-1:]]])
    hi = np.maximum.reduce([Te, np.r_[Te[:1], Te[:-1]], np.r_[Te[1:], Te[-1:]]])
    skip = np.zeros(Te.size, bool)
    for b in breaks:
        skip |= (lo <= b) & (b <= hi)
    assert skip.sum() <= 4
    k_up = model.rate_coefficients(temperatures={"Te": Te * np.exp(STEP)})
    k_dn = model.rate_coefficients(temperatures={"Te": Te * np.exp(-STEP)})
    given = np.tile(model.given, (2, 1))
    res = model.steady_densities(k=np.vstack([k_up, k_dn]), given=given)
    for s, ln in _log_densities(model, sens, res.n, given).items():
        ln = ln.reshape(2, Te.size)
        fd = (ln[0] - ln[1]) / (2 * STEP)
        exact = sens["sensitivity_Te"].sel(species=s).values
        np.testing.assert_allclose(exact[~skip], fd[~skip], rtol=0, atol=1e-4, err_msg=s)
    assert np.abs(sens["sensitivity_Te"].sel(species="O2+").values).max() > 0.1


def test_raising_o2d_n2_raises_f_region_n2plus_with_sensitivity_below_one(demo):
    """O+(2D) + N2 → N2+ + O is an F-region source of N2+ among others: raising it raises
    N2+ there, with 0 < S < 1 over 160-400 km *(common practice)*."""
    model, sens = demo
    alt = sens["altitude"].values
    f_region = (alt >= 160) & (alt <= 400)
    # O2D_N2 is a family over the product's levels: the total's sensitivity is the sum.
    members = [r for r in sens["reaction"].values if str(r).startswith("O2D_N2(")]
    S = sens["sensitivity"].sel(species="N2+", reaction=members).sum("reaction").values[f_region]
    assert np.all((S > 0) & (S < 1))
    base = model.solve()["density"].sel(species="N2+").values[f_region]
    more = model.with_changes(scale={"O2D_N2": 1.1}).solve()
    raised = more["density"].sel(species="N2+").values[f_region]
    assert np.all(raised > base)
    # A 10 % rise follows the local sensitivity, 1.1^S, to first order.
    np.testing.assert_allclose(np.log(raised / base), S * np.log(1.1), rtol=0.1)
