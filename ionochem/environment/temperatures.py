"""Electron, ion and ion–neutral effective temperatures of the column.

Two jobs:

1. A *parametric* Te/Ti profile for runs without measured temperatures
   (:func:`parametric_profile`). It is a smooth convenience shape with defaults typical of
   the mid-latitude ionosphere *(common practice)*; it is NOT an empirical model and must
   not be presented as one.
2. The ion–neutral effective temperature of St.-Maurice & Torr (1978, JGR 83, 969), with
   the frictional heating of the ions by an ion–neutral drift
   (:func:`effective_temperature`, :func:`frictional_ion_temperature`,
   :func:`check_tabulated_ti`).

Counting the drift exactly once
-------------------------------
St.-Maurice & Torr (1978) give the effective temperature of an ion (mass m_i, temperature
Ti) colliding with a neutral (m_n, Tn) that drifts past it at the relative speed v_d as

    Teff = (m_i Tn + m_n Ti)/(m_i + m_n) + m_i m_n v_d² / (3 k_B (m_i + m_n)).

The two terms are distinct physics: the first is the random (thermal) energy of the pair,
the second the relative *bulk* motion. Ti is the actual ion temperature, which friction
with the neutrals raises to Ti = Tn + m̄ v_d²/(3 k_B) (m̄ the mean neutral mass; Schunk &
Nagy, *Ionospheres*, 2nd ed., Cambridge 2009 *(from memory)*). Substituting that Ti with
m̄ = m_n,

    Teff = Tn + m_n² v_d²/(3 k_B (m_i+m_n)) + m_i m_n v_d²/(3 k_B (m_i+m_n))
         = Tn + m_n v_d² / (3 k_B),

which is the well-known result quoted in docs/physics.md §3. So the bulk term must be *kept*
with a heated Ti (dropping it would give Tn + m_n² v_d²/(3 k_B (m_i+m_n)), too cold); what
must never happen twice is the *heating of Ti*: a Ti that already contains frictional
heating (a radar or tabulated Ti, or one returned by :func:`frictional_ion_temperature`)
must not be heated again. :func:`effective_temperature` therefore takes
``ti_includes_drift``: True means Ti is used as given; False means Ti is a temperature
without frictional heating and the function heats it once, with the mean neutral mass, before
applying the formula.

This module must not know about reactions or species beyond masses.
"""

from __future__ import annotations

import numpy as np

from ionochem import constants

__all__ = ["K_B", "AMU_KG", "parametric_profile", "effective_temperature",
           "frictional_ion_temperature", "check_tabulated_ti", "mean_neutral_mass_amu",
           "neutral_mass_amu"]

#: Boltzmann constant, J K-1 (exact; CODATA 2018, Tiesinga et al. 2021, Rev. Mod. Phys.
#: 93, 025010).
K_B = constants.K_B
#: Atomic mass constant, kg (CODATA 2018, Tiesinga et al. 2021, Rev. Mod. Phys. 93, 025010).
AMU_KG = constants.AMU_KG


_NOT_SPECIES = {"Tn", "Te", "Ti", "Tv"}


def _friction_K(drift_m_s, mass_amu):
    """m v² / (3 k_B) in K for mass in amu and speed in m/s."""
    v = np.asarray(drift_m_s, dtype=float)
    return np.asarray(mass_amu, dtype=float) * AMU_KG * v * v / (3.0 * K_B)


def parametric_profile(altitude_km, Tn, *, daytime, te_peak_K: float = 2800.0,
                       te_night_K: float = 1000.0, ti_offset_K: float = 300.0,
                       base_km: float = 125.0, scale_km: float = 85.0,
                       ti_base_km: float = 300.0, ti_scale_km: float = 100.0):
    """A smooth Te, Ti shape above the neutral temperature (a convenience, not a model).

    With d the day factor (1 by day, 0 at night) and u(z) = 1 − exp(−max(z − z_b, 0)/s):

    - Te = Tn + max(Te_top − Tn, 0) · u(z; base_km, scale_km), where
      Te_top = te_night_K + d · (te_peak_K − te_night_K): Te equals Tn below ``base_km``
      and rises toward Te_top above it;
    - Ti = Tn + min(d · ti_offset_K · u(z; ti_base_km, ti_scale_km), Te − Tn): Ti equals
      Tn below ``ti_base_km`` and never exceeds Te.

    Defaults are typical of the mid-latitude ionosphere *(common practice)*: by day Te
    ≈ 2500–2800 K above 300 km, at night ≈ 1000 K; Ti close to Tn below ~300 km and a few
    hundred K above it by day. The rise (``base_km`` 125, ``scale_km`` 85) keeps the
    daytime Te at 150 km near 1200–1300 K for Tn ≈ 600–700 K, not above what the
    incoherent-scatter climatologies give there, about 1000–1300 K at midday at mid
    latitudes (Zhang & Holt 2004, Adv. Space Res. 33, 963, Millstone Hill 1976–2001;
    Zhang, Holt, Zalucha & Amory-Mazaudier 2004, J. Geophys. Res. 109, Saint Santin
    1966–1987; values *from memory*); the earlier 110/60 km shape gave ≈ 1700 K. The
    shape has no empirical basis beyond that: use measured (radar) profiles through a
    table when the temperatures matter.

    Parameters
    ----------
    altitude_km : array_like, shape (altitude,)
        Altitudes (km).
    Tn : array_like, shape (altitude,)
        Neutral temperature (K).
    daytime : bool or float
        True/False, or a day factor in [0, 1] (e.g. max(cos χ, 0) to blend dusk).
    te_peak_K : float
        Topside Te by day (K).
    te_night_K : float
        Topside Te at night (K).
    ti_offset_K : float
        Topside Ti − Tn by day (K).
    base_km, scale_km : float
        Height (km) where Te starts to depart from Tn and the e-folding height (km) of
        its rise.
    ti_base_km, ti_scale_km : float
        The same for Ti.

    Returns
    -------
    Te, Ti : ndarray, shape (altitude,)
        Electron and ion temperatures (K), with Tn <= Ti <= Te.
    """
    z = np.asarray(altitude_km, dtype=float)
    tn = np.broadcast_to(np.asarray(Tn, dtype=float), z.shape)
    d = float(daytime)
    if not 0.0 <= d <= 1.0:
        raise ValueError(f"daytime must be a bool or a day factor in [0, 1], got {daytime!r}")
    if scale_km <= 0 or ti_scale_km <= 0:
        raise ValueError("scale heights of the profile must be positive")
    u_e = -np.expm1(-np.maximum(z - base_km, 0.0) / scale_km)
    u_i = -np.expm1(-np.maximum(z - ti_base_km, 0.0) / ti_scale_km)
    te_top = te_night_K + d * (te_peak_K - te_night_K)
    te = tn + np.maximum(te_top - tn, 0.0) * u_e
    ti = tn + np.minimum(d * max(ti_offset_K, 0.0) * u_i, te - tn)
    return te, ti


def frictional_ion_temperature(Tn, drift_m_s, m_neutral_amu):
    """Ion temperature heated by friction with the neutrals: Tn + m_n v_d² / (3 k_B).

    Steady ion energy balance between frictional heating and ion–neutral cooling (Schunk
    & Nagy 2009, *Ionospheres*, Cambridge *(from memory)*). Use the mean neutral mass
    (:func:`mean_neutral_mass_amu`) for ``m_neutral_amu``. Passing an unheated model ion
    temperature in place of ``Tn`` adds the frictional heating to it (heating sources
    added linearly, *(common practice)*).

    Parameters
    ----------
    Tn : array_like, shape (altitude,)
        Neutral temperature (K) (or an unheated ion temperature).
    drift_m_s : float or array_like
        Ion–neutral drift speed (m/s).
    m_neutral_amu : float or array_like
        (Mean) neutral mass (amu).

    Returns
    -------
    ndarray
        Ion temperature (K).

    Examples
    --------
    For N2 (28.014 amu) at 1 km/s the heating is
    28.014 × 1.66053906660e-27 kg × (1000 m/s)² / (3 × 1.380649e-23 J/K) = 1123.1 K.
    """
    return np.asarray(Tn, dtype=float) + _friction_K(drift_m_s, m_neutral_amu)


def effective_temperature(m_ion_amu, m_neutral_amu, Ti, Tn, drift_m_s, *,
                          ti_includes_drift: bool, mean_neutral_mass_amu=None):
    """Ion–neutral effective temperature of one reacting pair (St.-Maurice & Torr 1978).

    Teff = (m_i Tn + m_n Ti)/(m_i + m_n) + m_i m_n v_d² / (3 k_B (m_i + m_n))
    (St.-Maurice & Torr 1978, JGR 83, 969), with Ti the actual (friction-heated) ion
    temperature. See the module docstring for why the drift term stays when Ti is heated
    and how the heating is applied exactly once.

    Parameters
    ----------
    m_ion_amu, m_neutral_amu : float
        Masses of the reacting ion and neutral (amu).
    Ti, Tn : array_like, shape (altitude,)
        Ion and neutral temperatures (K).
    drift_m_s : float or array_like
        Ion–neutral drift speed (m/s).
    ti_includes_drift : bool
        True if ``Ti`` already contains the frictional heating by this drift (a measured
        or tabulated Ti, or one from :func:`frictional_ion_temperature`): it is used as
        given. False if ``Ti`` has no frictional heating: it is heated once here by
        m̄ v_d²/(3 k_B), which needs ``mean_neutral_mass_amu`` whenever the drift is not 0.
    mean_neutral_mass_amu : float or array_like, optional
        Mean neutral mass (amu) for the heating when ``ti_includes_drift`` is False.

    Returns
    -------
    ndarray
        Teff (K), the broadcast shape of the inputs.

    Examples
    --------
    O+ (15.999 amu) + N2 (28.014 amu) at v_d = 1 km/s: reduced mass 10.1833 amu, drift
    term 10.1833 × 1.66053906660e-27 × 1e6 / (3 × 1.380649e-23) = 408.26 K. With Ti =
    Tn + 1123.10 K (friction on N2 alone) the total is Teff = Tn + 1123.10 K.
    """
    mi = float(m_ion_amu)
    mn = float(m_neutral_amu)
    if mi <= 0 or mn <= 0:
        raise ValueError("masses must be positive")
    ti = np.asarray(Ti, dtype=float)
    tn = np.asarray(Tn, dtype=float)
    v = np.asarray(drift_m_s, dtype=float)
    if not ti_includes_drift and np.any(v != 0):
        if mean_neutral_mass_amu is None:
            raise ValueError("Ti without frictional heating and a non-zero drift: give "
                             "mean_neutral_mass_amu so that Ti is heated once")
        ti = ti + _friction_K(v, mean_neutral_mass_amu)
    mu = mi * mn / (mi + mn)
    return (mi * tn + mn * ti) / (mi + mn) + _friction_K(v, mu)


def check_tabulated_ti(Ti, Tn, drift_m_s, m_neutral_amu, *, altitude_km=None,
                       tolerance_K: float = 0.0) -> list:
    """Altitude rows where a tabulated Ti is colder than frictional heating implies.

    Where the drift is non-zero, friction alone makes Ti >= Tn + m_n v_d²/(3 k_B)
    (:func:`frictional_ion_temperature`). A table colder than that probably left the
    heating out; the caller warns (it does not change the table). Altitude rows with no drift
    are not checked.

    Parameters
    ----------
    Ti, Tn : array_like, shape (altitude,)
        Tabulated ion temperature and neutral temperature (K).
    drift_m_s : float or array_like
        Ion–neutral drift speed (m/s).
    m_neutral_amu : float or array_like
        (Mean) neutral mass (amu).
    altitude_km : array_like, shape (altitude,), optional
        Altitudes to report; without it, row indices are reported.
    tolerance_K : float
        Ti may fall this much below the frictional value before an altitude is reported.

    Returns
    -------
    list
        Altitudes (km) — or indices — of the offending altitude rows, bottom first.
    """
    ti = np.atleast_1d(np.asarray(Ti, dtype=float))
    v = np.broadcast_to(np.asarray(drift_m_s, dtype=float), ti.shape)
    floor = np.broadcast_to(frictional_ion_temperature(Tn, v, m_neutral_amu), ti.shape)
    bad = (v != 0) & (ti < floor - tolerance_K)
    idx = np.flatnonzero(bad)
    if altitude_km is None:
        return [int(i) for i in idx]
    alt = np.atleast_1d(np.asarray(altitude_km, dtype=float))
    return [float(a) for a in alt[idx]]


def neutral_mass_amu(name: str) -> float:
    """Mass (amu) of a neutral written as a formula (``N2``, ``O``, ``NO``, ``N(2D)``).

    Summed standard atomic weights (:func:`ionochem.constants.formula_mass_amu`); an
    excitation state in parentheses does not change the mass at this precision.
    """
    return constants.formula_mass_amu(name)


def mean_neutral_mass_amu(neutrals: dict) -> np.ndarray:
    """Number-density-weighted mean neutral mass (amu) of a neutral profile.

    Parameters
    ----------
    neutrals : dict[str, array_like]
        Species (formulas such as ``N2``, ``O``, ``He``) → densities (cm-3), each shaped
        ``(altitude,)``. Temperature entries (``Tn`` ``Te`` ``Ti`` ``Tv``) are skipped.

    Returns
    -------
    ndarray, shape (altitude,)
        Mean mass (amu); NaN where every density is 0.
    """
    num = 0.0
    den = 0.0
    count = 0
    for name, n in neutrals.items():
        if name in _NOT_SPECIES:
            continue
        arr = np.asarray(n, dtype=float)
        num = num + arr * neutral_mass_amu(name)
        den = den + arr
        count += 1
    if count == 0:
        raise ValueError("no neutral species in the profile")
    den = np.asarray(den)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(den > 0, num / np.where(den > 0, den, 1.0), np.nan)
