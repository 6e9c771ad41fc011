"""Sampling of the Monte Carlo: rate and environment factors drawn from their
uncertainties, and the picklable kernel that carries them to the solver.

See :mod:`ionochem.analysis.uncertainty` for the sampling rules (one draw per reaction per
sample, shared by every level; bands as one-sigma ranges; environment factors) and the random
streams. This module works on a built :class:`ionochem.Model`; it never reads files.
"""

from __future__ import annotations

import hashlib

import numpy as np

from ionochem.errors import InputError, SolverError

ENV_EUV = "euv"
ENV_TE = "Te"
PHOTO_SOURCES = frozenset({"photo", "photoelectron"})


def parse_spreads(text, *, where="--vary-environment"):
    """``"euv=1.2,O=1.15,Te=1.1"`` → ``{"euv": 1.2, "O": 1.15, "Te": 1.1}``.

    Each value is a one-sigma multiplicative factor, ≥ 1. Raises :class:`InputError`.
    """
    out = {}
    if text is None:
        return out
    for item in str(text).split(","):
        item = item.strip()
        if not item:
            continue
        key, sep, value = item.partition("=")
        key, value = key.strip(), value.strip()
        if not sep or not key or not value:
            raise InputError(f"{item!r} must look like NAME=FACTOR (euv=1.2)", file=where)
        try:
            f = float(value)
        except ValueError:
            raise InputError(f"factor {value!r} for {key} is not a number", file=where) from None
        if not np.isfinite(f) or f < 1:
            raise InputError(f"factor for {key} must be a number >= 1 (a one-sigma "
                             "multiplicative factor)", file=where)
        if key.lower() == ENV_EUV:
            key = ENV_EUV
        out[key] = f
    return out


def photo_reactions(model):
    """Boolean mask (R,) of the reactions whose rate law reads ``photo``/``photoelectron``.

    Uses the model's current rate expressions (after ``--set`` changes) when it exposes
    them, else the reaction list's ``k`` expressions.
    """
    exprs = (getattr(model, "rate_expressions", None)
             or [r.k for r in model.reaction_list.reactions])
    return np.array([bool(e.variables & PHOTO_SOURCES) for e in exprs], bool)


def _light_mechanism(mech):
    """A copy of the Mechanism without the reaction list (smaller to send to workers).

    The tendency, Jacobian and production/loss need only the arrays.
    """
    light = object.__new__(type(mech))
    light.__dict__.update({k: v for k, v in mech.__dict__.items()
                           if k not in ("reaction_list", "reactions")})
    return light


class SampleKernel:
    """Everything a worker needs to solve samples: arrays, no compiled expressions.

    Attributes
    ----------
    mechanism : Mechanism
        Without its reaction list (see :func:`_light_mechanism`).
    k0 : ndarray (A, R)
        Central rate coefficients.
    sigma_low, sigma_high : ndarray (A, R)
        ln of the one-sigma factor below and above the centre (ln f for both, or the band).
    given0 : ndarray (A, G)
        Fixed densities, cm-3.
    photo_mask : ndarray (R,) of bool
        Reactions scaled by the EUV factor.
    ln_given : ndarray (G,)
        ln of the one-sigma factor of each fixed density (0: not varied).
    ln_euv, ln_te : float
        ln of the EUV and electron-temperature factors (0: not varied).
    rtol : float
        Steady-state tolerance.
    altitude_km : ndarray (A,)
    factor_names : list of str
        Names of the columns of the draws ``z``: reactions, given species, ``euv``, ``Te``.
    transport : SpeciesTransport or None
        The model's O+ transport operator (each sample's column is then solved as one
        coupled system), at the nominal temperatures.
    """

    def __init__(self, model, environment=None, member_correlation=1.0):
        environment = dict(environment or {})
        self._set_units(model, member_correlation)
        mech = model.mechanism
        self.mechanism = _light_mechanism(mech)
        k0 = np.asarray(model.rate_coefficients(), float)
        A, R = k0.shape
        self.k0 = k0
        lnf = np.log(np.asarray(model.uncertainty_factors(), float))
        lo = lnf.copy()
        hi = lnf.copy()
        self.banded = sorted(model.rate_bands())
        with np.errstate(divide="ignore", invalid="ignore"):
            for j, (low, high) in model.rate_bands().items():
                ok = (k0[:, j] > 0) & (np.asarray(low) > 0)
                hi[:, j] = np.where(ok, np.log(np.asarray(high) / k0[:, j]), 0.0)
                lo[:, j] = np.where(ok, np.log(k0[:, j] / np.asarray(low)), 0.0)
        self.sigma_low = np.clip(lo, 0.0, None)
        self.sigma_high = np.clip(hi, 0.0, None)
        self.given0 = np.asarray(model.given, float)
        self.given_names = list(mech.given)
        self.photo_mask = photo_reactions(model)
        allowed = [g for g in mech.given if g in mech.fixed]
        self.ln_given = np.zeros(len(self.given_names))
        self.ln_euv = 0.0
        self.ln_te = 0.0
        for key, f in environment.items():
            if key == ENV_EUV:
                if not self.photo_mask.any():
                    raise InputError("euv: no reaction of this list uses photo or "
                                     "photoelectron rates", file="--vary-environment")
                self.ln_euv = float(np.log(f))
            elif key == ENV_TE:
                self.ln_te = float(np.log(f))
            elif key in allowed:
                self.ln_given[self.given_names.index(key)] = np.log(f)
            else:
                raise InputError(f"unknown environment factor {key!r}: use euv, Te or a "
                                 f"fixed neutral of this mechanism ({', '.join(allowed)})",
                                 file="--vary-environment")
        self.environment = {k: float(v) for k, v in environment.items()}
        self.rtol = float(getattr(model.scenario.solve, "rtol", 1e-10))
        self.altitude_km = np.asarray(model.altitude_km, float)
        self.reactions = list(model.reactions)
        self.species = list(model.species)
        self.factor_names = (self.reactions + self.given_names + [ENV_EUV, ENV_TE]
                             + [self.unit_names[u] for u in self.shared_units])
        self.R, self.G = R, len(self.given_names)
        # O+ transport couples the levels of each sample's column; its coefficients stay at
        # the nominal temperatures (a sampled Te changes the rates only).
        self.transport = getattr(model, "transport", None)
        # The central (nominal) column, where every sample's Newton starts: a warm start
        # without fixed-point sweeps, or with transport a few iterations of the coupled
        # column. None (the solver's own start) when the central column itself does not
        # solve without transport.
        try:
            self.n_central = model.steady_densities().n
        except SolverError:
            if self.transport is not None:
                raise
            self.n_central = None
        self.n_nominal = self.n_central if self.transport is not None else None

    def _set_units(self, model, rho):
        """The units of analysis and the correlation of their members' draws."""
        from ionochem.analysis.units import unit_map
        rho = float(rho)
        if not 0.0 <= rho <= 1.0:
            raise InputError(f"member correlation {rho:g} must be between 0 and 1",
                             file="--member-correlation")
        umap = unit_map(model)
        self.member_correlation = rho
        self.unit_names = list(umap.names)
        self.unit_kinds = list(umap.kinds)
        self.unit_index = umap.index
        sizes = np.bincount(umap.index, minlength=len(umap.names))
        #: Units of two or more members, each with one shared normal (after Te) unless the
        #: members are drawn independently.
        self.shared_units = [int(u) for u in np.nonzero(sizes > 1)[0]] if rho > 0 else []

    # -------------------------------------------------------------- layout of the draws
    @property
    def width(self) -> int:
        """Number of standard normals per sample (columns of ``z``): one per reaction, per
        given species, ``euv``, ``Te``, then one per shared unit."""
        return self.R + self.G + 2 + len(self.shared_units)

    def unit_column(self, u) -> int | None:
        """Column of z of the shared normal of unit ``u`` (None: a plain reaction, or
        members drawn independently)."""
        try:
            return self.R + self.G + 2 + self.shared_units.index(int(u))
        except ValueError:
            return None

    def member_draws(self, z):
        """ε (B, R): each reaction's standard normal. A member of a unit of several
        reactions draws √ρ z_unit + √(1 − ρ) z_own, ρ the member correlation (1: the whole
        unit one draw; 0: independent); a plain reaction draws z_own."""
        z = np.asarray(z, float)
        eps = z[:, :self.R].copy()
        if not self.shared_units:
            return eps
        a = np.sqrt(self.member_correlation)
        b = np.sqrt(max(0.0, 1.0 - self.member_correlation))
        cols = np.array([self.unit_column(u) if self.unit_column(u) is not None else -1
                         for u in self.unit_index])
        shared = cols >= 0
        eps[:, shared] = a * z[:, cols[shared]] + b * eps[:, shared]
        return eps

    def sampled_columns(self):
        """The columns of z that move some rate, with the unit each belongs to:
        ``[(column, unit index)]`` — a plain reaction's own, a shared unit's normal, and the
        members' own normals when ρ < 1. Only reactions with an uncertainty count."""
        varied = set(int(j) for j in self.varied_reactions())
        out = []
        for u in range(len(self.unit_names)):
            members = [j for j in np.nonzero(self.unit_index == u)[0] if j in varied]
            if not members:
                continue
            col = self.unit_column(u)
            if col is not None:
                out.append((col, u))
            if col is None or self.member_correlation < 1.0:
                out += [(int(j), u) for j in members]
        return out

    @property
    def te_column(self) -> int:
        return self.R + self.G + 1

    def environment_columns(self):
        """``{name: column of z}`` of the varied environment factors."""
        out = {}
        for g, name in enumerate(self.given_names):
            if self.ln_given[g] != 0:
                out[name] = self.R + g
        if self.ln_euv:
            out[ENV_EUV] = self.R + self.G
        if self.ln_te:
            out[ENV_TE] = self.te_column
        return out

    def varied_reactions(self):
        """Indices of the reactions with a non-zero uncertainty at some level."""
        return np.nonzero(np.any((self.sigma_low > 0) | (self.sigma_high > 0), axis=0))[0]

    def log_sigma(self):
        """Symmetric one-sigma ln-factor (A, R): ln f, or the band's (ln high − ln low)/2."""
        return 0.5 * (self.sigma_low + self.sigma_high)

    def digest(self) -> str:
        """SHA-256 of every array the samples depend on (for the resume manifest)."""
        h = hashlib.sha256()
        for arr in (self.k0, self.sigma_low, self.sigma_high, self.given0,
                    self.photo_mask.astype(np.int8), self.ln_given,
                    np.array([self.ln_euv, self.ln_te, self.rtol, self.member_correlation]),
                    self.unit_index, self.altitude_km,
                    self.mechanism.nu_all, self.mechanism.slots):
            a = np.ascontiguousarray(arr)
            h.update(str(a.shape).encode())
            h.update(a.tobytes())
        if self.transport is not None:
            op = self.transport.operator
            for arr in (op.a, op.b, op.source, np.array([self.transport.index])):
                h.update(np.ascontiguousarray(arr, float).tobytes())
        h.update("\n".join(self.factor_names + self.species).encode())
        return h.hexdigest()

    # -------------------------------------------------------------- perturbed inputs
    def perturbed(self, z, k_base=None):
        """Rate coefficients (B·A, R) and fixed densities (B·A, G) of the samples ``z``.

        Parameters
        ----------
        z : ndarray (B, width)
            Standard-normal draws, one row per sample.
        k_base : ndarray (B, A, R), optional
            Central rates at each sample's temperatures (``Te`` varied); default ``k0``.
        """
        z = np.asarray(z, float)
        B, R, G = z.shape[0], self.R, self.G
        eps = self.member_draws(z)[:, None, :]
        d = np.where(eps > 0, eps * self.sigma_high[None], eps * self.sigma_low[None])
        if self.ln_euv:
            d = d + (z[:, R + G] * self.ln_euv)[:, None, None] * self.photo_mask
        base = self.k0[None] if k_base is None else k_base
        k = (base * np.exp(d)).reshape(-1, R)
        given = self.given0[None] * np.exp(z[:, None, R:R + G] * self.ln_given)
        return k, given.reshape(B * self.k0.shape[0], G)


def draw_normals(seed: int, start: int, stop: int, width: int):
    """Standard normals (stop − start, width) of samples start … stop − 1.

    Sample i uses ``default_rng(SeedSequence(seed, spawn_key=(i,)))`` (the i-th child of
    ``SeedSequence(seed).spawn(N)``), so its draws do not depend on the batching.
    """
    out = np.empty((stop - start, width))
    for row, i in enumerate(range(start, stop)):
        rng = np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(i,)))
        out[row] = rng.standard_normal(width)
    return out


def base_rates(model, kernel, z):
    """Central rates at each sample's electron temperature (B, A, R), or None (Te fixed)."""
    if not kernel.ln_te:
        return None
    env = model.environment
    factor = np.exp(np.asarray(z, float)[:, kernel.te_column] * kernel.ln_te)
    return np.asarray(model.rate_coefficients(
        temperatures={"Te": np.asarray(env.Te, float)[None] * factor[:, None]}), float)
