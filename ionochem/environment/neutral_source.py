"""Neutral densities for a scenario from NRLMSIS, on the grid and on an extended profile.

One pymsis call on a profile that holds the model altitudes plus a fine grid from the ground to
well above the top (rays past 90° zenith angle pass below the grid; above it the column
continues upward). The model altitudes are then taken from that profile, so the slant columns
and the chemistry see the same atmosphere.

NO: only NRLMSIS 2.1 gives it (Emmert et al. 2022, JGR Space Physics). With 2.0 or 00 a
reaction list that uses NO needs ``[neutrals] no_table``; it is never dropped silently.
"""

from __future__ import annotations

import numpy as np

from ionochem.environment.neutrals import msis_neutrals_extended
from ionochem.errors import ScenarioError
from ionochem.io.tables import read_profile_table

MSIS_MODELS = {"msis2.1": "2.1", "msis2.0": "2.0", "msis00": "00"}


def msis_column(scenario, grid_km, needs):
    """NRLMSIS neutrals for the scenario.

    Returns
    -------
    neutrals : dict[str, ndarray]
        Densities on the grid, cm-3 (N2, O2, O, N, NO, He, H, Ar).
    Tn : ndarray
        Neutral temperature on the grid, K.
    profile : NeutralProfile
        The same model on the extended profile (``profile.altitude_km``) for slant columns.
    """
    version = MSIS_MODELS[scenario.neutrals.model]
    reason = f"the neutral model {scenario.neutrals.model}"
    scenario.require("location", "time", "sun", "geomagnetic", reason=reason)
    utc = np.datetime64(scenario.time.utc.replace(tzinfo=None), "us")
    profile = msis_neutrals_extended(
        utc, scenario.location.latitude_deg, scenario.location.longitude_deg,
        f107=scenario.sun.f107, f107a=scenario.sun.f107a, ap=scenario.geomagnetic.ap,
        version=version, altitude_km=grid_km)
    alt = np.asarray(profile.altitude_km)
    idx = np.searchsorted(alt, grid_km)
    idx = np.clip(idx, 0, alt.size - 1)
    if not np.allclose(alt[idx], grid_km, rtol=0, atol=1e-9):
        raise RuntimeError("extended neutral profile does not contain the model altitudes")
    neutrals = {k: np.asarray(v)[idx] for k, v in profile.items() if k != "Tn"}
    Tn = np.asarray(profile["Tn"])[idx]
    if "NO" not in neutrals:
        if scenario.neutrals.no_table is not None:
            t = read_profile_table(scenario.neutrals.no_table, grid_km, columns=["NO"],
                                   where="neutrals.no_table", scenario_file=scenario.source,
                                   nonnegative=True)
            neutrals["NO"] = t["NO"]
        elif "NO" in needs:
            raise ScenarioError(
                f"NRLMSIS {version} gives no NO density but the reaction list uses NO; use "
                "model = \"msis2.1\" or give no_table = \"no.csv\" (altitude_km, NO)",
                file=scenario.source, key="neutrals.model")
    return neutrals, Tn, profile
