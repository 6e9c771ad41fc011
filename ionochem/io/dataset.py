"""Build the result dataset of a solved column (docs/design.md §7).

Dimensions ``species`` and ``altitude`` (km), ``reaction`` for per-reaction data, ``time`` for
transient runs. Every variable carries ``units`` and ``long_name`` (CF conventions); the
dataset carries provenance: package version, hashes of the reaction list and scenario, the
changes applied and the time of the run.
"""

from __future__ import annotations

import datetime as _dt

import numpy as np
import xarray as xr

from ionochem.io.diagnostics import steady_diagnostic_vars
from ionochem.mechanism.mechanism import THIRD_BODY

VALIDITY_NOTE = (
    "Photochemical equilibrium column: molecular ions (N2+, O2+, NO+) and metastables are in "
    "photochemical equilibrium at all heights; O+ is not where its chemical lifetime exceeds "
    "the diffusion time, and a box model overestimates it there: the pce_doubtful flag marks "
    "those levels. Research output, not a forecast: do not use alone for radio, navigation or "
    "satellite operations.")


def species_table(model, n_solved, given=None, neutrals=None):
    """All densities (..., N) with names and roles, from solved densities (..., A, S).

    ``given`` (..., A, G) and ``neutrals`` ({name: (..., A)}) are the fixed densities of
    each row when they differ between the leading entries (times of a run whose neutrals
    follow time); by default the model's own, repeated."""
    mech = model.mechanism
    lead = n_solved.shape[:-1]
    flat = n_solved.reshape(-1, n_solved.shape[-1])
    A = model.altitude_km.size
    reps = flat.shape[0] // A
    given = np.tile(model.given, (reps, 1)) if given is None \
        else np.asarray(given, float).reshape(flat.shape[0], -1)
    full = mech.full_densities(flat, given)[:, :-1]
    names = [s for s in mech.all_species if s != THIRD_BODY]
    cols = [mech.index(s) for s in names]
    dens = full[:, cols]
    roles = [mech.role(s) for s in names]
    # Neutrals of the environment that the mechanism does not use are reported as fixed.
    extra = [s for s in model.environment.neutrals if s not in names]
    if extra:
        ext = (np.tile(np.stack([model.environment.neutrals[s] for s in extra], -1), (reps, 1))
               if neutrals is None else
               np.stack([np.asarray(neutrals[s], float).reshape(-1) for s in extra], -1))
        dens = np.concatenate([dens, ext], axis=1)
        names += extra
        roles += ["fixed"] * len(extra)
    if mech.derived:
        # All totals in one array (a concatenation per total copied the whole table each
        # time: 0.19 s for an ensemble of 63,000 rows, issue 25).
        totals = np.stack([dens[:, [names.index(m) for m in tot.members]].sum(axis=1)
                           for tot in mech.derived], axis=1)
        dens = np.concatenate([dens, totals], axis=1)
        names += [tot.name for tot in mech.derived]
        roles += ["derived"] * len(mech.derived)
    return dens.reshape(*lead, len(names)), names, roles


#: Attributes of the altitude coordinate in every result (CF).
ALTITUDE_ATTRS = {"units": "km", "long_name": "altitude", "standard_name": "altitude",
                  "positive": "up"}

#: Rate coefficients are stored by reaction order so each variable has one unit (CF):
#: name, unit and long name per number of reactants (a third body M counts).
ORDER_VARIABLES = {
    1: ("rate_coefficient_first_order", "s-1",
        "first-order rate coefficient (photo and photoelectron rates, radiative decay, "
        "prescribed sources)"),
    2: ("rate_coefficient", "cm3 s-1", "two-body rate coefficient"),
    3: ("rate_coefficient_third_order", "cm6 s-1", "three-body rate coefficient"),
}


def reaction_order(r):
    """Number of reactant particles of a reaction (a third body M counts)."""
    return sum(c for _, c in r.reactants)


def rate_coefficient_vars(model, k, dims):
    """``rate_coefficient`` (two-body), ``rate_coefficient_first_order`` and
    ``rate_coefficient_third_order``, each NaN for reactions of another order, and
    ``reaction_order``; ``k`` has the reaction axis at ``dims.index("reaction")``."""
    order = model.structural("reaction_order", lambda: np.array(
        [reaction_order(r) for r in model.reaction_objects], np.int8))
    axis = dims.index("reaction")
    shape = [1] * len(dims)
    shape[axis] = order.size
    out = {"reaction_order": ("reaction", order,
                              {"units": "1", "long_name": "number of reactant particles"})}
    for n, (name, units, long) in ORDER_VARIABLES.items():
        if n == 2 or np.any(order == n):
            vals = np.where((order == n).reshape(shape), k, np.nan)
            out[name] = (dims, vals, {"units": units, "long_name": long})
    return out


def provenance(model):
    import ionochem
    scen = model.scenario
    env_attrs = {"neutral_model": scen.neutrals.model,
                 "ion_drift_m_s": float(scen.temperatures.ion_drift_m_s),
                 "temperatures": f"electron {scen.temperatures.electron}, "
                                 f"ion {scen.temperatures.ion}, "
                                 f"vibrational {_vibrational(scen.temperatures)}"}
    if scen.location is not None:
        env_attrs["latitude_deg"] = scen.location.latitude_deg
        env_attrs["longitude_deg"] = scen.location.longitude_deg
    if scen.time is not None:
        env_attrs["time_utc"] = scen.time.utc.isoformat()
    if scen.sun is not None:
        env_attrs["f107"] = scen.sun.f107
        env_attrs["f107a"] = scen.sun.f107a
    if scen.geomagnetic is not None:
        env_attrs["ap"] = scen.geomagnetic.ap
    for key, value in model.environment.info.items():
        env_attrs[key] = float(value)
    if model.environment.sun is not None:
        env_attrs["photon_source"] = model.environment.sun.spectrum.source
        env_attrs["photoelectron_secondaries"] = int(bool(scen.photons.secondary))
        env_attrs["photon_sources"] = "; ".join(model.environment.sun.photon_sources)
    return env_attrs | {
        "title": scen.title,
        "Conventions": "CF-1.10",
        "source": f"ionochem {ionochem.__version__}",
        "history": f"{_dt.datetime.now(_dt.UTC).isoformat(timespec='seconds')} ionochem "
                   "(Python API)",
        "scenario_file": scen.source,
        "scenario_sha256": scen.sha256,
        "reaction_list": str(model.reaction_list.path),
        "reaction_list_sha256": model.reaction_list.sha256,
        "changes_set": "; ".join(f"{k} = {v}" for k, v in model.changes["set"].items()),
        "changes_scale": "; ".join(f"{k} x {v:g}" for k, v in model.changes["scale"].items()),
        "electrons": scen.solve.electrons,
        "comment": VALIDITY_NOTE,
    }


def _vibrational(temps):
    """How Tv was set, for the provenance (``electron (c = 0.5)`` for the Te link)."""
    src = getattr(temps, "vibrational", "neutral")
    if src == "electron":
        return f"electron (c = {getattr(temps, 'vibrational_coupling', 0.5):g})"
    return src


def _environment_vars(model, dims=("altitude",), times=None):
    """Tn, Te, Ti, Tv on the grid; by time when the run's environment follows time."""
    env = model.environment
    timeline = getattr(model, "timeline", None) if times is not None else None
    out = {}
    for name, long in (("Tn", "neutral temperature"), ("Te", "electron temperature"),
                       ("Ti", "ion temperature"), ("Tv", "vibrational temperature of N2")):
        if timeline is None:
            out[name] = xr.Variable(dims, getattr(env, name), {"units": "K",
                                                               "long_name": long})
        else:
            arr = np.stack([timeline.field(float(t), lambda e, a=name: getattr(e, a))
                            for t in times])
            out[name] = xr.Variable(("time", *dims), arr, {"units": "K", "long_name": long})
    return out


def _stoichiometry_and_totals(mech, names, keep, rates, prod, loss):
    """Net stoichiometry (species, reaction) of the dataset's species, and the gross
    production and loss of each derived total filled into ``prod``/``loss`` (..., species)
    from the reaction rates (..., reaction). ``keep``: the mechanism index of each leading
    species of ``names``. A total's production and loss exclude the exchanges among its
    members (its members' net stoichiometry summed)."""
    stoich = np.zeros((len(names), rates.shape[-1]))
    stoich[:len(keep)] = mech.nu_all[keep]
    for tot in mech.derived:
        nu = mech.nu_all[[mech.index(m) for m in tot.members]].sum(axis=0)
        col = names.index(tot.name)
        stoich[col] = nu
        prod[..., col] = rates @ np.clip(nu, 0, None)
        loss[..., col] = rates @ np.clip(-nu, 0, None)
    return stoich


def steady_dataset(model, res, method_names):
    """Dataset of a steady solution (``SteadyResult`` from the steady solver).

    ``method_names`` maps the solver's method codes to names (the solver's
    ``METHOD_NAMES``); the caller adds the diagnostics
    (:func:`ionochem.io.diagnostics.steady_diagnostic_vars`), so this module imports
    neither the solver nor the analyses.
    """
    data_vars, coords, attrs = steady_variables(model, res, method_names)
    return xr.Dataset(data_vars, coords=coords, attrs=attrs)


def steady_variables(model, res, method_names):
    """The variables of :func:`steady_dataset` as plain dicts, before any Dataset exists.

    Building the Dataset once from dicts avoids one xarray merge per added variable
    (``Model.solve`` adds the diagnostics to these dicts, then makes one Dataset).

    Returns
    -------
    data_vars : dict
        Name -> (dims, values, attrs) or ``xarray.Variable``.
    coords : dict
        Coordinate name -> (dims, values[, attrs]).
    attrs : dict
        Global attributes (provenance).
    """
    mech = model.mechanism
    alt = model.altitude_km
    dens, names, roles = species_table(model, res.n)
    k = model.rate_coefficients()
    given = model.given
    n_all = mech.full_densities(res.n, given)
    rates = mech.rates(k, n_all)
    P, L = mech.gross_rates(rates)
    keep = [mech.index(s) for s in names if s in mech.all_species]
    prod = np.zeros_like(dens)
    loss = np.zeros_like(dens)
    prod[:, :len(keep)] = P[:, keep]
    loss[:, :len(keep)] = L[:, keep]
    stoich = _stoichiometry_and_totals(mech, names, keep, rates, prod, loss)
    data_vars = {
        "density": (("species", "altitude"), dens.T,
                    {"units": "cm-3", "long_name": "number density"}),
        "production": (("species", "altitude"), prod.T,
                       {"units": "cm-3 s-1", "long_name": "gross chemical production"}),
        "loss": (("species", "altitude"), loss.T,
                 {"units": "cm-3 s-1", "long_name": "gross chemical loss"}),
        **rate_coefficient_vars(model, k.T, ("reaction", "altitude")),
        "reaction_rate": (("reaction", "altitude"), rates.T,
                          {"units": "cm-3 s-1", "long_name": "volume reaction rate"}),
        "net_stoichiometry": (("species", "reaction"), stoich,
                              {"units": "1", "long_name": "net stoichiometric coefficient "
                               "(products minus reactants)"}),
        "residual": ("altitude", res.residual,
                     {"units": "1", "long_name": "largest relative residual "
                      "|f_i|/(P_i+L_i) of the steady state"}),
        "iterations": ("altitude", res.iterations.astype(np.int32),
                       {"units": "1", "long_name": "solver iterations"}),
        "solver_method": ("altitude", res.method.astype(np.int8),
                          {"long_name": "method that converged",
                           "flag_values": np.array(sorted(method_names), np.int8),
                           "flag_meanings": " ".join(method_names[k]
                                                     for k in sorted(method_names))}),
    }
    coords = {
        "altitude": ("altitude", alt, ALTITUDE_ATTRS),
        "species": ("species", np.array(names, dtype=object)),
        "role": ("species", np.array(roles, dtype=object),
                 {"long_name": "solved, fixed, electron, balance or derived"}),
        "reaction": ("reaction", np.array(model.reactions, dtype=object)),
        "equation": ("reaction", model.structural("equations", lambda: np.array(
            [_equation(r) for r in model.reaction_objects], dtype=object))),
        **unit_coordinates(model),
    }
    data_vars.update(_environment_vars(model))
    from ionochem.io.level_outputs import level_output_vars
    out = level_output_vars(model, k, dens, names, ())
    coords.update({c: out.pop(c) for c in ("family_reaction", "family_species") if c in out})
    data_vars.update(out)
    attrs = provenance(model)
    extra, extra_attrs = _transport_vars(model, res.n)
    data_vars.update(extra)
    attrs.update(extra_attrs)
    return data_vars, coords, attrs


def _add_level_outputs(model, ds, k, dens, names, lead_dims):
    """level_fraction and effective_rate_coefficient of vibrational families (§7)."""
    from ionochem.io.level_outputs import level_output_vars
    out = level_output_vars(model, k, dens, names, lead_dims)
    coords = {c: out.pop(c) for c in ("family_reaction", "family_species") if c in out}
    ds.coords.update(coords)
    for name, var in out.items():
        ds[name] = var


TRANSPORT_NOTE = (
    "Column with O+ transport: O+ diffuses along the geomagnetic field (ambipolar diffusion "
    "projected on the vertical, with the meridional-wind drift), the lowest level is in "
    "photochemical equilibrium and the given flux crosses the top; the molecular ions and "
    "metastables are in photochemical equilibrium at every height. Research output, not a "
    "forecast: do not use alone for radio, navigation or satellite operations.")


TRANSIENT_TRANSPORT_NOTE = (
    "Time-dependent column with O+ transport: every species is integrated in time from the "
    "initial state; O+ also diffuses along the geomagnetic field (ambipolar diffusion "
    "projected on the vertical, with the meridional-wind drift), the lowest level follows "
    "its chemistry alone and the given flux crosses the top. Research output, not a "
    "forecast: do not use alone for radio, navigation or satellite operations.")


def _transport_attrs(model, transient=False):
    env = model.environment
    c = env.transport
    return {"transport": "O+ field-aligned ambipolar diffusion (Schunk & Nagy 2009)",
            "transport_dip_deg": float(c.dip_deg),
            "transport_dip_source": "given" if model.scenario.transport.dip_deg is not None
            else "IGRF at 300 km (ppigrf)",
            "transport_upper_boundary_flux_cm2_s": float(c.upper_flux_cm2_s),
            "transport_meridional_wind_m_s": float(c.meridional_wind_m_s),
            "comment": TRANSIENT_TRANSPORT_NOTE if transient else TRANSPORT_NOTE}


def _transport_vars(model, n):
    """O+ vertical flux and transport rate of a column with transport (nothing otherwise):
    (data_vars, attrs) for the dataset."""
    if model.transport is None:
        return {}, {}
    tr = model.transport
    col = n[:, tr.index]
    out = {
        "vertical_flux": ("altitude", tr.operator.flux(col),
                          {"units": "cm-2 s-1", "long_name": f"upward flux of "
                           f"{model.species[tr.index]} through the top of each level's cell "
                           "(the last value is the upper boundary flux)"}),
        "transport_rate": ("altitude", tr.operator.apply(col),
                           {"units": "cm-3 s-1", "long_name": f"net gain of "
                            f"{model.species[tr.index]} by transport, -dPhi/dz (zero at "
                            "the lowest level, held in photochemical equilibrium)"}),
    }
    return out, _transport_attrs(model)


def unit_coordinates(model):
    """Coordinates naming the unit of analysis of each reaction (``model.units``: itself, its
    vibrational family, or a tie of the list): ``reaction_unit`` (reaction), and ``unit``
    with ``unit_kind`` and ``unit_equation`` (unit). Kept per model."""
    return model.structural("unit_coordinates", lambda: _unit_coordinates(model))


def _unit_coordinates(model):
    rx = {r.id: r for r in model.reaction_objects}
    of = {}
    names, kinds, labels = [], [], []
    for unit in model.units:
        names.append(unit.name)
        kinds.append(unit.kind)
        seen = []
        for m in unit.members:
            of[m] = unit.name
            r = rx[m]
            eq = _equation(r)
            eq = eq.replace(f"(v={r.level})", "(v)") if r.level is not None else eq
            if eq not in seen:
                seen.append(eq)
        levels = sorted({rx[m].level for m in unit.members if rx[m].level is not None})
        text = "; ".join(seen)
        labels.append(text + (f"  [v = {levels[0]}..{levels[-1]}]" if levels else ""))
    return {
        "reaction_unit": ("reaction", np.array([of[r] for r in model.reactions], dtype=object),
                          {"long_name": "unit of analysis the reaction belongs to (itself, "
                           "its vibrational family, or a tie of the reaction list)"}),
        "unit": ("unit", np.array(names, dtype=object),
                 {"long_name": "unit of analysis: a reaction, a family of vibrational "
                  "levels, or reactions tied in the reaction list"}),
        "unit_kind": ("unit", np.array(kinds, dtype=object),
                      {"long_name": "reaction, family or tied"}),
        "unit_equation": ("unit", np.array(labels, dtype=object),
                          {"long_name": "equations of the unit's members"}),
    }


def _equation(r):
    def side(terms):
        return " + ".join((f"{c} " if c > 1 else "") + sp.name for sp, c in terms) or "0"
    return f"{side(r.reactants)} -> {side(r.products)}"


TRANSIENT_NOTE = (
    "Time-dependent column: every species is integrated in time from the initial state, "
    "photochemistry only (no transport). O+ at heights where its chemical lifetime exceeds the "
    "diffusion time (see pce_doubtful in a steady run of the same scenario) is not realistic. "
    "Research output, not a forecast: do not use alone for radio, navigation or satellite "
    "operations.")


def _fixed_by_time(model, times):
    """Fixed densities (time, altitude, given) and neutrals ({name: (time, altitude)}) of a
    run whose environment follows time, else (None, None)."""
    timeline = getattr(model, "timeline", None)
    if timeline is None:
        return None, None
    given = np.stack([model.given_at(float(t)) for t in times])
    neutrals = {name: np.stack([timeline.field(float(t), lambda e, s=name: e.neutrals[s])
                                for t in times]) for name in model.environment.neutrals}
    return given, neutrals


def transient_dataset(model, times, n):
    """Dataset of a time integration: n shaped (time, altitude, species).

    Besides the densities: production, loss and reaction rates at each output time, the
    rate coefficients (which change with the sun), and a CF time coordinate in seconds
    since the scenario time (``time_s`` keeps the plain seconds).
    """
    mech = model.mechanism
    n = np.maximum(n, 0.0) if n.size else n
    given_t, neutrals_t = _fixed_by_time(model, times)
    dens, names, roles = species_table(model, n, given_t, neutrals_t)
    T = len(times)
    keep = [mech.index(s) for s in names if s in mech.all_species]
    A, R = model.altitude_km.size, len(model.reactions)
    prod = np.zeros((T, A, len(names)))
    loss = np.zeros_like(prod)
    rates = np.zeros((T, A, R))
    ks = np.zeros((T, A, R))
    for i, t in enumerate(times):
        k = model.rate_coefficients(float(t))
        ks[i] = k
        rates[i] = mech.rates(k, mech.full_densities(
            n[i], model.given if given_t is None else given_t[i]))
        P, L = mech.gross_rates(rates[i])
        prod[i, :, :len(keep)] = P[:, keep]
        loss[i, :, :len(keep)] = L[:, keep]
    stoich = _stoichiometry_and_totals(mech, names, keep, rates, prod, loss)
    dims3 = ("time", "species", "altitude")
    ds = xr.Dataset(
        {
            "density": (dims3, np.transpose(dens, (0, 2, 1)),
                        {"units": "cm-3", "long_name": "number density"}),
            "production": (dims3, np.transpose(prod, (0, 2, 1)),
                           {"units": "cm-3 s-1", "long_name": "gross chemical production"}),
            "loss": (dims3, np.transpose(loss, (0, 2, 1)),
                     {"units": "cm-3 s-1", "long_name": "gross chemical loss"}),
            **rate_coefficient_vars(model, np.transpose(ks, (0, 2, 1)),
                                    ("time", "reaction", "altitude")),
            "reaction_rate": (("time", "reaction", "altitude"), np.transpose(rates, (0, 2, 1)),
                              {"units": "cm-3 s-1", "long_name": "volume reaction rate"}),
            "net_stoichiometry": (("species", "reaction"), stoich,
                                  {"units": "1", "long_name": "net stoichiometric coefficient "
                                   "(products minus reactants)"}),
            "min_density": ("time", n.min(axis=(1, 2)) if n.size else np.zeros(T),
                            {"units": "cm-3", "long_name": "most negative solved density "
                             "before clipping at zero (integration accuracy check)"}),
        },
        coords={
            "time": ("time", np.asarray(times, float), _time_attrs(model)),
            "time_s": ("time", np.asarray(times, float),
                       {"units": "s", "long_name": "time since the scenario time"}),
            "altitude": ("altitude", model.altitude_km, ALTITUDE_ATTRS),
            "species": ("species", np.array(names, dtype=object)),
            "role": ("species", np.array(roles, dtype=object),
                     {"long_name": "solved, fixed, electron, balance or derived"}),
            "reaction": ("reaction", np.array(model.reactions, dtype=object)),
            "equation": ("reaction", np.array([_equation(r) for r in model.reaction_objects],
                                              dtype=object)),
            **unit_coordinates(model),
        },
        attrs=provenance(model),
    )
    ds.attrs["comment"] = TRANSIENT_NOTE
    for name, var in _environment_vars(model, times=times).items():
        ds[name] = var
    _add_level_outputs(model, ds, ks, dens, names, ("time",))
    env = model.environment
    if env.sun is not None:
        ds["solar_zenith_angle"] = ("time", np.array([env.solar_zenith_angle(t)
                                                      for t in times], float),
                                    {"units": "degree", "long_name": "solar zenith angle"})
    ds.attrs.update(mode="transient", environment=(
        "follows time: neutrals, temperatures and photo rates rebuilt every "
        f"{model.timeline.step_s:g} s and interpolated linearly, the sun every 60 s; transport "
        "coefficients and prescribed production of the start" if given_t is not None else
        "frozen at the scenario time (the sun moves)"))
    if model.transport is not None:
        ds.attrs.update(_transport_attrs(model, transient=True))
    return ds


def _time_attrs(model):
    """CF time units: seconds since the scenario's UTC time (or since the run start)."""
    t = getattr(model.scenario, "time", None)
    if t is not None and getattr(t, "utc", None) is not None:
        since = t.utc.strftime("%Y-%m-%d %H:%M:%S")
        return {"units": f"seconds since {since}", "calendar": "standard",
                "standard_name": "time", "long_name": "time"}
    return {"units": "s", "long_name": "time since the start of the run (no scenario time)"}


def steady_result(model, res, method_names):
    """The result dataset of a steady solve: :func:`steady_variables` and the diagnostics
    (:func:`ionochem.io.diagnostics.steady_diagnostic_vars`), built as plain dicts and made
    into one Dataset at the end (no merge per variable)."""
    data_vars, coords, attrs = steady_variables(model, res, method_names)
    extra, extra_coords, extra_attrs = steady_diagnostic_vars(
        model, data_vars["density"][1], data_vars["loss"][1], coords["role"][1],
        data_vars["reaction_rate"][1], list(coords["species"][1]))
    data_vars.update(extra)
    coords.update(extra_coords)
    attrs.update(extra_attrs)
    return xr.Dataset(data_vars, coords=result_coordinates(model, coords), attrs=attrs)


def result_coordinates(model, coords):
    """``xarray.Coordinates`` of ``coords`` (name -> (dims, values[, attrs])), reused from the
    model's last result when equal: building their indexes costs more than the rest of the
    dataset (pandas indexes of the species and reaction names). Each result gets its own
    shallow copy (its own attribute dicts)."""

    def token(value):
        dims, values, *rest = value
        values = np.asarray(values)
        data = tuple(values.tolist()) if values.dtype == object else values.tobytes()
        return dims, values.dtype.str, values.shape, data, repr(rest)

    key = tuple((name, token(value)) for name, value in coords.items())
    cached = model.__dict__.get("_coords_cache")
    if cached is None or cached[0] != key:
        cached = model.__dict__["_coords_cache"] = (key, xr.Coordinates(coords))
    return cached[1].copy(deep=False)
