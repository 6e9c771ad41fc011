"""Slant and vertical column densities of absorbers through spherical shells.

For a level at radius r0 = R + z0 and a solar zenith angle χ, the ray toward the Sun has the
impact parameter p = r0 sin χ. Let t be the distance along the ray measured from its
tangent point (the point of closest approach to the planet's centre), so that
r(t) = sqrt(p² + t²). In t the integrand n(r(t)) is smooth everywhere, the tangent point
included: integrating in t instead of r removes the 1/sqrt(r − p) singularity of
dt = r dr / sqrt(r² − p²). The column is

- χ ≤ 90°: ∫ n dt over the ray from r0 outward (t from r0 cos χ to the top);
- χ > 90°: the ray first descends to the tangent altitude z_t = (R + z0) sin χ − R and
  rises again, so the shells between p and r0 are crossed twice and those above r0 once;
- z_t < 0: the ray meets the solid body and the column is infinite (``numpy.inf``, so
  that exp(−τ) = 0).

The density profile is interpolated log-linearly between the nodes given by the caller
(piecewise exponential in altitude, exact for an isothermal layer); a segment with a zero
density at either end is interpolated linearly instead. Each segment crossed by a ray is
integrated in t by Gauss–Legendre quadrature, so the only approximation is the quadrature
of a smooth integrand over one shell (errors far below 1e-6 with shells finer than the
scale height). Above the top node each species is continued exponentially with the scale
height of the top two nodes (a species that does not decrease there gets no
continuation). The profile must reach down to every ray's tangent point: the caller
supplies neutrals below (and above) the model grid.

Many levels (more than three times the profile's nodes inside their span) with the sun
at most 88° from the zenith: the columns are computed exactly on the profile's nodes (and
±1e-4 km around them, for the slopes) and interpolated to the levels by cubic Hermite
interpolation of ln N in altitude; ≤ 1e-5 relative error in the photo rates
(``_interpolated``). Nearer the horizon every level is integrated.

Written by hand because no well-kept library offers spherical-shell columns of tabulated
profiles; the planet radius is a parameter (the Earth's mean radius is only the default).
This module knows nothing about species, cross sections or photons.
"""

from __future__ import annotations

import numpy as np

from ionochem import constants

__all__ = ["slant_columns", "vertical_columns", "column_nodes", "EARTH_RADIUS_KM"]

#: Mean radius of the Earth, km (IUGG mean radius R1 = 6371.0088 km, Moritz 1980,
#: Bull. Géodésique 54, 395; rounded as is common practice).
EARTH_RADIUS_KM = constants.EARTH_RADIUS_KM

_KM_TO_CM = 1e5  # columns are returned in cm-2 for densities in cm-3
_EXTENSION_SCALE_HEIGHTS = 40  # exp(-40) ~ 4e-18 of the top density is left out
#: Shell edges of the continuation above the top node, in units of its scale height.
_EXTENSION_EDGES = np.array([0.0, 0.25, 0.5, 0.75, 1.0, 1.5, 2.0, 3.0, 4.0, 6.0, 8.0, 12.0,
                             16.0, 24.0, 32.0, float(_EXTENSION_SCALE_HEIGHTS)])
_PAIR_BLOCK = 20000  # (ray, segment) pairs evaluated at once, bounds memory
#: Zenith angles up to which the columns of many levels are interpolated from a lattice.
INTERPOLATE_MAX_ZENITH_DEG = 88.0
_DERIVATIVE_STEP_KM = 1e-4  # central differences of ln N on the lattice


def _stack(profile_alt_km, densities):
    zp = np.asarray(profile_alt_km, dtype=float)
    if zp.ndim != 1 or zp.size < 2:
        raise ValueError("profile_alt_km must be one-dimensional with at least two nodes")
    if not np.all(np.diff(zp) > 0):
        raise ValueError("profile_alt_km must increase strictly")
    names = list(densities)
    if not names:
        raise ValueError("densities is empty")
    n = np.empty((zp.size, len(names)))
    for j, name in enumerate(names):
        col = np.asarray(densities[name], dtype=float)
        if col.shape != zp.shape:
            raise ValueError(f"density of {name} has shape {col.shape}, profile has {zp.shape}")
        if not np.all(np.isfinite(col)) or np.any(col < 0):
            raise ValueError(f"density of {name} must be finite and non-negative")
        n[:, j] = col
    return zp, names, n


def _segments(r_nodes, n):
    """Per-segment interpolation data: lower radius, width, lower density, log slope."""
    r_lo = r_nodes[:-1]
    dr = np.diff(r_nodes)
    n_lo, n_hi = n[:-1], n[1:]
    expo = (n_lo > 0) & (n_hi > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        slope = np.where(expo, np.log(np.where(expo, n_hi, 1.0) / np.where(expo, n_lo, 1.0))
                         / dr[:, None], 0.0)
    return r_lo, dr, n_lo, n_hi, expo, slope


def _top_extension(r_nodes, n):
    """Scale height (km) of each species over the top two nodes; 0 where not decreasing."""
    a, b = n[-2], n[-1]
    ok = (a > 0) & (b > 0) & (b < a)
    with np.errstate(divide="ignore", invalid="ignore"):
        h = np.where(ok, (r_nodes[-1] - r_nodes[-2]) / np.log(np.where(ok, a / b, 2.0)), 0.0)
    return h


def _leg_integrals(p, r_from, r_to, r_nodes, n, nodes, weights):
    """∫ n dt along rays of impact parameter ``p`` over the shells r_from < r < r_to.

    p, r_from, r_to: shape (legs,), with p <= r_from <= r_to. r_nodes: (K+1,). n:
    (K+1, S). Returns (legs, S) in km·cm-3.
    """
    r_lo, dr, n_lo, n_hi, expo, slope = _segments(r_nodes, n)
    r_hi = r_lo + dr
    legs, nspec = p.size, n.shape[1]
    out = np.zeros((legs, nspec))
    # (leg, segment) pairs whose shell overlaps the leg's radial range.
    mask = (r_hi[None, :] > r_from[:, None]) & (r_lo[None, :] < r_to[:, None])
    li, ki = np.nonzero(mask)
    for start in range(0, li.size, _PAIR_BLOCK):
        L = li[start:start + _PAIR_BLOCK]
        K = ki[start:start + _PAIR_BLOCK]
        pp = p[L]
        lo = np.maximum(r_lo[K], r_from[L])
        hi = np.minimum(r_hi[K], r_to[L])
        # t = sqrt(r² − p²) written as (r − p)(r + p) to keep precision near tangency.
        t_lo = np.sqrt(np.maximum(lo - pp, 0.0) * (lo + pp))
        t_hi = np.sqrt(np.maximum(hi - pp, 0.0) * (hi + pp))
        half = 0.5 * (t_hi - t_lo)
        t = t_lo[:, None] + half[:, None] * (nodes[None, :] + 1.0)  # (pairs, G)
        r = np.sqrt(pp[:, None] ** 2 + t * t)
        x = np.clip(r - r_lo[K][:, None], 0.0, dr[K][:, None])  # (pairs, G)
        # Exponential interpolation everywhere (slope 0 where a segment has a zero end) ...
        dens = slope[K][:, None, :] * x[:, :, None]  # (pairs, G, S)
        np.exp(dens, out=dens)
        dens *= n_lo[K][:, None, :]
        # ... then linear interpolation in the few segments with a zero density at one end.
        lin = ~expo[K]
        if np.any(lin):
            pi, si = np.nonzero(lin)
            kk = K[pi]
            dens[pi, :, si] = (n_lo[kk, si][:, None] + (n_hi[kk, si] - n_lo[kk, si])[:, None]
                               * x[pi] / dr[kk][:, None])
        contrib = np.einsum("pgs,g->ps", dens, weights) * half[:, None]
        # Pairs are sorted by leg: sum each leg's run of pairs.
        starts = np.flatnonzero(np.concatenate([[True], L[1:] != L[:-1]]))
        out[L[starts]] += np.add.reduceat(contrib, starts, axis=0)
    return out


def _extension_integrals(p, r_from, r_nodes, n, nodes, weights):
    """Columns above the top node, each species continued exponentially (legs, S).

    All species in one pass over common shells out to 40 of the largest scale height H,
    widening with height (:data:`_EXTENSION_EDGES`, in units of H): a shell crosses at
    most 8 H at a depth of 16 H or more, where the density is below exp(−16) of the top
    one. A species of smaller scale height is followed further and crosses more e-folds
    per shell (the ratio of the scale heights times the shell's width in H; the
    Gauss–Legendre error of the first shells, a quarter H wide, is ~1e-8 of the extension
    for a ratio of 8).
    """
    h = _top_extension(r_nodes, n)
    out = np.zeros((p.size, n.shape[1]))
    live = h > 0
    if not live.any():
        return out
    depth = _EXTENSION_EDGES * h[live].max()
    r_ext = r_nodes[-1] + depth
    with np.errstate(under="ignore"):
        n_ext = n[-1, live] * np.exp(-depth[:, None] / h[live])
    # A density that underflows would turn its shells linear: keep it positive.
    n_ext = np.maximum(n_ext, np.finfo(float).tiny)
    out[:, live] = _leg_integrals(p, np.maximum(r_from, r_nodes[-1]), np.full(p.size, np.inf),
                                  r_ext, n_ext, nodes, weights)
    return out


def column_nodes(profile_alt_km, densities, node_alt_km):
    """The profile thinned to the nodes nearest a fixed altitude grid, for slant columns.

    The cost of :func:`slant_columns` is levels × profile nodes; a profile that holds every
    model level as a node makes it quadratic in levels. Keeping, for each altitude of a
    fixed grid (``extended_grid_km`` without levels: 1 km to 150 km, 2.5 km to 400 km,
    10 km above), the profile node nearest to it makes the node count independent of the
    levels, so the columns' cost is linear in levels. Accuracy against the full profile with
    every level a node (NRLMSIS 2.1, 1,000–5,000 levels from 90 to 450 km, zenith angles
    0–100°): 6e-4 relative for N2 and O2, 2.5e-3 for O, largest at 90–115 km where ln n
    curves most (tests/test_slant.py); the same order as the grid's own interpolation error
    against NRLMSIS.

    Parameters
    ----------
    profile_alt_km : array_like, shape (node,)
        Strictly increasing profile altitudes (km).
    densities : dict[str, array_like], each shape (node,)
        Number densities (cm-3) on the profile.
    node_alt_km : array_like
        The fixed grid (km); its span is clipped to the profile's.

    Returns
    -------
    alt : ndarray, shape (kept,)
        Kept profile altitudes (km), the lowest and highest node always among them.
    dens : dict[str, ndarray]
        The densities at the kept nodes (cm-3).
    """
    zp = np.asarray(profile_alt_km, dtype=float)
    g = np.asarray(node_alt_km, dtype=float)
    g = g[(g >= zp[0]) & (g <= zp[-1])]
    j = np.clip(np.searchsorted(zp, g), 1, zp.size - 1)
    nearest = np.where(np.abs(zp[j - 1] - g) <= np.abs(zp[j] - g), j - 1, j)
    keep = np.unique(np.concatenate([[0, zp.size - 1], nearest]))
    if keep.size >= zp.size:
        return zp, {k: np.asarray(v, dtype=float) for k, v in densities.items()}
    return zp[keep], {k: np.asarray(v, dtype=float)[keep] for k, v in densities.items()}


def slant_columns(altitude_km, zenith_deg, profile_alt_km, densities, *,
                  planet_radius_km: float = EARTH_RADIUS_KM,
                  quadrature_points: int = 6) -> dict[str, np.ndarray]:
    """Column densities along the ray toward the Sun, through spherical shells.

    Parameters
    ----------
    altitude_km : array_like, shape (altitude,)
        Levels where the columns are wanted (km), inside the profile's range.
    zenith_deg : float or array_like, shape (zenith,)
        Solar zenith angles (degrees, 0–180).
    profile_alt_km : array_like, shape (node,)
        Strictly increasing altitudes (km) of the density profile. It must reach down to
        the tangent point of every ray with χ > 90° that does not meet the ground (a
        profile from 0 km always does) and should reach well above the levels.
    densities : dict[str, array_like], each shape (node,)
        Number densities (cm-3), finite and non-negative.
    planet_radius_km : float, optional
        Radius of the solid body (km); default the Earth's mean radius.
    quadrature_points : int, optional
        Gauss–Legendre points per shell crossing (default 6: relative error below 1e-6 for
        10 km shells in an NRLMSIS profile, 1e-12 for 1–2.5 km shells).

    Returns
    -------
    dict[str, ndarray]
        Column density (cm-2) per species, shape ``(altitude,)`` for a scalar
        ``zenith_deg`` and ``(zenith, altitude)`` for an array. ``numpy.inf`` where the
        ray meets the solid body (tangent altitude below 0 km).

    Raises
    ------
    ValueError
        Malformed inputs, levels outside the profile, or a ray whose tangent point lies
        above the ground but below the profile's lowest node.
    """
    zp, names, n = _stack(profile_alt_km, densities)
    z = np.atleast_1d(np.asarray(altitude_km, dtype=float))
    if z.ndim != 1:
        raise ValueError("altitude_km must be one-dimensional")
    if np.any(z < zp[0]) or np.any(z > zp[-1]):
        raise ValueError(f"levels must lie inside the profile, {zp[0]:g}..{zp[-1]:g} km")
    scalar = np.ndim(zenith_deg) == 0
    chi = np.atleast_1d(np.asarray(zenith_deg, dtype=float))
    if chi.ndim != 1 or np.any(~np.isfinite(chi)) or np.any(chi < 0) or np.any(chi > 180):
        raise ValueError("zenith_deg must be finite, within 0..180 degrees")
    R = float(planet_radius_km)
    if not R > 0:
        raise ValueError("planet_radius_km must be positive")
    nodes, weights = np.polynomial.legendre.leggauss(int(quadrature_points))
    col = np.empty((chi.size, z.size, n.shape[1]))
    lattice = _lattice(z, zp)
    fine = (chi <= INTERPOLATE_MAX_ZENITH_DEG) & (z.size > 3 * lattice.size)
    if fine.any():
        col[fine] = _interpolated(z, lattice, chi[fine], zp, n, R, nodes, weights)
    if (~fine).any():
        col[~fine] = _columns(z, chi[~fine], zp, n, R, nodes, weights)
    result = {}
    for j, name in enumerate(names):
        result[name] = col[0, :, j].copy() if scalar else col[:, :, j].copy()
    return result


def _lattice(z, zp):
    """The altitudes where the columns of many levels are computed: the profile's nodes
    inside the levels' span, and its ends."""
    inside = zp[(zp > z.min()) & (zp < z.max())]
    return np.unique(np.concatenate([[z.min()], inside, [z.max()]]))


def _interpolated(z, lattice, chi, zp, n, R, nodes, weights):
    """Columns (zenith, altitude, S) at the levels ``z`` from those on the ``lattice``:
    cubic Hermite interpolation of ln N in altitude, with the derivatives from central
    differences (±:data:`_DERIVATIVE_STEP_KM`) of exact columns.

    The lattice holds the profile's nodes, where the second derivative of N jumps (the
    density is piecewise exponential), so each interval is smooth. Error against the exact
    columns (NRLMSIS 2.1 profiles, 1,000–5,000 levels, χ ≤ 88°): ≤ 4e-6 in ln N, ≤ 1e-5
    relative in the photo rates (tests/test_slant_lattice.py). Closer to the horizon the
    ray lingers near its lowest point and N inherits the profile's kinks (3e-5 in ln N at
    89°); those angles are computed level by level. A column that is zero on the lattice
    (an absent species) is computed level by level too.
    """
    d = _DERIVATIVE_STEP_KM
    at = np.concatenate([lattice, np.minimum(lattice + d, zp[-1]),
                         np.maximum(lattice - d, zp[0])])
    c = _columns(at, chi, zp, n, R, nodes, weights).reshape(chi.size, 3, lattice.size, -1)
    out = np.empty((chi.size, z.size, n.shape[1]))
    bad = np.any(~(c > 0) | ~np.isfinite(c), axis=(1, 2))          # (zenith, S)
    with np.errstate(divide="ignore", invalid="ignore"):
        y = np.log(c)
    slope = (y[:, 1] - y[:, 2]) / (at[lattice.size:2 * lattice.size]
                                    - at[2 * lattice.size:])[None, :, None]
    i = np.clip(np.searchsorted(lattice, z) - 1, 0, lattice.size - 2)
    h = lattice[i + 1] - lattice[i]
    t = ((z - lattice[i]) / h)[None, :, None]
    h = h[None, :, None]
    y0, y1 = y[:, 0, i], y[:, 0, i + 1]
    d0, d1 = slope[:, i], slope[:, i + 1]
    out[:] = np.exp((2 * t ** 3 - 3 * t ** 2 + 1) * y0 + (t ** 3 - 2 * t ** 2 + t) * h * d0
                    + (3 * t ** 2 - 2 * t ** 3) * y1 + (t ** 3 - t ** 2) * h * d1)
    for a, sp in zip(*np.nonzero(bad)):
        out[a, :, sp] = _columns(z, chi[a:a + 1], zp, n[:, sp:sp + 1], R, nodes,
                                 weights)[0, :, 0]
    return out


def _columns(z, chi, zp, n, R, nodes, weights):
    """Exact columns (zenith, altitude, S), cm-2, of the stacked profile ``n`` (node, S)."""
    r_nodes = R + zp
    r0 = np.broadcast_to(R + z[None, :], (chi.size, z.size)).ravel()
    chir = np.broadcast_to(np.radians(chi)[:, None], (chi.size, z.size)).ravel()
    p = r0 * np.sin(chir)
    below = chir > np.pi / 2  # the ray descends to its tangent point first
    # For χ ≤ 90° the lowest point of the ray is the level itself.
    p_low = np.where(below, p, r0)
    hits = below & (p < R)
    if np.any(below & ~hits & (p < r_nodes[0])):
        zt = (p[below & ~hits & (p < r_nodes[0])] - R).min()
        raise ValueError(
            f"a ray's tangent point ({zt:.1f} km) lies below the profile's lowest node "
            f"({zp[0]:g} km): extend the profile downward")
    # Round-off can put p a hair above r0 at χ = 90°.
    p = np.minimum(p, r0)
    live = ~hits
    col = np.zeros((r0.size, n.shape[1]))
    if np.any(live):
        pl, r0l = p[live], r0[live]
        top = np.full(pl.size, r_nodes[-1])
        # The leg from the level outward, crossed once.
        up = _leg_integrals(pl, r0l, top, r_nodes, n, nodes, weights)
        up += _extension_integrals(pl, r0l, r_nodes, n, nodes, weights)
        # The shells between the tangent point and the level, crossed twice.
        bl = below[live]
        if np.any(bl):
            down = _leg_integrals(pl[bl], np.maximum(p_low[live][bl], r_nodes[0]), r0l[bl],
                                  r_nodes, n, nodes, weights)
            up[bl] += 2.0 * down
        col[live] = up * _KM_TO_CM
    col[hits] = np.inf
    return col.reshape(chi.size, z.size, n.shape[1])


def vertical_columns(altitude_km, profile_alt_km, densities) -> dict[str, np.ndarray]:
    """Vertical column densities above each level, ∫_z^∞ n dz.

    Exact for the piecewise-exponential interpolation of the profile (linear in a segment
    with a zero density at one end), with the exponential continuation above the top node
    described in the module docstring. Independent of the planet's radius.

    Parameters
    ----------
    altitude_km : array_like, shape (altitude,)
        Levels (km) inside the profile's range.
    profile_alt_km : array_like, shape (node,)
        Strictly increasing altitudes (km) of the profile.
    densities : dict[str, array_like], each shape (node,)
        Number densities (cm-3).

    Returns
    -------
    dict[str, ndarray]
        Column density (cm-2) per species, shape ``(altitude,)``.
    """
    zp, names, n = _stack(profile_alt_km, densities)
    z = np.atleast_1d(np.asarray(altitude_km, dtype=float))
    if np.any(z < zp[0]) or np.any(z > zp[-1]):
        raise ValueError(f"levels must lie inside the profile, {zp[0]:g}..{zp[-1]:g} km")
    z_lo, dz, n_lo, n_hi, expo, slope = _segments(zp, n)

    def partial(k, x):
        """∫ over segment k from its bottom + x to its top (x shaped like k)."""
        b = slope[k]
        width = (dz[k] - x)[:, None]
        nx = np.where(expo[k], n_lo[k] * np.exp(b * x[:, None]),
                      n_lo[k] + (n_hi[k] - n_lo[k]) * (x / dz[k])[:, None])
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            ex = np.where(np.abs(b * width) > 1e-8,
                          nx * np.expm1(b * width) / np.where(b == 0, 1.0, b),
                          nx * width * (1.0 + 0.5 * b * width))
        lin = 0.5 * (nx + n_hi[k]) * width
        return np.where(expo[k], ex, lin)

    kk = np.arange(zp.size - 1)
    seg_full = partial(kk, np.zeros(kk.size))  # (K, S)
    h = _top_extension(zp, n)
    above = np.concatenate([np.cumsum(seg_full[::-1], axis=0)[::-1], np.zeros((1, n.shape[1]))])
    above = above + n[-1] * h  # ∫ of n_top exp(−(z − z_top)/h) over the continuation
    k = np.clip(np.searchsorted(zp, z, side="right") - 1, 0, zp.size - 2)
    x = z - zp[k]
    col = partial(k, x) + above[k + 1]
    return {name: col[:, j] * _KM_TO_CM for j, name in enumerate(names)}
