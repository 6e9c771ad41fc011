"""Where ions are magnetised, and so where an electric-field drift moves them past the neutrals.

An electric field E perpendicular to B drives the ions at E×B/B² only where they gyrate
many times between collisions. With κ = Ω_i/ν_in (gyrofrequency over ion–neutral
collision frequency) the steady ion velocity relative to the neutrals has the magnitude

    v_d(z) = v_E κ / sqrt(1 + κ²)

(the Pedersen and Hall mobility components added in quadrature; Schunk & Nagy 2009,
*Ionospheres*, 2nd ed., Cambridge, §5.9; Kelley 2009, *The Earth's Ionosphere*, 2nd ed.,
Academic Press, ch. 2; *from memory*). Above the height where ν_in = Ω_i (near 120–130 km)
ions drift at v_E; below it they move with the neutrals and feel no frictional heating.
The scenario's ``ion_drift_m_s`` is v_E, the drift of magnetised ions.

The collision frequency is that of NO+, the main ion near the transition height, with N2,
O2 and O, non-resonant: ν = Σ C_n n_n with C = 4.34e-10 (N2), 4.27e-10 (O2), 2.44e-10 (O)
cm3 s-1 (Schunk & Nagy 2009, table 4.4, *from memory*).

It knows no reactions and no scenario: densities and a field strength in, a profile out.
"""

from __future__ import annotations

import numpy as np

from ionochem import constants

#: Elementary charge, C (exact; CODATA 2018).
E_CHARGE = constants.E_CHARGE_C
#: Atomic mass constant, kg (CODATA 2018).
AMU_KG = constants.AMU_KG
#: Mass of NO+, amu (N 14.007 + O 15.999, IUPAC standard atomic weights).
M_NOPLUS_AMU = 30.006
#: Non-resonant NO+–neutral momentum-transfer coefficients, cm3 s-1 (Schunk & Nagy 2009,
#: table 4.4, *from memory*).
C_NOPLUS = {"N2": 4.34e-10, "O2": 4.27e-10, "O": 2.44e-10}
#: Field strength used when the scenario has no place and date for the IGRF, tesla: a
#: typical mid- to high-latitude value at 100–150 km *(common practice)*.
DEFAULT_FIELD_T = 5.0e-5


def ion_gyrofrequency_s(B_T, mass_amu=M_NOPLUS_AMU):
    """Angular gyrofrequency Ω = e B / m of a singly charged ion, rad s-1."""
    return E_CHARGE * np.asarray(B_T, float) / (float(mass_amu) * AMU_KG)


def ion_neutral_collision_frequency_s(neutrals):
    """NO+–neutral momentum-transfer collision frequency, s-1, shape (altitude,)."""
    nu = 0.0
    for name, c in C_NOPLUS.items():
        if name in neutrals:
            nu = nu + c * np.asarray(neutrals[name], float)
    return np.asarray(nu, float)


def magnetised_drift(drift_m_s, neutrals, B_T):
    """Ion–neutral drift speed at each altitude, m s-1, and the height index where κ = 1.

    Parameters
    ----------
    drift_m_s : float
        E×B drift of magnetised ions (the scenario's ``ion_drift_m_s``), m s-1.
    neutrals : dict[str, ndarray]
        Neutral densities, cm-3, each (altitude,).
    B_T : float or ndarray (altitude,)
        Field strength, tesla.

    Returns
    -------
    drift : ndarray (altitude,)
        v_E κ / sqrt(1 + κ²), m s-1.
    kappa : ndarray (altitude,)
        Ω_i / ν_in.
    """
    nu = ion_neutral_collision_frequency_s(neutrals)
    omega = ion_gyrofrequency_s(B_T)
    with np.errstate(divide="ignore", invalid="ignore"):
        kappa = np.where(nu > 0, omega / np.where(nu > 0, nu, 1.0), np.inf)
        factor = np.where(np.isfinite(kappa), kappa / np.sqrt(1.0 + kappa ** 2), 1.0)
    return float(drift_m_s) * factor, kappa


def magnetisation_height_km(altitude_km, kappa):
    """Lowest height where κ = Ω_i/ν_in reaches 1 (log-linear interpolation), km; NaN if none."""
    z = np.asarray(altitude_km, float)
    lk = np.log(np.clip(np.asarray(kappa, float), 1e-300, 1e300))
    above = np.nonzero(lk >= 0)[0]
    if above.size == 0:
        return float("nan")
    i = above[0]
    if i == 0:
        return float(z[0])
    return float(z[i - 1] + (z[i] - z[i - 1]) * (0 - lk[i - 1]) / (lk[i] - lk[i - 1]))
