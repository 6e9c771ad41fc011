"""Build the result dataset of a solved column (DESIGN.md §7).

Dimensions ``species`` and ``altitude`` (km), ``reaction`` for per-reaction data, ``time`` for
transient runs. Every variable carries ``units`` and ``long_name`` (CF conventions); the
dataset carries provenance: package version, hashes of the reaction list and scenario, the
changes applied and the time of the run.
"""

from __future__ import annotations

import datetime as _dt

import numpy as np
import xarray as xr

from ionochem.mechanism.mechanism import THIRD_BODY

VALIDITY_NOTE = (
    "Photochemical equilibrium column: molecular ions (N2+, O2+, NO+) and metastables are in "
    "photochemical equilibrium at all heights; O+ is not above about 200-250 km by day, where "
    "its lifetime exceeds the diffusion time and a box model overestimates it (see the "
    "pce_doubtful flag). Research output, not a forecast: do not use alone for radio, "
    "navigation or satellite operations.")


def _species_table(model, n_solved):
    """All densities (..., N) with names and roles, from solved densities (..., A, S)."""
    mech = model.mechanism
    lead = n_solved.shape[:-1]
    flat = n_solved.reshape(-1, n_solved.shape[-1])
    A = model.altitude_km.size
    reps = flat.shape[0] // A
    given = np.tile(model.given, (reps, 1))
    full = mech.full_densities(flat, given)[:, :-1]
    names = [s for s in mech.all_species if s != THIRD_BODY]
    cols = [mech.index(s) for s in names]
    dens = full[:, cols]
    roles = [mech.role(s) for s in names]
    # Neutrals of the environment that the mechanism does not use are reported as fixed.
    extra = [s for s in model.environment.neutrals if s not in names]
    if extra:
        ext = np.tile(np.stack([model.environment.neutrals[s] for s in extra], -1), (reps, 1))
        dens = np.concatenate([dens, ext], axis=1)
        names += extra
        roles += ["fixed"] * len(extra)
    for tot in mech.derived:
        idx = [names.index(m) for m in tot.members]
        dens = np.concatenate([dens, dens[:, idx].sum(axis=1, keepdims=True)], axis=1)
        names.append(tot.name)
        roles.append("derived")
    return dens.reshape(*lead, len(names)), names, roles


def _provenance(model):
    import ionochem
    scen = model.scenario
    env_attrs = {"neutral_model": scen.neutrals.model,
                 "ion_drift_m_s": float(scen.temperatures.ion_drift_m_s),
                 "temperatures": f"electron {scen.temperatures.electron}, "
                                 f"ion {scen.temperatures.ion}"}
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
    return env_attrs | {
        "title": scen.title,
        "Conventions": "CF-1.10",
        "source": f"ionochem {ionochem.__version__}",
        "history": f"{_dt.datetime.now(_dt.UTC).isoformat(timespec='seconds')} ionochem run",
        "scenario_file": scen.source,
        "scenario_sha256": scen.sha256,
        "reaction_list": str(model.reaction_list.path),
        "reaction_list_sha256": model.reaction_list.sha256,
        "changes_set": "; ".join(f"{k} = {v}" for k, v in model.changes["set"].items()),
        "changes_scale": "; ".join(f"{k} x {v:g}" for k, v in model.changes["scale"].items()),
        "electrons": scen.solve.electrons,
        "comment": VALIDITY_NOTE,
    }


def _environment_vars(model, dims=("altitude",)):
    env = model.environment
    out = {}
    for name, arr, long in (("Tn", env.Tn, "neutral temperature"),
                            ("Te", env.Te, "electron temperature"),
                            ("Ti", env.Ti, "ion temperature"),
                            ("Tv", env.Tv, "vibrational temperature of N2")):
        out[name] = xr.Variable(dims, arr, {"units": "K", "long_name": long})
    return out


def steady_dataset(model, res):
    """Dataset of a steady solution (``SteadyResult`` from the steady solver)."""
    mech = model.mechanism
    alt = model.altitude_km
    dens, names, roles = _species_table(model, res.n)
    k = model.rate_coefficients()
    given = model.given
    n_all = mech.full_densities(res.n, given)
    rates = mech.rates(k, n_all)
    P, L = mech.production_loss(res.n, k, given)
    keep = [mech.index(s) for s in names if s in mech.all_species]
    prod = np.zeros_like(dens)
    loss = np.zeros_like(dens)
    prod[:, :len(keep)] = P[:, keep]
    loss[:, :len(keep)] = L[:, keep]
    stoich = np.zeros((len(names), len(model.reactions)))
    stoich[:len(keep)] = mech.nu_all[keep]
    for tot in mech.derived:
        # A total's production and loss exclude the exchanges among its members.
        members = [mech.index(m) for m in tot.members]
        nu = mech.nu_all[members].sum(axis=0)
        col = names.index(tot.name)
        stoich[col] = nu
        prod[:, col] = rates @ np.clip(nu, 0, None)
        loss[:, col] = rates @ np.clip(-nu, 0, None)
    from ionochem.solve.steady import METHOD_NAMES
    ds = xr.Dataset(
        {
            "density": (("species", "altitude"), dens.T,
                        {"units": "cm-3", "long_name": "number density"}),
            "production": (("species", "altitude"), prod.T,
                           {"units": "cm-3 s-1", "long_name": "gross chemical production"}),
            "loss": (("species", "altitude"), loss.T,
                     {"units": "cm-3 s-1", "long_name": "gross chemical loss"}),
            "rate_coefficient": (("reaction", "altitude"), k.T,
                                 {"units": "cm3 s-1 (bimolecular), s-1 (unimolecular), "
                                           "cm6 s-1 (termolecular)",
                                  "long_name": "rate coefficient"}),
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
                               "flag_values": np.array(sorted(METHOD_NAMES), np.int8),
                               "flag_meanings": " ".join(METHOD_NAMES[k]
                                                         for k in sorted(METHOD_NAMES))}),
        },
        coords={
            "altitude": ("altitude", alt, {"units": "km", "long_name": "altitude",
                                           "standard_name": "altitude", "positive": "up"}),
            "species": ("species", np.array(names, dtype=object)),
            "role": ("species", np.array(roles, dtype=object),
                     {"long_name": "solved, fixed, electron, balance or derived"}),
            "reaction": ("reaction", np.array(model.reactions, dtype=object)),
            "equation": ("reaction", np.array([_equation(r) for r in model._rxns],
                                              dtype=object)),
        },
        attrs=_provenance(model),
    )
    for name, var in _environment_vars(model).items():
        ds[name] = var
    _add_diagnostics(model, ds)
    _add_transport(model, ds, res.n)
    return ds


TRANSPORT_NOTE = (
    "Column with O+ transport: O+ diffuses along the geomagnetic field (ambipolar diffusion "
    "projected on the vertical, with the meridional-wind drift), the lowest level is in "
    "photochemical equilibrium and the given flux crosses the top; the molecular ions and "
    "metastables are in photochemical equilibrium at every height. Research output, not a "
    "forecast: do not use alone for radio, navigation or satellite operations.")


def _transport_attrs(model):
    env = model.environment
    c = env.transport
    return {"transport": "O+ field-aligned ambipolar diffusion (Schunk & Nagy 2009)",
            "transport_dip_deg": float(c.dip_deg),
            "transport_dip_source": "given" if model.scenario.transport.dip_deg is not None
            else "IGRF at 300 km (ppigrf)",
            "transport_upper_boundary_flux_cm2_s": float(c.upper_flux_cm2_s),
            "transport_meridional_wind_m_s": float(c.meridional_wind_m_s),
            "comment": TRANSPORT_NOTE}


def _add_transport(model, ds, n):
    """O+ vertical flux and transport rate of a column with transport (nothing otherwise)."""
    if model.transport is None:
        return
    tr = model.transport
    col = n[:, tr.index]
    ds["vertical_flux"] = ("altitude", tr.operator.flux(col),
                           {"units": "cm-2 s-1", "long_name": f"upward flux of "
                            f"{model.species[tr.index]} through the top of each level's cell "
                            "(the last value is the upper boundary flux)"})
    ds["transport_rate"] = ("altitude", tr.operator.apply(col),
                            {"units": "cm-3 s-1", "long_name": f"net gain of "
                             f"{model.species[tr.index]} by transport, -dPhi/dz (zero at "
                             "the lowest level, held in photochemical equilibrium)"})
    ds.attrs.update(_transport_attrs(model))


def _equation(r):
    def side(terms):
        return " + ".join((f"{c} " if c > 1 else "") + sp.name for sp, c in terms) or "0"
    return f"{side(r.reactants)} -> {side(r.products)}"


def _add_diagnostics(model, ds):
    """Dark levels, zenith angle, lifetimes and the ionization–recombination balance."""
    from ionochem.analysis.diagnostics import add_steady_diagnostics
    add_steady_diagnostics(model, ds)


def transient_dataset(model, times, n):
    """Dataset of a time integration: n shaped (time, altitude, species)."""
    dens, names, roles = _species_table(model, np.maximum(n, 0.0))
    ds = xr.Dataset(
        {
            "density": (("time", "species", "altitude"), np.transpose(dens, (0, 2, 1)),
                        {"units": "cm-3", "long_name": "number density"}),
            "min_density": ("time", n.min(axis=(1, 2)) if n.size else np.zeros(len(times)),
                            {"units": "cm-3", "long_name": "most negative solved density "
                             "before clipping at zero (integration accuracy check)"}),
        },
        coords={
            "time": ("time", np.asarray(times, float),
                     {"units": "s", "long_name": "time since the scenario time"}),
            "altitude": ("altitude", model.altitude_km, {"units": "km",
                                                          "standard_name": "altitude",
                                                          "positive": "up"}),
            "species": ("species", np.array(names, dtype=object)),
            "role": ("species", np.array(roles, dtype=object)),
        },
        attrs=_provenance(model),
    )
    for name, var in _environment_vars(model).items():
        ds[name] = var
    env = model.environment
    if env.sun is not None:
        ds["solar_zenith_angle"] = ("time", np.array([env.solar_zenith_angle(t)
                                                      for t in times], float),
                                    {"units": "degree", "long_name": "solar zenith angle"})
    ds.attrs["mode"] = "transient"
    if model.transport is not None:
        ds.attrs.update(_transport_attrs(model))
    return ds
