"""Exact local sensitivities of a steady column: S_ij = ∂ln n_i / ∂ln k_j.

At steady state f(n, k) = 0, so J ∂n/∂ln k_j = −∂f/∂ln k_j = −ν_j r_j (ν_j the net
stoichiometry of reaction j, r_j its rate): one LU factorisation of the Jacobian per level
serves every reaction at once (docs/physics.md §6). The photo, photoelectron and prescribed
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

Cost: one steady solve (or a given solution), one Jacobian, one batched inverse of the
levels' blocks and a few matrix products: the right-hand sides ν_j r_j share the S rows of ν,
so each reported species' response is ((rows · J⁻¹) ν) diag(r) (see ``_level_responses``).
Dark levels (no densities) get NaN. What depends only on the model (∂ln k/∂ln T, the factor
columns, the output rows, the result's coordinates) is kept per model (``model.structural``).

With transport the levels are coupled: the same equations hold for the whole column, whose
Jacobian (``model.column_jacobian``) couples levels only through the transported species.
The other species are eliminated level by level (Schur complement; ``_coupled_part``) and the
transported ones solved as one banded system for all R + F right-hand sides (one sparse LU
of the whole column when every species is coupled). The transport coefficients
depend on Te and Ti through the plasma temperature, so the Te column adds
∂(transport)/∂ln Te, by the same central difference of the transport operator alone.
"""

from __future__ import annotations

import weakref

import numpy as np
import xarray as xr

from ionochem.analysis.units import unit_coords, unit_map

TE_STEP = 1e-5


def _dlnk(model, name):
    """∂ln k/∂ln T for temperature ``name`` by a central difference, shape (A, R); computed
    once per model (it depends only on the rate laws and the column's temperatures) and
    read-only. Models on one environment share the columns of their common rate
    expressions (:func:`_shared_dlnk`), so a model that only scales some rates (a fit's
    trial, ``--scale``) or replaces a few (``--set``) does not difference them again."""
    def build():
        out = _shared_dlnk(model, name)
        out.flags.writeable = False
        return out
    return model.structural(("dlnk", name), build)


#: id(environment) → {(name, id(expression), id(reaction), zero column): (expression,
#: reaction, column)}; an entry leaves with its environment.
_DLNK_BY_ENVIRONMENT: dict = {}


def _shared_dlnk(model, name):
    """:func:`_dlnk_difference` through the environment's cache of columns.

    A column depends on the reaction's rate expression, the reaction (Teff uses its
    masses, a level its v) and the environment's temperatures; a scale factor on k cancels
    in the logarithm unless it is zero (the column is then 0), so a column that is zero at
    every level is cached apart."""
    env = model.environment
    store = _DLNK_BY_ENVIRONMENT.get(id(env))
    if store is None or store["env"]() is not env:
        store = {"env": weakref.ref(env), "columns": {}}
        _DLNK_BY_ENVIRONMENT[id(env)] = store
        weakref.finalize(env, _DLNK_BY_ENVIRONMENT.pop, id(env), None)
    zero = ~np.any(model.rate_coefficients() != 0, axis=0)
    keys = [(name, id(e), id(r), bool(z)) for e, r, z in
            zip(model.rate_expressions, model.reaction_objects, zero)]
    columns = store["columns"]
    if all(key in columns for key in keys):
        return np.stack([columns[key][2] for key in keys], axis=-1)
    out = _dlnk_difference(model, name)
    for j, (key, e, r) in enumerate(zip(keys, model.rate_expressions, model.reaction_objects)):
        columns[key] = (e, r, out[:, j].copy())
    return out


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
    factors, varying, constant = _factor_columns(model, dlnk_te)
    cols = [varying[..., f] for f in range(varying.shape[-1])]
    cols += [np.broadcast_to(constant[:, f], (A, R)) for f in range(constant.shape[-1])]
    return factors, np.stack(cols, axis=-1)


def _factor_columns(model, dlnk_te):
    """The factors, their altitude-dependent columns (A, R, Fv: Te, Ti, Tn) and their
    constant columns (R, Fc: EUV, n(X)), in the order of :func:`environment_factors`."""
    A, R = dlnk_te.shape
    factors = [("Te", "electron temperature (every Te-dependent rate)")]
    varying = [dlnk_te]
    for name, what in (("Ti", "ion temperature (rates of Ti and Teff)"),
                       ("Tn", "neutral temperature (rates of Tn and Teff)")):
        d = _dlnk(model, name)
        if np.any(d != 0):
            factors.append((name, what))
            varying.append(d)
    constant = []
    photo = np.array([bool(e.variables & {"photo", "photoelectron"})
                      for e in model.rate_expressions], float)
    if photo.any():
        factors.append(("EUV", "solar photon flux (every photo and photoelectron rate)"))
        constant.append(photo)
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
            constant.append(count)
    return (factors, np.stack(varying, axis=-1),
            np.stack(constant, axis=-1) if constant else np.zeros((R, 0)))


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


def _column_blocks(model, n, J, live):
    """The live column's Jacobian as level blocks D (L, S, S) (the chemistry ``J`` at the
    caller's rates and the transport's own share), the transported species t, their
    coupling between levels (rows, cols, values in the transported unknowns, level-major)
    and a function giving the whole sparse matrix.

    From ``model.column_jacobian(n)``: its entries between levels are the transport's, and
    its level blocks minus the chemistry at the model's rates are the transport's diagonal.
    """
    import scipy.sparse as sp

    mech = model.mechanism
    L, S, _ = J.shape
    keep = np.repeat(live, S)
    Jc = model.column_jacobian(n).tocsc()
    Jc = (Jc if live.all() else Jc[keep][:, keep]).tocoo()
    Jc.sum_duplicates()
    lv_r, lv_c = Jc.row // S, Jc.col // S
    off = lv_r != lv_c
    on = ~off
    D = np.zeros((L, S, S))
    D[lv_r[on], Jc.row[on] % S, Jc.col[on] % S] = Jc.data[on]
    k_model = model.rate_coefficients()[live]
    D += np.asarray(J, float) - mech.jacobian(n[live], k_model, model.given[live])
    t = np.union1d(Jc.row[off] % S, Jc.col[off] % S)
    tpos = np.full(S, -1)
    tpos[t] = np.arange(t.size)
    coupling = (lv_r[off] * t.size + tpos[Jc.row[off] % S],
                lv_c[off] * t.size + tpos[Jc.col[off] % S], Jc.data[off])

    def whole():
        return (sp.block_diag(list(D), format="csr")
                + sp.csr_matrix((Jc.data[off], (Jc.row[off], Jc.col[off])),
                                shape=(L * S, L * S)))
    return D, t, coupling, whole


def _sparse_solve(J, B):
    """−J⁻¹ B with one sparse LU of the whole (live) column."""
    from scipy.sparse.linalg import splu

    from ionochem.solve.column import ORDERING
    A, S, K = B.shape
    lu = splu(J.tocsc(), permc_spec=ORDERING)
    x = lu.solve(np.ascontiguousarray(B.reshape(-1, K)))
    return -x.reshape(A, S, K)


def _coupled_part(X, t, coupling, XB_t):
    """w = C x_t, (A, T, K), with x_t solving (I + X_tt C) x_t = (X B)_t (``XB_t``).

    With X = D⁻¹ and C the coupling of the transported species t between levels, J x = B
    reads x = X (B − C x); its transported part solves (I + X_tt C) x_t = (X B)_t, a banded
    system of A × len(t) unknowns (tridiagonal for one species; LAPACK gbsv) for every
    right-hand side at once, and then x = X B − X_{·t} w: the Schur complement of the
    untransported species."""
    import scipy.sparse as sp
    from scipy.linalg import solve_banded

    A, T, K = XB_t.shape
    Xt = X[:, :, t]                                     # (A, S, T)
    rows, cols, vals = coupling
    # Entries of X_tt C: row p of the block of C's row i, column j.
    q = np.arange(T)
    p = (rows // T * T)[:, None] + q[None, :]           # (nnz, T)
    v = Xt[rows // T][:, t, :][np.arange(rows.size)[:, None], q[None, :], (rows % T)[:, None]]
    v = v * vals[:, None]
    j = np.broadcast_to(cols[:, None], p.shape)
    lo = max(int((p - j).max(initial=0)), 0)
    up = max(int((j - p).max(initial=0)), 0)
    ab = np.zeros((lo + up + 1, A * T))
    ab[up] = 1.0
    np.add.at(ab, (up + p - j, j), v)
    xt = solve_banded((lo, up), ab, XB_t.reshape(A * T, K), check_finite=False)
    C = sp.csr_matrix((vals, (rows, cols)), shape=(A * T, A * T))
    return (C @ xt).reshape(A, T, K)


def _coupled_responses(D, t, coupling, nu, r, rows, columns, varying, constant, inv_d,
                       te_column, te_forcing):
    """The transported column's normalized responses (K, L, species) without forming the
    right-hand sides: as :func:`_level_responses` with the level blocks D (chemistry and
    the transport diagonal), then the correction Z_{·t} w of :func:`_coupled_part`
    (Z = diag(1/n) rows D⁻¹), and ``te_forcing`` (L, S), ∂(transport)/∂ln Te, in column
    ``te_column``."""
    X = np.linalg.inv(D)
    Z = np.matmul(rows, X)
    Z *= inv_d[:, :, None]                              # (L, species, S)
    out = _products(Z, nu, r, columns, varying, constant)              # −Z B
    XB_t = -_products(X[:, t, :], nu, r, columns, varying, constant)   # (K, L, T)
    if te_column is not None:
        out[te_column] -= np.matmul(Z, te_forcing[:, :, None])[..., 0]
        XB_t[te_column] += np.matmul(X[:, t, :], te_forcing[:, :, None])[..., 0]
    w = _coupled_part(X, t, coupling, np.ascontiguousarray(XB_t.transpose(1, 2, 0)))
    out += np.matmul(Z[:, :, t], w).transpose(2, 0, 1)
    return out


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
    dens = ds["density"].values                         # (species, A)
    names = tuple(str(x) for x in ds["species"].values)
    roles = tuple(str(x) for x in ds["role"].values)
    n = dens[[names.index(s) for s in model.species]].T     # (A, S)
    factors, varying, constant = model.structural(
        ("sensitivity", "factors"), lambda: _factor_columns(model, _dlnk(model, "Te")))
    R = len(model.reactions)
    norm = _responses(model, n, model.rate_coefficients(), dens, names, roles, None,
                      varying, constant, te_column=R)
    return _dataset(model, ds, names, roles, norm, R, factors)


def parameter_sensitivities(model, n, k=None, columns=None, te=False):
    """Normalized sensitivities to a few parameters, without a dataset (for fits).

    Parameters
    ----------
    model : ionochem.Model
    n : ndarray (altitude, solved species)
        A steady state of ``model`` with rate coefficients ``k``.
    k : ndarray (altitude, reaction), optional
        The rate coefficients (default the model's own): a model that differs only by
        scaled rates is its base model with scaled ``k``.
    columns : ndarray (reaction, P), optional
        Each parameter as a combination of ln k (a column of ones on a family's members
        for one common multiplier).
    te : bool
        Add ∂ln n/∂ln Te as the last parameter.

    Returns
    -------
    ndarray (altitude, species, P [+ 1])
        ∂ln n/∂θ of every species of ``model.species_table`` (NaN at dark levels).
    """
    from ionochem.solve.threads import single_thread_blas
    k = model.rate_coefficients() if k is None else k
    dens, names, roles = model.species_table(n)
    A, R = k.shape
    varying = (_dlnk(model, "Te") if te else np.zeros((A, R, 0))).reshape(A, R, -1)
    columns = np.zeros((R, 0)) if columns is None else np.asarray(columns, float)
    with single_thread_blas():
        out = _responses(model, n, k, dens.T, tuple(names), tuple(roles), columns, varying,
                         np.zeros((R, 0)), te_column=columns.shape[1] if te else None)
    return out.transpose(1, 2, 0)


def _responses(model, n, k, dens, names, roles, columns, varying, constant, te_column):
    """Normalized responses (K, altitude, species) of every reported species to the
    columns: ``columns`` (R, P; None: every reaction), then the altitude-dependent
    ``varying`` (A, R, Fv) and the constant ``constant`` (R, Fc) combinations of ln k.
    ``te_column`` is the column of ln Te (transport adds its own Te dependence there)."""
    mech = model.mechanism
    rows = _output_rows(model, names, roles)            # (species, S)
    given = model.given
    live = np.any(n > 0, axis=1)
    L = np.nonzero(live)[0]
    R = k.shape[1]
    K = (R if columns is None else columns.shape[1]) + varying.shape[2] + constant.shape[1]
    d = dens[:, L].T                                    # (L, species)
    with np.errstate(divide="ignore"):
        inv_d = np.where(d > 0, 1.0 / d, 0.0)
    if not L.size:                                      # all dark
        out = np.zeros((K, 0, len(names)))
    else:
        r = mech.rates(k[L], mech.full_densities(n[L], given[L]))     # (L, R)
        J = mech.jacobian(n[L], k[L], given[L])
        if model.transport is not None:
            g = _transport_te_column(model, n)[L] if te_column is not None else None
            out = _transported(model, n, J, live, r, rows, columns, varying[L], constant,
                               inv_d, te_column, g)
        else:
            out = _level_responses(J, mech.nu, r, rows, columns, varying[L], constant, inv_d)
    if L.size == dens.shape[1]:
        return out
    norm = np.full((K, dens.shape[1], len(names)), np.nan)
    norm[:, L] = out
    return norm


def _transported(model, n, J, live, r, rows, columns, varying, constant, inv_d, te_column,
                 g):
    """Responses (K, L, species) of a transport-coupled column: by the Schur complement
    (:func:`_coupled_responses`), else (every species coupled, a singular block) from the
    right-hand sides and one sparse LU of the whole column."""
    D, t, coupling, whole = _column_blocks(model, n, J, live)
    nu = model.mechanism.nu
    if t.size < D.shape[1]:
        try:
            return _coupled_responses(D, t, coupling, nu, r, rows, columns, varying,
                                      constant, inv_d, te_column, g)
        except (np.linalg.LinAlgError, RuntimeError):
            pass
    rhs = nu[None, :, :] * r[:, None, :]                # (L, S, R) = ∂f/∂ln k_j = ν_j r_j
    B = np.concatenate([rhs if columns is None else rhs @ columns,
                        np.matmul(rhs, varying), rhs @ constant], axis=-1)
    if te_column is not None:
        B[..., te_column] += g
    dn = _sparse_solve(whole(), B)                      # (L, S, K)
    S = dn.shape[1]
    out = (dn.transpose(2, 0, 1).reshape(-1, S) @ rows.T).reshape(B.shape[2], len(J), -1)
    out *= inv_d[None]
    return out


def _level_responses(J, nu, r, rows, columns, varying, constant, inv_d):
    """Each reported species' normalized response −rows J⁻¹ B / n at each (uncoupled)
    level, (K, L, species), for B = ν diag(r) [columns | varying | constant] (columns None:
    the identity) and ``inv_d`` (L, species) = 1/n (0 where n = 0).

    ν diag(r) has one column per reaction but only S rows, so the product is taken as
    ((diag(1/n) rows J⁻¹) ν) diag(r): the levels' inverses come from one batched LU
    (``np.linalg.inv``), which at these block sizes costs a quarter of LAPACK's solve with
    R + F right-hand sides and gives the same values (to ~1e-14 of the largest
    sensitivity, tests/test_sensitivity_fast.py); the rest are matrix products. A singular
    level falls back to least squares on the whole right-hand side.
    """
    Lv = J.shape[0]
    Nsp, S = rows.shape
    try:
        G = np.matmul(rows, np.linalg.inv(J))           # (L, species, S)
    except np.linalg.LinAlgError:
        rhs = nu[None, :, :] * r[:, None, :]
        B = np.concatenate([rhs if columns is None else rhs @ columns,
                            np.matmul(rhs, varying), rhs @ constant], axis=-1)
        dn = np.stack([np.linalg.lstsq(J[a], B[a], rcond=None)[0] for a in range(Lv)])
        out = (dn.transpose(2, 0, 1).reshape(-1, S) @ rows.T).reshape(-1, Lv, Nsp)
        out *= -inv_d[None]
        return out
    G *= inv_d[:, :, None]
    return _products(G, nu, r, columns, varying, constant)


def _products(G, nu, r, columns, varying, constant):
    """−G B for B = ν diag(r) [columns | varying | constant] per level: (K, L, rows of G),
    from G (L, rows, S)."""
    Lv, Nsp, S = G.shape
    P = nu.shape[1] if columns is None else columns.shape[1]
    Fv, Fc = varying.shape[2], constant.shape[1]
    out = np.empty((P + Fv + Fc, Lv, Nsp))
    # H[j, l, i] = −(G ν)[l, i, j] r[l, j]: the response to ln k_j.
    H = out[:P] if columns is None else np.empty((nu.shape[1], Lv, Nsp))
    np.matmul(nu.T, G.reshape(-1, S).T, out=H.reshape(H.shape[0], -1))
    H *= -r.T[:, :, None]
    if columns is not None:
        out[:P] = (columns.T @ H.reshape(H.shape[0], -1)).reshape(P, Lv, Nsp)
    if Fv:
        # Σ_j H[j, l, i] varying[l, j, f], level by level.
        out[P:P + Fv] = np.matmul(H.transpose(1, 2, 0), varying).transpose(2, 0, 1)
    if Fc:
        out[P + Fv:] = (constant.T @ H.reshape(H.shape[0], -1)).reshape(Fc, Lv, Nsp)
    return out


def _output_rows(model, names, roles):
    """(species, S) weights: each reported species' density change as a combination of the
    solved ones (its row of the mechanism's affine map E; zero for fixed species; a derived
    total the sum of its members' rows), kept per model."""
    def build():
        mech = model.mechanism
        S = len(model.species)
        W = np.zeros((len(names), S))
        for i, name in enumerate(names):
            if name in mech.all_species and roles[i] != "fixed":
                W[i] = mech.E[mech.index(name), :S]
        for tot in mech.derived:
            W[names.index(tot.name)] = sum(W[names.index(m)] for m in tot.members)
        W.flags.writeable = False
        return W
    return model.structural(("sensitivity", "rows", names, roles), build)


def _sum_units(values, umap):
    """``values`` (R, ...) summed over each unit's members → (U, ...), the members added in
    the order of the reaction list (the sums of
    :func:`ionochem.analysis.units.sum_over_units`): each unit starts from its first member
    and the others are added slab by slab (few units have more than one)."""
    index = np.asarray(umap.index)
    first = np.full(len(umap.names), -1)
    extra = []
    for j, u in enumerate(index):
        if first[u] < 0:
            first[u] = j
        else:
            extra.append(j)
    out = values[first]
    for j in extra:
        out[index[j]] += values[j]
    return out


def _template(model, ds, names, roles, factors):
    """The coordinates of a result (from the solution's, the unit map and the factors) as an
    empty dataset, kept per model; its arrays are read-only (results share them)."""
    def build():
        umap = unit_map(model)
        coords = {c: ds.coords[c].variable.copy(deep=True)
                  for c in ("species", "role", "reaction", "equation", "altitude")}
        coords.update(unit_coords(umap))
        coords["factor"] = ("factor", np.array([f for f, _ in factors], dtype=object))
        coords["factor_description"] = ("factor", np.array([d for _, d in factors],
                                                          dtype=object))
        tpl = xr.Dataset(coords=coords)
        for c in tpl.coords.values():
            if isinstance(c.values, np.ndarray):
                c.values.flags.writeable = False
        return umap, tpl
    A = ds.sizes["altitude"]
    return model.structural(("sensitivity", "template", names, roles, A), build)


def _dataset(model, ds, names, roles, norm, R, factors):
    """The result dataset from the normalized sensitivities (R + F, altitude, species)."""
    umap, tpl = _template(model, ds, names, roles, factors)
    by_unit = _sum_units(norm[:R], umap)                # (U, A, species)
    T = (2, 0, 1)
    res = tpl.assign({
        "sensitivity": xr.Variable(
            ("species", "reaction", "altitude"), norm[:R].transpose(T),
            {"units": "1", "long_name": "normalized sensitivity d ln n / d ln k at steady "
             "state"}),
        "sensitivity_Te": xr.Variable(
            ("species", "altitude"), norm[R].T,
            {"units": "1", "long_name": "normalized sensitivity d ln n / d ln Te through "
             "every Te-dependent rate"}),
        "sensitivity_environment": xr.Variable(
            ("species", "factor", "altitude"), norm[R:].transpose(T),
            {"units": "1", "long_name": "normalized local sensitivity d ln n / d ln "
             "(environment factor)"}),
        "sensitivity_unit": xr.Variable(
            ("species", "unit", "altitude"), by_unit.transpose(T),
            {"units": "1", "long_name": "normalized sensitivity to one common multiplier of "
             "every member of a unit, d ln n / d ln lambda = sum of the members' d ln n / "
             "d ln k"}),
        "density": ds["density"].variable,
    })
    res.attrs = {**ds.attrs, "method": "exact: one LU factorisation of the steady-state "
                 "Jacobian per level, J dn/dln k = -nu r"}
    return res
