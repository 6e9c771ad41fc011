"""A user's photon spectrum with its own cross sections, read from a CSV file.

:func:`load_user_spectrum` reads a commented-CSV file (``#`` comments allowed, one header
row, numeric rows; nothing in the file is executed; :mod:`ionochem.io.csvtable`). Columns:

- ``wl_lo_A``, ``wl_hi_A`` (required): bin edges in angstrom, ``wl_lo_A <= wl_hi_A``; equal
  edges make a single line.
- ``photons_cm2_s`` (required): photon flux in the bin at 1 AU, photons cm-2 s-1 (not per
  angstrom).
- ``sigma_abs_<ABSORBER>``: absorption cross section of that absorber, e.g. ``sigma_abs_O``,
  ``sigma_abs_N2``; absorbers without a column do not attenuate.
- ``sigma_ion_<CHANNEL KEY>``: ionization cross section of one channel, the key written as
  in the channel table of :mod:`ionochem.environment.crosssections`, e.g.
  ``sigma_ion_O->O+``, ``sigma_ion_O->O+(2D)``, ``sigma_ion_N2->N+``.
  Other keys of the form ``ABSORBER->PRODUCTS`` are accepted and passed through (their
  threshold cannot be checked).
- ``sigma_dis_N2->N(2D)+N``: N2 dissociation cross section; when absent and both
  ``sigma_abs_N2`` and some N2 ionization columns are given, it is derived as absorption minus
  ionization (never below zero).

Every ``sigma_`` column is in units of 1e-18 cm2 (megabarn), as in the packaged table. Every
channel's absorber must also have a ``sigma_abs_`` column, and each channel cross section
must not exceed its absorber's absorption. The file's spectrum replaces the default one; to
add soft X-rays to EUVAC, give only the new bins and combine with
``solar_spectrum(...).concatenate(load_user_spectrum(path))``.

The channels, thresholds and :class:`~ionochem.environment.crosssections.Spectrum` are those
of :mod:`ionochem.environment.crosssections`; this module only reads and checks the file.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ionochem.environment.crosssections import (
    CHANNELS,
    MEGABARN_CM2,
    Spectrum,
    channel_absorber,
    threshold_violations,
)
from ionochem.errors import InputError, ScenarioError
from ionochem.io.tables import read_csv_columns

__all__ = ["load_user_spectrum"]

_REQUIRED = ("wl_lo_A", "wl_hi_A", "photons_cm2_s")
#: The N2 dissociation channel, derived as absorption minus ionization when not given.
_DISSOCIATION = "N2->N(2D)+N"


def load_user_spectrum(path, *, where: str | None = None,
                       scenario_file=None) -> Spectrum:
    """Read a photon spectrum with its own cross sections from a CSV file.

    The column naming is given in the module docstring (``wl_lo_A``, ``wl_hi_A``,
    ``photons_cm2_s``, ``sigma_abs_<ABSORBER>``, ``sigma_ion_<CHANNEL>``,
    ``sigma_dis_N2->N(2D)+N``; cross sections in 1e-18 cm2).

    Parameters
    ----------
    path : str or Path
        The CSV file.
    where : str, optional
        Scenario key that names the file (``"photons.spectrum"``); errors are then
        :class:`~ionochem.errors.ScenarioError` at that key.
    scenario_file : str or Path, optional
        The scenario file, for errors with ``where``.

    Returns
    -------
    Spectrum
        Fluxes at 1 AU, cross sections in cm2.

    Raises
    ------
    InputError or ScenarioError
        Unreadable file, missing or unknown columns, negative values, bins with
        ``wl_lo_A > wl_hi_A`` or non-positive wavelengths, a channel without its absorber's
        absorption column or larger than it, or a cross section beyond its channel's
        threshold.
    """
    path = Path(path)
    header, data, lines = read_csv_columns(path, where=where, scenario_file=scenario_file)

    def fail(msg, line=None):
        if where is not None:
            place = path.name if line is None else f"{path.name} line {line}"
            return ScenarioError(f"{place}: {msg}", file=scenario_file or path, key=where)
        return InputError(msg, file=path, line=line)

    cols = dict(zip(header, data.T, strict=True))
    lo, hi, flux = _bins(header, cols, lines, fail)
    sigma_abs, sigma_chan = _cross_sections(header, cols, lines, fail)
    neg = np.flatnonzero(flux < 0)
    if neg.size:
        raise fail("column 'photons_cm2_s' has a negative value", lines[neg[0]])
    _add_dissociation(sigma_abs, sigma_chan)
    _check_channel_sums(sigma_abs, sigma_chan, lines, fail)
    spectrum = Spectrum(lo, hi, flux, sigma_abs, sigma_chan, f"user spectrum {path.name}")
    bad = threshold_violations(spectrum)
    if bad:
        key, i = bad[0]
        raise fail(f"column 'sigma_{'ion' if CHANNELS[key].ionizing else 'dis'}_{key}' is "
                   f"non-zero in a bin wholly longward of the channel's threshold "
                   f"{CHANNELS[key].threshold_A:.1f} angstrom", lines[i])
    return spectrum


def _bins(header, cols, lines, fail):
    """The bin edges and the flux, checked: ``0 < wl_lo_A <= wl_hi_A``."""
    for name in _REQUIRED:
        if name not in cols:
            raise fail(f"required column {name!r} is missing (columns: {', '.join(header)})")
    lo, hi, flux = cols["wl_lo_A"], cols["wl_hi_A"], cols["photons_cm2_s"]
    for i in range(lo.size):
        if not 0 < lo[i] <= hi[i]:
            raise fail(f"bin edges must satisfy 0 < wl_lo_A <= wl_hi_A, got {lo[i]:g} and "
                       f"{hi[i]:g}", lines[i])
    return lo, hi, flux


def _cross_sections(header, cols, lines, fail):
    """``sigma_abs_`` columns by absorber and ``sigma_ion_``/``sigma_dis_`` by channel, cm2."""
    sigma_abs: dict[str, np.ndarray] = {}
    sigma_chan: dict[str, np.ndarray] = {}
    for name in header:
        if name in _REQUIRED:
            continue
        values = cols[name]
        neg = np.flatnonzero(values < 0)
        if neg.size:
            raise fail(f"column {name!r} has a negative value", lines[neg[0]])
        if name.startswith("sigma_abs_") and len(name) > len("sigma_abs_"):
            sigma_abs[name[len("sigma_abs_"):]] = values * MEGABARN_CM2
        elif name.startswith("sigma_ion_") or name.startswith("sigma_dis_"):
            key = name[len("sigma_ion_"):]
            try:
                channel_absorber(key)
            except InputError as exc:
                raise fail(f"column {name!r}: {exc.message}") from None
            if key in CHANNELS and CHANNELS[key].ionizing != name.startswith("sigma_ion_"):
                kind = "sigma_ion_" if CHANNELS[key].ionizing else "sigma_dis_"
                raise fail(f"column {name!r}: channel {key!r} must be written {kind}{key}")
            sigma_chan[key] = values * MEGABARN_CM2
        else:
            raise fail(f"unknown column {name!r}: expected wl_lo_A, wl_hi_A, photons_cm2_s, "
                       "sigma_abs_<ABSORBER>, sigma_ion_<CHANNEL> or sigma_dis_<CHANNEL>")
    return sigma_abs, sigma_chan


def _add_dissociation(sigma_abs, sigma_chan):
    """N2 dissociation as N2 absorption minus its ionization channels (never below zero),
    when the file gives both and no dissociation column."""
    n2_ion = [k for k in sigma_chan if channel_absorber(k) == "N2" and k != _DISSOCIATION]
    if _DISSOCIATION not in sigma_chan and "N2" in sigma_abs and n2_ion:
        sigma_chan[_DISSOCIATION] = np.maximum(
            sigma_abs["N2"] - sum(sigma_chan[k] for k in n2_ion), 0.0)


def _check_channel_sums(sigma_abs, sigma_chan, lines, fail):
    """Every channel has its absorber's absorption column, and the channels of an absorber
    add up to no more than it."""
    by_absorber: dict[str, np.ndarray] = {}
    for key, sigma in sigma_chan.items():
        absorber = channel_absorber(key)
        if absorber not in sigma_abs:
            raise fail(f"channel {key!r} has no absorption column 'sigma_abs_{absorber}'")
        by_absorber[absorber] = by_absorber.get(absorber, 0.0) + sigma
    for absorber, total in by_absorber.items():
        over = np.flatnonzero(total > sigma_abs[absorber] * (1 + 1e-6) + 1e-30)
        if over.size:
            raise fail(f"the channels of {absorber} add up to more than its absorption "
                       f"'sigma_abs_{absorber}'", lines[over[0]])
