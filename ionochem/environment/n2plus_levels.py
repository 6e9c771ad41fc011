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

Bin by bin. The split above holds for photons far above every threshold. The column uses
:func:`photoionization_split` instead, one split per wavelength bin: only the states and
levels the photon energy can reach are made, and in the autoionization range between the
X and B thresholds (796-661 angstrom) the X(v) distribution is the measured non-Franck-
Condon one (:data:`AUTOIONIZATION_V1_SHARE`). :func:`level_sources` turns the per-bin photo
frequencies of N2 -> N2+ into per-level frequencies (keys ``"photo:N2->N2+(v=k)"``) for the
environment; photoelectron impact is split by :func:`electron_impact_split` (electron-impact
state shares, optical Franck-Condon factors). The packaged table
``ionochem/data/n2plus_level_fractions.csv`` (written by :func:`compute_level_fractions`,
v = 0..8, the last row standing for v >= 8; read by :func:`n2plus_level_fractions`) is the
high-energy limit, kept as the fallback when no spectrum is available.

N2+ made by O+(2D) + N2 or O+(2P) + N2 is the reaction list's business;
:func:`statistical_level_distribution` gives the prior distribution it assumes.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from functools import lru_cache
from types import MappingProxyType

import numpy as np

from ionochem import constants
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

_H = constants.PLANCK_J_S
#: eV per cm-1: h c / e (constants.HC_EV_CM).
CM_TO_EV = constants.HC_EV_CM
_C_CM = constants.SPEED_OF_LIGHT_CM_S
_AMU = constants.AMU_KG
_MU_N2 = 0.5 * 14.0030740048 * _AMU  # reduced mass of 14N2 (AME atomic mass of 14N)
_R_GRID_A = np.linspace(0.75, 2.2, 3000)


#: Second radiation constant h c / k_B, cm K (CODATA 2018, from exact constants).
CM_TO_K = 1.438776877

#: Term values of O+(2D) and O+(2P) above O+(4S), cm-1: 26817 and 40467 (O II levels of the
#: ADAS adf04 file nlike_dhbl94#o, read; docs/physics.md §10.4).
OPLUS_LEVELS_CM = MappingProxyType({"2D": 26817.0, "2P": 40467.0})

#: Ionization energies, eV: O 13.618 and N2 (into N2+ X v=0) 15.581 (NIST *(from memory)*).
_IP_O_EV = 13.618

#: Energy released by O+(2D) + N2 -> N2+ X(v=0) + O: IP(O) + E(2D) - IP(N2) = 1.362 eV, and by
#: O+(2P) + N2: 3.054 eV (levels above; ionization energies *(from memory)*).
O2D_N2_EXOTHERMICITY_EV = round(_IP_O_EV + OPLUS_LEVELS_CM["2D"] * CM_TO_EV - 15.581, 3)
O2P_N2_EXOTHERMICITY_EV = round(_IP_O_EV + OPLUS_LEVELS_CM["2P"] * CM_TO_EV - 15.581, 3)


def x_level_energies_cm(n_levels: int = 6) -> np.ndarray:
    """Vibrational energies of N2+ X above v = 0, cm-1, from the Dunham two-term expansion.

    G(v) = omega_e (v + 1/2) - omega_e x_e (v + 1/2)^2 with omega_e = 2207.00 and omega_e x_e
    = 16.10 cm-1 (Huber & Herzberg 1979, Constants of Diatomic Molecules *(from memory)*;
    :data:`SPECTROSCOPIC_CONSTANTS`); the Morse levels of :func:`vibrational_levels` are the
    same expansion up to the grid error. E(1) - E(0) = 2174.8 cm-1 (3129 K).
    """
    k = SPECTROSCOPIC_CONSTANTS["N2+(X)"]
    v = np.arange(n_levels) + 0.5
    g = k["we"] * v - k["wexe"] * v ** 2
    return g - g[0]


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
    from scipy.linalg import eigh_tridiagonal  # deferred: 0.3 s to import
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


# --------------------------------------------------------------------------- bin by bin

#: Ionization energy of N2 into N2+ X(v=0), eV (docs/physics.md §4; NIST *(from memory)*).
IONIZATION_EV = 15.581

#: Photon-energy range (eV) where autoionizing Rydberg series dominate N2 photoionization:
#: from the X threshold to the B(v=0) threshold, 15.58-18.75 eV (796-661 angstrom;
#: docs/physics.md §4b). There the X(v) distribution is not Franck-Condon.
AUTOIONIZATION_EV = (15.581, 18.75)

#: Share of X-state ions made in v >= 1 in the autoionization range: measured vibrational
#: branching through the Rydberg resonances between the X and B thresholds reaches
#: v=1/v=0 ratios of 0.2-0.5, against the Franck-Condon 0.09 (photoelectron spectroscopy of
#: N2 in the 600-800 angstrom range, e.g. Woodruff & Marr 1977, Proc. R. Soc. Lond. A 358,
#: 87 *(from memory; value and citation unverified)*). 0.25 is taken as a resonance average
#: *(from memory)*; the v >= 1 share is spread over the open levels by their Franck-Condon
#: weights.
AUTOIONIZATION_V1_SHARE = 0.25

#: Shares of the X, A and B states in N2+ made by fast-electron impact, derived here from
#: two measurements: the A/B production ratio 4.1 +- 0.7 above 50 eV (record "Electron
#: impact excitation of the N2+ Meinel band", authors *(from memory: Piper et al.)*) and the
#: total-ionization to first-negative (0,0) band cross-section ratio 14.1 from 30 eV to
#: 10 keV (record "excitation of the (0,0) first negative band of N2+ by electron impact",
#: *(authors from memory: Borst & Zipf 1970, Phys. Rev. A 1, 834)*), with the (0,0) band
#: 0.65 of B production (q[X(0)->B(0)] x B(0->0) branching of this module) and 20 % of
#: N2 ionizations going to N+ (secondary.SecondaryParameters): B = 0.109, A = 0.448,
#: X = 0.242 of all ionizations, i.e. X : A : B = 0.30 : 0.56 : 0.14 of bound N2+.
#: Electron-impact Franck-Condon factors are the optical ones at these energies (Born
#: approximation; Shemansky & Liu 2005, J. Geophys. Res. 110, A07307, treat N2+ X, A, B
#: production so).
ELECTRON_IMPACT_BRANCHING = MappingProxyType({"X": 0.30, "A": 0.56, "B": 0.14})


def _state_energies_eV(n_levels: int) -> dict[str, np.ndarray]:
    """Energies (eV) of N2+ X, A, B vibrational levels above N2+ X(v=0)."""
    e_x0 = vibrational_levels("N2+(X)", n_levels)[0][0]
    return {s: (vibrational_levels(f"N2+({s})", n_levels)[0] - e_x0) * CM_TO_EV
            for s in ("X", "A", "B")}


def _fold(f: np.ndarray, levels: Sequence[int]) -> np.ndarray:
    """Fold a (..., v) distribution onto resolved levels; the top collects the rest."""
    lv = [int(x) for x in levels]
    if not lv or lv[0] != 0 or any(b <= a for a, b in zip(lv, lv[1:], strict=False)):
        raise InputError(f"N2+ levels must be strictly increasing from 0, got {list(levels)}")
    v = np.arange(f.shape[-1])
    edges = lv + [np.inf]
    return np.stack([f[..., (v >= lo) & (v < hi)].sum(axis=-1)
                     for lo, hi in zip(edges[:-1], edges[1:], strict=True)], axis=-1)


def photon_energy_eV(wl_lo_A, wl_hi_A) -> np.ndarray:
    """Photon energy (eV) of each bin for the N2+ split, shape (bin,).

    A line bin uses its wavelength; a range bin its centre, or, when it straddles the N2
    ionization threshold, the middle of the part shortward of it (as the photoelectron
    energies of :mod:`ionochem.environment.photorates`).
    """
    HC_EV_A = constants.HC_EV_A
    lo = np.asarray(wl_lo_A, float)
    hi = np.asarray(wl_hi_A, float)
    lam_th = HC_EV_A / IONIZATION_EV
    lam = np.where(lo < hi, 0.5 * (lo + np.minimum(hi, lam_th)), lo)
    return HC_EV_A / lam


def photoionization_split(wl_lo_A, wl_hi_A, levels: Sequence[int] | None = None, *,
                          branching: Mapping[str, float] = STATE_BRANCHING,
                          autoionization_v1_share: float | None = AUTOIONIZATION_V1_SHARE,
                          n_levels: int = 16) -> dict[str, np.ndarray]:
    """Split of N2 photoionization over N2+ X(v), bin by bin.

    In each bin the photon energy E (:func:`photon_energy_eV`) decides which states and
    levels are open: a level of X, A or B is made only if it lies less than E - 15.581 eV
    above N2+ X(0). Among the open states the shares are ``branching`` renormalised
    (STATE_BRANCHING *(from memory)*, representative of 584-304 angstrom; the measured
    partial cross sections vary with wavelength); within a state the Franck-Condon factors
    from N2 X(0) (this module's Morse model; Gilmore, Laher & Espy 1992) over its open
    levels, renormalised. A and B ions then radiate to X by the nu^3 q branching
    (:func:`radiative_branching`). In the autoionization range
    (:data:`AUTOIONIZATION_EV`) the X-state ions go to v >= 1 with the share
    ``autoionization_v1_share`` instead of the Franck-Condon share (None keeps
    Franck-Condon there too).

    Parameters
    ----------
    wl_lo_A, wl_hi_A : array_like, shape (bin,)
        Bin edges (angstrom); equal edges are a line.
    levels : sequence of int, optional
        Resolved levels (strictly increasing from 0; the top one collects all higher
        levels). Default: every level 0..n_levels-1.
    branching : Mapping[str, float]
        Shares of X, A and B where all three are open.
    autoionization_v1_share : float or None
        Share of X ions in v >= 1 in the autoionization range.
    n_levels : int
        Levels kept per state.

    Returns
    -------
    dict[str, ndarray]
        ``fraction`` (bin, level), rows summing to 1 where the bin can ionize N2 (0
        elsewhere), and its parts ``direct_X``, ``via_A``, ``via_B`` (bin, level);
        ``photon_eV`` (bin,).
    """
    E = photon_energy_eV(wl_lo_A, wl_hi_A)
    avail = E - IONIZATION_EV
    energies = _state_energies_eV(n_levels)
    q = {s: franck_condon_factors("N2(X)", f"N2+({s})", 1, n_levels)[0]
         for s in ("X", "A", "B")}
    cascade = {"A": radiative_branching("N2+(A)", n_upper=n_levels, n_lower=n_levels),
               "B": radiative_branching("N2+(B)", n_upper=n_levels, n_lower=n_levels)}
    nb = E.size
    parts = {}
    weights = {}
    for s in ("X", "A", "B"):
        open_ = energies[s][None, :] < avail[:, None]                     # (bin, v)
        w = np.where(open_, q[s][None, :], 0.0)
        tot = w.sum(axis=1, keepdims=True)
        dist = np.divide(w, tot, out=np.zeros_like(w), where=tot > 0)
        if s == "X" and autoionization_v1_share is not None:
            lo, hi = AUTOIONIZATION_EV
            auto = (E >= lo) & (E < hi)
            upper = dist[:, 1:]
            share = upper.sum(axis=1, keepdims=True)
            has_upper = share[:, 0] > 0
            redo = auto & has_upper
            new_upper = np.divide(upper, share, out=np.zeros_like(upper), where=share > 0)
            dist = np.where(redo[:, None],
                            np.concatenate([np.full((nb, 1), 1 - autoionization_v1_share),
                                            autoionization_v1_share * new_upper], axis=1),
                            dist)
        parts[s] = dist
        weights[s] = np.where(tot[:, 0] > 0, float(branching[s]), 0.0)
    wsum = weights["X"] + weights["A"] + weights["B"]
    scale = {s: np.divide(weights[s], wsum, out=np.zeros(nb), where=wsum > 0)
             for s in weights}
    x_from = {"direct_X": scale["X"][:, None] * parts["X"],
              "via_A": scale["A"][:, None] * (parts["A"] @ cascade["A"]),
              "via_B": scale["B"][:, None] * (parts["B"] @ cascade["B"])}
    lv = list(range(n_levels)) if levels is None else levels
    out = {k: _fold(v, lv) for k, v in x_from.items()}
    out["fraction"] = out["direct_X"] + out["via_A"] + out["via_B"]
    out["photon_eV"] = E
    return out


def electron_impact_split(levels: Sequence[int], *,
                          branching: Mapping[str, float] = ELECTRON_IMPACT_BRANCHING
                          ) -> np.ndarray:
    """Split of N2+ made by photoelectron impact over X(v), shape (len(levels),).

    Franck-Condon factors from N2 X(0) into X, A and B with the A -> X and B -> X cascades,
    as for photons well above threshold, with the electron-impact state shares
    :data:`ELECTRON_IMPACT_BRANCHING`. Independent of the electron energy (the secondary
    electrons are not resolved in energy, see :mod:`ionochem.environment.secondary`).
    """
    d = compute_level_fractions(top=15, branching=branching, n_levels=16)
    return _fold(d["fraction"], levels)


def level_requests(needs) -> dict[str, list[int]]:
    """Per-level N2+ channels a mechanism asks for: ``{"photo:N2->N2+": [0, 1, ...]}``.

    ``needs`` holds keys such as ``"photo:N2->N2+(v=1)"`` (see :func:`level_sources`).
    """
    out: dict[str, set[int]] = {}
    for n in needs:
        if n.startswith(("photo:N2->N2+(v=", "photoelectron:N2->N2+(v=")) and n.endswith(")"):
            base, v = n[:-1].split("(v=")
            out.setdefault(base, set()).add(int(v))
    return {k: sorted(v) for k, v in out.items()}


def level_sources(spectrum, slant_columns, totals, requests) -> dict[str, np.ndarray]:
    """Per-level N2+ production frequencies (s-1 per N2) for the requested channels.

    Parameters
    ----------
    spectrum : Spectrum
        Photon bins and fluxes (already scaled to the Sun's distance).
    slant_columns : dict[str, ndarray]
        Slant columns (cm-2) as for :func:`~ionochem.environment.photorates.photo_frequencies`.
    totals : dict[str, ndarray]
        Channel totals already computed (``"photoelectron:N2->N2+"``).
    requests : dict[str, list[int]]
        From :func:`level_requests`.

    Returns
    -------
    dict[str, ndarray]
        ``"photo:N2->N2+(v=k)"`` and ``"photoelectron:N2->N2+(v=k)"`` -> (..., altitude);
        the levels of one channel add up to its total.
    """
    from ionochem.environment.photorates import photo_frequencies
    out = {}
    for base, levels in requests.items():
        if not levels or levels[0] != 0 or levels != list(range(levels[-1] + 1)):
            raise InputError(f"{base}: N2+ levels must cover v = 0..top, got {levels}")
        if base == "photo:N2->N2+":
            jb = photo_frequencies(spectrum, slant_columns, channels=["N2->N2+"],
                                   per_bin=True)["N2->N2+"]              # (..., alt, bin)
            split = photoionization_split(spectrum.wl_lo_A, spectrum.wl_hi_A,
                                          levels)["fraction"]            # (bin, level)
            per_level = jb @ split
        else:
            split = electron_impact_split(levels)
            per_level = np.asarray(totals[base])[..., None] * split
        for i, v in enumerate(levels):
            out[f"{base}(v={v})"] = per_level[..., i]
    return out
