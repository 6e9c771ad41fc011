"""Coefficients of O+ ambipolar diffusion along the field, projected on the vertical.

The vertical flux of O+ in a plane-stratified F region (Schunk & Nagy 2009, *Ionospheres*,
2nd ed., Cambridge, §5.13 on ambipolar diffusion and §10.2 on the F region; Rishbeth &
Garriott 1969, *Introduction to Ionospheric Physics*, Academic Press, ch. 3; forms as in
docs/physics.md §4a, *from memory*) is

    Φ = −D_a sin²I [dn/dz + n/H_p + (n/T_p) dT_p/dz] + n U_v,

with T_p = (Te + Ti)/2 the plasma temperature, H_p = 2 k T_p/(m_i g) the plasma scale
height, D_a = 2 k T_p/(m_i ν_in) the ambipolar diffusion coefficient, I the dip angle and
U_v = −U sin I cos I the vertical drift a meridional wind U (positive northward) induces
along the field (an equatorward wind lifts the layer in either hemisphere).

Written as Φ = −D dn/dz + V n this module returns, on the faces between altitude rows,
D = D_a sin²I and V = U_v − D (1/H_p + d ln T_p/dz): the diffusion coefficient and the
velocity the operator in ``ionochem.solve.transport`` needs. It also gives the diffusion
time used by the photochemical-equilibrium flag.

The collision frequency of O+ with the neutrals sums the resonant charge exchange with O,
ν = 3.67e-11 n(O) T_r^0.5 (1 − 0.064 log10 T_r)², T_r = (Ti + Tn)/2, and the non-resonant
(induced-dipole) collisions with the other neutrals, ν = C_n n_n (Schunk & Nagy 2009,
tables 4.4 and 4.5, *from memory*).

It knows neither reactions nor solvers: it takes temperatures and neutral densities.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ionochem import constants

#: Boltzmann constant, J K-1 (exact; CODATA 2018).
K_B = constants.K_B
#: Atomic mass constant, kg (CODATA 2018).
AMU_KG = constants.AMU_KG
#: Mass of O+, amu (atomic weight of O, IUPAC; the electron's mass is negligible here).
M_OPLUS_AMU = 15.999
#: Standard gravity, m s-2 (3rd CGPM, 1901).
G0_M_S2 = constants.G0_M_S2
#: Mean Earth radius, km (IUGG mean radius R1, *from memory*).
R_EARTH_KM = constants.EARTH_RADIUS_KM

#: Non-resonant O+–neutral momentum-transfer coefficients C_n, cm3 s-1, ν = C_n n_n
#: (Schunk & Nagy 2009, table 4.4, *from memory*).
C_OPLUS_NONRESONANT = {"N2": 6.82e-10, "O2": 6.64e-10, "He": 1.32e-10, "N": 4.62e-10,
                       "H": 6.61e-11}


def gravity_m_s2(altitude_km):
    """Gravitational acceleration g0 (R/(R + z))², m s-2 (inverse-square with height)."""
    z = np.asarray(altitude_km, dtype=float)
    return G0_M_S2 * (R_EARTH_KM / (R_EARTH_KM + z)) ** 2


def oplus_collision_frequency(neutrals, Ti, Tn):
    """Momentum-transfer collision frequency of O+ with the neutrals, s-1, shape (altitude,).

    Parameters
    ----------
    neutrals : dict[str, ndarray]
        Neutral densities, cm-3, each (altitude,).
    Ti, Tn : ndarray (altitude,)
        Ion and neutral temperatures, K.
    """
    Tr = 0.5 * (np.asarray(Ti, float) + np.asarray(Tn, float))
    nu = np.zeros_like(Tr)
    for name, c in C_OPLUS_NONRESONANT.items():
        if name in neutrals:
            nu = nu + c * np.asarray(neutrals[name], float)
    if "O" in neutrals:
        nu = nu + 3.67e-11 * np.asarray(neutrals["O"], float) * np.sqrt(Tr) \
            * (1.0 - 0.064 * np.log10(Tr)) ** 2
    return nu


def ambipolar_diffusion_cm2_s(neutrals, Te, Ti, Tn):
    """Ambipolar diffusion coefficient of O+ along the field, D_a = k (Te + Ti)/(m ν), cm2 s-1."""
    nu = oplus_collision_frequency(neutrals, Ti, Tn)
    kT = K_B * (np.asarray(Te, float) + np.asarray(Ti, float))
    with np.errstate(divide="ignore"):
        return kT / (M_OPLUS_AMU * AMU_KG * nu) * 1e4


def plasma_scale_height_km(altitude_km, Te, Ti):
    """O+ plasma scale height H_p = k (Te + Ti)/(m_O+ g), km."""
    kT = K_B * (np.asarray(Te, float) + np.asarray(Ti, float))
    return kT / (M_OPLUS_AMU * AMU_KG * gravity_m_s2(altitude_km)) * 1e-3


def neutral_scale_height_km(altitude_km, Tn, mass_amu=M_OPLUS_AMU):
    """Neutral scale height k Tn/(m g), km (default: atomic oxygen)."""
    return K_B * np.asarray(Tn, float) / (mass_amu * AMU_KG
                                           * gravity_m_s2(altitude_km)) * 1e-3


def diffusion_time_s(altitude_km, neutrals, Te, Ti, Tn, dip_deg=90.0):
    """Vertical diffusion time of O+, H_n² / (D_a sin²I), s, shape (altitude,).

    The F2 peak forms, and photochemical equilibrium of O+ ends, where the chemical loss
    rate β equals D/H² with H the scale height of the *neutral* gas through which the
    ions diffuse (atomic oxygen, on which D_a ∝ 1/n(O) depends), not the plasma scale
    height, which is 2–3 times larger (Rishbeth & Garriott 1969, ch. 3; Schunk & Nagy
    2009, §10.2; *from memory*).
    """
    D = ambipolar_diffusion_cm2_s(neutrals, Te, Ti, Tn) * np.sin(np.radians(dip_deg)) ** 2
    H_cm = neutral_scale_height_km(altitude_km, Tn) * 1e5
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(D > 0, H_cm ** 2 / D, np.inf)


@dataclass
class FaceCoefficients:
    """Vertical transport coefficients of one species on the faces between altitude rows.

    Attributes
    ----------
    altitude_km : ndarray (altitude,)
        The altitude rows.
    D_cm2_s : ndarray (altitude - 1,)
        Vertical diffusion coefficient D_a sin²I on the faces, cm2 s-1.
    V_cm_s : ndarray (altitude - 1,)
        Vertical velocity of the drift terms (gravity, thermal diffusion, wind), cm s-1,
        positive upward.
    upper_flux_cm2_s : float
        Flux through the top of the column, cm-2 s-1, positive upward.
    dip_deg : float
        Dip angle used, degrees.
    meridional_wind_m_s : float
        Meridional wind used, m s-1, positive northward.
    """

    altitude_km: np.ndarray
    D_cm2_s: np.ndarray
    V_cm_s: np.ndarray
    upper_flux_cm2_s: float
    dip_deg: float
    meridional_wind_m_s: float = 0.0


def oplus_face_coefficients(altitude_km, neutrals, Te, Ti, Tn, *, dip_deg,
                            meridional_wind_m_s=0.0, upper_flux_cm2_s=0.0):
    """D and V of the O+ flux Φ = −D dn/dz + V n on the faces between altitude rows.

    Face values: D is the geometric mean of the row values (it varies exponentially with
    height), 1/H_p is taken at the face's height and mean plasma temperature, and
    d ln T_p/dz is the difference between the two rows.

    Parameters
    ----------
    altitude_km : ndarray (altitude,)
        Strictly increasing altitudes, km (at least two).
    neutrals : dict[str, ndarray]
        Neutral densities, cm-3.
    Te, Ti, Tn : ndarray (altitude,)
        Temperatures, K.
    dip_deg : float
        Magnetic dip angle, degrees (signed: positive where the field points down).
    meridional_wind_m_s : float
        Meridional neutral wind, m s-1, positive northward.
    upper_flux_cm2_s : float
        O+ flux through the top, cm-2 s-1, positive upward (negative: into the column).

    Returns
    -------
    FaceCoefficients
    """
    z = np.asarray(altitude_km, float)
    Te, Ti, Tn = (np.asarray(t, float) for t in (Te, Ti, Tn))
    I = np.radians(float(dip_deg))
    Da = ambipolar_diffusion_cm2_s(neutrals, Te, Ti, Tn)
    D_lev = Da * np.sin(I) ** 2
    D = np.sqrt(D_lev[:-1] * D_lev[1:])
    Tp = 0.5 * (Te + Ti)
    z_face = 0.5 * (z[:-1] + z[1:])
    Tp_face = 0.5 * (Tp[:-1] + Tp[1:])
    inv_Hp = (M_OPLUS_AMU * AMU_KG * gravity_m_s2(z_face)) / (2.0 * K_B * Tp_face) * 1e-2
    dlnT = np.diff(np.log(Tp)) / (np.diff(z) * 1e5)          # cm-1
    U_v = -float(meridional_wind_m_s) * 100.0 * np.sin(I) * np.cos(I)    # cm s-1
    V = U_v - D * (inv_Hp + dlnT)
    return FaceCoefficients(altitude_km=z, D_cm2_s=D, V_cm_s=V,
                            upper_flux_cm2_s=float(upper_flux_cm2_s), dip_deg=float(dip_deg),
                            meridional_wind_m_s=float(meridional_wind_m_s))
