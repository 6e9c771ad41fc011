"""Finite-volume operator of vertical transport of one species in a column.

The flux Φ = −D dn/dz + V n (cm-2 s-1, positive upward) is given by its coefficients on the
faces between rows (D in cm2 s-1, V in cm s-1); this module turns it into a linear
operator, dn/dt|transport = T n + s, with T a sparse (A, A) matrix and s a constant source.
It knows nothing of the physics behind D and V.

Discretisation
--------------
Vertex-centred finite volumes: row i owns the cell between the midpoints to its
neighbours (the top row owns half a cell, closed by the given upper-boundary flux).
The flux through the face between rows i and i+1 (spacing h) is the exponentially fitted
form of Scharfetter & Gummel (1969, IEEE Trans. Electron Devices 16, 64), exact when D and V
are constant across the face:

    Φ = (D/h) [B(−P) n_i − B(P) n_{i+1}],   P = V h / D,   B(x) = x / (e^x − 1).

It is central differencing when diffusion dominates and upwind when drift dominates, keeps
the off-diagonal entries of T non-negative (so the scheme preserves positivity), and gives
the diffusive-equilibrium profile n_{i+1}/n_i = exp(V h / D) exactly.

Lower boundary: the lowest row has no transport row (its density is set by chemistry
alone, photochemical equilibrium); the flux between it and the next row still enters the
next row's cell.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp


def _bernoulli(x):
    """B(x) = x / (e^x − 1), accurate near 0 and without overflow for large |x|."""
    x = np.asarray(x, float)
    small = np.abs(x) < 1e-6
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        big = x / np.expm1(np.where(small, 1.0, x))
    return np.where(small, 1.0 - 0.5 * x, np.where(np.isfinite(big), big, 0.0))


def face_weights(z_cm, D_cm2_s, V_cm_s):
    """Weights (a, b) of the face fluxes Φ_f = a_f n_f − b_f n_{f+1}, each (A − 1,), cm s-1."""
    h = np.diff(z_cm)
    D = np.asarray(D_cm2_s, float)
    V = np.asarray(V_cm_s, float)
    diffusive = D > 0
    Dsafe = np.where(diffusive, D, 1.0)
    P = np.where(diffusive, V * h / Dsafe, 0.0)
    a = np.where(diffusive, Dsafe / h * _bernoulli(-P), np.maximum(V, 0.0))
    b = np.where(diffusive, Dsafe / h * _bernoulli(P), np.maximum(-V, 0.0))
    # A very large Péclet number makes B(-P) overflow to inf·0; the upwind limit holds there.
    a = np.where(np.isfinite(a), a, np.maximum(V, 0.0))
    b = np.where(np.isfinite(b), b, np.maximum(-V, 0.0))
    return a, b


@dataclass
class TransportOperator:
    """dn/dt = T n + s for one species on a column of A rows.

    Attributes
    ----------
    T : scipy.sparse.csr_matrix (A, A), s-1
    source : ndarray (A,), cm-3 s-1
        From the upper-boundary flux.
    a, b : ndarray (A − 1,), cm s-1
        Face weights (see :func:`face_weights`).
    upper_flux_cm2_s : float
    """

    T: sp.csr_matrix
    source: np.ndarray
    a: np.ndarray
    b: np.ndarray
    upper_flux_cm2_s: float

    @property
    def size(self) -> int:
        return self.source.size

    def apply(self, n):
        """Transport tendency T n + s, cm-3 s-1; ``n`` shaped (..., A)."""
        n = np.asarray(n, float)
        return (self.T @ n.reshape(-1, self.size).T).T.reshape(n.shape) + self.source

    def gross(self, n):
        """(inflow, outflow) of every cell, each (..., A), cm-3 s-1, ≥ 0.

        Inflow: the off-diagonal part of T n and a positive source; outflow: the diagonal
        part and a negative source. Their difference is :meth:`apply`.
        """
        n = np.asarray(n, float)
        flat = n.reshape(-1, self.size)
        diag = self.T.diagonal()
        off = (self.T @ flat.T).T - diag * flat
        inflow = off + np.maximum(self.source, 0.0)
        outflow = -diag * flat + np.maximum(-self.source, 0.0)
        return inflow.reshape(n.shape), outflow.reshape(n.shape)

    def flux(self, n):
        """Upward flux on the faces, (..., A − 1), and the top flux appended: (..., A).

        The value at index i is the flux through the face above row i (the last one is
        the given upper-boundary flux), cm-2 s-1.
        """
        n = np.asarray(n, float)
        faces = self.a * n[..., :-1] - self.b * n[..., 1:]
        top = np.full(n.shape[:-1] + (1,), self.upper_flux_cm2_s)
        return np.concatenate([faces, top], axis=-1)


def transport_operator(altitude_km, D_cm2_s, V_cm_s, upper_flux_cm2_s=0.0):
    """Build the operator of the module docstring.

    Parameters
    ----------
    altitude_km : ndarray (A,)
        Strictly increasing rows, km, A ≥ 2.
    D_cm2_s, V_cm_s : ndarray (A − 1,)
        Diffusion coefficient and drift velocity on the faces (positive upward).
    upper_flux_cm2_s : float
        Flux through the top of the column, cm-2 s-1, positive upward.

    Returns
    -------
    TransportOperator
    """
    z = np.asarray(altitude_km, float) * 1e5
    A = z.size
    if A < 2:
        raise ValueError("transport needs at least two rows")
    a, b = face_weights(z, D_cm2_s, V_cm_s)
    width = np.empty(A)
    width[1:-1] = 0.5 * (z[2:] - z[:-2])
    width[-1] = 0.5 * (z[-1] - z[-2])
    width[0] = 0.5 * (z[1] - z[0])
    f = np.arange(A - 1)
    lower_has_row = f >= 1
    rows = np.concatenate([f[lower_has_row], f[lower_has_row], f + 1, f + 1])
    cols = np.concatenate([f[lower_has_row], f[lower_has_row] + 1, f, f + 1])
    vals = np.concatenate([-a[lower_has_row] / width[f[lower_has_row]],
                           b[lower_has_row] / width[f[lower_has_row]],
                           a / width[f + 1], -b / width[f + 1]])
    T = sp.csr_matrix((vals, (rows, cols)), shape=(A, A))
    source = np.zeros(A)
    if A >= 2:
        source[-1] = -float(upper_flux_cm2_s) / width[-1]
    return TransportOperator(T=T, source=source, a=a, b=b,
                             upper_flux_cm2_s=float(upper_flux_cm2_s))


class SpeciesTransport:
    """One species' transport operator placed in the (row, species) state of columns.

    The state is ``n`` shaped (C·A, S): C columns of A rows stacked (row-major within
    each column), S solved species, the transported one at column ``species_index``.

    Parameters
    ----------
    operator : TransportOperator
        For one column of A rows.
    species_index : int
        Column of the transported species in ``n``.
    n_species : int
        S.
    """

    def __init__(self, operator: TransportOperator, species_index: int, n_species: int):
        self.operator = operator
        self.index = int(species_index)
        self.S = int(n_species)
        self.A = operator.size
        self._matrices = {}

    def _columns(self, n):
        C = n.shape[0] // self.A
        return n[:, self.index].reshape(C, self.A)

    def tendency(self, n):
        """Transport part of dn/dt, (C·A, S), cm-3 s-1 (zero outside the species)."""
        out = np.zeros_like(n, dtype=float)
        out[:, self.index] = self.operator.apply(self._columns(n)).ravel()
        return out

    def gross(self, n):
        """(inflow, outflow), each (C·A, S), cm-3 s-1."""
        P = np.zeros_like(n, dtype=float)
        L = np.zeros_like(n, dtype=float)
        inflow, outflow = self.operator.gross(self._columns(n))
        P[:, self.index] = inflow.ravel()
        L[:, self.index] = outflow.ravel()
        return P, L

    def diagonal(self):
        """Diagonal of T (A,), s-1: the row's own share of the Jacobian."""
        return self.operator.T.diagonal()

    def matrix(self, n_columns=1):
        """Sparse (C·A·S, C·A·S) Jacobian of the transport part (constant, cached)."""
        C = int(n_columns)
        if C not in self._matrices:
            T = sp.kron(sp.identity(C, format="csr"), self.operator.T).tocoo()
            rows = T.row * self.S + self.index
            cols = T.col * self.S + self.index
            N = C * self.A * self.S
            self._matrices[C] = sp.csr_matrix((T.data, (rows, cols)), shape=(N, N))
        return self._matrices[C]
