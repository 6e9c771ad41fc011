"""Fitting rate multipliers to observations (ionochem.analysis.fit, ``ionochem fit``).

Checks against sources outside the code under test: synthetic truth (observations made by
the model itself with known multipliers and Gaussian noise in ln density, drawn with
numpy's generator), the analytic one-ion column n = sqrt(q/α) (analytic), whose ln n
depends on ln q − ln α only, central finite differences of the misfit, and the frequentist
coverage of 68 % Gaussian intervals (a linear model with known Gaussian errors covers the
truth 68.27 % of the time). The columns are synthetic with invented rates.
"""

from __future__ import annotations

import numpy as np
import pytest
import xarray as xr
from test_observations import ALT, small_column  # tests/ is on sys.path (rootdir conftest)

import ionochem
from ionochem.analysis.fit import (
    _Problem,
    electron_constrained_model,
    fit,
    resolve_parameters,
)
from ionochem.cli import main


def synthetic_observations(model, species, scale, log_s, rng, path=None, te=None):
    """Observations of ``species`` at every level of ``model`` with multipliers ``scale``
    applied, noise N(0, log_s) in ln density; sigma chosen so that the misfit's
    s = sqrt(ln(1 + (σ/y)²)) equals ``log_s`` exactly."""
    from ionochem.analysis.fit import model_on
    truth = model
    if te is not None:
        truth = model_on(truth, Te=model.environment.Te * te)
    truth = truth.with_changes(scale=scale)
    ds = truth.solve()
    rows = []
    for s in species:
        n = ds["density"].sel(species=s).values
        y = n * np.exp(log_s * rng.standard_normal(n.size))
        sig = y * np.sqrt(np.expm1(log_s ** 2))
        rows += [(a, s, v, e) for a, v, e in zip(ALT, y, sig)]
    obs = xr.Dataset({
        "altitude_km": ("observation", np.array([r[0] for r in rows])),
        "species": ("observation", np.array([r[1] for r in rows], object)),
        "kind": ("observation", np.array(["electron_density" if r[1] == "e" else "density"
                                          for r in rows], object)),
        "density_cm3": ("observation", np.array([r[2] for r in rows])),
        "sigma_cm3": ("observation", np.array([r[3] for r in rows])),
        "line": ("observation", np.zeros(len(rows), int))}, attrs={"source": "synthetic"})
    if path is not None:
        with open(path, "w") as fh:
            fh.write("# synthetic (invented) observations\n"
                     "altitude_km,species,density_cm3,sigma_cm3\n")
            for a, s, v, e in rows:
                fh.write(f"{float(a)!r},{s},{float(v)!r},{float(e)!r}\n")
    return obs


@pytest.fixture
def small_model(column):
    return ionochem.Model(ionochem.load_scenario(small_column(column)))


def test_synthetic_truth_is_recovered_within_its_errors(small_model):
    """Observations made with R4 × 1.6, R3 × 0.8 and P1 × 1.2 (10 % noise in ln n; N2+,
    NO+, O+ and e at every level) are fitted back: each ln multiplier within 3 of its
    stated sigma of the truth, and χ² within 4 standard deviations (sqrt(2 dof)) of the degrees of
    freedom (chi-square distribution)."""
    rng = np.random.default_rng(20261202)
    truth = {"R4": 1.6, "R3": 0.8, "P1": 1.2}
    obs = synthetic_observations(small_model, ["N2+", "NO+", "O+", "e"], truth, 0.1, rng)
    ds = fit(small_model, obs, list(truth), priors={k: "none" for k in truth})
    for p in ds["parameter"].values:
        err = float(ds["log_multiplier"].sel(parameter=p)) - np.log(truth[p])
        sig = float(ds["log_multiplier_sigma"].sel(parameter=p))
        assert 0 < sig < 0.2
        assert abs(err) < 3 * sig, (p, err, sig)
    dof = int(ds["degrees_of_freedom"])
    assert dof == 40 - 3
    assert abs(float(ds["chi2"]) - dof) < 4 * np.sqrt(2 * dof)
    assert float(ds["chi2_baseline"]) > 5 * float(ds["chi2"])
    assert ds.attrs["converged"] == 1


@pytest.mark.slow
def test_coverage_of_68_percent_intervals(small_model):
    """Over 200 noise realisations the ±1σ intervals of two fitted ln multipliers (P2 and
    R4 from N2+ and e profiles, 8 % noise) cover the truth 68 ± 5 % of the time (Gaussian
    68.27 %; the column is nearly log-linear in the multipliers)."""
    rng = np.random.default_rng(7)
    truth = np.log([0.8, 1.3])
    problem_model = small_model
    hits = []
    base = problem_model.with_changes(scale={"P2": 0.8, "R4": 1.3}).solve()
    for _ in range(200):
        rows_y, rows_s, rows_a, rows_sp = [], [], [], []
        for s in ("N2+", "e"):
            n = base["density"].sel(species=s).values
            y = n * np.exp(0.08 * rng.standard_normal(n.size))
            rows_y.append(y)
            rows_s.append(y * np.sqrt(np.expm1(0.08 ** 2)))
            rows_a.append(ALT)
            rows_sp += [s] * n.size
        obs = xr.Dataset({
            "altitude_km": ("observation", np.concatenate(rows_a)),
            "species": ("observation", np.array(rows_sp, object)),
            "kind": ("observation", np.array(["density"] * len(rows_sp), object)),
            "density_cm3": ("observation", np.concatenate(rows_y)),
            "sigma_cm3": ("observation", np.concatenate(rows_s)),
            "line": ("observation", np.zeros(len(rows_sp), int))})
        ds = fit(problem_model, obs, ["P2", "R4"], priors={"P2": "none", "R4": "none"})
        err = ds["log_multiplier"].values - truth
        hits.append(np.abs(err) < ds["log_multiplier_sigma"].values)
    rate = np.mean(hits)
    assert 0.63 <= rate <= 0.73, rate


ONE_ION = """\
P1: O -> O+ + e | k = prescribed | f = 1.5 | ref = invented test
R1: O+ + e -> O | k = 2.0e-7*(300/Te)^0.7 | f = 1.3 | ref = invented test
"""


def test_production_and_recombination_are_reported_degenerate(column):
    """In the one-ion column ln n = (ln q − ln α)/2 exactly (analytic), so the data
    constrain only ln m(P1) − ln m(R1): the fit names P1 and R1 as degenerate, and with
    their priors their posterior correlation is close to +1."""
    z = np.linspace(150.0, 300.0, 8)
    path = column(ONE_ION, z, neutrals={"O": 1e10 * np.exp(-(z - 150) / 50)},
                  Tn=np.full(z.size, 900.0), Te=np.linspace(900, 2000, z.size),
                  production={"P1": 100 * np.exp(-(z - 150) / 80)}, name="one")
    model = ionochem.Model(ionochem.load_scenario(path))
    rng = np.random.default_rng(3)
    n = model.solve()["density"].sel(species="O+").values * 1.5
    y = n * np.exp(0.05 * rng.standard_normal(n.size))
    obs = xr.Dataset({
        "altitude_km": ("observation", z), "species": ("observation", np.array(["O+"] * 8,
                                                                                object)),
        "kind": ("observation", np.array(["density"] * 8, object)),
        "density_cm3": ("observation", y), "sigma_cm3": ("observation", 0.05 * y),
        "line": ("observation", np.zeros(8, int))})
    ds = fit(model, obs, ["P1", "R1"])
    text = ds.attrs["degenerate"]
    assert "cannot separate P1, R1" in text, text
    assert float(ds["singular_value"].min()) < 1e-6 * float(ds["singular_value"].max())
    assert float(ds["correlation"].sel(parameter="P1", parameter_b="R1")) > 0.9
    assert "strongly correlated" in ds.attrs["warnings"]
    # The constrained combination: m(P1)/m(R1) = 1.5² within its error.
    d = ds["log_multiplier"].values
    assert d[0] - d[1] == pytest.approx(2 * np.log(1.5), abs=0.05)


def _fd_check(problem, theta, step=1e-4):
    J = problem.jacobian(theta)
    fd = np.empty_like(J)
    for p in range(theta.size):
        e = np.zeros_like(theta)
        e[p] = step
        fd[:, p] = (problem.residuals(theta + e) - problem.residuals(theta - e)) / (2 * step)
    return J, fd


def test_jacobian_matches_finite_differences_of_the_misfit(small_model, tmp_path):
    """The exact Jacobian (sensitivities through the interpolation matrix) equals central
    finite differences (step 1e-4 in ln m) of the whitened residuals, data and prior rows,
    for reactions and Te, at a point away from the baseline; observations off the grid
    levels and a ratio row included."""
    path = tmp_path / "o.csv"
    path.write_text("altitude_km,species,density_cm3,sigma_cm3,kind\n"
                    "137,N2+,40,8,\n201.5,NO+,3e3,3e2,\n250,e,2e4,2e3,\n"
                    "175,NO+/O+,1.0,0.2,ratio\n290,O+,1e4,2e3,\n")
    obs = ionochem.load_observations(path)
    params = resolve_parameters(small_model, ["R4", "P2", "R1", "Te"])
    problem = _Problem(small_model, obs, params, {"R4": np.log(1.3), "P2": np.log(1.5),
                                                  "R1": None, "Te": np.log(1.2)})
    theta = np.array([0.2, -0.3, 0.1, 0.05])
    J, fd = _fd_check(problem, theta)
    np.testing.assert_allclose(J, fd, rtol=2e-5, atol=2e-5 * np.abs(fd).max())


def test_electron_constraint_fixes_ne_and_keeps_the_jacobian_exact(small_model, tmp_path):
    """With the observed Ne as the electron table the solved electrons equal the observed
    profile (log-linear interpolation between rows), e rows are dropped from the misfit,
    and the Jacobian still matches finite differences."""
    ds0 = small_model.solve()
    ne = ds0["density"].sel(species="e").values * 1.3
    lines = ["altitude_km,species,density_cm3,sigma_cm3"]
    lines += [f"{float(a)!r},e,{float(v)!r},{float(0.1 * v)!r}" for a, v in zip(ALT, ne)]
    lines += ["150,N2+,40,8", "220,NO+,1e4,2e3"]
    path = tmp_path / "ne.csv"
    path.write_text("\n".join(lines) + "\n")
    obs = ionochem.load_observations(path)
    constrained = electron_constrained_model(small_model, obs)
    np.testing.assert_allclose(constrained.solve()["density"].sel(species="e").values, ne,
                               rtol=1e-9)
    problem = _Problem(constrained, obs, resolve_parameters(constrained, ["R4", "R3"]),
                       {"R4": None, "R3": None})
    assert problem.use.sum() == 2
    J, fd = _fd_check(problem, np.array([0.1, -0.2]))
    np.testing.assert_allclose(J, fd, rtol=2e-5, atol=2e-5 * np.abs(fd).max())
    out = fit(constrained, obs, ["R4", "R3"])
    assert out.attrs["electrons"] == "table"
    assert "electron constraint" in out.attrs["warnings"]


def test_profile_likelihood_matches_the_gaussian_interval(small_model):
    """For a nearly log-linear column the profile χ² has its minimum at the fit and rises
    by 1 at about ±1 sigma (Wilks: Δχ² = 1 for 68 % of one parameter)."""
    rng = np.random.default_rng(11)
    obs = synthetic_observations(small_model, ["N2+", "e"], {"R4": 1.4}, 0.1, rng)
    ds = fit(small_model, obs, ["R4", "P2"], priors={"R4": "none", "P2": "none"},
             profile="R4", profile_points=9)
    chi2 = ds["profile_chi2"].values
    grid = ds["profile_log_multiplier"].values
    best = float(ds["log_multiplier"].sel(parameter="R4"))
    sig = float(ds["log_multiplier_sigma"].sel(parameter="R4"))
    assert grid[np.argmin(chi2)] == pytest.approx(best, abs=1e-6)
    lo, hi = (np.log(float(x)) for x in ds.attrs["profile_interval_68"].split(" to "))
    assert hi - best == pytest.approx(sig, rel=0.1)
    assert best - lo == pytest.approx(sig, rel=0.1)


def test_fit_command_writes_the_contract_variables(column, tmp_path, capsys):
    """``ionochem fit`` prints the fitted multipliers and writes FIT.nc with the variables
    of docs/outputs.md ("Fits") and a figure; bad --free / --prior, and an electron
    constraint without electron-density rows, exit 2."""
    scen = small_column(column)
    model = ionochem.Model(ionochem.load_scenario(scen))
    obs_path = tmp_path / "o.csv"
    synthetic_observations(model, ["N2+", "e"], {"R4": 2.0}, 0.1,
                           np.random.default_rng(5), path=obs_path)
    out, fig = tmp_path / "fit.nc", tmp_path / "fit.png"
    code = main(["fit", str(scen), "--observed", str(obs_path), "--free", "R4",
                 "--free", "P2", "--prior", "P2=1.5", "--prior", "R4=none", "-o", str(out),
                 "--plot", str(fig)])
    text = capsys.readouterr()
    assert code == 0, text.err
    assert "R4" in text.out and "multiplier" in text.out
    ds = xr.open_dataset(out)
    for v in ("log_multiplier", "multiplier", "log_covariance", "correlation",
              "density_fitted", "density_baseline", "residual", "chi2",
              "degrees_of_freedom"):
        assert v in ds, v
    assert ds["log_covariance"].dims == ("parameter", "parameter_b")
    assert float(ds["multiplier"].sel(parameter="R4")) == pytest.approx(2.0, rel=0.25)
    ds.close()
    assert fig.stat().st_size > 1000
    from PIL import Image  # matplotlib's own dependency
    with Image.open(fig) as im:      # a readable page width (the figure was 1,700-2,300 px)
        assert im.size[0] <= 1500, im.size
    n2_only = tmp_path / "n2.csv"
    synthetic_observations(model, ["N2+"], {}, 0.1, np.random.default_rng(6), path=n2_only)
    for bad, words in ((["--free", "NOPE"], "--free: no reaction"),
                       (["--free", "R4", "--prior", "R4=0.5"], "--prior: prior factor"),
                       (["--free", "R4", "--prior", "R9=2"], "not a free parameter"),
                       (["--free", "R4", "--free", "R4"], "overlaps"),
                       (["--free", "R4", "--constrain-electrons", "--observed",
                         str(n2_only)], "no electron-density")):
        code = main(["fit", str(scen), "--observed", str(obs_path), *bad])
        err = capsys.readouterr().err
        assert code == 2 and words in err, err


def test_family_and_te_parameters_resolve_on_the_default_list():
    """A family id with or without ``(v)`` frees all its levels (the default list's N2+
    recombination family has six levels, v = 0..5); Te is the electron temperature."""
    from pathlib import Path
    root = Path(__file__).resolve().parents[1]
    model = ionochem.Model(ionochem.load_scenario(root / "scenarios" /
                                                  "tabulated_column.toml"))
    a, b, c = resolve_parameters(model, ["DR_N2plus", "N2plus_O2(v)", "Te"])
    assert [model.reactions[j] for j in a.indices] == [f"DR_N2plus(v={v})" for v in range(6)]
    assert len(b.indices) == 6 and c.is_te and c.indices == ()
    with pytest.raises(ionochem.InputError, match="overlaps"):
        resolve_parameters(model, ["DR_N2plus", "DR_N2plus(v=1)"])


def test_worked_example_is_labelled_invented_and_shows_the_n2plus_excess():
    """The example's observation file says it is invented, fits the demo scenario's grid,
    and holds the factor-of-two N2+ excess it was made with (median model/observed 0.5
    within the 15 % noise) while the electrons agree (0.9-1.1)."""
    from pathlib import Path

    from ionochem.analysis.misfit import misfit_of_dataset
    root = Path(__file__).resolve().parents[1]
    path = root / "scenarios" / "observations" / "brackenfold_n2plus_ne.csv"
    assert "INVENTED" in path.read_text().splitlines()[0]
    obs = ionochem.load_observations(path)
    model = ionochem.Model(ionochem.load_scenario(root / "scenarios" /
                                                  "tabulated_column.toml"))
    mf = misfit_of_dataset(obs, model.solve())
    logs = np.log(obs["density_cm3"].values)
    n2 = obs["species"].values == "N2+"
    ratio = np.exp(np.median(mf.log_model[n2] - logs[n2]))
    assert ratio == pytest.approx(0.5, abs=0.08)
    ratio_e = np.exp(np.median(mf.log_model[~n2] - logs[~n2]))
    assert 0.9 < ratio_e < 1.1
