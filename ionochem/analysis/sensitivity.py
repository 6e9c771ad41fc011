"""Exact local sensitivities of a steady column: S_ij = ∂ln n_i / ∂ln k_j.

At steady state f(n, k) = 0, so J ∂n/∂ln k_j = −∂f/∂ln k_j = −ν_j r_j (ν_j the net
stoichiometry of reaction j, r_j its rate): one LU factorisation of the Jacobian per level
serves every reaction at once (SCIENCE.md §6). The photo, photoelectron and prescribed
sources are reactions like any other, so their sensitivities are those of the production.
Algebraic species (electrons, or the balance ion) follow through their affine dependence on
the solved densities; derived totals are sums of their members.

The electron temperature is one more parameter: ∂f/∂ln Te = Σ_j ν_j r_j ∂ln k_j/∂ln Te,
with ∂ln k_j/∂ln Te from a central difference of the rate expressions alone (a step of 1e-5
in ln Te; no re-solve), so every Te-dependent rate contributes. The other environment
factors (``sensitivity_environment``) are built the same way: Ti and Tn (through every rate
that reads them, Teff included), the solar flux ``EUV`` (every photo and photoelectron rate
is proportional to it, so ∂ln r_j/∂ln F = 1 for those) and each fixed neutral ``n(X)``
(∂ln r_j/∂ln n_X = the count of X among the reactants). These are *local*: a neutral's
density enters the rates at the level, not the optical depth above it.

Cost: one steady solve (or a given solution), one Jacobian and one batched LU solve with
R + 1 right-hand sides. Dark levels (no densities) get NaN.

With transport the levels are coupled: the same equations hold for the whole column, with
the sparse block-tridiagonal Jacobian of ``model.column_jacobian``, factorised once (SuperLU)
for all R + 1 right-hand sides. The transport coefficients depend on Te and Ti through the
plasma temperature, so the Te column adds ∂(transport)/∂ln Te, by the same central
difference of the transport operator alone.
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from ionochem.analysis.units import sum_over_units, unit_coords, unit_map

TE_STEP = 1e-5


def _dlnk(model, name):
    """∂ln k/∂ln T for temperature ``name`` by a central difference, shape (A, R); computed
    once per model (it depends only on the rate laws and the column's temperatures) and
    read-only."""
    def build():
        out = _dlnk_difference(model, name)
        out.flags.writeable = False
        return out
    return model.structural(("dlnk", name), build)


def _dlnk_difference(model, name):
    env = model.environment
    base = getattr(env, name)
    k_up = model.rate_coefficients(temperatures={name: base * np.exp(TE_STEP)})
    k_dn = model.rate_coefficients(temperatures={name: base * np.exp(-TE_STEP)})
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where((k_up > 0) & (k_dn > 0),
                        (np.log(k_up) - np.log(k_dn)) / (2 * TE_STEP), 0.0)


def environment_factors(model, dlnk_te):
    """Environment factors and ∂ln r_j/∂ln factor for each reaction.

    Returns
    -------
    factors : list of (name, description)
        ``Te`` first, then ``Ti``, ``Tn``, ``EUV`` (when the list has photo rates) and
        ``n(X)`` for each fixed neutral X that is a reactant.
    dln : ndarray (altitude, reaction, factor)
    """
    A, R = dlnk_te.shape
    factors = [("Te", "electron temperature (every Te-dependent rate)")]
    cols = [dlnk_te]
    for name, what in (("Ti", "ion temperature (rates of Ti and Teff)"),
                       ("Tn", "neutral temperature (rates of Tn and Teff)")):
        d = _dlnk(model, name)
        if np.any(d != 0):
            factors.append((name, what))
            cols.append(d)
    photo = np.array([bool(e.variables & {"photo", "photoelectron"})
                      for e in model.rate_expressions], float)
    if photo.any():
        factors.append(("EUV", "solar photon flux (every photo and photoelectron rate)"))
        cols.append(np.broadcast_to(photo, (A, R)))
    fixed = getattr(model.environment, "neutrals", {})
    for name in fixed:
        # A prescribed rate is a given volume rate: no neutral density scales it.
        count = np.array([0.0 if "prescribed" in e.variables else
                          sum(c for sp, c in r.reactants if sp.name == name)
                          for r, e in zip(model.reaction_objects, model.rate_expressions)],
                         float)
        if count.any():
            factors.append((f"n({name})", f"density of {name} where it reacts (local; not "
                                          "its optical depth)"))
            cols.append(np.broadcast_to(count, (A, R)))
    return factors, np.stack(cols, axis=-1)


def _solved_matrix(model, ds):
    return np.stack([ds["density"].sel(species=s).values for s in model.species], -1)


def _transport_te_column(model, n):
    """∂(transport tendency)/∂ln Te, (A, S), central difference of the operator alone."""
    from ionochem.environment.diffusion import oplus_face_coefficients
    from ionochem.solve.transport import transport_operator
    env = model.environment
    c = env.transport
    out = np.zeros_like(n)
    i = model.transport.index
    for sign in (1.0, -1.0):
        Te = env.Te * np.exp(sign * TE_STEP)
        fc = oplus_face_coefficients(env.altitude_km, env.neutrals, Te, env.Ti, env.Tn,
                                     dip_deg=c.dip_deg,
                                     meridional_wind_m_s=c.meridional_wind_m_s,
                                     upper_flux_cm2_s=c.upper_flux_cm2_s)
        op = transport_operator(fc.altitude_km, fc.D_cm2_s, fc.V_cm_s, fc.upper_flux_cm2_s)
        out[:, i] += sign * op.apply(n[:, i]) / (2 * TE_STEP)
    return out


def _column_solve(model, n, B, live):
    """−J⁻¹ B for the live levels of a transport-coupled column: one sparse LU."""
    from scipy.sparse.linalg import splu

    from ionochem.solve.column import ORDERING
    A, S, K = B.shape
    J = model.column_jacobian(n)
    keep = np.repeat(live, S)
    Jl = J[keep][:, keep].tocsc()
    lu = splu(Jl, permc_spec=ORDERING)
    x = lu.solve(np.ascontiguousarray(B[live].reshape(-1, K)))
    return -x.reshape(-1, S, K)


def sensitivity(model, result=None):
    """Normalized sensitivities of every species to every reaction and to Te.

    Parameters
    ----------
    model : ionochem.Model
    result : xarray.Dataset, optional
        A steady solution of this model (``model.solve()``), to avoid solving again.

    Returns
    -------
    xarray.Dataset
        ``sensitivity`` (species, reaction, altitude) = ∂ln n/∂ln k and
        ``sensitivity_Te`` (species, altitude) = ∂ln n/∂ln Te, and
        ``sensitivity_environment`` (species, factor, altitude) for Te, Ti, Tn, the EUV flux
        and the fixed neutrals (see the module docstring), and ``sensitivity_unit``
        (species, unit, altitude), the sensitivity to one multiplier of all members of each
        unit of analysis (:mod:`ionochem.analysis.units`), dimensionless, with the densities
        they refer to.
    """
    from ionochem.solve.threads import single_thread_blas
    with single_thread_blas():  # faster for batches of small matrices (solve/threads.py)
        return _sensitivity(model, result)


def _sensitivity(model, result):
    ds = model.solve() if result is None else result
    mech = model.mechanism
    n = _solved_matrix(model, ds)                       # (A, S)
    k = model.rate_coefficients()
    given = model.given
    J = mech.jacobian(n, k, given)                      # (A, S, S)
    rhs = mech.rate_sensitivity_columns(n, k, given)    # (A, S, R) = ν_j r_j
    dlnk = _dlnk(model, "Te")
    factors, dln = environment_factors(model, dlnk)     # dln (A, R, F), F[0] = Te
    rhs_env = np.einsum("asr,arf->asf", rhs, dln)
    B = np.concatenate([rhs, rhs_env], axis=-1)         # (A, S, R+F)
    R = rhs.shape[-1]
    live = np.any(n > 0, axis=1)
    dn = np.full(B.shape, np.nan)
    if model.transport is not None:
        B[..., -1] += _transport_te_column(model, n)
        if live.any():
            dn[live] = _column_solve(model, n, B, live)
    elif live.any():
        try:
            dn[live] = -np.linalg.solve(J[live], B[live])
        except np.linalg.LinAlgError:
            for a in np.nonzero(live)[0]:
                dn[a] = -np.linalg.lstsq(J[a], B[a], rcond=None)[0]
    # Every reported species: solved, algebraic, fixed (zero) and derived totals.
    names = list(ds["species"].values)
    roles = ds["role"].values
    E = mech.E                                          # (N_all + 1, S)
    out = np.zeros((len(names), dn.shape[0], dn.shape[2]))     # (species, A, R+1)
    for i, name in enumerate(names):
        if name in mech.all_species and roles[i] != "fixed":
            row = E[mech.index(name)]
            out[i] = np.einsum("s,asp->ap", row, dn)
    for tot in mech.derived:
        i = names.index(tot.name)
        out[i] = sum(out[names.index(m)] for m in tot.members)
    dens = ds["density"].values                         # (species, A)
    with np.errstate(divide="ignore", invalid="ignore"):
        norm = np.where(dens[:, :, None] > 0, out / dens[:, :, None], 0.0)
    norm[:, ~live, :] = np.nan
    umap = unit_map(model)
    by_unit = sum_over_units(norm[:, :, :R], umap, axis=2)     # (species, A, U)
    res = xr.Dataset(
        {
            "sensitivity": (("species", "reaction", "altitude"),
                            np.transpose(norm[:, :, :R], (0, 2, 1)),
                            {"units": "1", "long_name": "normalized sensitivity "
                             "d ln n / d ln k at steady state"}),
            "sensitivity_Te": (("species", "altitude"), norm[:, :, R],
                               {"units": "1", "long_name": "normalized sensitivity "
                                "d ln n / d ln Te through every Te-dependent rate"}),
            "sensitivity_environment": (("species", "factor", "altitude"),
                                        np.transpose(norm[:, :, R:], (0, 2, 1)),
                                        {"units": "1", "long_name": "normalized local "
                                         "sensitivity d ln n / d ln (environment factor)"}),
            "sensitivity_unit": (("species", "unit", "altitude"),
                                 np.transpose(by_unit, (0, 2, 1)),
                                 {"units": "1", "long_name": "normalized sensitivity to one "
                                  "common multiplier of every member of a unit, "
                                  "d ln n / d ln lambda = sum of the members' d ln n / d ln k"}),
            "density": ds["density"],
        },
        coords={"species": ds["species"], "role": ds["role"], "reaction": ds["reaction"],
                "equation": ds["equation"], "altitude": ds["altitude"], **unit_coords(umap),
                "factor": ("factor", np.array([f for f, _ in factors], dtype=object)),
                "factor_description": ("factor", np.array([d for _, d in factors],
                                                          dtype=object))},
        attrs=dict(ds.attrs),
    )
    res.attrs["method"] = ("exact: one LU factorisation of the steady-state Jacobian per "
                           "level, J dn/dln k = -nu r")
    return res
