"""``discern`` over one column or over a grid of conditions: the separation dataset and the
ranked list of the best (observable, altitude band, condition) combinations.

Each point of a sweep is the base scenario with the swept keys set
(:func:`ionochem.analysis.sweep.point_scenario`); at each point the baseline model is built,
the change applied by the caller's ``make_changed(baseline)`` (the same change options as
``compare``: :func:`ionochem.analysis.compare.changed_model`), both solved with their exact
sensitivities and separated (:func:`ionochem.analysis.discern.separate`). Points run in
this process, one after the other.

This module calls models; it reads no files and imports nothing of the command line.
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from ionochem.analysis.discern import (
    DISCERN_BANDS,
    DOUBTFUL_LOG_SIGMA,
    given_electron_models,
    separate,
)
from ionochem.analysis.sweep import point_scenario
from ionochem.analysis.sweep_axes import AXIS_ATTRS, grid_shape, point_count, point_values
from ionochem.io.dataset import provenance
from ionochem.model import Model

SEPARATION_UNITS = "1"


def point_models(scenario, reaction_list, make_changed, electrons_given=False):
    """Baseline and changed models of one scenario."""
    base = Model(scenario, reaction_list=reaction_list)
    changed = make_changed(base)
    if electrons_given:
        base, changed = given_electron_models(base, changed)
    return base, changed


def discern(spec, make_changed, observables, errors, uncertain, *, electrons_given=False,
            altitude_range=None, bands=None, progress=None):
    """Separation at every point of ``spec`` (a :class:`~ionochem.analysis.sweep.SweepSpec`;
    no axes: the single column).

    Returns
    -------
    xarray.Dataset
        ``separation`` (observable, altitude, *sweep dims) in combined standard
        deviations; ``separation_profile`` (observable, *sweep), ``separation_band``
        (observable, band, *sweep), ``separation_combined`` (*sweep); ``log_ratio`` (Δ ln y),
        ``observable_baseline``/``observable_changed``, ``model_log_std`` (the baseline's
        one-sigma spread of ln y: the uncertainty band over the sweep),
        ``combined_log_std`` (sqrt of the averaged model variance plus the measurement's),
        ``linear_doubtful`` (flag).
    """
    bands = dict(DISCERN_BANDS if bands is None else bands)
    shape = grid_shape(spec.axes)
    total = point_count(spec.axes)
    results, alt, excluded = [], None, set()
    for i in range(total):
        scen = point_scenario(spec, point_values(spec.axes, i))
        base, changed = point_models(scen, spec.reaction_list, make_changed, electrons_given)
        r = separate(base, changed, observables, errors, uncertain,
                     altitude_range=altitude_range, bands=bands)
        excluded.update(r.excluded)
        results.append(r)
        if alt is None:
            alt = np.asarray(base.altitude_km, float)
            attrs = provenance(base)
        if progress is not None:
            progress(i + 1, total)
    return _dataset(spec, shape, results, alt, observables, bands, attrs, excluded,
                    uncertain, errors)


def _stack(results, name, shape):
    arr = np.array([getattr(r, name) for r in results], float)
    arr = arr.reshape(shape + arr.shape[1:])
    return np.moveaxis(arr, range(len(shape)), range(arr.ndim - len(shape), arr.ndim))


def _dataset(spec, shape, results, alt, observables, bands, attrs, excluded, uncertain,
             errors):
    dims = tuple(a.name for a in spec.axes)
    oa = ("observable", "altitude") + dims
    sep = _stack(results, "separation", shape)
    lyb = _stack(results, "log_y_baseline", shape)
    lyc = _stack(results, "log_y_changed", shape)
    var_model = _stack(results, "var_model", shape)
    var_base = _stack(results, "var_model_baseline", shape)
    var_meas = _stack(results, "var_measurement", shape)
    units = [o.units for o in observables]
    one = {"units": SEPARATION_UNITS}
    data = {
        "separation": (oa, sep, {**one, "long_name": "separation of the changed from the "
                                 "baseline prediction, |d ln y| / combined standard "
                                 "deviation (model uncertainty averaged over the two rate "
                                 "sets, plus measurement error)"}),
        "log_ratio": (oa, lyc - lyb, {**one, "long_name": "ln(y changed / y baseline)"}),
    }
    data.update(_observable_values(units, oa, lyb, lyc))
    data.update({
        "model_log_std": (oa, np.sqrt(var_base), {**one, "long_name": "one-sigma spread of "
                          "ln y of the baseline model from the uncertain rates and "
                          "environment (linear propagation)"}),
        "combined_log_std": (oa, np.sqrt(var_model + var_meas), {**one, "long_name":
                             "combined standard deviation of ln y: averaged model "
                             "variance plus measurement variance"}),
        "linear_doubtful": (oa, (np.sqrt(var_model) > DOUBTFUL_LOG_SIGMA).astype(np.int8),
                            {"units": "1", "long_name": "1 where the model's spread of ln y "
                             f"exceeds {DOUBTFUL_LOG_SIGMA} and linear propagation is "
                             "doubtful", "flag_values": np.array([0, 1], np.int8),
                             "flag_meanings": "linear_adequate linear_doubtful",
                             "doubtful_log_std": DOUBTFUL_LOG_SIGMA}),
        "separation_profile": (("observable",) + dims, _stack(results, "profile", shape),
                               {**one, "long_name": "whole-profile separation sqrt(d' C^-1 "
                                "d) over the chosen altitudes, full model covariance plus "
                                "measurement noise"}),
        "separation_band": (("observable", "band") + dims, _stack(results, "band", shape),
                            {**one, "long_name": "separation sqrt(d' C^-1 d) over the "
                             "levels of each altitude band"}),
        "separation_combined": (dims, np.array([r.combined for r in results]).reshape(shape),
                                {**one, "long_name": "separation over every observable and "
                                 "chosen altitude at once"}),
    })
    coords = {
        "observable": ("observable", np.array([o.name for o in observables], dtype=object),
                       {"long_name": "observable: a density or a ratio of densities"}),
        "observable_units": ("observable", np.array(units, dtype=object),
                             {"long_name": "units of the observable"}),
        "altitude": ("altitude", alt, {"units": "km", "long_name": "altitude",
                                       "standard_name": "altitude", "positive": "up"}),
        "band": ("band", np.array(list(bands), dtype=object),
                 {"long_name": "altitude band"}),
        "band_bottom": ("band", np.array([b[0] for b in bands.values()]),
                        {"units": "km", "long_name": "bottom of the altitude band"}),
        "band_top": ("band", np.array([b[1] for b in bands.values()]),
                     {"units": "km", "long_name": "top of the altitude band"}),
    }
    for a in spec.axes:
        at = dict(AXIS_ATTRS.get(a.name, {}))
        at.setdefault("long_name", f"swept scenario key {a.key}")
        at["scenario_key"] = a.key
        coords[a.name] = (a.name, a.coordinate(), at)
    swept = {a.name for a in spec.axes} | {"time_utc"} if spec.axes else set()
    out_attrs = {k: v for k, v in attrs.items() if k not in swept and k != "history"}
    out_attrs.setdefault("Conventions", "CF-1.8")
    out_attrs.update({
        "title": out_attrs.get("title", "") or "ionochem discern",
        "discern_covariance": "average of the baseline's and the changed model's linear "
                              "covariances (exact sensitivities)",
        "discern_excluded_reactions": " ".join(sorted(excluded)),
        "discern_environment_spreads": ", ".join(f"{k}={v:g}" for k, v in
                                                 uncertain.spreads.items()) or "none",
        "discern_member_correlation": float(uncertain.member_correlation),
        "discern_measurement_error": "; ".join(
            f"{o.name}: relative {errors[o.name].relative:g}, absolute "
            f"{errors[o.name].absolute:g} {o.units}" for o in observables if o.name in errors),
        "sweep_dimensions": " ".join(dims),
    })
    return no_fill_on_coordinates(xr.Dataset(data, coords=coords, attrs=out_attrs))


def no_fill_on_coordinates(ds):
    """Coordinates are written without a _FillValue (CF: a coordinate has no missing
    values)."""
    for name in ds.coords:
        ds[name].encoding["_FillValue"] = None
    return ds


def _observable_values(units, dims, lyb, lyc):
    """y of both models: in their unit when every observable shares one, else as ln y
    (dimensionless; y in its ``observable_units``), since a CF variable has one unit."""
    if len(set(units)) == 1:
        u = {"units": units[0]}
        return {"observable_baseline": (dims, np.exp(lyb), {**u, "long_name":
                                        "observable y, baseline"}),
                "observable_changed": (dims, np.exp(lyc), {**u, "long_name":
                                       "observable y, changed"})}
    u = {"units": "1"}
    return {"log_observable_baseline": (dims, lyb, {**u, "long_name": "ln y of the "
                                        "baseline, y in its observable_units"}),
            "log_observable_changed": (dims, lyc, {**u, "long_name": "ln y of the changed "
                                       "model, y in its observable_units"})}


def ranking(ds, top=10):
    """The best (observable, band, condition) combinations: list of dicts, best first."""
    var = ds["separation_band"]
    dims = [d for d in var.dims if d not in ("observable", "band")]
    flat = var.transpose("observable", "band", *dims).values
    rows = []
    for idx in np.ndindex(flat.shape):
        v = flat[idx]
        if not np.isfinite(v):
            continue
        cond = {d: ds[d].values[i] for d, i in zip(dims, idx[2:])}
        b = idx[1]
        rows.append({"observable": str(ds["observable"].values[idx[0]]),
                     "band": str(ds["band"].values[b]),
                     "bottom_km": float(ds["band_bottom"].values[b]),
                     "top_km": float(ds["band_top"].values[b]),
                     "condition": cond, "separation": float(v)})
    rows.sort(key=lambda r: -r["separation"])
    return rows[:top]
