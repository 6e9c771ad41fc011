"""Rank the reactions (and the environment factors) that control each species.

Input is a sensitivity dataset (:func:`ionochem.analysis.sensitivity.sensitivity`):
``sensitivity`` (species, reaction, altitude) = ∂ln n/∂ln k and
``sensitivity_environment`` (species, factor, altitude) = ∂ln n/∂ln factor (Te, Ti, Tn, the
EUV flux, fixed neutral densities; older files carry only ``sensitivity_Te``). The
environment factors enter the ranking as pseudo-reactions named ``Te``, ``EUV``, ``n(O)``….
Two measures over an altitude range: the largest |S| (with its sign and the altitude where
it occurs) and the mean |S| over the altitude rows in the range, counting only the rows where the
species is at least a share of its own peak (:data:`DEFAULT_MIN_SHARE`).
A reaction that matters strongly in a thin layer ranks high on the first, one that matters
everywhere on the second.

Works on the dataset alone, so it applies to files written earlier.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import xarray as xr

from ionochem.analysis.compare import main_species
from ionochem.analysis.units import sum_over_units, unit_coords, unit_map_from_dataset
from ionochem.errors import InputError

TE_NAME = "Te"

#: Altitude rows where a species is below this share of its own peak density (in the altitude
#: range) are left out of its ranking: a sensitivity where the ion is a trace (O+ at 90 km)
#: says nothing a user needs *(common practice)*. ``min_share=0`` ranks over every altitude row.
DEFAULT_MIN_SHARE = 0.01
def default_species(names):
    """N2+, O2+, NO+, O+(total) (or O+ without metastables), e — those present."""
    return main_species(names)


@dataclass(frozen=True)
class RankRow:
    """One reaction's influence on one species over an altitude range.

    ``max_abs`` is the largest |S|, ``signed_at_max`` the value of S there (with its sign)
    at ``altitude_km``; ``mean_abs`` the mean |S| over the altitude rows of the range;
    ``rank_max`` and ``rank_mean`` the 1-based places by each measure.
    """

    species: str
    reaction: str
    equation: str
    max_abs: float
    signed_at_max: float
    altitude_km: float
    mean_abs: float
    rank_max: int
    rank_mean: int


def parse_altitude_range(text):
    """``"150:300"`` → ``(150.0, 300.0)`` km."""
    lo, sep, hi = str(text).partition(":")
    try:
        if not sep:
            raise ValueError
        lo_f, hi_f = float(lo), float(hi)
    except ValueError:
        raise InputError(f"altitude range {text!r} must look like LOW_KM:HIGH_KM (150:300)",
                         file="altitude_range") from None
    if not (np.isfinite(lo_f) and np.isfinite(hi_f)) or hi_f < lo_f:
        raise InputError(f"altitude range {text!r}: the upper altitude is below the lower",
                         file="altitude_range")
    return lo_f, hi_f


def _rows_in_range(sens_ds, altitude_range):
    alt = sens_ds["altitude"].values
    if altitude_range is None:
        return np.ones(alt.size, bool)
    lo, hi = altitude_range
    inside = (alt >= lo - 1e-9) & (alt <= hi + 1e-9)
    if not inside.any():
        raise InputError(f"no altitude of the grid ({alt.min():g}-{alt.max():g} km) lies in "
                         f"{lo:g}-{hi:g} km", file="altitude_range")
    return inside


def unit_sensitivity(sens_ds):
    """``sensitivity_unit`` (species, unit, altitude) of a sensitivity dataset, with the unit
    names and equations; computed from the per-reaction values for files written before units
    existed (:func:`ionochem.analysis.units.unit_map_from_dataset`)."""
    umap = unit_map_from_dataset(sens_ds)
    if "sensitivity_unit" in sens_ds:
        S = sens_ds["sensitivity_unit"].transpose("species", "unit", "altitude").values
    else:
        S = sum_over_units(sens_ds["sensitivity"].transpose("species", "reaction",
                                                             "altitude").values, umap, 1)
    return list(umap.names), list(umap.labels), S


def sensitivity_matrix(sens_ds, species, altitude_range=None, *, members=False):
    """S of one species to every unit (or, with ``members``, every reaction) and the
    environment factors over the range.

    Returns
    -------
    names : list of str
        Unit names (reaction ids with ``members``), then the factors (``"Te"``, …).
    equations : list of str
    S : ndarray (unit + factor, altitude)
        Dimensionless; NaN at dark altitude rows.
    altitude_km : ndarray (altitude,)
    """
    names = list(sens_ds["species"].values)
    if species not in names:
        raise InputError(f"no species {species!r} in the result (species: "
                         f"{', '.join(names)})", file="species")
    inside = _rows_in_range(sens_ds, altitude_range)
    if members:
        S = sens_ds["sensitivity"].sel(species=species).values[:, inside]  # (R, altitude)
        ids = [str(r) for r in sens_ds["reaction"].values]
        eqs = ([str(e) for e in sens_ds["equation"].values] if "equation" in sens_ds.coords
               else [""] * len(ids))
    else:
        ids, eqs, S_all = unit_sensitivity(sens_ds)
        S = S_all[names.index(species)][:, inside]                       # (U, altitude)
    names, descr, S_env = environment_rows(sens_ds, species)
    return (ids + names, eqs + descr, np.vstack([S, S_env[:, inside]]),
            sens_ds["altitude"].values[inside])


def environment_rows(sens_ds, species):
    """Names, descriptions and S (factor, altitude) of the environment factors (Te first)."""
    if "sensitivity_environment" in sens_ds:
        env = sens_ds["sensitivity_environment"].sel(species=species)
        names = [str(f) for f in sens_ds["factor"].values]
        descr = ([str(d) for d in sens_ds["factor_description"].values]
                 if "factor_description" in sens_ds.coords else [""] * len(names))
        return names, descr, np.asarray(env.transpose("factor", "altitude").values)
    S_te = sens_ds["sensitivity_Te"].sel(species=species).values
    return [TE_NAME], ["electron temperature (every Te-dependent rate)"], S_te[None]


def where_it_matters(sens_ds, species, altitude_range=None, min_share=DEFAULT_MIN_SHARE):
    """Altitude rows of the range where ``species`` is at least ``min_share`` of its peak there.

    Returns a boolean array over the altitude rows of the range (all True without densities).
    """
    inside = _rows_in_range(sens_ds, altitude_range)
    if "density" not in sens_ds or not min_share:
        return np.ones(int(inside.sum()), bool)
    n = np.asarray(sens_ds["density"].sel(species=species).values, float)[inside]
    peak = np.nanmax(n) if np.any(np.isfinite(n)) else 0.0
    if not peak > 0:
        return np.ones(n.size, bool)
    return n >= min_share * peak


def rank_reactions(sens_ds, species, altitude_range=None, top=10, *, by="max",
                   min_share=DEFAULT_MIN_SHARE, members=False):
    """The units of analysis (and ``Te``…) with the largest |S| for each species.

    A unit is a plain reaction, a whole family of vibrational levels or a tie of the list
    (:mod:`ionochem.analysis.units`); its S is that of one multiplier of all its members.
    With ``members`` the reactions are ranked one by one (a family level by level).

    Parameters
    ----------
    sens_ds : xarray.Dataset
        Sensitivities (see the module docstring).
    species : str or sequence of str
        Species to rank for.
    altitude_range : (float, float), optional
        Lowest and highest altitude, km, both included; default the whole grid.
    top : int or None
        Rows kept per species (None: all).
    by : {"max", "mean"}
        Order by the largest |S| or by the altitude-mean |S|.
    min_share : float
        Rank over the altitude rows where the species is at least this share of its own peak
        density in the range (:func:`where_it_matters`; 0: every row).

    Returns
    -------
    list of RankRow
        Per species, in the order asked for; rows of a species by decreasing measure. Ties
        (and all-zero rows) keep the reaction-list order.
    """
    if by not in ("max", "mean"):
        raise ValueError(f"by must be 'max' or 'mean', not {by!r}")
    if top is not None and int(top) < 1:
        raise InputError(f"must be at least 1, not {top}", file="top")
    species = [species] if isinstance(species, str) else list(species)
    rows = []
    for s in species:
        ids, eqs, S, alt = sensitivity_matrix(sens_ds, s, altitude_range, members=members)
        absS = np.abs(S)
        live = np.isfinite(absS).any(axis=0) & where_it_matters(sens_ds, s, altitude_range,
                                                                 min_share)
        if not live.any():
            continue
        absS, S = absS[:, live], S[:, live]
        alt = alt[live]
        with np.errstate(invalid="ignore"):
            mx = np.nanmax(absS, axis=1)
            mean = np.nanmean(absS, axis=1)
        at = np.nanargmax(np.where(np.isfinite(absS), absS, -1.0), axis=1)
        signed = S[np.arange(S.shape[0]), at]
        order_max = np.argsort(-mx, kind="stable")
        order_mean = np.argsort(-mean, kind="stable")
        rank_max = np.empty(len(ids), int)
        rank_max[order_max] = np.arange(1, len(ids) + 1)
        rank_mean = np.empty(len(ids), int)
        rank_mean[order_mean] = np.arange(1, len(ids) + 1)
        order = order_max if by == "max" else order_mean
        if top is not None:
            order = order[:int(top)]
        rows += [RankRow(s, ids[j], eqs[j], float(mx[j]), float(signed[j]), float(alt[at[j]]),
                         float(mean[j]), int(rank_max[j]), int(rank_mean[j])) for j in order]
    return rows


def format_ranking(sens_ds, species, altitude_range=None, top=10,
                   min_share=DEFAULT_MIN_SHARE, members=False):
    """Two tables per species: by the largest |S| and by the altitude-mean |S|."""
    alt = sens_ds["altitude"].values
    lo, hi = altitude_range if altitude_range is not None else (alt.min(), alt.max())
    lines = [f"normalized sensitivities S = d ln n / d ln k over {lo:g}-{hi:g} km "
             "(Te: d ln n / d ln Te)"]
    species = [species] if isinstance(species, str) else list(species)
    for s in species:
        for by, what in (("max", "largest |S|"), ("mean", "altitude-mean |S|")):
            rows = rank_reactions(sens_ds, s, altitude_range, top, by=by, min_share=min_share,
                                  members=members)
            lines.append(f"{s}: top {len(rows)} by {what}")
            lines.append(f"  {'#':>3} {'reaction':<24}{'S at max':>10}{'at km':>8}"
                         f"{'mean |S|':>10}  equation")
            for r in rows:
                place = r.rank_max if by == "max" else r.rank_mean
                lines.append(f"  {place:>3} {r.reaction:<24}{r.signed_at_max:>+10.4f}"
                             f"{r.altitude_km:>8g}{r.mean_abs:>10.4f}  {r.equation}")
    return "\n".join(lines)


def ranking_dataset(sens_ds, altitude_range=None, min_share=DEFAULT_MIN_SHARE):
    """The sensitivity dataset with the two ranking measures added.

    Adds ``max_abs_sensitivity``, ``signed_sensitivity_at_max``,
    ``altitude_of_max_sensitivity`` and ``mean_abs_sensitivity`` over (species, reaction),
    and the same for Te with the suffix ``_Te`` over (species), for the altitude rows in
    ``altitude_range`` (km, stored as the attribute ``ranking_altitude_range_km``).
    """
    out = sens_ds.copy()
    names = list(sens_ds["species"].values)
    R = sens_ds.sizes["reaction"]
    factors = environment_rows(sens_ds, names[0])[0] if names else [TE_NAME]
    shape = (len(names), R + len(factors))
    mx, sg, at, mean = (np.full(shape, np.nan) for _ in range(4))
    column = {str(r): j for j, r in enumerate(sens_ds["reaction"].values)}
    column.update({f: R + i for i, f in enumerate(factors)})
    te = column.get(TE_NAME, R)
    for i, s in enumerate(names):
        for r in rank_reactions(sens_ds, s, altitude_range, top=None, min_share=min_share,
                                members=True):
            j = column[r.reaction]
            mx[i, j], sg[i, j], at[i, j], mean[i, j] = (r.max_abs, r.signed_at_max,
                                                        r.altitude_km, r.mean_abs)
    specs = (("max_abs_sensitivity", mx, "1", "largest |d ln n / d ln k| over the range"),
             ("signed_sensitivity_at_max", sg, "1", "d ln n / d ln k where |S| is largest"),
             ("altitude_of_max_sensitivity", at, "km", "altitude of the largest |S|"),
             ("mean_abs_sensitivity", mean, "1", "mean |d ln n / d ln k| over the altitude rows "
              "of the range"))
    for name, arr, units, long in specs:
        out[name] = xr.Variable(("species", "reaction"), arr[:, :R],
                                {"units": units, "long_name": long})
        out[f"{name}_Te"] = xr.Variable(("species",), arr[:, te],
                                        {"units": units,
                                         "long_name": long.replace("k|", "Te|")
                                         .replace("/ d ln k", "/ d ln Te")})
        if "factor" in sens_ds.dims:
            out[f"{name}_environment"] = xr.Variable(
                ("species", "factor"), arr[:, R:],
                {"units": units, "long_name": long.replace("d ln k", "d ln factor")
                 .replace("k|", "factor|")})
    alt = sens_ds["altitude"].values
    lo, hi = altitude_range if altitude_range is not None else (alt.min(), alt.max())
    out = _unit_measures(out, sens_ds, names, altitude_range, min_share, specs)
    out.attrs["ranking_altitude_range_km"] = np.array([lo, hi], float)
    out.attrs["ranking_min_share"] = float(min_share)
    out.attrs["analysis"] = "rank: normalized local sensitivities at steady state"
    return out


def _unit_measures(out, sens_ds, names, altitude_range, min_share, specs):
    """The four measures over (species, unit), suffix ``_unit``, and the unit coordinates
    (plus ``sensitivity_unit`` for files written before units existed)."""
    umap = unit_map_from_dataset(sens_ds)
    if "sensitivity_unit" not in out:
        out = out.assign_coords({k: v for k, v in unit_coords(umap).items()})
        _, _, S = unit_sensitivity(sens_ds)
        out["sensitivity_unit"] = xr.Variable(("species", "unit", "altitude"), S,
                                              {"units": "1", "long_name": "normalized "
                                               "sensitivity to one multiplier of every "
                                               "member of a unit"})
    U = len(umap.names)
    arrs = [np.full((len(names), U), np.nan) for _ in range(4)]
    column = {u: j for j, u in enumerate(umap.names)}
    for i, s in enumerate(names):
        for r in rank_reactions(sens_ds, s, altitude_range, top=None, min_share=min_share):
            j = column.get(r.reaction)
            if j is not None:
                for arr, val in zip(arrs, (r.max_abs, r.signed_at_max, r.altitude_km,
                                           r.mean_abs)):
                    arr[i, j] = val
    for (name, _, units, long), arr in zip(specs, arrs):
        out[f"{name}_unit"] = xr.Variable(("species", "unit"), arr,
                                          {"units": units, "long_name": long.replace(
                                              "d ln k", "d ln lambda") + " (per unit of "
                                              "analysis: one multiplier of all members)"})
    return out
