"""Can a measurement tell a baseline rate set from a changed one? Separation in combined
standard deviations, by observable and altitude, from the exact local sensitivities.

Definitions
-----------
An observable y is a density (``N2+``, ``e``) or a ratio of two (``N2+/O+``); it is compared
in ln y. Δ = ln y_changed − ln y_baseline comes from the two steady solves (exact, not
linearised). What else is uncertain enters through the exact sensitivities g = ∂ln y/∂ln x
(:func:`ionochem.analysis.sensitivity.sensitivity`; a ratio's is the difference of its two
species'):

- the rate list's own one-sigma factors σ_j = ln f_j at each altitude (a tabulated band: its
  symmetric half-width, as in :class:`~ionochem.analysis.sampling.SampleKernel`), one
  multiplier per reaction shared by every altitude, the members of a unit of analysis
  (family, tie) correlated with ρ (``member_correlation``), units independent. The reactions
  the change touches (their whole units) are **excluded**: their uncertainty is the
  question, not noise;
- environment factors, each one log-normal multiplier over the whole column, one-sigma
  factor s: ``EUV``, ``n(O)``, ``n(N2)``, ``n(O2)``, ``Te``, ``Ti`` (:data:`DEFAULT_SPREADS`);
- a measurement error per observable, relative r and absolute a (in the observable's unit):
  var_meas(ln y) = r² + (a / y)² (first order), independent between points.

One model's covariance of ln y over all (observable, altitude) points is C_m = V Vᵀ, a column
of V per independent factor: for a unit √ρ Σ_{j∈u} g_j σ_j and, when ρ < 1, √(1 − ρ) g_j σ_j
per member (so a unit's variance is ρ (Σ_j g_j σ_j)² + (1 − ρ) Σ_j (g_j σ_j)², as
:func:`ionochem.analysis.variance.linear_variance_shares`); for an environment factor
g_e ln s_e.

**Which covariance.** The two hypotheses predict different sensitivities, and neither is
privileged: ``discern`` uses the average C = ½ (C_baseline + C_changed) (and averages the
measurement term's a²/y² likewise), the pooled covariance of a two-sample comparison. It
is symmetric (swapping baseline and change gives the same separation) and reduces to either
model's when the change is small. Then

- ``separation`` = |Δ| / sqrt(C_pp + var_meas,p) at each point p (observable, altitude);
- ``separation_profile`` = sqrt(Δᵀ (C + D)⁻¹ Δ) over the chosen altitudes of one observable
  (D the diagonal measurement noise): the factors are shared by every altitude, so C is
  strongly correlated across altitudes and the altitude rows are **not** independent;
- ``separation_band`` the same over the altitude rows of each band, and
  ``separation_combined`` over every observable and chosen altitude at once.

(C + D)⁻¹ is applied through the Woodbury identity with D diagonal and V of a few hundred
columns at most, so a profile costs O(P K²), not O(P³).

This module calls models; it reads no files and imports nothing of the command line.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ionochem.analysis.fit import model_on
from ionochem.analysis.sensitivity import environment_factors
from ionochem.analysis.units import unit_map
from ionochem.errors import InputError

#: Default one-sigma multiplicative spreads of the environment factors *(common practice:
#: typical quoted accuracies of a solar EUV flux model, about 20 %, of an empirical neutral
#: atmosphere, 10–20 % for O, N2 and O2 in the thermosphere, and of modelled or measured
#: electron and ion temperatures, 10 % and 5 %; change them with ``--environment``)*.
DEFAULT_SPREADS = {"EUV": 1.2, "n(O)": 1.2, "n(N2)": 1.1, "n(O2)": 1.15, "Te": 1.1,
                   "Ti": 1.05}

#: Default measurement error of every observable: 10 % relative, no absolute floor
#: *(common practice: the order of a rocket ion mass spectrometer's or an incoherent-scatter
#: radar's density error; change it with ``--error``)*.
DEFAULT_RELATIVE_ERROR = 0.10

#: A point's linear propagation is flagged doubtful when the model's one-sigma spread of
#: ln y exceeds this (a factor of 1.65): beyond it the first-order variance of a log-normal
#: product can depart by tens of per cent from the exact one (run the Monte Carlo check
#: there) *(common practice)*.
DOUBTFUL_LOG_SIGMA = 0.5

#: Altitude bands of the ranking, km: E, F1, lower F2 (analysis.compare.DEFAULT_BANDS) and
#: the upper F region, where N2+ recombination matters most *(common practice)*.
DISCERN_BANDS = {"E": (90.0, 150.0), "F1": (150.0, 200.0), "F2": (200.0, 300.0),
                 "upper": (300.0, 500.0)}


# ----------------------------------------------------------------------------- inputs
@dataclass(frozen=True)
class Observable:
    """A density (``denominator`` None) or a ratio of two densities."""

    numerator: str
    denominator: str | None = None

    @property
    def name(self) -> str:
        return self.numerator if self.denominator is None else \
            f"{self.numerator}/{self.denominator}"

    @property
    def units(self) -> str:
        return "cm-3" if self.denominator is None else "1"


@dataclass(frozen=True)
class MeasurementError:
    """Relative (fraction) and absolute (observable's unit) one-sigma parts."""

    relative: float = DEFAULT_RELATIVE_ERROR
    absolute: float = 0.0


@dataclass
class Uncertain:
    """What is uncertain besides the change: environment spreads and unit correlation."""

    spreads: dict = field(default_factory=lambda: dict(DEFAULT_SPREADS))
    member_correlation: float = 1.0


def parse_observables(items, species, *, where="observables"):
    """``["N2+", "N2+/O+"]`` → Observables; every species must be one of ``species``."""
    out = []
    for item in items:
        text = str(item).strip()
        num, sep, den = text.partition("/")
        num, den = num.strip(), den.strip()
        if not num or (sep and not den) or "/" in den:
            raise InputError(f"{text!r} is not an observable: give a species (N2+) or a "
                             "ratio of two (N2+/O+)", file=where)
        for s in (num, den) if sep else (num,):
            if s not in species:
                raise InputError(f"no species {s!r} in this model (species: "
                                 f"{', '.join(species)})", file=where)
        obs = Observable(num, den if sep else None)
        if obs not in out:
            out.append(obs)
    return out


def parse_error(text, *, where="error"):
    """``"0.25"`` or ``"0.25:100"`` → MeasurementError(relative, absolute); both ≥ 0."""
    rel, sep, ab = str(text).partition(":")
    try:
        r = float(rel)
        a = float(ab) if sep else 0.0
    except ValueError:
        raise InputError(f"{text!r} must look like RELATIVE[:ABSOLUTE] (0.25 or 0.1:100)",
                         file=where) from None
    if not (np.isfinite(r) and np.isfinite(a)) or r < 0 or a < 0:
        raise InputError(f"{text!r}: errors must be finite numbers >= 0", file=where)
    return MeasurementError(r, a)


def parse_environment(text, *, where="environment"):
    """``"EUV=1.3,n(O)=1.1,Tn=1.05"`` (or ``none``) → (spreads over the defaults, the names
    given).

    Names are the factors of ``sensitivity_environment`` (``Te Ti Tn EUV n(X)``); ``O`` is
    read as ``n(O)``. Each value is a one-sigma factor ≥ 1 (1 switches the factor off).
    """
    spreads, named = dict(DEFAULT_SPREADS), set()
    if text is None:
        return spreads, named
    if str(text).strip().lower() == "none":
        return {}, named
    for item in str(text).split(","):
        key, sep, value = (p.strip() for p in item.partition("="))
        if not item.strip():
            continue
        if not sep or not key:
            raise InputError(f"{item.strip()!r} must look like NAME=FACTOR (EUV=1.2)",
                             file=where)
        try:
            f = float(value)
        except ValueError:
            raise InputError(f"factor {value!r} for {key} is not a number", file=where) \
                from None
        if not np.isfinite(f) or f < 1:
            raise InputError(f"factor for {key} must be a number >= 1 (a one-sigma "
                             "multiplicative factor)", file=where)
        spreads[canonical_factor(key)] = f
        named.add(canonical_factor(key))
    return {k: v for k, v in spreads.items() if v > 1}, named


def check_spreads(spreads, model, named=()):
    """The spreads of the factors the model has: a default of a factor it lacks is dropped,
    a factor the user ``named`` that it lacks (``n(Ar)`` when Ar reacts nowhere, ``Ti``
    when no rate reads it) is refused."""
    # Te is always a factor; only the names are wanted, not the derivatives.
    dlnk_te = np.zeros((len(model.altitude_km), len(model.reactions)))
    known = [f for f, _ in environment_factors(model, dlnk_te)[0]]
    for name in named:
        if name not in known:
            raise InputError(f"no environment factor {name!r} in this model (factors: "
                             f"{', '.join(known)})", file="environment")
    return {k: v for k, v in spreads.items() if k in known}


def canonical_factor(key):
    """``euv`` → ``EUV``, ``O`` → ``n(O)``; temperatures and ``n(X)`` unchanged."""
    if key.lower() == "euv":
        return "EUV"
    if key in ("Te", "Ti", "Tn") or key.startswith("n("):
        return key
    return f"n({key})"


# ----------------------------------------------------------------------------- one model
def changed_reactions(baseline, changed):
    """Reaction ids whose rate coefficient differs between the two models, or which only
    one of them has (the reactions the change touches)."""
    kb = np.asarray(baseline.rate_coefficients(), float)
    kc = np.asarray(changed.rate_coefficients(), float)
    ib = {r: j for j, r in enumerate(baseline.reactions)}
    ic = {r: j for j, r in enumerate(changed.reactions)}
    out = set(ib) ^ set(ic)
    for r in set(ib) & set(ic):
        a, b = kb[:, ib[r]], kc[:, ic[r]]
        if not np.allclose(a, b, rtol=1e-12, atol=0.0, equal_nan=True):
            out.add(r)
        elif baseline.rate_expressions[ib[r]].text != changed.rate_expressions[ic[r]].text:
            out.add(r)
    return out


def observable_arrays(sens, observables):
    """ln y (O, A), its reaction sensitivities (O, R, A) and environment ones (O, F, A).

    ``sens`` is the dataset of :func:`ionochem.analysis.sensitivity.sensitivity`. A level
    where a species is zero or dark gives NaN.
    """
    names = [str(s) for s in sens["species"].values]
    dens = sens["density"].values
    S = sens["sensitivity"].values
    E = sens["sensitivity_environment"].values
    lny, gr, ge = [], [], []
    for ob in observables:
        i = names.index(ob.numerator)
        with np.errstate(divide="ignore", invalid="ignore"):
            ly = np.where(dens[i] > 0, np.log(np.where(dens[i] > 0, dens[i], 1.0)), np.nan)
        r, e = S[i].copy(), E[i].copy()
        if ob.denominator is not None:
            k = names.index(ob.denominator)
            with np.errstate(divide="ignore", invalid="ignore"):
                ly = ly - np.where(dens[k] > 0, np.log(np.where(dens[k] > 0, dens[k], 1.0)),
                                   np.nan)
            r, e = r - S[k], e - E[k]
        lny.append(ly)
        gr.append(r)
        ge.append(e)
    return np.array(lny), np.array(gr), np.array(ge)


def factor_columns(model, sens, observables, uncertain, exclude):
    """V (O, A, K): one column per independent factor, C_model = V Vᵀ over (O·A).

    Also returns the labels of the K columns (unit names, then environment factors).
    """
    lny, gr, ge = observable_arrays(sens, observables)
    gr, ge = np.nan_to_num(gr), np.nan_to_num(ge)
    sigma = _log_sigma(model)                             # (A, R)
    umap = unit_map(model)
    rho = float(uncertain.member_correlation)
    skip = {umap.index[j] for j, r in enumerate(model.reactions) if r in exclude}
    cols, labels = [], []
    gs = gr * sigma.T[None]                               # (O, R, A)
    for u, name in enumerate(umap.names):
        members = np.nonzero(umap.index == u)[0]
        if u in skip or not np.any(sigma[:, members] > 0):
            continue
        if len(members) == 1:
            cols.append(gs[:, members[0]])
            labels.append(name)
            continue
        if rho > 0:
            cols.append(np.sqrt(rho) * gs[:, members].sum(axis=1))
            labels.append(name)
        if rho < 1:
            cols += [np.sqrt(1 - rho) * gs[:, j] for j in members]
            labels += [model.reactions[j] for j in members]
    factors = [str(f) for f in sens["factor"].values]
    for name, s in uncertain.spreads.items():
        if name in factors:
            cols.append(ge[:, factors.index(name)] * np.log(s))
            labels.append(name)
    V = np.stack(cols, axis=-1) if cols else np.zeros(lny.shape + (0,))
    return lny, V, labels


def _log_sigma(model):
    """σ_j (A, R): ln f, or a tabulated band's symmetric half-width, as the sampling has."""
    lnf = np.log(np.asarray(model.uncertainty_factors(), float))
    bands = model.rate_bands()
    if not bands:
        return lnf
    k0 = np.asarray(model.rate_coefficients(), float)
    with np.errstate(divide="ignore", invalid="ignore"):
        for j, (low, high) in bands.items():
            ok = (k0[:, j] > 0) & (np.asarray(low) > 0)
            lnf[:, j] = np.where(ok, 0.5 * np.log(np.asarray(high) / np.asarray(low)), 0.0)
    return np.clip(lnf, 0.0, None)


def reported_species(model):
    """Names of every species a result of ``model`` reports (no solve needed)."""
    A, S = len(model.altitude_km), len(model.species)
    return list(model.species_table(np.ones((A, S)))[1])


# ----------------------------------------------------------------------------- algebra
def profile_statistic(delta, V, dvar):
    """Δᵀ (V Vᵀ + diag(dvar))⁻¹ Δ over the finite entries of ``delta`` (flattened).

    Woodbury with D = diag(dvar) when every dvar > 0; otherwise the pseudo-inverse of the
    full matrix (no measurement noise). ``V`` is (P, K), ``delta`` and ``dvar`` (P,).
    """
    delta, dvar = np.ravel(delta), np.ravel(dvar)
    V = np.reshape(V, (delta.size, -1))
    keep = np.isfinite(delta) & np.isfinite(dvar) & np.all(np.isfinite(V), axis=1)
    if not keep.any():
        return np.nan
    d, V, dv = delta[keep], V[keep], dvar[keep]
    if np.all(dv > 0):
        x = d / np.sqrt(dv)
        W = V / np.sqrt(dv)[:, None]
        small = np.eye(W.shape[1]) + W.T @ W
        wx = W.T @ x
        return float(x @ x - wx @ np.linalg.solve(small, wx))
    C = V @ V.T + np.diag(dv)
    return float(d @ np.linalg.pinv(C, hermitian=True) @ d)


@dataclass
class PointResult:
    """One condition's numbers; arrays (O, A) unless said."""

    delta: np.ndarray
    log_y_baseline: np.ndarray
    log_y_changed: np.ndarray
    var_model: np.ndarray
    var_model_baseline: np.ndarray
    var_measurement: np.ndarray
    separation: np.ndarray
    profile: np.ndarray          # (O,)
    band: np.ndarray             # (O, bands)
    combined: float
    excluded: tuple


def separate(baseline, changed, observables, errors, uncertain, *, altitude_range=None,
             bands=DISCERN_BANDS, sens_baseline=None, sens_changed=None):
    """The separation of ``observables`` between two models on one column.

    Parameters
    ----------
    baseline, changed : ionochem.Model
        Steady models on the same column.
    observables : list of Observable
    errors : dict
        Observable name → MeasurementError (missing: the default).
    uncertain : Uncertain
    altitude_range : (lo, hi) km, optional
        Altitude rows combined in ``profile`` and ``combined`` (default all).
    bands : dict name → (lo, hi) km
    sens_baseline, sens_changed : xarray.Dataset, optional
        Their sensitivities, if already computed.

    Returns
    -------
    PointResult
    """
    sb = baseline.sensitivity() if sens_baseline is None else sens_baseline
    sc = changed.sensitivity() if sens_changed is None else sens_changed
    exclude = changed_reactions(baseline, changed)
    lyb, Vb, _ = factor_columns(baseline, sb, observables, uncertain, exclude)
    lyc, Vc, _ = factor_columns(changed, sc, observables, uncertain, exclude)
    delta = lyc - lyb
    dead = ~np.isfinite(delta)
    V = np.concatenate([Vb, Vc], axis=-1) / np.sqrt(2.0)      # C = ½ (C_b + C_c)
    var_model = np.sum(V * V, axis=-1)
    rel = np.array([errors.get(o.name, MeasurementError()).relative for o in observables])
    ab = np.array([errors.get(o.name, MeasurementError()).absolute for o in observables])
    with np.errstate(divide="ignore", over="ignore", invalid="ignore"):
        a2 = 0.5 * (ab[:, None] ** 2) * (np.exp(-2 * lyb) + np.exp(-2 * lyc))
    var_meas = rel[:, None] ** 2 + np.where(ab[:, None] > 0, a2, 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        sep = np.abs(delta) / np.sqrt(var_model + var_meas)
    sep = np.where(dead, np.nan, np.where(delta == 0, 0.0, sep))
    alt = np.asarray(baseline.altitude_km, float)
    lo, hi = altitude_range if altitude_range is not None else (-np.inf, np.inf)
    chosen = (alt >= lo) & (alt <= hi)
    O = len(observables)
    profile = np.array([np.sqrt(profile_statistic(delta[o, chosen], V[o, chosen],
                                                  var_meas[o, chosen])) for o in range(O)])
    band = np.full((O, len(bands)), np.nan)
    for b, (blo, bhi) in enumerate(bands.values()):
        m = (alt >= blo) & (alt <= bhi)
        if m.any():
            band[:, b] = [np.sqrt(profile_statistic(delta[o, m], V[o, m], var_meas[o, m]))
                          for o in range(O)]
    combined = np.sqrt(profile_statistic(delta[:, chosen], V[:, chosen],
                                         var_meas[:, chosen]))
    return PointResult(delta, lyb, lyc, var_model, np.sum(Vb * Vb, axis=-1), var_meas, sep,
                       profile, band, float(combined), tuple(sorted(exclude)))


def given_electron_models(baseline, changed, balance_ion="O+"):
    """Both models with the electron density fixed to the baseline's (as a radar gives it):
    ``[solve] electrons = "table"`` with Ne on the grid, ``balance_ion`` the rest."""
    import dataclasses

    res = baseline.solve()
    ne = np.nan_to_num(res["density"].sel(species="e").values)
    out = []
    for m in (baseline, changed):
        scen = m.scenario
        solve = dataclasses.replace(scen.solve, electrons="table", balance_ion=balance_ion,
                                    electron_table="(baseline electron density)")
        out.append(model_on(m, dataclasses.replace(scen, solve=solve),
                            electron_density=ne))
    return out[0], out[1]
