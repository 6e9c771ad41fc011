"""Rate coefficient against detuning energy for the flattened electron distribution of a
merged-beam or electron-cooler experiment.

The distribution
----------------
In the ion frame the electrons of a cooler or merged beam drift along the beam axis with
velocity v_d (detuning energy E_d = m_e v_d^2 / 2) and have separate transverse and
longitudinal temperatures, kT_perp >> kT_par (the "flattened" Maxwellian):

    f(v) = m/(2 pi kT_perp) exp(-m v_perp^2 / 2 kT_perp)
           * sqrt(m/(2 pi kT_par)) exp(-m (v_par - v_d)^2 / 2 kT_par),

and the measured (merged-beam) rate coefficient is alpha(E_d) = integral sigma(v) v f(v) d3v
(Kilgus et al. 1992, Phys. Rev. A 46, 5730; Schippers et al. 2001, Astrophys. J. 555, 1027,
arXiv:astro-ph/0101552; Schippers 2015, Nucl. Instrum. Methods B 350, 61,
arXiv:1407.6500 -- the volume and page of the last two *(from memory)*).

The method used here
--------------------
The two factors of f are integrated in turn (our own reduction of that integral, checked
in the tests against a direct scipy quadrature over the 3-D distribution):

1. Transverse: for a longitudinal velocity w, with E_w = m w^2/2,
   h(w) = H(E_w),  H(E') = integral_{E'}^inf sigma(E) v(E) exp(-(E - E')/kT_perp) dE / kT_perp,
   a one-sided exponential smoothing of sigma v over energy. With sigma piecewise linear
   between the user's points (zero outside), each segment's integral has a closed form in
   terms of erfcx (the scaled complementary error function, so nothing overflows), and
   H at the points follows from H_i = exp(-(E_{i+1}-E_i)/kT_perp) H_{i+1} + I_i
   (a short sequential pass over the energy points, O(energy)).
2. Longitudinal: alpha(v_d) = integral h(w) N(w - v_d; 0, kT_par/m) dw, a Gaussian
   convolution summed (trapezoid rule) on a uniform w grid fine enough to resolve the
   Gaussian (spacing <= sqrt(kT_par/m)/32; relative error ~1e-5 in the tests), kT_perp
   mapped to w, and any energy segment across which H changes sharply (a resonance
   narrower than kT_perp), restricted to +-8 standard deviations around each
   v_d (a banded sum, O(detuning x band)).

With kT_perp = kT_par = kT and v_d = 0 this is the isotropic Maxwellian rate; far from
threshold (E_d >> kT) alpha -> sigma(E_d) v_d.

This module knows nothing of reactions or of the atmosphere.
"""

from __future__ import annotations

import warnings

import numpy as np
from scipy.special import erfcx, ndtr

from ionochem.errors import InputError
from ionochem.rates.common import (
    ELECTRON_MASS_G,
    EV_ERG,
    check_cross_sections,
    check_energy_grid,
    check_kt,
    check_positive,
    speed_cm_s,
)

__all__ = ["beam_rate", "transverse_smoothing"]

_SQRT_PI = np.sqrt(np.pi)
_GL_X, _GL_W = np.polynomial.legendre.leggauss(8)
_HALF_WIDTH = 8.0          # Gaussian standard deviations kept on each side (e^-32 ~ 1e-14)
_PER_SIGMA = 32            # grid points per longitudinal standard deviation, at least
_MAX_GRID = 2_000_000      # largest w grid (memory); beyond it resolution is capped, with a warning
_SHARP = 0.05            # relative change of H across one segment that counts as sharp
_BLOCK = 2_000_000         # detuning x band elements evaluated at once


def _segment_integrals(a, b, tau):
    """P = int_a^b sqrt(E) e^{-(E-a)/tau} dE and R = int_a^b (E-a) sqrt(E) e^{-(E-a)/tau} dE.

    Wide segments (b - a >= tau/2) use closed forms (energies in eV, arrays broadcast):
    with y = sqrt(E/tau), int sqrt(E) e^{-E/tau} dE = -tau sqrt(E) e^{-E/tau}
    + tau^{3/2} sqrt(pi)/2 erf(y), and e^{a/tau} (erf(y_b) - erf(y_a)) = erfcx(y_a)
    - e^{-(b-a)/tau} erfcx(y_b), so nothing overflows. On narrow segments those forms lose
    digits to cancellation, so there an 8-point Gauss-Legendre rule in u = sqrt(E) is used
    (the integrands are then smooth: 2u^2 e^{-(u^2-a)/tau} and 2u^2 (u^2-a) e^{...}, with
    the exponential changing by less than e^{1/2} across the segment).
    """
    a, b = np.broadcast_arrays(np.asarray(a, float), np.asarray(b, float))
    P = np.empty(a.shape)
    R = np.empty(a.shape)
    wide = (b - a) >= 0.5 * tau
    if wide.any():
        aw, bw = a[wide], b[wide]
        d = np.exp(-(bw - aw) / tau)
        ya, yb = np.sqrt(aw / tau), np.sqrt(bw / tau)
        Pw = (tau * (np.sqrt(aw) - np.sqrt(bw) * d)
              + 0.5 * tau ** 1.5 * _SQRT_PI * (erfcx(ya) - d * erfcx(yb)))
        # int E^{3/2} e^{-E/tau} = -tau E^{3/2} e^{-E/tau} + (3 tau/2) int sqrt(E) e^{-E/tau}
        Qw = tau * (aw ** 1.5 - bw ** 1.5 * d) + 1.5 * tau * Pw
        P[wide] = Pw
        R[wide] = Qw - aw * Pw
    narrow = ~wide
    if narrow.any():
        an, bn = a[narrow], b[narrow]
        ua, ub = np.sqrt(an), np.sqrt(bn)
        half = 0.5 * (ub - ua)
        u = (0.5 * (ua + ub))[:, None] + half[:, None] * _GL_X[None, :]
        ex = np.exp(-(u - ua[:, None]) * (u + ua[:, None]) / tau)
        base = 2.0 * u * u * ex * _GL_W[None, :]
        P[narrow] = half * base.sum(axis=1)
        R[narrow] = half * (base * (u - ua[:, None]) * (u + ua[:, None])).sum(axis=1)
    return P, R


def _node_values(E, S, tau):
    """H at the energy points and the slope of sigma on each segment (module docstring)."""
    c = speed_cm_s(1.0)                          # v = c sqrt(E)
    a, b = E[:-1], E[1:]
    slope = (S[1:] - S[:-1]) / (b - a)[:, None]
    P, R = _segment_integrals(a, b, tau)
    seg = (c / tau) * (S[:-1] * P[:, None] + slope * R[:, None])    # (segment, column)
    decay = np.exp(-(b - a) / tau)
    H = np.zeros_like(S)
    # Sequential by nature (a first-order recursion); one short pass over the energy points.
    for i in range(E.size - 2, -1, -1):
        H[i] = decay[i] * H[i + 1] + seg[i]
    return H, slope


def transverse_smoothing(energy_eV, sigma_cm2, kT_perp_eV, at_energy_eV, *, nodes=None):
    """H(E') of the module docstring: sigma v smoothed over the transverse distribution.

    Parameters
    ----------
    energy_eV : ndarray, shape (energy,)
        Checked energy grid (eV).
    sigma_cm2 : ndarray, shape (energy, column)
        Cross sections (cm2), piecewise linear, zero outside the grid.
    kT_perp_eV : float
        Transverse temperature (eV).
    at_energy_eV : ndarray, shape (point,)
        Longitudinal energies E' = m w^2 / 2 (eV) where H is wanted.
    nodes : tuple, optional
        ``(H at the energy points, slopes)`` when already computed.

    Returns
    -------
    ndarray, shape (point, column)
        H in cm3 s-1 (sigma v units).
    """
    E, S, tau = energy_eV, sigma_cm2, float(kT_perp_eV)
    c = speed_cm_s(1.0)
    H, slope = _node_values(E, S, tau) if nodes is None else nodes
    x = np.asarray(at_energy_eV, float)
    out = np.zeros((x.size, S.shape[1]))
    below = x < E[0]
    if below.any():
        out[below] = np.exp(-(E[0] - x[below]) / tau)[:, None] * H[0]
    inside = ~below & (x < E[-1])
    if inside.any():
        xi = x[inside]
        k = np.clip(np.searchsorted(E, xi, side="right") - 1, 0, E.size - 2)
        s_at = S[k] + slope[k] * (xi - E[k])[:, None]
        Pp, Rp = _segment_integrals(xi, E[k + 1], tau)
        part = (c / tau) * (s_at * Pp[:, None] + slope[k] * Rp[:, None])
        out[inside] = part + np.exp(-(E[k + 1] - xi) / tau)[:, None] * H[k + 1]
    return out


def _single(value, name):
    return check_kt(value, name)


def beam_rate(energy_eV, sigma_cm2, detuning_eV, kT_perp_eV, kT_par_eV):
    """Merged-beam rate coefficient alpha(E_d) for a flattened Maxwellian.

    Parameters
    ----------
    energy_eV : array_like, shape (energy,)
        Collision-energy grid (eV), strictly increasing, >= 0, any spacing.
    sigma_cm2 : array_like, shape (energy,) or (energy, column)
        Cross sections (cm2), piecewise linear between the points, zero outside the grid;
        several columns (levels) at once.
    detuning_eV : array_like
        Detuning energies E_d = m_e v_d^2 / 2 (eV), >= 0, any shape; at most the last
        grid energy.
    kT_perp_eV, kT_par_eV : float
        Transverse and longitudinal electron temperatures (eV), > 0.

    Returns
    -------
    ndarray
        Rate coefficients (cm3 s-1), shaped ``detuning_eV.shape`` (+ ``(column,)`` when
        sigma is 2-D).
    """
    E = check_energy_grid(energy_eV)
    S, one = check_cross_sections(sigma_cm2, E.size)
    Ed = check_positive(detuning_eV, "detuning_eV", allow_zero=True)
    kT_perp = _single(kT_perp_eV, "kT_perp_eV")
    kT_par = _single(kT_par_eV, "kT_par_eV")
    if Ed.max() > E[-1]:
        raise InputError(f"detuning {Ed.max():g} eV is beyond the cross section's last "
                         f"energy {E[-1]:g} eV")
    m = ELECTRON_MASS_G
    s = np.sqrt(kT_par * EV_ERG / m)                         # longitudinal spread, cm s-1
    vd = speed_cm_s(Ed.reshape(-1))
    w_lo = vd.min() - _HALF_WIDTH * s
    w_hi = vd.max() + _HALF_WIDTH * s
    # Grid spacing: resolve the Gaussian, kT_perp and the user's energy spacing, in w.
    w_top = max(abs(w_lo), abs(w_hi))
    dw = s / _PER_SIGMA
    dw = min(dw, 0.5 * kT_perp * EV_ERG / (m * w_top))
    # Where the smoothed sigma v changes sharply within one energy segment (a resonance
    # narrower than kT_perp), the w grid must also resolve that segment.
    nodes = _node_values(E, S, kT_perp)
    H_nodes = nodes[0].max(axis=1)
    jump = np.abs(np.diff(H_nodes)) > _SHARP * np.maximum(H_nodes[1:], H_nodes[:-1])
    wE = speed_cm_s(E)
    use = jump & (wE[:-1] <= w_top)
    if use.any():
        mid = 0.5 * (wE[1:] + wE[:-1])[use]
        dE = np.diff(E)[use] * EV_ERG
        dw = min(dw, 0.5 * float(np.min(dE / (m * np.maximum(mid, s)))))
    n_grid = int(np.ceil((w_hi - w_lo) / dw)) + 1
    if n_grid > _MAX_GRID:
        warnings.warn(f"beam_rate: velocity grid capped at {_MAX_GRID} points; structure "
                      "of the cross section finer than its spacing is smoothed approximately",
                      RuntimeWarning, stacklevel=2)
        dw = (w_hi - w_lo) / (_MAX_GRID - 1)
    # h is even in w, so alpha(v_d) = int_0^inf h(w) [N(w - v_d) + N(w + v_d)] dw. Summing
    # over w >= 0 only puts the kink of h at w = 0 (sigma ~ 1/E makes h ~ h0 - c|w|) at the
    # end of the range, where the end weights 3/8, 7/6, 23/24 (Press et al. 2007, Numerical
    # Recipes, 3rd ed., eq. 4.1.14, *(from memory)*) keep the rule accurate for a smooth h.
    j_lo = max(0, int(np.floor(w_lo / dw)))
    j_hi = int(np.ceil(w_hi / dw))
    w = np.arange(j_lo, j_hi + 1) * dw
    h = transverse_smoothing(E, S, kT_perp, 0.5 * m * w * w / EV_ERG, nodes=nodes)
    end = np.array([3.0 / 8.0, 7.0 / 6.0, 23.0 / 24.0])
    coarse = dw > s / 4.0
    band = int(np.ceil(_HALF_WIDTH * s / dw)) + (1 if coarse else 0)
    offsets = np.arange(-band, band + 1)
    centre = np.rint(vd / dw).astype(np.int64)
    out = np.empty((vd.size, S.shape[1]))
    rows = max(1, _BLOCK // offsets.size)
    norm = dw / (np.sqrt(2.0 * np.pi) * s)
    for start in range(0, vd.size, rows):
        sl = slice(start, start + rows)
        j = centre[sl, None] + offsets[None, :]                      # (detuning, band)
        zm = (j * dw - vd[sl, None]) / s
        zp = (j * dw + vd[sl, None]) / s
        if coarse:
            # Grid coarser than the Gaussian (capped grid): exact Gaussian mass of each cell
            # [w_j - dw/2, w_j + dw/2] (clipped at w = 0), so the weights still sum to one.
            lo_edge = np.maximum(j - 0.5, 0.0) * dw
            hi_edge = (j + 0.5) * dw
            g = (ndtr((hi_edge - vd[sl, None]) / s) - ndtr((lo_edge - vd[sl, None]) / s)
                 + ndtr((hi_edge + vd[sl, None]) / s) - ndtr((lo_edge + vd[sl, None]) / s))
            g = np.where((j >= j_lo) & (j <= j_hi), g, 0.0)
        else:
            g = (np.exp(-0.5 * zm * zm) + np.exp(-0.5 * zp * zp)) * norm
            g = np.where((j >= j_lo) & (j <= j_hi), g, 0.0)
            g = np.where(j < 3, g * end[np.clip(j, 0, 2)], g) if j_lo == 0 else g
        idx = np.clip(j - j_lo, 0, w.size - 1)
        out[sl] = np.einsum("db,dbc->dc", g, h[idx])
    out = out.reshape(Ed.shape + (S.shape[1],))
    return out[..., 0] if one else out
