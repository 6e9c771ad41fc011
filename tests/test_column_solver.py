"""The linear solvers of the column Newton (ionochem/solve/column.py): plain Newton (a sparse
LU per iteration), chord (reused LU) and Newton–Krylov (GMRES + incomplete LU) reach the
same steady state, checked against each other, against analytic solutions and against
scipy's solve_ivp (BDF) run to steady state; and the prebuilt CSC structure of the column
Jacobian gives the same matrix as the sparse sum it replaces."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import scipy.sparse as sp
from scipy.integrate import solve_ivp

import ionochem
from ionochem.io.scenario import Grid
from ionochem.solve import column as C
from ionochem.solve.steady import solve_steady

ROOT = Path(__file__).resolve().parents[1]
MID = ROOT / "scenarios" / "midlatitude_equinox.toml"
VARIANTS = ["newton", "chord", "krylov"]


def _bound(model):
    """The mechanism's tendency, Jacobian and gross rates on the model's rows, as the
    column system's chemistry binds them (ionochem/system/chemistry.py)."""
    rows = model.system.row_processes[0].bound
    return rows.tendency, rows.jacobian, rows.gross


@pytest.fixture(scope="module")
def demo():
    """The demo column with O+ transport on 60 levels, 90–600 km, and its chemistry bound
    to the rows (:func:`_bound`)."""
    base = ionochem.load_scenario(MID)
    model = ionochem.Model(base.replace(grid=Grid(tuple(np.linspace(90.0, 600.0, 60)))))
    assert model.transport is not None
    fns = _bound(model)
    return model, fns


def _solve(demo, linear, stats=None):
    model, _ = demo
    return model.column_system().steady(rtol=1e-10, linear=linear, stats=stats)


def _significant(n):
    return n > 1e-12 * n.max(axis=1, keepdims=True)


@pytest.mark.parametrize("linear", ["chord", "krylov"])
def test_variant_matches_plain_newton_on_the_demo_transport_column(demo, linear):
    """Chord and Newton–Krylov reach plain Newton's steady state on the demo column with
    O+ transport to 1e-8 relative (every density above 1e-12 of its level's largest), meet
    the same convergence rule (residual ≤ 1e-10), and really are the variant: the chord
    factorises fewer times than it iterates, Krylov runs GMRES iterations."""
    ref = _solve(demo, "newton")
    stats = {}
    res = _solve(demo, linear, stats)
    big = _significant(ref.n)
    assert np.max(np.abs(res.n[big] / ref.n[big] - 1)) <= 1e-8
    assert np.all(res.residual <= 1e-10)
    assert np.all(res.method == 1)            # converged by Newton, no continuation
    assert stats["solvers"] == [linear]       # by the variant itself, no fallback
    if linear == "chord":
        assert stats["factorisations"] < res.iterations.max()
    else:
        assert stats["krylov_iterations"] > 0


@pytest.fixture(scope="module")
def ivp_steady(demo):
    """scipy.integrate.solve_ivp (BDF, the model's analytic sparse column Jacobian, rtol
    1e-10) integrating the coupled column from the photochemical state to t = 1e7 s."""
    model, (tend, jac, gross) = demo
    B, S = model.altitude_km.size, len(model.species)
    start = solve_steady(np.zeros((B, S)), tend, jac, gross, rtol=1e-6).n
    sol = solve_ivp(lambda t, y: model.tendency(y.reshape(B, S)).ravel(), (0.0, 1e7),
                    start.ravel(), method="BDF", rtol=1e-10, atol=1e-8,
                    jac=lambda t, y: model.column_jacobian(y.reshape(B, S)))
    assert sol.success, sol.message
    return sol.y[:, -1].reshape(B, S)


@pytest.mark.slow  # the solve_ivp reference run takes ~30 s
@pytest.mark.parametrize("linear", VARIANTS)
def test_variant_matches_solve_ivp_run_to_steady_state(demo, ivp_steady, linear):
    """Reference: the column integrated in time by solve_ivp to t = 1e7 s (fixture
    ``ivp_steady``), long after O+ diffusion and chemistry have settled (slowest time
    ≲ 1e4 s here). Every significant density agrees to 1e-5."""
    ref = ivp_steady
    res = _solve(demo, linear)
    big = ref > 1e-6 * ref.max(axis=1, keepdims=True)
    np.testing.assert_allclose(res.n[big], ref[big], rtol=1e-5)


def _coupled_quadratic(B=40, alpha=1e-7, d=2.0):
    """One species per level: f = q − α n² + d (n_{i−1} − 2 n_i + n_{i+1}) (no flux at
    the ends), q varying over six decades; returns (q, tendency, jacobian, gross, T)."""
    q = np.logspace(0, 6, B)
    T = sp.diags([np.full(B - 1, d), np.r_[-d, np.full(B - 2, -2 * d), -d],
                  np.full(B - 1, d)], [-1, 0, 1], format="csr")

    def tendency(n):
        return (q - alpha * n[:, 0] ** 2 + T @ n[:, 0])[:, None]

    def jacobian(n):
        return sp.csc_matrix(T + sp.diags(-2 * alpha * n[:, 0]))

    def gross(n):
        off = T @ n[:, 0] - T.diagonal() * n[:, 0]
        return ((q + off)[:, None], (alpha * n[:, 0] ** 2 - T.diagonal() * n[:, 0])[:, None])

    return q, tendency, jacobian, gross, T


@pytest.mark.parametrize("linear", VARIANTS)
def test_uncoupled_recombination_levels_reach_the_analytic_density(linear):
    """Without coupling (d = 0) each level is q = α n²: n = sqrt(q/α) exactly (the
    recombination-limited layer, Rishbeth & Garriott 1969 ch. 3), from far below."""
    q, tend, jac, gross, _ = _coupled_quadratic(d=0.0)
    res = C.solve_column(np.full((q.size, 1), 1.0), tend, jac, gross, linear=linear)
    np.testing.assert_allclose(res.n[:, 0], np.sqrt(q / 1e-7), rtol=1e-9)


@pytest.mark.parametrize("linear", ["chord", "krylov"])
def test_coupled_recombination_column_matches_newton_and_conserves(linear):
    """With diffusion coupling the levels, the variants reach Newton's solution (1e-9), and
    the steady state conserves: Σ q = Σ α n² (no flux through the ends)."""
    q, tend, jac, gross, _ = _coupled_quadratic()
    start = np.full((q.size, 1), 1.0)
    ref = C.solve_column(start, tend, jac, gross, linear="newton")
    res = C.solve_column(start, tend, jac, gross, linear=linear)
    np.testing.assert_allclose(res.n, ref.n, rtol=1e-9)
    assert abs(np.sum(1e-7 * res.n ** 2) / q.sum() - 1) < 1e-9


def test_failed_variant_falls_back_to_plain_newton(monkeypatch):
    """A chord that cannot give a step is followed by plain Newton from the same start: the
    column still converges, to Newton's solution."""
    q, tend, jac, gross, _ = _coupled_quadratic()
    start = np.full((q.size, 1), 1.0)
    ref = C.solve_column(start, tend, jac, gross, linear="newton")
    monkeypatch.setattr(C.Chord, "direction", lambda self, n, f, scale: None)
    stats = {}
    res = C.solve_column(start, tend, jac, gross, linear="chord", stats=stats)
    np.testing.assert_array_equal(res.n, ref.n)
    assert stats["factorisations"] >= ref.iterations.max()


def test_prebuilt_column_jacobian_equals_the_sparse_sum():
    """ColumnJacobian(blocks) is exactly block_diagonal(blocks) + coupling, entry by entry,
    for random blocks (with zeros) and a coupling with duplicate and off-block entries,
    and its structure is canonical CSC (sorted rows, no duplicates)."""
    rng = np.random.default_rng(3)
    B, S = 7, 4
    blocks = rng.normal(size=(B, S, S)) * (rng.random((B, S, S)) < 0.6)
    rows = rng.integers(0, B * S, 40)
    cols = np.clip(rows + rng.integers(-2 * S, 2 * S, 40), 0, B * S - 1)
    coupling = sp.coo_matrix((rng.normal(size=40), (rows, cols)), shape=(B * S, B * S))
    assemble = C.ColumnJacobian(B, S, coupling)
    for _ in range(2):                      # refilled, not rebuilt
        blocks = blocks * 1.5
        J = assemble(blocks)
        ref = (C.block_diagonal(blocks) + coupling.tocsr()).toarray()
        np.testing.assert_array_equal(J.toarray(), ref)
        check = J.copy()
        check.has_canonical_format = False
        check.sum_duplicates()
        np.testing.assert_array_equal(check.indices, J.indices)


def test_default_linear_solver_is_a_known_variant():
    """Every size maps to one of the solvers of LINEAR_SOLVERS."""
    for unknowns in (12, 2_400, 12_000, 60_000, 10**6):
        assert C.default_linear(unknowns) in C.LINEAR_SOLVERS


def test_large_twilight_column_uses_the_chord_and_matches_newton():
    """The demo at χ ≈ 104° (sunlit top, shadowed levels fed by diffusion: the hardest
    column of test_transport.py) on 900 levels: above CHORD_FROM unknowns the default is
    the chord, which converges by itself (no fallback, residual ≤ 1e-10) to plain Newton's
    column within 1e-8."""
    import datetime as dt

    from ionochem.environment.geometry import solar_zenith_angle_deg
    base = ionochem.load_scenario(MID)
    t0 = np.datetime64(base.time.utc.replace(tzinfo=None), "s")
    t = t0 + np.arange(0, 14 * 60).astype("timedelta64[m]")
    chi = solar_zenith_angle_deg(t, base.location.latitude_deg, base.location.longitude_deg)
    i = int(np.argmin(np.abs(chi - 104.0)))
    assert abs(chi[i] - 104.0) < 0.5
    utc = t[i].astype(dt.datetime).replace(tzinfo=dt.UTC)
    model = ionochem.Model(base.replace(time=type(base.time)(utc=utc),
                                        grid=Grid(tuple(np.linspace(90.0, 600.0, 900)))))
    B, S = model.altitude_km.size, len(model.species)
    assert C.default_linear(B * S) == "chord"
    stats = {}
    res = model.column_system().steady(rtol=1e-10, stats=stats)
    ref = model.column_system().steady(rtol=1e-10, linear="newton")
    assert stats["solvers"] == ["chord"]
    assert np.all(res.residual <= 1e-10)
    big = _significant(ref.n)
    assert np.max(np.abs(res.n[big] / ref.n[big] - 1)) <= 1e-8


@pytest.mark.parametrize("half_width", [3, 40])
def test_factorise_solves_like_scipy_spsolve_banded_or_sparse(half_width):
    """The column LU (banded LAPACK for a narrow band, SuperLU for a wide one:
    C.BANDED_MAX_WIDTH) solves a random diagonally dominant banded system, one and several
    right-hand sides, as scipy.sparse.linalg.spsolve does, to 1e-10."""
    from scipy.sparse.linalg import spsolve
    rng = np.random.default_rng(7)
    N = 300
    offsets = list(range(-half_width, half_width + 1))
    diags = [rng.uniform(-1, 1, N - abs(k)) for k in offsets]
    J = sp.diags(diags, offsets, format="csc") + sp.identity(N, format="csc") * 4 * half_width
    assert (2 * half_width + 1 <= C.BANDED_MAX_WIDTH) == (half_width == 3)
    rhs = rng.uniform(-1, 1, (N, 3))
    solve = C.factorise(J)
    np.testing.assert_allclose(solve(rhs[:, 0]), spsolve(J, rhs[:, 0]), rtol=1e-10)
    np.testing.assert_allclose(solve(rhs), spsolve(J, rhs), rtol=1e-10)


def test_factorise_shifts_an_exactly_singular_banded_matrix():
    """A zero row (a species with no loss where every density is zero) makes J singular;
    the LU of J − εI still gives a finite direction, equal to scipy's spsolve of the
    shifted matrix (ε = 1e-12 × the largest diagonal entry)."""
    from scipy.sparse.linalg import spsolve
    J = sp.diags([np.r_[2.0, 0.0, 3.0, 4.0]], [0], format="csc") \
        + sp.diags([np.r_[0.5, 0.0, 0.5]], [1], format="csc")
    rhs = np.ones(4)
    solve = C.factorise(J)
    assert solve is not None
    shifted = J - 1e-12 * 4.0 * sp.identity(4, format="csc")
    np.testing.assert_allclose(solve(rhs), spsolve(shifted.tocsc(), rhs), rtol=1e-10)
