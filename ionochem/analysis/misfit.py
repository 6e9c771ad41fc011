"""Misfit of a modelled column against measured profiles, in log density.

Each observation i (value y_i, one-sigma error σ_i) is compared in the logarithm: the
residual is r_i = (ln y_i − ln m_i)/s_i with s_i = sqrt(ln(1 + (σ_i/y_i)²)), the width of
the log-normal with the measurement's mean and variance *(common practice)*; it is σ_i/y_i
for small relative errors. χ² = Σ r_i², reported per species and altitude band.

The model value m_i is the model's ln n interpolated linearly in altitude to the
observation's height (a ratio A/B is ln n_A − ln n_B). That map is one matrix W
(observation × species·altitude, :func:`interpolation_matrix`), so the same W carries
sensitivities ∂ln n/∂θ to ∂ln m/∂θ exactly: the fit's Jacobian is W S.

Takes arrays and datasets; never reads files or solves.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ionochem.io.observations import check_against_model, check_matrix_size, ratio_parts

#: Altitude bands of the misfit summary, km, [low, high) *(common practice: D, E, F1, F2,
#: topside)*; the E–F2 edges are those of ``compare``.
MISFIT_BANDS = {"D": (0.0, 90.0), "E": (90.0, 150.0), "F1": (150.0, 200.0),
                "F2": (200.0, 300.0), "topside": (300.0, np.inf)}


def log_sigma(obs):
    """One-sigma width in ln of each observation, shape (observation,)."""
    rel = obs["sigma_cm3"].values / obs["density_cm3"].values
    return np.sqrt(np.log1p(rel ** 2))


def interpolation_matrix(obs, species, altitude_km):
    """Linear map from ln n (species, altitude), raveled, to ln m at the observations.

    Parameters
    ----------
    obs : xarray.Dataset
        From :func:`ionochem.load_observations`, checked against the model.
    species : sequence of str
        The species order of the model array.
    altitude_km : array_like
        The grid, km (increasing or decreasing).

    Returns
    -------
    ndarray
        W, shape (observation, species × altitude): ln m = W @ ln n.ravel().
    """
    names = [str(s) for s in species]
    alt = np.asarray(altitude_km, float)
    A = alt.size
    check_matrix_size(obs.sizes["observation"], len(names), A, source=obs.attrs.get("source"))
    order = np.argsort(alt)
    a_sorted = alt[order]
    x = np.clip(obs["altitude_km"].values.astype(float), a_sorted[0], a_sorted[-1])
    hi = np.clip(np.searchsorted(a_sorted, x, side="left"), 1, max(A - 1, 1))
    lo = hi - 1
    if A == 1:
        lo = hi = np.zeros_like(hi)
        w_hi = np.zeros_like(x)
    else:
        w_hi = (x - a_sorted[lo]) / (a_sorted[hi] - a_sorted[lo])
    W = np.zeros((x.size, len(names) * A))
    rows = np.arange(x.size)
    for sign, part in ((1.0, 0), (-1.0, 1)):
        idx = []
        for name, kind in zip(obs["species"].values, obs["kind"].values):
            parts = ratio_parts(name) if kind == "ratio" else (str(name), None)
            idx.append(-1 if parts[part] is None else names.index(parts[part]))
        idx = np.asarray(idx)
        use = idx >= 0
        r = rows[use]
        np.add.at(W, (r, idx[use] * A + order[lo[use]]), sign * (1.0 - w_hi[use]))
        np.add.at(W, (r, idx[use] * A + order[hi[use]]), sign * w_hi[use])
    return W


@dataclass(frozen=True)
class MisfitRow:
    """χ² of one species in one altitude band."""

    species: str
    band: str
    low_km: float
    high_km: float
    points: int
    chi2: float
    median_ratio: float           # median model/observed over the band's points


@dataclass(frozen=True)
class Misfit:
    """Misfit of one model column against observations.

    Attributes
    ----------
    log_model : ndarray (observation,)
        ln of the model value at each observation (NaN where the model is zero there).
    residual : ndarray (observation,)
        (ln y − ln m)/s, dimensionless (NaN where the model is zero).
    chi2 : float
        Σ r² over the finite residuals.
    points : int
        Observations with a finite residual.
    rows : list of MisfitRow
    """

    log_model: np.ndarray
    residual: np.ndarray
    chi2: float
    points: int
    rows: list


def log_density(ds, time_index=-1):
    """ln of ``ds["density"]`` as (species, altitude); a transient run at one time."""
    dens = ds["density"]
    if "time" in dens.dims:
        dens = dens.isel(time=time_index)
    dens = dens.transpose("species", "altitude").values
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(dens > 0, np.log(np.where(dens > 0, dens, 1.0)), np.nan)


def misfit(obs, species, altitude_km, log_n, bands=None):
    """Residuals and χ² of a model column against observations.

    Parameters
    ----------
    obs : xarray.Dataset
        From :func:`ionochem.load_observations`.
    species, altitude_km : sequence
        Labels of ``log_n``.
    log_n : ndarray (species, altitude)
        ln density of the model (NaN where the model is zero).
    bands : dict, optional
        Name → (low, high) km; default :data:`MISFIT_BANDS`.

    Returns
    -------
    Misfit

    Raises
    ------
    InputError
        An observed species the model lacks, an altitude outside the grid.
    """
    check_against_model(obs, species, altitude_km)
    W = interpolation_matrix(obs, species, altitude_km)
    flat = np.asarray(log_n, float).ravel()
    bad = ~np.isfinite(flat)
    log_m = W @ np.where(bad, 0.0, flat)
    touches_bad = (np.abs(W[:, bad]) > 0).any(axis=1) if bad.any() else np.zeros(
        W.shape[0], bool)
    log_m = np.where(touches_bad, np.nan, log_m)
    res = (np.log(obs["density_cm3"].values) - log_m) / log_sigma(obs)
    return Misfit(log_model=log_m, residual=res, chi2=float(np.nansum(res ** 2)),
                  points=int(np.isfinite(res).sum()),
                  rows=band_rows(obs, res, log_m, bands))


def band_rows(obs, residual, log_model, bands=None):
    """χ² per species and altitude band (bands without points are left out)."""
    bands = MISFIT_BANDS if bands is None else bands
    alt = obs["altitude_km"].values
    names = obs["species"].values.astype(str)
    log_y = np.log(obs["density_cm3"].values)
    rows = []
    for s in dict.fromkeys(names):
        for band, (lo, hi) in bands.items():
            sel = (names == s) & (alt >= lo) & (alt < hi) & np.isfinite(residual)
            if not sel.any():
                continue
            rows.append(MisfitRow(species=s, band=band, low_km=lo, high_km=hi,
                                  points=int(sel.sum()),
                                  chi2=float(np.sum(residual[sel] ** 2)),
                                  median_ratio=float(np.exp(np.median(log_model[sel]
                                                                      - log_y[sel])))))
    return rows


def misfit_of_dataset(obs, ds, *, density=None, bands=None):
    """:func:`misfit` of a result dataset (its ``density``, or the given DataArray)."""
    if density is None:
        log_n = log_density(ds)
    else:
        d = density.transpose("species", "altitude").values
        with np.errstate(divide="ignore", invalid="ignore"):
            log_n = np.where(d > 0, np.log(np.where(d > 0, d, 1.0)), np.nan)
    return misfit(obs, ds["species"].values, ds["altitude"].values, log_n, bands=bands)
