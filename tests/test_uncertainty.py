"""Monte Carlo over rate uncertainties against analytic spreads, and its reproducibility.

The columns are synthetic (invented rates and densities). The reference case is the single
ion with production q and recombination α: n = sqrt(q/α), so with log-normal factors
ln n = ln n0 + ε_q ln f_q / 2 − ε_α ln f_α / 2 is normal with standard deviation
σ = ½ sqrt(ln² f_q + ln² f_α) (for n = sqrt(q/α): S(n, q) = ½, S(n, α) = −½ exactly).

Sampling error of the quantile estimates (large-sample theory of order statistics, e.g.
David & Nagaraja 2003, *Order Statistics*, 3rd ed., §10.3): for a normal variable the
16–84 % half-width (q84 − q16)/2 estimated from N samples has standard error 0.959 σ/√N,
the median 1.2533 σ/√N. Tolerances below are four standard errors.
"""

from __future__ import annotations

import pickle

import numpy as np
import pytest
import xarray as xr
from scipy.stats import norm

import ionochem
from ionochem.analysis import uncertainty as U
from ionochem.analysis.ensemble_store import store_path_for
from ionochem.errors import InputError

ALT = np.linspace(100.0, 300.0, 11)
Q = 50.0 * np.exp((ALT - 100.0) / 80.0)                # invented production, cm-3 s-1
TE = np.linspace(250.0, 2500.0, ALT.size)
O_DENS = 1e10 * np.exp(-(ALT - 100) / 50)
F_Q, F_A = 1.5, 1.3
Z84 = norm.ppf(0.84)                                    # 0.99446: q84 of N(0,1)

TWO_FACTOR = f"""\
P1: O -> O+ + e | k = prescribed | f = {F_Q} | ref = invented test
R1: O+ + e -> O | k = 2.0e-7*(300/Te)^0.7 | f = {F_A} | ref = invented test
"""

NO_FACTOR = """\
P1: O -> O+ + e | k = prescribed | ref = invented test
R1: O+ + e -> O | k = 2.0e-7*(300/Te)^0.7 | ref = invented test
"""

BANDED = """\
P1: O -> O+ + e | k = prescribed | ref = invented test
R1: O+ + e -> O | k = table("dr.csv", "k") | ref = invented test
"""

CHAIN = """\
P1: N2 -> N2+ + e | k = prescribed | f = 1.4 | ref = invented test
C1: N2+ + O -> O+ + N2 | k = 1.0e-10 | f = 1.3 | ref = invented test
C2: O+ + O2 -> O2+ + O | k = 2.0e-11*(300/Teff)^0.5 | f = 1.5 | ref = invented test
C3: O+ + N2 -> NO+ + N | k = 1.2e-12 | f = 1.6 | ref = invented test
C4: N2+ + O2 -> O2+ + N2 | k = 5.0e-11*(300/Teff) | f = 1.3 | ref = invented test
C5: O2+ + NO -> NO+ + O2 | k = 4.4e-10 | f = 1.2 | ref = invented test
D1: N2+ + e -> N + N | k = 2.2e-7*(300/Te)^0.39 | f = 1.2 | ref = invented test
D2: O2+ + e -> O + O | k = 1.95e-7*(300/Te)^0.7 | f = 1.25 | ref = invented test
D3: NO+ + e -> N + O | k = 4.0e-7*(300/Te)^0.5 | f = 1.2 | ref = invented test
D4: O+ + e -> O | k = 3.7e-12*(250/Te)^0.7 | f = 1.5 | ref = invented test
"""


def _one_ion(column, text=TWO_FACTOR, name="s"):
    path = column(text, ALT, neutrals={"O": O_DENS}, Tn=np.linspace(200, 1000, ALT.size),
                  Te=TE, production={"P1": Q}, name=name)
    return ionochem.Model(ionochem.load_scenario(path))


def _chain(column):
    h = np.exp(-(ALT - 100) / 40)
    neutrals = {"N2": 1e13 * h, "O2": 2e12 * h ** 1.2, "O": 5e11 * np.exp(-(ALT - 100) / 60),
                "NO": 1e8 * h, "N": 1e9 * h}
    path = column(CHAIN, ALT, neutrals=neutrals, Tn=np.linspace(200, 1000, ALT.size), Te=TE,
                  Ti=np.linspace(200, 1200, ALT.size), production={"P1": 10 * Q}, name="c")
    return ionochem.Model(ionochem.load_scenario(path))


def _log_quantiles(ds, species="O+"):
    return np.log(ds["density_quantiles"].sel(species=species).values)   # (quantile, alt)


def _sigma(*factors):
    return 0.5 * np.sqrt(sum(np.log(f) ** 2 for f in factors))


# ----------------------------------------------------------------------------- analytic
def test_spread_of_sqrt_q_over_alpha_matches_half_quadrature_of_log_factors(column):
    """16–84 % half-width of ln n = Φ⁻¹(0.84) · ½ sqrt(ln² f_q + ln² f_α) for n = sqrt(q/α)
    with f_q = 1.5, f_α = 1.3 (analytic); N = 4000, tolerance 4 standard errors
    (4 × 0.959 σ/√N ≈ 6 % of σ). The median is n0 within 4 × 1.2533 σ/√N. One draw per
    reaction is shared by every level, so the spread is the same at every level (to
    rounding) although n0 varies by a factor 4 over the column."""
    model = _one_ion(column)
    N = 4000
    ds = U.monte_carlo(model, N, seed=11)
    lq = _log_quantiles(ds)
    sigma = _sigma(F_Q, F_A)
    half = 0.5 * (lq[3] - lq[1])
    np.testing.assert_allclose(half, half[0], rtol=1e-9)
    assert abs(half[0] - Z84 * sigma) < 4 * 0.959 * sigma / np.sqrt(N)
    n0 = np.sqrt(Q / (2.0e-7 * (300 / TE) ** 0.7))
    assert np.all(np.abs(lq[2] - np.log(n0)) < 4 * 1.2533 * sigma / np.sqrt(N))
    np.testing.assert_allclose(ds["density_central"].sel(species="O+").values, n0, rtol=1e-8)
    # The 5–95 % half-width is Φ⁻¹(0.95) σ (standard error ≈ 1.3 σ/√N for that pair).
    assert abs(0.5 * (lq[4] - lq[0])[0] - norm.ppf(0.95) * sigma) < 4 * 1.3 * sigma / np.sqrt(N)


def test_variance_shares_of_two_factor_column_are_squared_log_factors(column):
    """For ln n = ½ε_q ln f_q − ½ε_α ln f_α the share of var(ln n) of each reaction is
    ln² f_j / (ln² f_q + ln² f_α) (analytic: 0.705 and 0.295). The first-order share from
    the exact sensitivities equals it to 1e-10; the share from a regression on the samples
    to 0.03 (≈ 4 standard errors from the sampling of var ε with N = 4000); the linear model
    explains all of var(ln n)."""
    model = _one_ion(column)
    ds = U.monte_carlo(model, 4000, seed=3)
    tot = np.log(F_Q) ** 2 + np.log(F_A) ** 2
    exact = {"P1": np.log(F_Q) ** 2 / tot, "R1": np.log(F_A) ** 2 / tot}
    for rid, share in exact.items():
        lin = ds["variance_share_linear"].sel(species="O+", reaction=rid).values
        np.testing.assert_allclose(lin, share, rtol=1e-10)
        smp = ds["variance_share"].sel(species="O+", reaction=rid).values
        assert np.all(np.abs(smp - share) < 0.03)
    np.testing.assert_allclose(ds["explained_variance"].sel(species="O+").values, 1.0,
                               atol=1e-9)
    np.testing.assert_allclose(ds["log_uncertainty_factor"].sel(reaction="P1").values,
                               np.log(F_Q), rtol=1e-12)


def test_asymmetric_band_is_sampled_as_its_one_sigma_range(column, tmp_path):
    """A table rate with band k/1.2 .. 1.5 k is a two-piece log-normal whose 16 % and 84 %
    points are the band edges (the band read as ±1σ, module docstring). With q exact,
    ln n = ln n0 − ½ ln α: its 84 % point is ln n0 + ½ Φ⁻¹(0.84) ln 1.2 and its 16 % point
    ln n0 − ½ Φ⁻¹(0.84) ln 1.5 (analytic), within 4 standard errors of a quantile
    (1.5075 σ_side/√N, David & Nagaraja 2003)."""
    T = np.array([100.0, 300.0, 1000.0, 3000.0, 6000.0])
    k = 2.0e-7 * (300 / T) ** 0.7
    rows = ["# invented test table", "Te_K,k,k_low,k_high"]
    rows += [f"{t:g},{v:.17g},{v / 1.2:.17g},{v * 1.5:.17g}" for t, v in zip(T, k)]
    (tmp_path / "dr.csv").write_text("\n".join(rows) + "\n")
    model = _one_ion(column, BANDED, name="b")
    kernel = U.SampleKernel(model)
    np.testing.assert_allclose(kernel.sigma_high[:, 1], np.log(1.5), rtol=1e-9)
    np.testing.assert_allclose(kernel.sigma_low[:, 1], np.log(1.2), rtol=1e-9)
    N = 4000
    ds = U.monte_carlo(model, N, seed=5)
    lq = _log_quantiles(ds)
    ln0 = np.log(ds["density_central"].sel(species="O+").values)
    up, down = 0.5 * np.log(1.2), 0.5 * np.log(1.5)
    assert np.all(np.abs(lq[3] - ln0 - Z84 * up) < 4 * 1.5075 * up / np.sqrt(N))
    assert np.all(np.abs(ln0 - lq[1] - Z84 * down) < 4 * 1.5075 * down / np.sqrt(N))
    assert ds.attrs["banded_reactions"] == "R1"


def test_electron_temperature_and_neutral_factors_have_analytic_spreads(column):
    """Te × factor (f_T = 1.25): α ∝ Te^-0.7 so ln n = 0.35 ε ln f_T; O × factor (f_O = 1.3)
    scales the prescribed production (rate = k n_O with k fixed): ln n = ½ ε ln f_O
    (analytic). Half-widths within 4 standard errors (N = 2000). The Te path re-evaluates
    the rate laws: the rates of a sample equal ``rate_coefficients`` at its temperature."""
    model = _one_ion(column, NO_FACTOR, name="n")
    N = 2000
    ds = U.monte_carlo(model, N, seed=2, environment={"Te": 1.25})
    half = 0.5 * np.diff(_log_quantiles(ds)[[1, 3]], axis=0)[0]
    s_te = 0.35 * np.log(1.25)
    assert np.all(np.abs(half - Z84 * s_te) < 4 * 0.959 * s_te / np.sqrt(N))
    np.testing.assert_allclose(ds["variance_share_linear_environment"]
                               .sel(species="O+", environment_factor="Te").values, 1.0,
                               rtol=1e-6)
    kernel = U.SampleKernel(model, {"Te": 1.25})
    z = U.draw_normals(2, 0, 3, kernel.width)
    kb = U.base_rates(model, kernel, z)
    fac = np.exp(z[1, kernel.te_column] * np.log(1.25))
    np.testing.assert_allclose(kb[1], model.rate_coefficients(
        temperatures={"Te": model.environment.Te * fac}), rtol=1e-14)

    ds = U.monte_carlo(model, N, seed=4, environment={"O": 1.3})
    half = 0.5 * np.diff(_log_quantiles(ds)[[1, 3]], axis=0)[0]
    s_o = 0.5 * np.log(1.3)
    assert np.all(np.abs(half - Z84 * s_o) < 4 * 0.959 * s_o / np.sqrt(N))
    # The fixed O density reported carries its sample factor: 68 % half-width ln 1.3.
    lo = _log_quantiles(ds, "O")
    assert np.all(np.abs(0.5 * (lo[3] - lo[1]) - Z84 * np.log(1.3))
                  < 4 * 0.959 * np.log(1.3) / np.sqrt(N))


def test_unknown_or_impossible_environment_factors_are_refused(column):
    """euv without photo reactions, a species that is not a fixed neutral, and factors
    below 1 are input errors naming the option (DEVELOPERS.md: errors are ionochem.Error)."""
    model = _one_ion(column)
    with pytest.raises(InputError, match="photo"):
        U.SampleKernel(model, {"euv": 1.2})
    with pytest.raises(InputError, match="fixed neutral"):
        U.SampleKernel(model, {"O+": 1.2})
    with pytest.raises(InputError, match=">= 1"):
        U.parse_spreads("O=0.9")
    assert U.parse_spreads("EUV=1.2, O=1.15,Te=1.1") == {"euv": 1.2, "O": 1.15, "Te": 1.1}


# ----------------------------------------------------------------------------- reproducibility
def test_sample_streams_are_numpy_spawned_children(column):
    """Sample i's draws are the stream of SeedSequence(seed).spawn(N)[i] (numpy's documented
    spawning), so a sample's draws do not depend on the batch it is drawn in."""
    seed = 1234
    children = np.random.SeedSequence(seed).spawn(20)
    ref = np.stack([np.random.default_rng(c).standard_normal(7) for c in children])
    np.testing.assert_array_equal(U.draw_normals(seed, 0, 20, 7), ref)
    np.testing.assert_array_equal(U.draw_normals(seed, 5, 9, 7), ref[5:9])


def test_solved_sample_does_not_depend_on_its_batch(column):
    """The densities of a sample solved alone, in a batch of 4 or of 13 agree to 1e-12
    relative (the steady solver decides step length and convergence row by row;
    ionochem/solve/steady.py), on a ten-reaction chain that takes several Newton steps."""
    model = _chain(column)
    kernel = U.SampleKernel(model)
    z = U.draw_normals(7, 0, 13, kernel.width)
    whole = U.solve_batch(kernel, z)
    for size in (1, 4):
        parts = np.concatenate([U.solve_batch(kernel, z[a:a + size])
                                for a in range(0, 13, size)])
        big = whole > 1e-20
        np.testing.assert_allclose(parts[big], whole[big], rtol=1e-12)


def test_kernel_pickles_and_central_sample_is_the_model_solution(column):
    """The worker kernel survives pickling (dask ships it) and the sample with every ε = 0
    reproduces Model.steady_densities within the solver's tolerance (same solver, same
    inputs; samples start from the central solution, and one more Newton step from it may
    move the densities by about the error the convergence rule allows, ~1e-10 relative;
    measured 4e-11)."""
    model = _chain(column)
    kernel = pickle.loads(pickle.dumps(U.SampleKernel(model)))
    n = U.solve_batch(kernel, np.zeros((1, kernel.width)))[0]
    np.testing.assert_array_equal(kernel.n_central, model.steady_densities().n)
    np.testing.assert_allclose(n, model.steady_densities().n, rtol=1e-9, atol=0)


def test_same_seed_gives_same_quantiles_in_any_batch_size(column):
    """Same seed → the same quantiles to 1e-12 relative with batches of 7 and of 25
    samples (independent streams per sample); another seed changes them."""
    model = _chain(column)
    a = U.monte_carlo(model, 60, seed=9, batch=7)
    b = U.monte_carlo(model, 60, seed=9, batch=25)
    qa, qb = a["density_quantiles"].values, b["density_quantiles"].values
    np.testing.assert_allclose(qb, qa, rtol=1e-12, atol=0)
    c = U.monte_carlo(model, 60, seed=10, batch=25)
    assert not np.allclose(c["density_quantiles"].values, qa, rtol=1e-6)
    assert a.attrs["seed"] == 9 and a.attrs["samples"] == 60


@pytest.mark.slow
def test_two_worker_local_cluster_reproduces_serial_run(column):
    """Two local worker processes give the serial quantiles to 1e-12 relative (README.md:
    work beyond one process on local worker processes or a dask cluster)."""
    model = _chain(column)
    serial = U.monte_carlo(model, 40, seed=21, batch=6)
    dist = U.monte_carlo(model, 40, seed=21, batch=6, workers=2)
    np.testing.assert_allclose(dist["density_quantiles"].values,
                               serial["density_quantiles"].values, rtol=1e-12, atol=0)


# ----------------------------------------------------------------------------- resume
class _Stop(Exception):
    pass


def test_interrupted_run_resumes_without_losing_or_recomputing_samples(column, tmp_path):
    """Interrupt after 3 of 8 batches; --resume computes exactly the other 5 (no finished
    sample is lost or recomputed: the stored batch files are untouched) and the result
    equals an uninterrupted run to 1e-12 (reference: the uninterrupted run)."""
    model = _chain(column)
    out = tmp_path / "mc.nc"
    first = []

    def stop_after_three(a, b, done, total):
        first.append((a, b))
        if len(first) == 3:
            raise _Stop

    with pytest.raises(_Stop):
        U.monte_carlo(model, 40, seed=4, batch=5, output=out, on_batch=stop_after_three)
    folder = store_path_for(out)
    files = sorted(folder.glob("batch_*.npz"))
    # The finished batches are stored (gathered into fewer files: ensemble.STORE_INTERVAL_S).
    stored = sorted(tuple(int(x) for x in f.stem.split("_")[1:]) for f in files)
    assert stored[0][0] == 0 and stored[-1][1] == 15
    assert all(x[1] == y[0] for x, y in zip(stored, stored[1:]))
    stamps = {p.name: (p.stat().st_mtime_ns, p.read_bytes()) for p in files}
    second = []
    resumed = U.monte_carlo(model, 40, seed=4, batch=5, output=out, resume=True,
                            on_batch=lambda a, b, d, t: second.append((a, b)))
    assert not set(first) & set(second)
    assert sorted(first + second) == [(a, a + 5) for a in range(0, 40, 5)]
    for p in files:
        assert (p.stat().st_mtime_ns, p.read_bytes()) == stamps[p.name]
    whole = U.monte_carlo(model, 40, seed=4, batch=5)
    np.testing.assert_allclose(resumed["density_quantiles"].values,
                               whole["density_quantiles"].values, rtol=1e-12, atol=0)
    U.remove_store(out)
    assert not folder.exists()


def test_resume_with_other_inputs_or_without_flag_is_refused(column, tmp_path):
    """A store made with seed 4 refuses a resume with seed 5 (naming the seed), and an
    existing store is not overwritten without --resume (the manifest guards the inputs)."""
    model = _chain(column)
    out = tmp_path / "mc.nc"

    def stop(a, b, done, total):
        raise _Stop

    with pytest.raises(_Stop):
        U.monte_carlo(model, 20, seed=4, batch=5, output=out, on_batch=stop)
    with pytest.raises(InputError, match="seed"):
        U.monte_carlo(model, 20, seed=5, batch=5, output=out, resume=True)
    with pytest.raises(InputError, match="--resume"):
        U.monte_carlo(model, 20, seed=4, batch=5, output=out)
    with pytest.raises(InputError, match="samples"):
        U.monte_carlo(model, 30, seed=4, batch=5, output=out, resume=True)


# ----------------------------------------------------------------------------- command line
def _cli(monkeypatch, argv):
    """Run ``ionochem`` (cli.main's error handling: ionochem.Error → one line on stderr,
    exit 2)."""
    import ionochem.cli as cli
    return cli.main(argv)


def test_command_writes_dataset_and_figure_and_removes_its_samples(column, tmp_path,
                                                                   monkeypatch, capsys):
    """``ionochem uncertainty S --samples 50 -o out.nc --plot out.png`` exits 0, writes a
    dataset with the quantiles of every species and a PNG, and removes out.nc.samples
    (README.md, 'What it does')."""
    model_path = column(TWO_FACTOR, ALT, neutrals={"O": O_DENS},
                        Tn=np.linspace(200, 1000, ALT.size), Te=TE, production={"P1": Q})
    out, fig = tmp_path / "out.nc", tmp_path / "out.png"
    rc = _cli(monkeypatch, ["uncertainty", str(model_path), "--samples", "50", "--seed", "3",
                            "-o", str(out), "--plot", str(fig)])
    assert rc == 0
    ds = xr.open_dataset(out)
    assert ds["density_quantiles"].dims == ("quantile", "species", "altitude")
    assert set(ds["species"].values) >= {"O+", "e", "O"}
    assert ds.attrs["samples"] == 50 and ds.attrs["method"] == "montecarlo"
    ds.close()
    assert fig.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert not store_path_for(out).exists()
    assert "Monte Carlo: 50 samples" in capsys.readouterr().out


def test_command_bad_option_is_one_line_and_exit_2(column, monkeypatch, capsys):
    """A bad --vary-environment value and --resume without -o are one line on stderr and
    exit status 2 (docs/reaction-list.md, 'Error messages')."""
    path = column(TWO_FACTOR, ALT, neutrals={"O": O_DENS},
                  Tn=np.linspace(200, 1000, ALT.size), Te=TE, production={"P1": Q})
    rc = _cli(monkeypatch, ["uncertainty", str(path), "--samples", "10",
                            "--vary-environment", "O=abc"])
    err = capsys.readouterr().err.strip().splitlines()
    assert rc == 2 and len(err) == 1 and "--vary-environment" in err[0]
    rc = _cli(monkeypatch, ["uncertainty", str(path), "--samples", "10", "--resume"])
    err = capsys.readouterr().err.strip().splitlines()
    assert rc == 2 and len(err) == 1 and "-o" in err[0]


def test_auto_workers_stay_serial_for_small_runs_or_a_busy_machine(monkeypatch):
    """``--workers auto`` (analysis/ensemble.py): one process below AUTO_LEVEL_SOLVES level
    solves or with fewer than two free CPUs; otherwise the free CPUs, which are the CPUs of
    the affinity mask less the load average of other work (os.getloadavg, one process of
    load being this one)."""
    from ionochem.analysis import ensemble as E
    monkeypatch.setattr(E.os, "sched_getaffinity", lambda pid: {0, 1, 2, 3}, raising=False)
    monkeypatch.setattr(E.os, "getloadavg", lambda: (1.0, 0.0, 0.0))   # only this process
    assert E.free_cpus() == 4
    assert E.auto_workers(E.AUTO_LEVEL_SOLVES - 1) == 1
    assert E.auto_workers(E.AUTO_LEVEL_SOLVES) == 4
    monkeypatch.setattr(E.os, "getloadavg", lambda: (3.4, 0.0, 0.0))   # 2.4 others busy
    assert E.free_cpus() == 2
    assert E.auto_workers(10 * E.AUTO_LEVEL_SOLVES) == 2
    monkeypatch.setattr(E.os, "getloadavg", lambda: (4.2, 0.0, 0.0))
    assert E.free_cpus() == 1
    assert E.auto_workers(10 * E.AUTO_LEVEL_SOLVES) == 1


def test_auto_workers_default_solves_a_small_run_in_this_process(column, monkeypatch):
    """A small ensemble with workers="auto" never starts worker processes (neither the
    pool nor a dask client is made) and equals the serial run exactly."""
    from ionochem.analysis import ensemble as E
    model = _one_ion(column)

    def no_cluster(*a, **k):
        raise AssertionError("a cluster was started for a small run")
    monkeypatch.setattr(E, "dask_client", no_cluster)
    monkeypatch.setattr(E, "worker_pool", no_cluster)
    a = U.monte_carlo(model, 16, seed=3, workers="auto")
    b = U.monte_carlo(model, 16, seed=3, workers=1)
    np.testing.assert_array_equal(a["density_quantiles"].values,
                                  b["density_quantiles"].values)


class _DyingKernel(U.SampleKernel):
    """A sample kernel whose worker process ends abruptly (as if killed) on its first batch."""

    def perturbed(self, z, k_base=None):
        import os
        os._exit(3)


@pytest.mark.slow
def test_a_worker_process_that_dies_ends_the_run_with_an_error(column):
    """A local worker that dies mid-run (out of memory, killed) ends the ensemble with one
    SolverError naming the cause, instead of waiting for its result forever."""
    from ionochem.analysis import ensemble as E
    from ionochem.errors import SolverError
    model = _one_ion(column)
    kernel = _DyingKernel(model)
    with pytest.raises(SolverError, match="worker process ended unexpectedly"):
        E.run_ensemble(model, kernel, lambda a, b: U.draw_normals(0, a, b, kernel.width), 40,
                       batch=5, workers=2)


# ----------------------------------------------------------------------------- failed samples
def _failing_solver(monkeypatch, j, threshold):
    """Make the steady solver fail, as it does for a column it cannot bring in, on every row
    whose rate coefficient j exceeds ``threshold`` (a sample drawn far in the tail)."""
    import ionochem.system.batch as batch
    from ionochem.errors import SolverError
    real = batch.solve_rows

    def solve_rows(mechanism, k, given, **kw):
        bad = np.flatnonzero(np.asarray(k)[:, j] > threshold)
        if bad.size:
            raise SolverError("steady state not reached (planted)", levels=bad.tolist())
        return real(mechanism, k, given, **kw)

    monkeypatch.setattr(batch, "solve_rows", solve_rows)


def test_failed_samples_are_recorded_and_the_run_finishes(column, tmp_path, monkeypatch,
                                                          capsys):
    """Samples whose recombination factor is drawn beyond +1.5 sigma are made unsolvable.
    The run still finishes: the failed samples are exactly those whose standard normal for
    R1 (its own numpy stream, SeedSequence(seed, spawn_key=(i,)), second draw) exceeds 1.5;
    the output records their count and indices, the terminal reports them, and the
    statistics are those of the others (the batches they shared solve unchanged)."""
    model = _one_ion(column)
    seed, n = 3, 40
    eps = np.array([np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(i,)))
                    .standard_normal(2)[1] for i in range(n)])
    expected = np.flatnonzero(eps > 1.5)
    assert 0 < expected.size < n - 2
    j = model.reactions.index("R1")
    k0 = model.rate_coefficients()[:, j]
    _failing_solver(monkeypatch, j, float(k0.max()) * F_A ** 1.5)
    out = tmp_path / "mc.nc"
    path = model.scenario.source
    assert _cli(monkeypatch, ["uncertainty", str(path), "--samples", str(n), "--seed",
                              str(seed), "--batch", "8", "-o", str(out)]) == 0
    captured = capsys.readouterr()
    with xr.open_dataset(out) as ds:
        assert ds.attrs["failed_samples"] == expected.size
        assert ds.attrs["failed_sample_indices"] == ", ".join(map(str, expected))
        assert ds.attrs["samples"] == n - expected.size
        quantiles = ds["density_quantiles"].transpose("quantile", "altitude", "species").values
    assert f"{expected.size} of {n} samples could not be solved" in captured.err
    assert f"({expected.size} more failed and are left out)" in captured.out
    # Unplanted, every sample solves; the run's quantiles are those of the others.
    monkeypatch.undo()
    kernel = U.SampleKernel(model)
    z, dens = U.run_ensemble(model, kernel, lambda a, b: U.draw_normals(seed, a, b,
                                                                        kernel.width), n)
    assert U.failed_samples(dens).size == 0
    np.testing.assert_allclose(z[:, j], eps)
    ok = np.setdiff1d(np.arange(n), expected)
    reported = U.species_samples(model, kernel, z[ok], dens[ok])[0]
    np.testing.assert_allclose(quantiles, np.quantile(reported, U.QUANTILES, axis=0),
                               rtol=1e-9)


def test_a_leftover_store_offers_resume_or_restart(column, tmp_path, monkeypatch, capsys):
    """A store left by an earlier run (kept with --keep-samples) blocks a plain rerun with a
    message naming both --resume and --restart; --restart discards it and starts over (the
    result equals a fresh run), and is refused together with --resume."""
    model = _one_ion(column)
    path, out = str(model.scenario.source), tmp_path / "mc.nc"
    base = ["uncertainty", path, "--samples", "10", "--seed", "2", "-o", str(out)]
    assert _cli(monkeypatch, [*base, "--keep-samples"]) == 0
    with xr.open_dataset(out) as ds:
        first = ds["density_quantiles"].values
    capsys.readouterr()
    assert _cli(monkeypatch, base) == 2
    err = capsys.readouterr().err
    assert "--resume" in err and "--restart" in err
    assert _cli(monkeypatch, [*base, "--seed", "5", "--resume"]) == 2
    assert "--restart" in capsys.readouterr().err
    assert _cli(monkeypatch, [*base, "--restart", "--resume"]) == 2
    capsys.readouterr()
    assert _cli(monkeypatch, [*base, "--restart"]) == 0
    assert "discarded the samples of an earlier run" in capsys.readouterr().err
    with xr.open_dataset(out) as ds:
        np.testing.assert_array_equal(ds["density_quantiles"].values, first)
    assert not store_path_for(out).exists()


def test_global_sensitivity_still_needs_every_run(column, monkeypatch):
    """A Morris design cannot leave runs out: a failed run is an error (SolverError naming
    how many failed) once the batches are done, not a silently thinner design."""
    from ionochem.analysis.globalsens import global_sensitivity
    from ionochem.errors import SolverError
    model = _one_ion(column)
    j = model.reactions.index("R1")
    k0 = model.rate_coefficients()[:, j]
    _failing_solver(monkeypatch, j, float(k0.max()) * F_A ** 1.5)
    with pytest.raises(SolverError, match="could not be solved.*needs every run"):
        global_sensitivity(model, 8, method="morris", seed=1)
