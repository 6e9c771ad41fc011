"""Split of N2+ photoionization production over the vibrational levels X(v) of N2+.

Photoionization of N2 X(v=0) makes N2+ in the X, A and B electronic states; A and B then
radiate to X within microseconds (the A -> X Meinel and B -> X first negative bands), so at
thermospheric densities every bound N2+ ends in some X(v). The fraction ending in X(v) is

    f(v) = b_X q[N2 X(0) -> N2+ X(v)]
         + b_A sum_v' q[N2 X(0) -> N2+ A(v')] B_AX(v' -> v)
         + b_B sum_v' q[N2 X(0) -> N2+ B(v')] B_BX(v' -> v),

with b the electronic-state branching at photoionization (:data:`STATE_BRANCHING`), q
Franck-Condon factors, and B the radiative branching of each upper level over the X levels,
B(v' -> v) proportional to nu^3 q[v' -> v] (constant electronic transition moment).

Method (written here; no library computes it): each state is a Morse oscillator with the
spectroscopic constants of Huber & Herzberg (1979), Constants of Diatomic Molecules
*(from memory)*; its J = 0 vibrational wavefunctions come from a finite-difference radial
Hamiltonian (scipy's tridiagonal eigensolver) and q is the squared overlap. The results
reproduce the Franck-Condon factors tabulated by Gilmore, Laher & Espy (1992), J. Phys.
Chem. Ref. Data 21, 1005, to about 0.01-0.03 (checked in the tests against values quoted
from memory). Photoionization Franck-Condon factors assume a constant ionization matrix
element (photons well above threshold, *(common practice)*). B -> A emission (weak) and
the r-dependence of the Meinel transition moment are neglected.

The packaged table ``ionochem/data/n2plus_level_fractions.csv`` was written by
:func:`compute_level_fractions` (v = 0..8, the last row standing for v >= 8);
:func:`n2plus_level_fractions` reads it and folds it onto the levels a mechanism resolves.

This module covers photoionization of N2 only; N2+ made by O+(2D) + N2 or O+(2P) + N2
(which can populate v up to about 5 and higher) is the reaction list's business.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from functools import lru_cache
from types import MappingProxyType

import numpy as np
from scipy.linalg import eigh_tridiagonal

from ionochem.environment.euvac import DATA_DIR
from ionochem.errors import InputError
from ionochem.io.tables import read_csv_columns

LEVEL_FRACTIONS_PATH = DATA_DIR / "n2plus_level_fractions.csv"

#: Spectroscopic constants (omega_e, omega_e x_e, Te in cm-1; r_e in angstrom), Huber &
#: Herzberg (1979), Constants of Diatomic Molecules IV *(from memory)*. Te of the ion states
#: is counted from N2+ X.
SPECTROSCOPIC_CONSTANTS = MappingProxyType({
    "N2(X)": {"we": 2358.57, "wexe": 14.324, "re": 1.09768, "Te": 0.0},
    "N2+(X)": {"we": 2207.00, "wexe": 16.10, "re": 1.11642, "Te": 0.0},
    "N2+(A)": {"we": 1903.70, "wexe": 15.02, "re": 1.1749, "Te": 9167.46},
    "N2+(B)": {"we": 2419.84, "wexe": 23.18, "re": 1.07426, "Te": 25461.4},
})

#: Share of bound N2+ made in the X, A and B states by solar EUV photoionization
#: *(from memory; representative of N2 photoelectron spectra between 584 and 304 angstrom,
#: where most N2 ionization happens; the shares vary with wavelength)*.
STATE_BRANCHING = MappingProxyType({"X": 0.40, "A": 0.45, "B": 0.15})

_H = 6.62607015e-34          # J s (CODATA 2018, exact)
#: eV per cm-1: h c / e (CODATA 2018, exact constants).
CM_TO_EV = 1.239841984e-4
_C_CM = 2.99792458e10        # cm s-1 (exact)
_AMU = 1.66053906660e-27     # kg (CODATA 2018)
_MU_N2 = 0.5 * 14.0030740048 * _AMU  # reduced mass of 14N2 (AME atomic mass of 14N)
_R_GRID_A = np.linspace(0.75, 2.2, 3000)


@lru_cache(maxsize=None)
def vibrational_levels(state: str, n_levels: int = 16) -> tuple[np.ndarray, np.ndarray]:
    """Vibrational levels (J = 0) of a Morse model of one N2 or N2+ state.

    Parameters
    ----------
    state : str
        A key of :data:`SPECTROSCOPIC_CONSTANTS` (``"N2(X)"``, ``"N2+(X)"``, ``"N2+(A)"``,
        ``"N2+(B)"``).
    n_levels : int, optional
        Number of levels from v = 0.

    Returns
    -------
    energy_cm : ndarray, shape (n_levels,)
        Term value Te + G(v) (cm-1).
    psi : ndarray, shape (r, n_levels)
        Wavefunctions on the internal radial grid, normalised so that sum psi^2 dr = 1
        (dr in metres).
    """
    if state not in SPECTROSCOPIC_CONSTANTS:
        raise InputError(f"unknown N2 state {state!r}; known: {list(SPECTROSCOPIC_CONSTANTS)}")
    k = SPECTROSCOPIC_CONSTANTS[state]
    de = k["we"] ** 2 / (4.0 * k["wexe"])                      # well depth, cm-1
    a = 2.0 * np.pi * _C_CM * k["we"] * np.sqrt(_MU_N2 / (2.0 * de * _H * _C_CM))  # m-1
    r = _R_GRID_A
    dr = (r[1] - r[0]) * 1e-10
    v = de * (1.0 - np.exp(-a * (r - k["re"]) * 1e-10)) ** 2  # cm-1
    kin = _H / (8.0 * np.pi ** 2 * _MU_N2 * _C_CM) / dr ** 2   # hbar^2 / (2 mu dr^2) in cm-1
    w, psi = eigh_tridiagonal(v + 2.0 * kin, np.full(r.size - 1, -kin),
                              select="i", select_range=(0, n_levels - 1))
    psi = psi / np.sqrt(dr)
    psi *= np.sign(psi.sum(axis=0))
    return w + k["Te"], psi


def franck_condon_factors(lower: str, upper: str, n_lower: int = 16,
                          n_upper: int = 16) -> np.ndarray:
    """Franck-Condon factors q[v_lower, v_upper] between two states (Morse model).

    Returns
    -------
    ndarray, shape (n_lower, n_upper)
        Squared vibrational overlaps; each row sums to about 1 when enough levels are kept.
    """
    _, a = vibrational_levels(lower, n_lower)
    _, b = vibrational_levels(upper, n_upper)
    dr = (_R_GRID_A[1] - _R_GRID_A[0]) * 1e-10
    return (a.T @ b * dr) ** 2


def radiative_branching(upper: str, lower: str = "N2+(X)", n_upper: int = 16,
                        n_lower: int = 16) -> np.ndarray:
    """Vibrational branching of emission from each level of ``upper`` over ``lower``.

    B[v', v] = nu^3 q[v', v] / sum_v nu^3 q[v', v] (constant transition moment).

    Returns
    -------
    ndarray, shape (n_upper, n_lower)
        Rows sum to 1.
    """
    e_up, _ = vibrational_levels(upper, n_upper)
    e_lo, _ = vibrational_levels(lower, n_lower)
    q = franck_condon_factors(upper, lower, n_upper, n_lower)
    nu = np.maximum(e_up[:, None] - e_lo[None, :], 0.0)
    w = q * nu ** 3
    return w / w.sum(axis=1, keepdims=True)


def compute_level_fractions(top: int = 8, *,
                            branching: Mapping[str, float] = STATE_BRANCHING,
                            n_levels: int = 16) -> dict[str, np.ndarray]:
    """Fraction of photoionization-made N2+ ending in each X(v), from first principles.

    Parameters
    ----------
    top : int, optional
        Highest level listed; it collects v >= top.
    branching : Mapping[str, float], optional
        Shares of the X, A and B states at photoionization (normalised here).
    n_levels : int, optional
        Levels kept in each state for the sums.

    Returns
    -------
    dict[str, ndarray]
        ``v`` (0..top), ``fraction`` (sums to 1) and its parts ``direct_X``, ``via_A``,
        ``via_B``, each shape (top + 1,).
    """
    total = sum(branching[s] for s in ("X", "A", "B"))
    if total <= 0 or min(branching[s] for s in ("X", "A", "B")) < 0:
        raise InputError("state branching must be non-negative with a positive sum")
    q_ion = {s: franck_condon_factors("N2(X)", f"N2+({s})", 1, n_levels)[0]
             for s in ("X", "A", "B")}
    q_ion = {s: q / q.sum() for s, q in q_ion.items()}
    parts = {
        "direct_X": branching["X"] / total * q_ion["X"],
        "via_A": branching["A"] / total * q_ion["A"] @ radiative_branching("N2+(A)",
                                                                           n_upper=n_levels,
                                                                           n_lower=n_levels),
        "via_B": branching["B"] / total * q_ion["B"] @ radiative_branching("N2+(B)",
                                                                           n_upper=n_levels,
                                                                           n_lower=n_levels),
    }
    out = {"v": np.arange(top + 1)}
    for name, f in parts.items():
        out[name] = np.append(f[:top], f[top:].sum())
    out["fraction"] = out["direct_X"] + out["via_A"] + out["via_B"]
    return out


@lru_cache(maxsize=1)
def _table() -> tuple[np.ndarray, np.ndarray]:
    header, data, _ = read_csv_columns(LEVEL_FRACTIONS_PATH)
    cols = dict(zip(header, data.T, strict=True))
    v = cols["v"].astype(int)
    frac = cols["fraction"]
    return v, frac / frac.sum()


def n2plus_level_fractions(levels: Sequence[int]) -> np.ndarray:
    """Fraction of N2+ made by photoionization of N2 in each resolved level of N2+ X.

    Parameters
    ----------
    levels : sequence of int
        The vibrational levels a mechanism resolves, strictly increasing from 0, e.g.
        ``[0, 1, 2, 3, 4]``. Each entry collects the levels from itself up to the next
        entry minus one; the top entry stands for "v = top and above" (all higher levels
        are folded into it).

    Returns
    -------
    ndarray, shape (len(levels),)
        Non-negative fractions adding up to 1, from the packaged table (module docstring).

    Raises
    ------
    InputError
        When ``levels`` is empty, does not start at 0 or is not strictly increasing.
    """
    lv = [int(x) for x in levels]
    if not lv or lv[0] != 0 or any(b <= a for a, b in zip(lv, lv[1:], strict=False)):
        raise InputError(f"N2+ levels must be strictly increasing from 0, got {list(levels)}")
    v, frac = _table()
    edges = lv + [np.inf]
    return np.array([frac[(v >= lo) & (v < hi)].sum()
                     for lo, hi in zip(edges[:-1], edges[1:], strict=True)])


def statistical_level_distribution(available_eV: float, levels: Sequence[int]) -> np.ndarray:
    """Prior (statistical) distribution of N2+ X(v) made by an exothermic charge transfer.

    P(v) is proportional to (E - E_v)^(3/2) over the levels with E_v < E: the products'
    translation (density of states ~ E^(1/2)) and the ion's rotation (~ E) share what the
    vibration leaves (the "prior" of Levine & Bernstein 1987, Molecular Reaction Dynamics and
    Chemical Reactivity, Oxford, ch. 5 *(from memory)*). E_v are the Morse levels of N2+ X
    (:func:`vibrational_levels`). Used for O+(2D) + N2 (E = 1.36 eV) and O+(2P) + N2
    (3.05 eV) in the default reaction list, as a stated assumption: no measured product
    distribution is known to the project.

    Parameters
    ----------
    available_eV : float
        Exothermicity of the reaction into N2+ X(v=0), eV.
    levels : sequence of int
        Resolved levels, strictly increasing from 0; the top one collects all higher levels.

    Returns
    -------
    ndarray, shape (len(levels),)
        Fractions adding up to 1.
    """
    lv = [int(x) for x in levels]
    if not lv or lv[0] != 0 or any(b <= a for a, b in zip(lv, lv[1:], strict=False)):
        raise InputError(f"N2+ levels must be strictly increasing from 0, got {list(levels)}")
    if not available_eV > 0:
        raise InputError("the available energy must be positive")
    e_cm, _ = vibrational_levels("N2+(X)", 30)
    ev = (e_cm - e_cm[0]) * CM_TO_EV
    w = np.clip(available_eV - ev, 0.0, None) ** 1.5
    w = w / w.sum()
    v = np.arange(w.size)
    edges = lv + [np.inf]
    return np.array([w[(v >= lo) & (v < hi)].sum()
                     for lo, hi in zip(edges[:-1], edges[1:], strict=True)])
