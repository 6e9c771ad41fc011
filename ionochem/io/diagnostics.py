"""Diagnostics practitioners read beside the densities of a steady column.

- ``lifetime`` (species, altitude): chemical lifetime n / L, s.
- ``diffusion_time`` (altitude): O+ diffusion time H_n² / (D_a sin²I), s (H_n the
  atomic-oxygen scale height), and
  ``pce_doubtful`` (species, altitude): lifetime longer than that time, where photochemical
  equilibrium is doubtful and transport would matter.
- ``volume_emission_rate`` (emission, altitude): photons cm-3 s-1 of O+(2P) 7320 Å,
  O+(2D) 3726/3729 Å and N(2D) 5200 Å, from the radiative reactions of the list.
- ``ionization_rate`` and ``recombination_rate`` (altitude): electron production and loss,
  and their column integrals' balance in the attributes.
- ``dark`` (altitude) and ``solar_zenith_angle``.

It reads only the model's arrays and the dataset being built; it never re-reads files.
"""

from __future__ import annotations

import numpy as np

from ionochem.mechanism.mechanism import ELECTRON

EMISSIONS = (
    # (name, upper state, lower state, wavelength label)
    ("OII_7320", "O+(2P)", "O+(2D)", "7320 Å (O+ 2P→2D, 7320/7330 doublet)"),
    ("OII_3726_3729", "O+(2D)", "O+", "3726/3729 Å (O+ 2D→4S)"),
    ("NI_5200", "N(2D)", "N", "5200 Å (N 2D→4S)"),
)


def oplus_diffusion_time(env):
    """Vertical diffusion time of O+ on the grid, H_n² / (D_a sin²I), s.

    H_n is the scale height of atomic oxygen, the gas through which O+ diffuses and on
    whose density D_a depends, not the plasma scale height, 2–3 times larger, which put
    the end of photochemical equilibrium ~50 km too high (Rishbeth & Garriott 1969, ch. 3;
    Schunk & Nagy 2009, §10.2; *from memory*). I is the dip angle of the transport section,
    or 90° (vertical field, the shortest time) without one. See
    :func:`ionochem.environment.diffusion.diffusion_time_s`.
    """
    from ionochem.environment.diffusion import diffusion_time_s
    tr = getattr(env, "transport", None)
    dip = 90.0 if tr is None else tr.dip_deg
    return diffusion_time_s(env.altitude_km, env.neutrals, env.Te, env.Ti, env.Tn, dip)


def add_steady_diagnostics(model, ds):
    """Add the diagnostics listed in the module docstring to ``ds`` in place."""
    data_vars, coords, attrs = steady_diagnostic_vars(
        model, ds["density"].values, ds["loss"].values, ds["role"].values,
        ds["reaction_rate"].values, list(ds["species"].values))
    ds.update(data_vars)
    ds.coords.update(coords)
    ds.attrs.update(attrs)


def emission_reactions(model):
    """Per line of :data:`EMISSIONS` with at least one radiative reaction in the list:
    (name, label, indices of the reactions upper -> lower)."""
    out = []
    for name, upper, lower, label in EMISSIONS:
        found = []
        for j, r in enumerate(model.reaction_objects):
            reac = [sp.name for sp, c in r.reactants for _ in range(c)]
            prod = [sp.name for sp, c in r.products for _ in range(c)]
            if reac == [upper] and prod == [lower]:
                found.append(j)
        if found:
            out.append((name, label, found))
    return out


def steady_diagnostic_vars(model, dens, loss, roles, rates, species):
    """The diagnostics of the module docstring as plain dicts, for one Dataset build.

    Parameters
    ----------
    model : Model
    dens, loss : ndarray, shape (species, altitude)
        Densities (cm-3) and gross chemical loss (cm-3 s-1) of the dataset's species.
    roles : array_like of str, shape (species,)
    rates : ndarray, shape (reaction, altitude)
        Volume reaction rates, cm-3 s-1.
    species : list of str
        The dataset's species names.

    Returns
    -------
    data_vars, coords, attrs : dict
        Name -> (dims, values, attrs) variables, coordinates and global attributes.
    """
    out, coords, attrs = {}, {}, {}
    notes = list(model.warnings)
    out.update(_lifetime_vars(model, dens, loss, roles, species))
    _emission_vars(model, rates, out, coords)
    _electron_balance(model, rates, out, attrs, dens, species)
    _light_vars(model, out, notes)
    _balance_ion_vars(model, dens, species, out, notes)
    attrs["warnings"] = "; ".join(str(n) for n in notes)
    return out, coords, attrs


def _given_ne(model):
    """True when the electron density is given (``electrons = "table"``)."""
    return (model.environment.electron_density is not None
            and model.mechanism.balance_ion is not None)


def _lifetime_vars(model, dens, loss, roles, species):
    """``lifetime``, ``diffusion_time`` and ``pce_doubtful``."""
    env, mech, out = model.environment, model.mechanism, {}
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        life = np.where(loss > 0, dens / loss, np.inf)
    life[np.asarray(roles) == "fixed"] = np.nan
    out["lifetime"] = (("species", "altitude"), life,
                       {"units": "s", "long_name": "chemical lifetime n/L"})
    # Fixed by the model's environment: computed once per model (a copy per result).
    tau_d = model.structural("oplus_diffusion_time",
                             lambda: oplus_diffusion_time(env)).copy()
    out["diffusion_time"] = ("altitude", tau_d,
                             {"units": "s", "long_name": "O+ vertical diffusion time "
                              "H_n^2/(D_a sin^2 I), H_n the scale height of atomic oxygen"})
    doubtful = (life > tau_d[None, :]) & np.isfinite(life) & (dens > 0)
    if getattr(model, "transport", None) is not None:
        # Transported species are not assumed in equilibrium, nor the electrons and totals
        # that follow them: the flag concerns the species still solved locally.
        moved = set(model.scenario.transport.species)
        for tot in mech.derived:
            if moved & set(tot.members):
                moved.add(tot.name)
        moved.add(ELECTRON)
        for i, name in enumerate(species):
            if name in moved:
                doubtful[i] = False
    out["pce_doubtful"] = (("species", "altitude"), doubtful.astype(np.int8),
                           {"long_name": "photochemical equilibrium doubtful: lifetime longer "
                            "than the diffusion time", "flag_values": np.array([0, 1], np.int8),
                            "flag_meanings": "equilibrium_plausible equilibrium_doubtful"})
    return out


def _emission_vars(model, rates, out, coords):
    """``volume_emission_rate`` and its ``emission`` coordinates (when the list has them)."""
    ver, labels = [], []
    for name, label, found in model.structural("emission_reactions",
                                               lambda: emission_reactions(model)):
        total = np.zeros(rates.shape[1])
        for j in found:
            total += rates[j]
        ver.append(total)
        labels.append((name, label))
    if ver:
        out["volume_emission_rate"] = (("emission", "altitude"), np.array(ver),
                                       {"units": "cm-3 s-1", "long_name": "volume emission "
                                        "rate (photons per cm3 per s)"})
        coords["emission"] = ("emission", np.array([n for n, _ in labels], dtype=object))
        coords["emission_line"] = ("emission", np.array([lab for _, lab in labels],
                                                        dtype=object))


def _electron_balance(model, rates, out, attrs, dens, species):
    """Ionization–recombination balance from the electron row of the stoichiometry; with
    transport, the ions the moving species brings into the column (through the upper
    boundary, less what leaves through the bottom) close the column's budget."""
    env, mech = model.environment, model.mechanism
    if ELECTRON not in mech.all_species:
        return
    nu_e = mech.nu_all[mech.index(ELECTRON)]
    ion = np.clip(nu_e, 0, None) @ rates
    rec = np.clip(-nu_e, 0, None) @ rates
    out["ionization_rate"] = ("altitude", ion, {"units": "cm-3 s-1",
                                                "long_name": "electron production"})
    out["recombination_rate"] = ("altitude", rec, {"units": "cm-3 s-1",
                                                   "long_name": "electron loss"})
    z_cm = env.altitude_km * 1e5

    def column(x):
        # The trapezoid weights are the transport operator's cell widths, so the column of
        # the transport rate is exactly its net boundary inflow.
        return float(np.trapezoid(x, z_cm)) if x.size > 1 else float(x.sum())

    col_ion, col_rec = column(ion), column(rec)
    attrs["column_ionization_cm2_s"] = col_ion
    attrs["column_recombination_cm2_s"] = col_rec
    col_tr = 0.0
    tr = getattr(model, "transport", None)
    if tr is not None:
        moving = model.species[tr.index]
        col_tr = column(tr.operator.apply(dens[list(species).index(moving)]))
        attrs["column_transport_inflow_cm2_s"] = col_tr
    # With a given electron density (electrons = "table") the electrons are not made by
    # this column's ionization, so ionization and recombination need not balance: their
    # ratio is no check of the solution and is not reported.
    if not _given_ne(model):
        attrs["column_balance"] = float((col_ion + col_tr - col_rec) / col_ion) \
            if col_ion > 0 else 0.0


def _light_vars(model, out, notes):
    """``dark`` and ``solar_zenith_angle``, and the note on a wholly dark column."""
    env = model.environment
    dark = env.dark(None)
    sources = list(getattr(env.sun, "photon_sources", ()) or ())
    night = any(src.startswith("night:") for src in sources)
    # "Photochemistry alone" applies only to a column without transport; with transport
    # the F layer is what diffusion and the boundary flux keep.
    moved = getattr(model, "transport", None) is not None
    if dark.all() and not _given_ne(model):
        if moved:
            notes.append("every altitude is dark: " + (
                "only the scattered night-time sources ionize" if night else
                "nothing ionizes (no night-time sources)")
                + "; the F layer is what transport and the upper-boundary flux keep")
        else:
            notes.append("every altitude is dark: only the scattered night-time sources "
                         "ionize (photochemistry alone, without transport, cannot keep the "
                         "night F layer)" if night else
                         "every altitude is dark: photochemistry alone cannot sustain the "
                         "night ionosphere (no transport, no night-time sources)")
    out["dark"] = ("altitude", dark.astype(np.int8),
                   {"long_name": "no direct sunlight reaches the altitude",
                    "flag_values": np.array([0, 1], np.int8), "flag_meanings": "sunlit dark"})
    sza = model.structural("solar_zenith_angle",
                           lambda: float(env.solar_zenith_angle(None)))
    out["solar_zenith_angle"] = ((), sza,
                                 {"units": "degree", "long_name": "solar zenith angle"})


def _balance_ion_vars(model, dens, species, out, notes):
    """``balance_negative`` where the balance ion (Ne − other ions) would be negative."""
    mech, env = model.mechanism, model.environment
    if not _given_ne(model):
        return
    b = list(species).index(mech.balance_ion)
    neg = dens[b] < 0
    out["balance_negative"] = ("altitude", neg.astype(np.int8),
                               {"long_name": f"{mech.balance_ion} = Ne - other ions "
                                "would be negative",
                                "flag_values": np.array([0, 1], np.int8),
                                "flag_meanings": "ok negative"})
    if neg.any():
        alt = env.altitude_km[neg]
        notes.append(f"{mech.balance_ion} = Ne - other ions is negative at {neg.sum()} "
                     f"altitude(s), {alt.min():g}-{alt.max():g} km: the given Ne is below "
                     "the molecular ions there")
