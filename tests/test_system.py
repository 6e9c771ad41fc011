"""The column system: a process added in one class joins every solution path.

References: scipy's ``solve_ivp`` (BDF) integrated to a long time as the steady state of the
same equations, central finite differences (numpy) for the assembled Jacobian, and the
analytic steady state q/λ of a source–sink pair.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import scipy.sparse as sp
from scipy.integrate import solve_ivp

import ionochem
from ionochem.io.scenario import Grid
from ionochem.system import Chemistry, ColumnSystem, Process, Transport

ROOT = Path(__file__).resolve().parents[1]
SOLAR_MIN = ROOT / "scenarios" / "midlatitude_solar_minimum.toml"
EQUINOX = ROOT / "scenarios" / "midlatitude_equinox.toml"


class FirstOrderLoss(Process):
    """A toy row process: one unknown lost at frequency ``rate_s`` (s-1), e.g. an ion
    swept out of the column by a drift the model does not otherwise know."""

    name = "extra loss"
    reads = ("density",)

    def __init__(self, index, n_unknowns, rate_s):
        self.index, self.U, self.rate = index, n_unknowns, rate_s

    def tendency(self, n, rows):
        out = np.zeros_like(n)
        out[:, self.index] = -self.rate * n[:, self.index]
        return out

    def gross(self, n, rows):
        L = np.zeros_like(n)
        L[:, self.index] = self.rate * n[:, self.index]
        return np.zeros_like(n), L

    def blocks(self, n, rows):
        J = np.zeros((n.shape[0], self.U, self.U))
        J[:, self.index, self.index] = -self.rate
        return J


class ConstantSource(FirstOrderLoss):
    """A toy row process: a constant production ``q`` (cm-3 s-1) of one unknown."""

    def tendency(self, n, rows):
        out = np.zeros_like(n)
        out[:, self.index] = self.rate
        return out

    def gross(self, n, rows):
        P = np.zeros_like(n)
        P[:, self.index] = self.rate
        return P, np.zeros_like(n)

    def blocks(self, n, rows):
        return np.zeros((n.shape[0], self.U, self.U))


def _model(path, rows, transport=True):
    scen = ionochem.load_scenario(path)
    scen = scen.replace(grid=Grid(tuple(np.linspace(110.0, 400.0, rows))))
    return ionochem.Model(scen if transport else scen.replace(transport=None))


def test_source_and_sink_alone_reach_q_over_lambda():
    """Two toy row processes and nothing else: the steady state is n = q/λ exactly (to the
    solver's tolerance) in every row, through the generic sum of row processes."""
    B, U = 7, 2
    q, lam = 3.0e3, 2.0e-3
    system = ColumnSystem(["X", "Y"], B, [ConstantSource(0, U, q), FirstOrderLoss(0, U, lam),
                                          ConstantSource(1, U, 1.0),
                                          FirstOrderLoss(1, U, 1.0)])
    res = system.steady(rtol=1e-12)
    np.testing.assert_allclose(res.n[:, 0], q / lam, rtol=1e-10)
    np.testing.assert_allclose(res.n[:, 1], 1.0, rtol=1e-10)


def test_added_process_joins_the_chemistry_steady_state():
    """The chemistry of a 6-row photochemical column plus a first-order loss of NO+ (1e-3
    s-1): the system's steady state equals solve_ivp (BDF, rtol 1e-10) run to 1e7 s on the
    same tendency, every density above 1e-6 of its row's largest to 1e-6; and NO+ is lower
    than without the loss."""
    model = _model(SOLAR_MIN, 6, transport=False)
    U = len(model.species)
    i = model.species.index("NO+")
    system = ColumnSystem(model.species, 6, [Chemistry.for_model(model),
                                             FirstOrderLoss(i, U, 1e-3)])
    res = system.steady(rtol=1e-10)
    start = model.steady_densities().n
    sol = solve_ivp(lambda t, y: system.evaluate(y.reshape(6, U)).ravel(), (0.0, 1e7),
                    start.ravel(), method="BDF", rtol=1e-10, atol=1e-8,
                    jac=lambda t, y: system.jacobian(y.reshape(6, U)))
    assert sol.success
    ref = sol.y[:, -1].reshape(6, U)
    big = ref > 1e-6 * ref.max(axis=1, keepdims=True)
    np.testing.assert_allclose(res.n[big], ref[big], rtol=1e-6)
    assert np.all(res.n[:, i] < start[:, i])


def test_assembled_jacobian_of_a_coupled_system_matches_finite_differences():
    """Chemistry + O+ transport + a toy loss on a 10-row transported column: the sparse
    Jacobian the system assembles (structure built once) equals central finite differences
    of its tendency (step 1e-4 of each density; the tendency is a low-order polynomial), to
    1e-6 of each equation's largest entry;
    and it is the same matrix on a second call (the kept structure refilled)."""
    model = _model(EQUINOX, 10)
    assert model.transport is not None
    U = len(model.species)
    i = model.species.index("O2+")
    system = ColumnSystem(model.species, 10, [Chemistry.for_model(model),
                                              Transport(model.transport),
                                              FirstOrderLoss(i, U, 1e-2)])
    assert system.coupled
    # The point: the steady column, densities below 1 cm-3 raised to 1 (a scale for the
    # finite-difference steps that is never zero).
    # (The photochemical steady state of the rows: a point that needs no coupled solve.)
    chemistry = ColumnSystem(model.species, 10, [Chemistry.for_model(model)])
    n = np.maximum(chemistry.steady(rtol=1e-8).n, 1.0)
    J = system.jacobian(n).toarray()
    scale = n.ravel()

    def f(x):
        return system.evaluate((x * scale).reshape(10, U)).ravel()

    h = 1e-4
    eye = np.eye(10 * U)
    num = np.stack([(f(1 + h * eye[c]) - f(1 - h * eye[c])) / (2 * h)
                    for c in range(10 * U)], axis=1)
    ana = J * scale[None, :]
    tol = 1e-6 * np.abs(ana).max(axis=1, keepdims=True)
    assert np.all(np.abs(num - ana) <= tol)
    assert sp.issparse(system.jacobian(n))
    np.testing.assert_array_equal(system.jacobian(n).toarray(), J)


@pytest.mark.parametrize("transport", [False, True], ids=["photochemical", "transported"])
def test_model_solutions_go_through_its_system(transport):
    """Model.steady_densities is the system's steady state; Model.jacobian is the system's
    row blocks (transport's own-row entries included); Model.tendency its evaluate."""
    model = _model(EQUINOX, 8, transport)
    res = model.steady_densities()
    again = model.system.steady(rtol=model.scenario.solve.rtol)
    np.testing.assert_array_equal(res.n, again.n)
    np.testing.assert_array_equal(model.jacobian(res.n), model.system.row_jacobian(res.n))
    whole = model.column_jacobian(res.n).toarray()
    blocks = model.jacobian(res.n)
    U = len(model.species)
    for a in range(8):
        np.testing.assert_array_equal(whole[a * U:(a + 1) * U, a * U:(a + 1) * U], blocks[a])


class PinnedBottom(Process):
    """A toy row process: the bottom row of each column relaxes to 1 at rate ``k`` (s-1),
    dn/dt = k (1 − n); other rows are untouched."""

    name = "pinned bottom"
    reads = ("density",)

    def __init__(self, rows_per_column, k):
        self.A, self.k = rows_per_column, k

    def _bottom(self, n, rows):
        index = np.arange(n.shape[0]) if isinstance(rows, slice) else np.asarray(rows)
        return (index % self.A == 0)[:, None]

    def tendency(self, n, rows):
        return np.where(self._bottom(n, rows), self.k * (1.0 - n), 0.0)

    def gross(self, n, rows):
        bottom = self._bottom(n, rows)
        return np.where(bottom, self.k, 0.0), np.where(bottom, self.k * n, 0.0)

    def blocks(self, n, rows):
        return np.where(self._bottom(n, rows)[:, :, None], -self.k, 0.0)[:, :, :1]


class SquareDiffusion(Process):
    """A toy nonlinear coupling process: flux Φ = −D n dn/dz (cm-2 s-1, upward positive) on
    rows ``h`` cm apart, discretised on the faces as Φ = D (n_i² − n_{i+1}²) / (2h) — exact
    for this flux, since n dn/dz = d(n²/2)/dz — closed at the bottom, fed by a downward flux
    ``F`` through the top. Its steady state: Φ = −F on every face, n_i² = n_0² + 2 F z_i / D.
    """

    name = "square diffusion"
    reads = ("density",)
    couples_rows = True
    constant_coupling = False

    def __init__(self, rows_per_column, h, D, F):
        self.rows_per_column, self.h, self.D, self.F = rows_per_column, h, D, F

    def _faces(self, n):
        x = n[:, 0].reshape(-1, self.rows_per_column)
        return self.D * (x[:, :-1] ** 2 - x[:, 1:] ** 2) / (2 * self.h)

    def gross(self, n, rows):
        phi = self._faces(n)
        P = np.zeros((phi.shape[0], self.rows_per_column))
        L = np.zeros_like(P)
        up, down = np.maximum(phi, 0.0), np.maximum(-phi, 0.0)
        P[:, 1:] += up / self.h
        L[:, :-1] += up / self.h
        P[:, :-1] += down / self.h
        L[:, 1:] += down / self.h
        P[:, -1] += self.F / self.h
        return P.reshape(-1, 1), L.reshape(-1, 1)

    def tendency(self, n, rows):
        P, L = self.gross(n, rows)
        return P - L

    def coupling(self, n_columns, n=None):
        B = n_columns * self.rows_per_column
        x = np.ones(B) if n is None else np.asarray(n, float)[:, 0]
        c = self.D * x / self.h ** 2
        top = (np.arange(B) % self.rows_per_column) == self.rows_per_column - 1
        bottom = (np.arange(B) % self.rows_per_column) == 0
        # dΦ_{i+1/2}/dn_i = D n_i / h, dΦ_{i+1/2}/dn_{i+1} = −D n_{i+1} / h; row i gains
        # Φ_{i−1/2} and loses Φ_{i+1/2}, each divided by h.
        diag = -c * ~top - c * ~bottom
        upper = np.where(top[:-1], 0.0, c[1:])     # ∂f_i/∂n_{i+1}
        lower = np.where(bottom[1:], 0.0, c[:-1])  # ∂f_{i+1}/∂n_i
        return sp.diags([lower, diag, upper], [-1, 0, 1], format="coo")


def test_nonlinear_coupling_reaches_the_analytic_steady_state():
    """A nonlinear coupling process (its Jacobian refilled at each state on a fixed
    structure) joins the steady solve, the Jacobian and the time integration: the column's
    steady state is the analytic n_i = sqrt(n_0² + 2 F z_i / D), n_0 = 1 + F / (h k)
    (the discretisation is exact for this flux), to 1e-10; the assembled Jacobian equals
    central finite differences; solve_ivp from a flat start reaches the same state."""
    A, h, D, F, k = 12, 1.0e5, 1.0e10, 3.0e6, 1.0
    system = ColumnSystem(["X"], A, [PinnedBottom(A, k), SquareDiffusion(A, h, D, F)])
    assert system.coupled and not system.constant_coupling
    z = h * np.arange(A)
    n0 = 1.0 + F / (h * k)
    exact = np.sqrt(n0 ** 2 + 2 * F * z / D)
    res = system.steady(rtol=1e-12)
    np.testing.assert_allclose(res.n[:, 0], exact, rtol=1e-10)

    x = exact[:, None] * (1.0 + 0.1 * np.sin(np.arange(A)))[:, None]
    J = system.jacobian(x).toarray()
    step = 1e-6 * x[:, 0]
    num = np.stack([(system.tendency(x + np.where(np.arange(A)[:, None] == c, step[c], 0.0))
                     - system.tendency(x - np.where(np.arange(A)[:, None] == c, step[c], 0.0)))
                    [:, 0] / (2 * step[c]) for c in range(A)], axis=1)
    np.testing.assert_allclose(J, num, rtol=1e-6, atol=1e-9 * np.abs(num).max())
    np.testing.assert_allclose(system.row_jacobian(x)[:, 0, 0], np.diag(num), rtol=1e-6)

    path = system.integrate([0.0, 1e7], np.ones((A, 1)))
    np.testing.assert_allclose(path[-1][:, 0], exact, rtol=1e-6)


def test_nonlinear_coupling_outside_its_declared_structure_is_refused():
    """A coupling whose Jacobian at a state has an entry its structure did not declare is
    a programming error the assembly names, not a silently dropped derivative."""

    class Wider(SquareDiffusion):
        def coupling(self, n_columns, n=None):
            J = super().coupling(n_columns, n)
            if n is None:
                return J
            B = J.shape[0]
            return sp.coo_matrix(J + sp.coo_matrix(([1.0], ([0], [B - 1])), shape=J.shape))

    A = 6
    system = ColumnSystem(["X"], A, [PinnedBottom(A, 1.0), Wider(A, 1e5, 1e10, 1e6)])
    with pytest.raises(ValueError, match="outside the structure"):
        system.jacobian(np.ones((A, 1)))
