"""Neutral atmosphere from NRLMSIS through the pymsis package.

NRLMSIS 2.1 (Emmert et al. 2022, JGR Space Physics 127, e2022JA030896), NRLMSIS 2.0
(Emmert et al. 2021, Earth and Space Science 8, e2020EA001321) and NRLMSISE-00 (Picone et
al. 2002, JGR 107, 1468) are run by pymsis; this module only chooses the inputs, converts
units and makes the output safe for the chemistry:

- Solar and geomagnetic indices are always passed explicitly (F10.7 of the previous day,
  its 81-day mean, and the daily Ap repeated into pymsis's 7-element ``aps`` array, of
  which only element 0 is used in daily-Ap mode). pymsis therefore never looks up, or
  downloads, an index file.
- Densities come out of pymsis in m-3 and are returned in cm-3 (×1e-6).
- "Anomalous oxygen" (a hot-O component that NRLMSIS adds to the total mass density above
  ~500 km) is not atomic oxygen and is not returned.
- Neutral NO is modelled only by NRLMSIS 2.1; with 2.0 or 00 the ``NO`` entry is absent
  so that the caller must refuse or ask for a NO table.
- Below a lower boundary of its own, NRLMSIS does not model some minor species and pymsis
  returns NaN there (measured with pymsis 0.13: NRLMSIS 2.x gives O from 50.5 km, H from
  76 km, N from 91.5 km, NO (2.1) from 73.5 km; NRLMSISE-00 gives O, H, N from 72.5 km).
  Those NaN are replaced by 0: O, H and N below these heights are small next to N2 and O2
  (mixing ratios far below 1e-3 there, *(common practice)*), which makes
  zero the right value for column absorption, where they are dominated by N2 and O2.
  Altitudes so filled are listed in ``NeutralProfile.undefined`` so the caller can refuse to
  solve chemistry on them. A NaN anywhere else (a major species, the temperature, or a
  minor species above its lower boundary) raises ``ValueError``: it would be a bug.

This module must not know about reactions, ions or the grid of the chemistry beyond the
altitudes it is given.
"""

from __future__ import annotations

import numpy as np

__all__ = ["NeutralProfile", "msis_neutrals", "msis_neutrals_extended", "extended_grid_km",
           "SPECIES", "MSIS_VERSIONS", "NEUTRAL_SPECIES"]

#: Species returned (cm-3), in this order, and the pymsis output column of each
#: (pymsis.msis.Variable: N2=1, O2=2, O=3, HE=4, H=5, AR=6, N=7, ANOMALOUS_O=8, NO=9,
#: TEMPERATURE=10).
_COLUMNS = {"N2": 1, "O2": 2, "O": 3, "N": 7, "NO": 9, "He": 4, "H": 5, "Ar": 6}
_TEMPERATURE = 10
SPECIES = tuple(_COLUMNS)

#: Neutrals a column may hold fixed (from the neutral model or a table): the species a
#: reaction list may use without solving them.
NEUTRAL_SPECIES = ("N2", "O2", "O", "N", "NO", "He", "H", "Ar")

#: Scenario version names → pymsis version numbers.
MSIS_VERSIONS = {"2.1": 2.1, "2.0": 2.0, "00": 0}

# Species that NRLMSIS leaves undefined (NaN from pymsis) below a lower boundary of
# their own; see the module docstring. Highest undefined altitude in km, measured with
# pymsis 0.13, with a margin, used only to tell an expected NaN from a bug.
_UNDEFINED_BELOW_KM = {
    "2.1": {"O": 52.0, "H": 78.0, "N": 93.0, "NO": 75.0},
    "2.0": {"O": 52.0, "H": 78.0, "N": 93.0},
    "00": {"O": 74.0, "H": 74.0, "N": 74.0},
}

_M3_TO_CM3 = 1e-6  # 1 m-3 = 1e-6 cm-3


class NeutralProfile(dict):
    """Neutral densities and temperature: a plain ``dict`` with one extra attribute.

    Keys: the species of :data:`SPECIES` present for the version (densities in cm-3,
    shape ``(altitude,)``) and ``"Tn"`` (K, shape ``(altitude,)``).

    Attributes
    ----------
    undefined : dict[str, ndarray of bool]
        For each species, the altitudes where NRLMSIS does not model it and 0 was put in
        place of pymsis's NaN (all False where the species is defined everywhere).
    altitude_km : ndarray
        The altitudes of the profile (km).
    version : str
        The NRLMSIS version used (``"2.1"``, ``"2.0"`` or ``"00"``).
    """

    undefined: dict
    altitude_km: np.ndarray
    version: str


def _check_version(version: str) -> str:
    v = str(version)
    if v not in MSIS_VERSIONS:
        raise ValueError(f"NRLMSIS version must be one of {sorted(MSIS_VERSIONS)}, got {v!r}")
    return v


def msis_neutrals(utc, latitude_deg, longitude_deg, altitude_km, *, f107, f107a, ap,
                  version: str = "2.1") -> NeutralProfile:
    """Run NRLMSIS (pymsis) for one place and time on an altitude profile.

    Parameters
    ----------
    utc : numpy.datetime64
        Time (UTC), a single value.
    latitude_deg, longitude_deg : float
        Geodetic latitude (degrees north) and longitude (degrees east).
    altitude_km : array_like, shape (altitude,)
        Geodetic altitudes (km), 0 km and up.
    f107 : float
        F10.7 of the previous day (solar flux units) as NRLMSIS expects it (pymsis notes
        that this is the flux observed at the Earth–Sun distance, not adjusted to 1 AU).
    f107a : float
        81-day centred mean of F10.7 (sfu).
    ap : float
        Daily Ap index.
    version : {"2.1", "2.0", "00"}
        NRLMSIS 2.1, 2.0 or NRLMSISE-00.

    Returns
    -------
    NeutralProfile
        A dict with ``N2 O2 O N NO He H Ar`` (cm-3; no ``NO`` for versions 2.0 and 00)
        and ``Tn`` (K), each shaped ``(altitude,)``, float64, no NaN.

    Raises
    ------
    ValueError
        For an unknown version, a non-scalar time, negative altitudes, non-finite
        indices, or a NaN from pymsis where NRLMSIS should define the species.
    """
    from pymsis import msis  # imported here so the rest of the package loads without it

    v = _check_version(version)
    alt = np.atleast_1d(np.asarray(altitude_km, dtype=float))
    if alt.ndim != 1:
        raise ValueError("altitude_km must be one-dimensional")
    if np.any(alt < 0.0) or not np.all(np.isfinite(alt)):
        raise ValueError("altitude_km must be finite and at least 0 km for NRLMSIS")
    t = np.asarray(utc).astype("datetime64[us]")
    if t.ndim != 0:
        raise ValueError("msis_neutrals takes one time; call it once per time")
    idx = np.array([f107, f107a, ap], dtype=float)
    if not np.all(np.isfinite(idx)) or np.any(idx < 0):
        raise ValueError(f"f107, f107a and ap must be finite and non-negative, got {idx}")

    # Every index passed explicitly: pymsis never reaches for its index file or the web.
    out = msis.calculate(
        np.atleast_1d(t), float(longitude_deg), float(latitude_deg), alt,
        f107s=[float(f107)], f107as=[float(f107a)], aps=[[float(ap)] * 7],
        version=MSIS_VERSIONS[v],
    )
    out = np.asarray(out, dtype=np.float64).reshape(-1, out.shape[-1])
    if out.shape[0] != alt.size:  # pragma: no cover - guards a pymsis layout change
        raise RuntimeError("unexpected pymsis output shape")

    prof = NeutralProfile()
    prof.undefined = {}
    prof.altitude_km = alt
    prof.version = v
    limits = _UNDEFINED_BELOW_KM[v]
    for name, col in _COLUMNS.items():
        if name == "NO" and v != "2.1":
            continue  # only NRLMSIS 2.1 models NO (Emmert et al. 2022)
        n = out[:, col] * _M3_TO_CM3
        bad = ~np.isfinite(n)
        if np.any(bad):
            top = limits.get(name)
            if top is None or np.any(alt[bad] > top):
                raise ValueError(
                    f"NRLMSIS {v} returned NaN for {name} at "
                    f"{alt[bad].max():g} km, where the model should define it")
            n = np.where(bad, 0.0, n)
        if np.any(n < 0.0):  # pragma: no cover - NRLMSIS densities are positive
            raise ValueError(f"NRLMSIS {v} returned a negative {name} density")
        prof[name] = n
        prof.undefined[name] = bad
    tn = out[:, _TEMPERATURE]
    if not np.all(np.isfinite(tn)) or np.any(tn <= 0):
        raise ValueError(f"NRLMSIS {v} returned an invalid temperature")
    prof["Tn"] = tn
    return prof


def extended_grid_km(altitude_km=None, *, bottom_km: float = 0.0,
                     top_km: float = 1000.0) -> np.ndarray:
    """Profile grid for slant columns: the model grid merged with a fine default grid.

    Steps are 1 km up to 150 km, 2.5 km to 400 km and 10 km above (finer than every
    neutral scale height there, so piecewise-exponential interpolation between nodes is
    close to NRLMSIS itself). The grid reaches from ``bottom_km`` to at least ``top_km``
    and at least 50 km above the highest model altitude.

    Parameters
    ----------
    altitude_km : array_like, optional
        Model grid altitudes to include as nodes (km).
    bottom_km, top_km : float
        Lower and upper end of the profile (km).

    Returns
    -------
    ndarray
        Increasing, unique altitudes (km).
    """
    top = float(top_km)
    bottom = float(bottom_km)
    default = np.concatenate([np.arange(bottom, min(150.0, top), 1.0),
                              np.arange(max(150.0, bottom), min(400.0, top), 2.5),
                              np.arange(max(400.0, bottom), top, 10.0), [top]])
    if altitude_km is None:
        return np.unique(default[default >= bottom])
    alt = np.unique(np.asarray(altitude_km, dtype=float).ravel())
    if alt.min() < bottom:
        raise ValueError(f"model altitudes below the profile bottom {bottom} km")
    default = np.concatenate([default, np.arange(top + 10.0, alt.max() + 60.0, 10.0)])
    # Default nodes closer than 0.1 km to a model altitude give way to the model altitude.
    near = np.abs(default[:, None] - alt[None, :]).min(axis=1) < 0.1
    return np.unique(np.concatenate([default[~near], alt]))


def msis_neutrals_extended(utc, latitude_deg, longitude_deg, *, f107, f107a, ap,
                           version: str = "2.1", altitude_km=None, bottom_km: float = 0.0,
                           top_km: float = 1000.0) -> NeutralProfile:
    """NRLMSIS on an extended grid for slant columns (rays below and above the model grid).

    Same inputs as :func:`msis_neutrals`; the grid is :func:`extended_grid_km` (which
    contains the model altitudes ``altitude_km`` when given). The profile's altitudes are in
    the ``altitude_km`` attribute of the result. Species undefined low down are 0 there
    (see the module docstring), which is what a column integral needs.

    Returns
    -------
    NeutralProfile
        As :func:`msis_neutrals`, on the extended grid.
    """
    grid = extended_grid_km(altitude_km, bottom_km=bottom_km, top_km=top_km)
    return msis_neutrals(utc, latitude_deg, longitude_deg, grid, f107=f107, f107a=f107a,
                         ap=ap, version=version)
