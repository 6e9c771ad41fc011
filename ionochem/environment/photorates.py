"""Photo frequencies (s-1 per absorber molecule) from a spectrum and slant columns.

Given the slant column N_s (cm-2) of each absorber toward the Sun at every altitude and a
:class:`~ionochem.environment.crosssections.Spectrum` (top-of-atmosphere fluxes, already
scaled by (1 AU / r)^2 by the caller):

    tau(lambda, z) = sum_s sigma_abs,s(lambda) N_s(z)
    I(lambda, z)   = I_inf(lambda) exp(-tau(lambda, z))
    J_c(z)         = sum_lambda sigma_c(lambda) I(lambda, z)

J_c is the frequency of channel c per molecule of its absorber; the volume rate is
n_absorber(z) J_c(z). Everything is vectorised over altitude rows, bins and any leading axes
(time, sample) of the slant columns and fluxes.

Conventions
-----------
- Slant columns are a dict species -> array shaped (..., altitude) in cm-2; ``numpy.inf``
  marks an altitude whose ray meets the solid body: that altitude is dark in every bin (even in a
  bin where no absorber of the spectrum has a cross section), so all its frequencies are 0.
- Species in the slant columns that the spectrum does not know absorb nothing; absorbers of
  the spectrum missing from the slant columns do not attenuate (column zero).
- Channel keys are those of :data:`~ionochem.environment.crosssections.CHANNELS`, without
  any ``photo:`` prefix.

This module must not know about reactions or the neutral model, and does not compute slant
columns (see ``slant.py``).
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping

import numpy as np

from ionochem.environment.crosssections import CHANNELS, HC_EV_A, Spectrum
from ionochem.errors import InputError


def _columns(slant_columns: Mapping[str, np.ndarray]) -> dict[str, np.ndarray]:
    if not slant_columns:
        raise InputError("no slant columns given")
    cols = {k: np.asarray(v, dtype=float) for k, v in slant_columns.items()}
    for name, col in cols.items():
        if np.any(np.isnan(col)) or np.any(col < 0):
            raise InputError(f"slant column of {name} has NaN or negative values")
    return cols


def optical_depth(spectrum: Spectrum, slant_columns: Mapping[str, np.ndarray]) -> np.ndarray:
    """Optical depth tau(lambda, z).

    Parameters
    ----------
    spectrum : Spectrum
        Bins and absorption cross sections (cm2).
    slant_columns : dict[str, array_like]
        Species -> slant column (cm-2), each shaped (..., altitude); they broadcast.

    Returns
    -------
    ndarray, shape (..., altitude, bin)
        Optical depth; ``inf`` at dark altitudes (a column is ``inf``).
    """
    cols = _columns(slant_columns)
    shape = np.broadcast_shapes(*(c.shape for c in cols.values()))
    tau = np.zeros(shape + (spectrum.n_bins,))
    dark = np.zeros(shape, dtype=bool)
    for name, col in cols.items():
        inf = np.isinf(col)
        dark |= inf
        sigma = spectrum.sigma_abs_cm2.get(name)
        if sigma is None:
            continue
        tau += np.where(inf, 0.0, col)[..., np.newaxis] * sigma
    tau[dark] = np.inf
    return tau


def attenuated_flux(spectrum: Spectrum, slant_columns: Mapping[str, np.ndarray]) -> np.ndarray:
    """Photon flux I(lambda, z) = I_inf exp(-tau) at every altitude.

    Parameters
    ----------
    spectrum : Spectrum
        Fluxes shaped (..., bin) at the top of the atmosphere (photons cm-2 s-1).
    slant_columns : dict[str, array_like]
        Species -> slant column (cm-2), shaped (..., altitude).

    Returns
    -------
    ndarray, shape (..., altitude, bin)
        Photons cm-2 s-1; zero at dark altitudes. Leading axes are the broadcast of those of
        the fluxes and the columns.
    """
    tau = optical_depth(spectrum, slant_columns)
    return spectrum.photons_cm2_s[..., np.newaxis, :] * np.exp(-tau)


def _sigma_matrix(spectrum: Spectrum, channels: Iterable[str] | None) -> tuple[list[str],
                                                                             np.ndarray]:
    keys = list(spectrum.channels if channels is None else channels)
    unknown = [k for k in keys if k not in spectrum.sigma_channel_cm2]
    if unknown:
        raise InputError(f"the spectrum has no cross section for channel(s) {unknown}; it has "
                         f"{list(spectrum.channels)}")
    if not keys:
        return keys, np.zeros((spectrum.n_bins, 0))
    return keys, np.stack([spectrum.sigma_channel_cm2[k] for k in keys], axis=-1)


def photo_frequencies(spectrum: Spectrum, slant_columns: Mapping[str, np.ndarray], *,
                      channels: Iterable[str] | None = None,
                      per_bin: bool = False) -> dict[str, np.ndarray]:
    """Photo frequency of every channel at every altitude.

    Parameters
    ----------
    spectrum : Spectrum
        Top-of-atmosphere fluxes (photons cm-2 s-1, already scaled for the Earth-Sun
        distance) and cross sections.
    slant_columns : dict[str, array_like]
        Species -> slant column toward the Sun (cm-2), each shaped (..., altitude), e.g.
        (altitude,) or (time, altitude); ``numpy.inf`` where the ray meets the ground.
    channels : iterable of str, optional
        Channel keys wanted (default: every channel of the spectrum).
    per_bin : bool, optional
        Return the contribution of each bin instead of the sum (for photoelectrons).

    Returns
    -------
    dict[str, ndarray]
        Channel key (``"O->O+"``, ``"N2->N(2D)+N"``, ...) -> frequency per absorber molecule
        (s-1), shape (..., altitude), or (..., altitude, bin) with ``per_bin``.

    Notes
    -----
    ``"N2->N(2D)+N"`` is the N2 dissociation frequency; each event gives one N(2D) and one
    N(4S). ``"NO->NO+"`` comes from Lyman alpha alone.
    """
    keys, sigma = _sigma_matrix(spectrum, channels)
    flux = attenuated_flux(spectrum, slant_columns)
    if per_bin:
        return {k: flux * sigma[:, i] for i, k in enumerate(keys)}
    j = flux @ sigma
    return {k: j[..., i] for i, k in enumerate(keys)}


def unattenuated_frequencies(spectrum: Spectrum, *, channels: Iterable[str] | None = None,
                             per_bin: bool = False) -> dict[str, np.ndarray]:
    """Photo frequencies at the top of the atmosphere (no absorption).

    Parameters
    ----------
    spectrum : Spectrum
        Fluxes (photons cm-2 s-1), shape (..., bin), and cross sections.
    channels : iterable of str, optional
        Channel keys wanted (default: all of the spectrum's).
    per_bin : bool, optional
        Return each bin's contribution, shape (..., bin).

    Returns
    -------
    dict[str, ndarray]
        Channel key -> frequency per absorber molecule (s-1), shape (...) (a 0-d array for
        a single flux vector).
    """
    keys, sigma = _sigma_matrix(spectrum, channels)
    flux = spectrum.photons_cm2_s
    if per_bin:
        return {k: flux * sigma[:, i] for i, k in enumerate(keys)}
    j = flux @ sigma
    return {k: j[..., i] for i, k in enumerate(keys)}


def photoelectron_energies_eV(spectrum: Spectrum, *,
                              channels: Iterable[str] | None = None) -> dict[str, np.ndarray]:
    """Energy of the primary photoelectron, h nu - threshold, per channel and bin.

    Parameters
    ----------
    spectrum : Spectrum
        Bins (angstrom) and channel cross sections.
    channels : iterable of str, optional
        Channel keys (default: the spectrum's ionizing channels with a known threshold).

    Returns
    -------
    dict[str, ndarray]
        Channel key -> energy (eV), shape (bin,), never negative. The photon energy of a
        range bin is taken at its centre; for a bin that straddles the threshold, at the
        middle of the part shortward of the threshold. Zero where the channel's cross
        section is zero. Neutral-dissociation channels have no photoelectron and are left
        out, as are channels whose threshold is unknown.
    """
    if channels is None:
        channels = [k for k in spectrum.channels if k in CHANNELS and CHANNELS[k].ionizing]
    lo, hi = spectrum.wl_lo_A, spectrum.wl_hi_A
    out = {}
    for key in channels:
        if key not in CHANNELS:
            raise InputError(f"channel {key!r} has no known threshold")
        chan = CHANNELS[key]
        lam_eff = np.where(lo < hi, 0.5 * (lo + np.minimum(hi, chan.threshold_A)), lo)
        energy = np.maximum(HC_EV_A / lam_eff - chan.threshold_eV, 0.0)
        out[key] = np.where(spectrum.sigma_channel_cm2[key] > 0, energy, 0.0)
    return out
