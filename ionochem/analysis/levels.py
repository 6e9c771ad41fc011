"""What a rate change does to the effective rates of vibrational families.

The effective (population-weighted) rate coefficient of a family that consumes the levels of
a species (``DR_N2plus(v)``: N2+(v) + e) is k_eff = sum_m k_m n_m / N, with n_m the density
of member m's level and N the family total (:mod:`ionochem.io.level_outputs`). Its exact
normalized sensitivity to any rate coefficient k_j follows from the steady sensitivities of
the densities, with no further solve:

    d ln k_eff / d ln k_j = sum_m w_m (delta_mj + S(n_m, j)) - S(N, j),
    w_m = k_m n_m / sum_m' k_m' n_m'

(delta_mj = 1 when j is member m itself). This is what ``rank`` reports besides the
densities' sensitivities: how a change of one level's rate moves the rate an unresolved
model would need. This module calls the model's sensitivity results; it reads no files.
"""

from __future__ import annotations

import numpy as np
import xarray as xr

__all__ = ["effective_rate_sensitivity"]


def effective_rate_sensitivity(model, sens):
    """Exact d ln k_eff / d ln k_j of every loss family and every reaction.

    Parameters
    ----------
    model : ionochem.Model
    sens : xarray.Dataset
        ``model.sensitivity()`` (with its ``density``).

    Returns
    -------
    xarray.Dataset or None
        ``effective_rate_sensitivity`` (family_reaction, reaction, altitude), dimensionless,
        with ``family_species``; None when the list has no loss families.
    """
    from ionochem.io.level_outputs import family_reactants
    fams = family_reactants(model)
    if not fams:
        return None
    k = model.rate_coefficients()                                  # (A, R)
    S = sens["sensitivity"]                                        # (species, reaction, A)
    dens = sens["density"]
    R = len(model.reactions)
    out = np.zeros((len(fams), R, k.shape[0]))
    for f, (_, total, pairs, _) in enumerate(fams):
        loss = np.stack([k[:, j] * dens.sel(species=s).values for j, s in pairs])  # (M, A)
        tot = loss.sum(axis=0)
        with np.errstate(invalid="ignore", divide="ignore"):
            w = np.where(tot > 0, loss / tot, np.nan)              # (M, A)
        acc = -S.sel(species=total).values                         # (R, A)
        for m, (j, s) in enumerate(pairs):
            acc = acc + w[m] * S.sel(species=s).values
            acc[j] += w[m]
        out[f] = acc
    return xr.Dataset(
        {"effective_rate_sensitivity": (
            ("family_reaction", "reaction", "altitude"), out,
            {"units": "1", "long_name": "normalized sensitivity of a family's "
             "population-weighted rate coefficient to each rate coefficient, "
             "d ln k_eff / d ln k"})},
        coords={"family_reaction": np.array([f[0] for f in fams], dtype=object),
                "family_species": ("family_reaction",
                                   np.array([f[1] for f in fams], dtype=object)),
                "reaction": sens["reaction"], "altitude": sens["altitude"]})
