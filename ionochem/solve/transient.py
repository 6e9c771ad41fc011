"""Time integration of a chemical column with scipy's stiff solvers.

The state is the solved densities of every row flattened row-major, ``y = n.ravel()``
with ``n`` shaped (altitude, species). Without transport the rows are coupled only through
time, so the Jacobian is block diagonal; with transport it is block tridiagonal and the
caller's ``jacobian`` returns it as a scipy.sparse matrix already. Either way ``solve_ivp``
gets a sparse matrix, which keeps the LU factorisation cost linear in the number of rows.

Like the steady solver this module sees only callables: ``tendency(t, n)`` and
``jacobian(t, n)``, so rates may depend on time (a setting sun).
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from scipy.integrate import solve_ivp

from ionochem.errors import SolverError
from ionochem.solve.column import block_diagonal

__all__ = ["block_diagonal", "integrate"]


def integrate(times_s, n0, tendency, jacobian, *, method="BDF", rtol=1e-8, atol=1e-6,
              t0=0.0, max_step=np.inf):
    """Integrate from ``t0`` and report the densities at ``times_s``.

    Parameters
    ----------
    times_s : array_like (T,)
        Output times, s, non-decreasing, each ≥ t0.
    n0 : ndarray (B, S)
        Densities at t0, cm-3.
    tendency : callable ``(t, n) -> (B, S)``
    jacobian : callable ``(t, n) -> (B, S, S)`` or ``-> scipy.sparse (B·S, B·S)``
    method : {"BDF", "Radau"}
    rtol, atol : float
        solve_ivp tolerances (atol in cm-3).

    Returns
    -------
    ndarray (T, B, S)
    """
    times = np.asarray(times_s, float)
    if times.ndim != 1 or times.size == 0 or np.any(np.diff(times) < 0) or times[0] < t0:
        raise SolverError("output times must be a non-empty, non-decreasing list ≥ 0 s")
    B, S = n0.shape
    if S == 0:
        return np.zeros((times.size, B, 0))

    def rhs(t, y):
        return tendency(t, y.reshape(B, S)).ravel()

    def jac(t, y):
        J = jacobian(t, y.reshape(B, S))
        return J if sp.issparse(J) else block_diagonal(J)

    t_end = times[-1]
    if t_end == t0:
        return np.repeat(n0[None], times.size, axis=0)
    sol = solve_ivp(rhs, (t0, t_end), n0.ravel(), method=method, t_eval=times, jac=jac,
                    rtol=rtol, atol=atol, max_step=max_step)
    if not sol.success:
        raise SolverError(f"time integration failed: {sol.message}")
    out = sol.y.T.reshape(times.size, B, S)
    return out
