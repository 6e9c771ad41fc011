"""``ionochem discern``: separation of a baseline and a changed rate set.

External references: the closed form of a one-ion column n = P / (k1 [O2] + k2 [N2]) (its
linear separation written out here, and the exact moments of ln n under a log-normal k1 by
Gauss–Hermite quadrature, numpy.polynomial.hermite_e); an independent numpy computation of
Δᵀ C⁻¹ Δ with the full covariance matrix built member by member; the physics of N2+ loss
(dissociative recombination's share of N2+ loss grows with altitude as the molecular
neutrals fall off faster than the electrons: docs/physics.md §1).
"""

from __future__ import annotations

import numpy as np
import pytest
import xarray as xr

import ionochem
from ionochem.analysis.compare import changed_model
from ionochem.analysis.discern import (
    MeasurementError,
    Observable,
    Uncertain,
    separate,
)
from ionochem.analysis.discern_check import monte_carlo_check
from ionochem.cli import main
from ionochem.mechanism.parser import parse_reaction_text

DEMO = "scenarios/midlatitude_equinox.toml"

ALT = np.array([200.0, 250.0, 300.0])
O2 = np.array([2e8, 5e7, 1e7])                 # invented neutral densities, cm-3
N2 = np.array([4e9, 1e9, 1e8])
K1, K2, C = 2e-11, 1e-12, 3.0                  # invented rates; the change scales k2 by C
REL = 0.02
ANALYTIC = """\
P1: O -> O+ + e | k = prescribed | f = 1 | ref = invented test
L1: O+ + O2 -> O2+ + O | k = {k1} | f = {f} | ref = invented test
L2: O+ + N2 -> NO+ + N | k = {k2} | f = 1.3 | ref = invented test
R1: O2+ + e -> 2 O | k = 2e-7 | f = 1 | ref = invented test
R2: NO+ + e -> N + O | k = 4e-7 | f = 1 | ref = invented test
"""


def _analytic_scenario(column, f):
    return column(ANALYTIC.format(k1=K1, k2=K2, f=f), ALT,
                  neutrals={"O": 1e9, "O2": O2, "N2": N2, "N": 1e6}, Tn=800.0,
                  production={"P1": 100.0}, name=f"an{str(f).replace('.', '_')}")


def _closed_form_linear(f):
    """|Δ ln n| / sqrt(½ (s_b² + s_c²) ln² f + REL²), s = ∂ln n/∂ln k1 = −a/(a + b)."""
    a, b = K1 * O2, K2 * N2
    delta = -np.log((a + C * b) / (a + b))
    sb, sc = -a / (a + b), -a / (a + C * b)
    return np.abs(delta) / np.sqrt(0.5 * (sb ** 2 + sc ** 2) * np.log(f) ** 2 + REL ** 2)


def _exact_separation(f):
    """The same with the exact mean and variance of ln n = ln P − ln(a e^{σz} + b),
    z ~ N(0, 1), by 80-point Gauss–Hermite quadrature."""
    x, w = np.polynomial.hermite_e.hermegauss(80)
    w = w / w.sum()
    a, s = K1 * O2, np.log(f)

    def moments(b):
        y = -np.log(a[:, None] * np.exp(s * x[None]) + b[:, None])
        m = (y * w).sum(axis=1)
        return m, ((y - m[:, None]) ** 2 * w).sum(axis=1)
    mb, vb = moments(K2 * N2)
    mc, vc = moments(C * K2 * N2)
    return np.abs(mc - mb) / np.sqrt(0.5 * (vb + vc) + REL ** 2)


def test_command_separation_equals_the_closed_form(column, tmp_path):
    """One ion lost to O2 and N2: n = P/(k1[O2] + k2[N2]); k2 scaled by 3, k1 uncertain
    (f = 1.1), 2 % measurement error; the command's netCDF ``separation`` equals the closed
    form to 1e-6 (relative)."""
    scen = _analytic_scenario(column, 1.1)
    out = tmp_path / "d.nc"
    assert main(["discern", str(scen), "--scale", f"L2={C}", "--observable", "O+",
                 "--error", f"{REL}", "--environment", "none", "-o", str(out)]) == 0
    with xr.open_dataset(out) as ds:
        got = ds["separation"].sel(observable="O+").values
        assert ds["separation"].attrs["units"] == "1"
        assert "_FillValue" not in ds["altitude"].encoding or \
            ds["altitude"].encoding["_FillValue"] is None
    np.testing.assert_allclose(got, _closed_form_linear(1.1), rtol=1e-6)


@pytest.mark.parametrize("f, samples", [(1.1, 400), (3.0, 2000)])
def test_monte_carlo_check_agrees_at_small_spread_and_shows_nonlinearity_at_large(column, f,
                                                                                  samples):
    """The sampled separation agrees with the exact one (Gauss–Hermite) within 3 bootstrap
    standard errors at f = 1.1 and f = 3; the linear one agrees at f = 1.1 (0.5 %) and is
    off by more than 3 standard errors at f = 3 where the quadrature puts it more than
    10 % off (ln n is not linear in ln k1 over a factor-3 spread where k1[O2] and k2[N2]
    are comparable)."""
    base = ionochem.Model(ionochem.load_scenario(_analytic_scenario(column, f)))
    changed = changed_model(base, scale={"L2": C})
    obs = [Observable("O+")]
    unc = Uncertain({}, 1.0)
    point = separate(base, changed, obs, {"O+": MeasurementError(REL, 0.0)}, unc)
    out = monte_carlo_check(base, changed, obs, unc, point, samples, seed=3)
    exact = _exact_separation(f)
    mc, se = out["separation"][0], out["stderr"][0]
    assert np.all(np.abs(mc - exact) < 3 * se)
    lin = point.separation[0]
    if f < 2:
        np.testing.assert_allclose(lin, exact, rtol=5e-3)
    else:
        off = np.abs(lin - exact) > 0.1 * exact       # where the quadrature says so
        assert off.sum() >= 2
        assert np.all(np.abs(lin - mc)[off] > 3 * se[off])


@pytest.fixture(scope="module")
def demo():
    base = ionochem.Model(ionochem.load_scenario(DEMO))
    return base


def _log_sigma(model):
    lnf = np.log(np.asarray(model.uncertainty_factors(), float))
    for j, (lo, hi) in model.rate_bands().items():
        lnf[:, j] = 0.5 * np.log(np.asarray(hi) / np.asarray(lo))
    return lnf


def _numpy_covariance(model, sens, exclude, spreads, name="N2+", over=None):
    """Full C over altitudes, one unit at a time: C = Σ_u w_u w_uᵀ + Σ_e w_e w_eᵀ (of the
    ratio name/over when ``over`` is given: the difference of the two sensitivities)."""
    def sel(var, sp):
        return np.nan_to_num(sens[var].sel(species=sp).values)
    S = sel("sensitivity", name) - (sel("sensitivity", over) if over else 0.0)  # (R, A)
    sig = _log_sigma(model).T
    units = [str(u) for u in sens["reaction_unit"].values]
    A = S.shape[1]
    C = np.zeros((A, A))
    for u in dict.fromkeys(units):
        idx = [j for j, x in enumerate(units) if x == u]
        if any(model.reactions[j] in exclude for j in idx):
            continue
        w = (S[idx] * sig[idx]).sum(axis=0)
        C += np.outer(w, w)
    E = sel("sensitivity_environment", name) - (
        sel("sensitivity_environment", over) if over else 0.0)
    factors = list(sens["factor"].values)
    for fac, s in spreads.items():
        w = E[factors.index(fac)] * np.log(s)
        C += np.outer(w, w)
    return C


@pytest.mark.slow
def test_profile_separation_equals_numpy_full_covariance(demo):
    """Demo column, N2+ DR (both branches, all levels) × 0.5, N2+ over 200–400 km, every
    factor fully shared (ρ = 1): sqrt(Δᵀ (½(C_b + C_c) + D)⁻¹ Δ) equals an independent numpy
    build of the full matrix and np.linalg.solve to 1e-8."""
    changed = changed_model(demo, scale={"DR_N2plus_branches": 0.5})
    spreads = {"EUV": 1.2, "n(N2)": 1.1, "Te": 1.1}
    unc = Uncertain(spreads, 1.0)
    sb, sc = demo.sensitivity(), changed.sensitivity()
    r = separate(demo, changed, [Observable("N2+")], {"N2+": MeasurementError(0.1, 0.0)},
                 unc, altitude_range=(200.0, 400.0), sens_baseline=sb, sens_changed=sc)
    exclude = {x for x in demo.reactions if x.startswith("DR_N2plus")}
    assert set(r.excluded) == exclude
    C = 0.5 * (_numpy_covariance(demo, sb, exclude, spreads)
               + _numpy_covariance(changed, sc, exclude, spreads))
    alt = np.asarray(demo.altitude_km)
    m = (alt >= 200) & (alt <= 400)
    nb = sb["density"].sel(species="N2+").values
    nc = sc["density"].sel(species="N2+").values
    d = np.log(nc / nb)[m]
    Cm = C[np.ix_(m, m)] + np.eye(m.sum()) * 0.01
    expect = np.sqrt(d @ np.linalg.solve(Cm, d))
    np.testing.assert_allclose(r.profile[0], expect, rtol=1e-8)
    # Altitude by altitude as if independent would overstate it: the factors are shared.
    naive = np.sqrt(np.sum(d ** 2 / np.diag(Cm)))
    assert naive > 1.5 * expect
    # A ratio: its sensitivities are the differences of its two species'.
    ratio = separate(demo, changed, [Observable("N2+", "O+(total)")], {}, unc,
                     sens_baseline=sb, sens_changed=sc)
    Cr = 0.5 * (_numpy_covariance(demo, sb, exclude, spreads, over="O+(total)")
                + _numpy_covariance(changed, sc, exclude, spreads, over="O+(total)"))
    ob = sb["density"].sel(species="O+(total)").values
    oc = sc["density"].sel(species="O+(total)").values
    dr = np.log(nc / oc) - np.log(nb / ob)
    np.testing.assert_allclose(ratio.separation[0], np.abs(dr) / np.sqrt(np.diag(Cr) + 0.01),
                               rtol=1e-8)


@pytest.mark.slow
def test_inert_reaction_switched_off_gives_zero_separation(demo):
    """A reaction among fixed neutrals only (O + O2 -> O + O2, invented) has no effect on
    N2+: switching it off leaves separation 0 at every level, and it is the one reaction
    excluded."""
    extra = parse_reaction_text("INERT: O + O2 -> O + O2 | k = 1e-12 | f = 2 | "
                                "ref = invented test\n")
    base = changed_model(demo, additions=[extra])
    changed = changed_model(base, scale={"INERT": 0.0})
    r = separate(base, changed, [Observable("N2+"), Observable("N2+", "e")], {},
                 Uncertain())
    assert r.excluded == ("INERT",)
    assert np.all(r.separation[np.isfinite(r.separation)] == 0.0)
    assert np.isfinite(r.separation).sum() > 200


def test_halving_n2plus_recombination_separates_more_with_altitude(demo):
    """N2+ DR × 0.5: its share of N2+ loss grows with altitude (charge transfer to O and
    reaction with O falls with the neutrals while DR keeps pace with Ne), so |Δ ln N2+|
    grows monotonically above 200 km, and so does the separation, band by band."""
    changed = changed_model(demo, scale={"DR_N2plus": 0.5, "DR_N2plus_2D2D": 0.5})
    r = separate(demo, changed, [Observable("N2+")], {}, Uncertain())
    alt = np.asarray(demo.altitude_km)
    up = alt >= 200
    assert np.all(np.diff(r.delta[0, up]) > 0)
    sep = r.separation[0]
    means = [np.mean(sep[(alt >= lo) & (alt < hi)])
             for lo, hi in ((200, 230), (230, 260), (260, 300), (300, 450))]
    assert np.all(np.diff(means) > 0)
    assert sep[alt == 200][0] < 0.2 < 0.5 < sep[alt == 300][0]


@pytest.mark.parametrize("extra, message", [
    (["--observable", "Xe+"], "--observable: no species 'Xe+'"),
    (["--observable", "N2+/Q+"], "--observable: no species 'Q+'"),
    (["--observable", "N2+/"], "--observable: 'N2+/' is not an observable"),
    (["--error", "-0.1"], "--error: '-0.1': errors must be finite numbers >= 0"),
    (["--error", "N2+=0.1:-5"], "--error:"),
    (["--error", "Q+=0.1"], "--error: 'Q+' is not one of the observables"),
    (["--environment", "EUV=0.5"], "--environment: factor for EUV must be"),
    (["--environment", "n(Ar)=1.1"], "--environment: no environment factor 'n(Ar)'"),
    (["--member-correlation", "2"], "--member-correlation: must be between 0 and 1"),
    (["--monte-carlo", "3"], "--monte-carlo: at least 20 samples"),
    (["--altitudes", "300:200"], "--altitudes:"),
    (["--given-electrons"], "--given-electrons: a given electron density makes O+"),
    (["--check-point", "0"], "--check-point: needs --monte-carlo N"),
])
def test_bad_input_is_refused_before_work(extra, message, capsys, monkeypatch):
    """Bad options exit 2 with ``--option: message`` and never reach the analysis."""
    import ionochem.analysis.discern_sweep as ds_mod

    def boom(*a, **k):
        raise AssertionError("work started")
    monkeypatch.setattr(ds_mod, "separate", boom)
    argv = ["discern", DEMO, "--scale", "DR_N2plus_branches=0.5", *extra]
    assert main(argv) == 2
    assert message in capsys.readouterr().err


def test_discern_needs_a_change(capsys):
    assert main(["discern", DEMO]) == 2
    assert "needs at least one change" in capsys.readouterr().err


def test_help_states_the_default_spreads():
    """The help text (written out so that --help loads no numpy) names the defaults the
    analysis uses."""
    import argparse

    from ionochem.analysis.discern import DEFAULT_SPREADS
    from ionochem.cli import discern as cli
    sub = argparse.ArgumentParser().add_subparsers()
    cli.register(sub)
    text = sub.choices["discern"].format_help().replace("\n", "").replace(" ", "")
    for k, v in DEFAULT_SPREADS.items():
        assert f"{k}={v:g}" in text


def test_given_electron_density_is_the_baselines_in_both_models():
    """``--given-electrons`` (a radar's Ne): both models run in ``electrons = "table"`` mode
    at the baseline's own solved Ne (its definition), so Δ ln Ne = 0 at every level while
    the change still moves N2+."""
    from ionochem.analysis.discern import given_electron_models
    # Photochemical (a given Ne fixes O+ as the balance ion, which cannot also move).
    scen = ionochem.load_scenario("scenarios/midlatitude_solar_minimum.toml")
    base = ionochem.Model(scen.replace(transport=None))
    changed = changed_model(base, scale={"DR_N2plus_branches": 0.5})
    ne = base.solve()["density"].sel(species="e").values
    gb, gc = given_electron_models(base, changed)
    for m in (gb, gc):
        assert m.scenario.solve.electrons == "table"
        np.testing.assert_allclose(m.solve()["density"].sel(species="e").values, ne,
                                   rtol=1e-10)
    r = separate(gb, gc, [Observable("N2+")], {}, Uncertain())
    assert np.nanmax(r.separation) > 0.5


def test_output_file_is_cf_readable(column, tmp_path):
    """Every variable and coordinate of the discern file (a density and a ratio, with the
    Monte Carlo check) has a UDUNITS-parsable ``units`` (cf_xarray's pint registry, an
    outside reference) and a ``long_name``; coordinates carry no _FillValue; ``history``
    names the command."""
    from cf_xarray.units import units as cf_units
    scen = _analytic_scenario(column, 1.2)
    out = tmp_path / "d.nc"
    argv = ["discern", str(scen), "--scale", f"L2={C}", "--observable", "O+",
            "--observable", "O+/e", "--monte-carlo", "20", "-o", str(out)]
    assert main(argv) == 0
    with xr.open_dataset(out) as ds:
        for name, var in {**ds.data_vars, **ds.coords}.items():
            if var.dtype.kind in "OSU" or {"flag_values"} & set(var.attrs):
                continue
            assert "long_name" in var.attrs, name
            cf_units.Unit(var.attrs["units"])
        for name in ds.coords:
            assert ds[name].encoding.get("_FillValue") is None, name
        assert "log_observable_baseline" in ds and "separation_montecarlo" in ds
        assert ds.attrs["history"].endswith(" ".join(argv))
