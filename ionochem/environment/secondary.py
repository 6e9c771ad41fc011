"""Secondary ionization by photoelectrons (local-absorption approximation).

Every photoionization frees a primary photoelectron of energy E = h nu - threshold
(:func:`~ionochem.environment.photorates.photoelectron_energies_eV`). Slowing down in the
gas, it makes Y(E) further ion pairs. The yield used here is

    Y(E) = (E - E0) / W   for E > E0,     Y(E) = 0 otherwise,

with W = 35 eV per ion pair (Rees 1989, Physics and Chemistry of the Upper Atmosphere,
Cambridge, *(common practice)*) and E0 = 15 eV, the bottom of the 15-20 eV region below which
a photoelectron makes no further ion pair at all (docs/physics.md §4; a 584 angstrom photon
on O gives a 7.6 eV electron and nothing more). Y(E) tends to E/W at high energy, the regime
of hundreds of eV and more where W = 35 eV holds; between 15 and ~100 eV this linear form is
an approximation *(common practice)*, the place to improve with the published
secondary-to-primary ratios per bin (Richards & Torr 1988, J. Geophys. Res. 93, 4060).

The secondary ion pairs at an altitude,

    P_sec(z) = sum_channels sum_bins n_absorber(z) J_c,bin(z) Y(E_c,bin)   (cm-3 s-1),

are shared among N2, O2 and O in proportion to n_s sigma_s, with sigma_s the total
electron-impact ionization cross section at 100 eV (:data:`ELECTRON_IMPACT_100EV_CM2`), and
then split over products (:class:`SecondaryParameters`). The result is returned per molecule
of the target (s-1), like the photo frequencies.

Validity: the photoelectrons are assumed to lose their energy where they are made. That holds
below about 250 km, where their range is short compared with the scale height; above, they
escape along the field line and the local estimate is too high *(common practice)*. The
scenario switch ``[photons] secondary`` turns it off (``enabled=False`` here).

What this module must not do: it does not transport electrons, compute their energy
spectrum, or know about reactions.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from types import MappingProxyType

import numpy as np

from ionochem.environment.crosssections import Spectrum, channel_absorber
from ionochem.environment.photorates import photo_frequencies, photoelectron_energies_eV
from ionochem.errors import InputError

#: Mean energy per ion pair at high electron energy, eV (Rees 1989, *(common practice)*).
W_EV = 35.0
#: Energy below which a photoelectron makes no further ion pair, eV (docs/physics.md §4:
#: "about 15-20 eV"; the lower end is used, *(common practice)*).
YIELD_THRESHOLD_EV = 15.0

#: Total electron-impact ionization cross sections at 100 eV, cm2 *(from memory)*:
#: N2 2.5e-16 (Itikawa 2006, J. Phys. Chem. Ref. Data 35, 31), O2 2.4e-16 (Itikawa 2009,
#: J. Phys. Chem. Ref. Data 38, 1), O 1.5e-16 (Thompson, Shah & Gilbody 1995, J. Phys. B 28,
#: 1321). Only their ratios matter here.
ELECTRON_IMPACT_100EV_CM2 = MappingProxyType({"N2": 2.5e-16, "O2": 2.4e-16, "O": 1.5e-16})

#: Channel keys returned by :func:`secondary_frequencies` (without the ``photoelectron:``
#: prefix the environment adds).
SECONDARY_CHANNELS = ("N2->N2+", "N2->N+", "O2->O2+", "O2->O+", "O->O+", "O->O+(2D)",
                      "O->O+(2P)", "N2->N(2D)+N")


@dataclass(frozen=True)
class SecondaryParameters:
    """How secondary ion pairs are shared among targets and products.

    Attributes
    ----------
    w_eV : float
        Energy per ion pair at high energy (eV); Rees 1989, *(common practice)*.
    threshold_eV : float
        Yield threshold E0 (eV); see the module docstring.
    impact_cross_sections_cm2 : Mapping[str, float]
        Target -> total electron-impact ionization cross section used for the sharing.
    n2_to_n_plus : float
        Fraction of N2 ionizations that give N+ + N: 0.2 (docs/physics.md §4; partial
        cross sections near 100 eV, Itikawa 2006, *(from memory)*).
    o2_to_o_plus : float
        Fraction of O2 ionizations that give O+ + O: 0.25 (partial cross sections near
        100 eV compiled by Itikawa 2009, *(from memory)*).
    o_plus_states : tuple of 3 floats
        Shares of O+(4S), O+(2D), O+(2P) in electron-impact ionization of O: 0.4, 0.4, 0.2
        *(from memory; common practice)*.
    n2_dissociation_per_ionization : float
        Electron-impact dissociations of N2 into N(2D) + N(4S) per N2 ionization: 0.5
        *(common practice, from memory; the neutral dissociation cross section of N2 near
        100 eV is about half the ionization one, Cosby 1993, J. Chem. Phys. 98, 9560)*.
    """

    w_eV: float = W_EV
    threshold_eV: float = YIELD_THRESHOLD_EV
    impact_cross_sections_cm2: Mapping[str, float] = field(
        default_factory=lambda: dict(ELECTRON_IMPACT_100EV_CM2))
    n2_to_n_plus: float = 0.2
    o2_to_o_plus: float = 0.25
    o_plus_states: tuple[float, float, float] = (0.4, 0.4, 0.2)
    n2_dissociation_per_ionization: float = 0.5

    def __post_init__(self):
        if not self.w_eV > 0 or not self.threshold_eV >= 0:
            raise InputError("secondary ionization: w_eV must be > 0 and threshold_eV >= 0")
        for name in ("n2_to_n_plus", "o2_to_o_plus"):
            if not 0 <= getattr(self, name) <= 1:
                raise InputError(f"secondary ionization: {name} must be within [0, 1]")
        if (len(self.o_plus_states) != 3 or min(self.o_plus_states) < 0
                or abs(sum(self.o_plus_states) - 1) > 1e-9):
            raise InputError("secondary ionization: o_plus_states must be three non-negative "
                             "shares adding up to 1")
        if self.n2_dissociation_per_ionization < 0:
            raise InputError("secondary ionization: n2_dissociation_per_ionization must be "
                             ">= 0")


def ionization_yield(energy_eV, *, threshold_eV: float = YIELD_THRESHOLD_EV,
                     w_eV: float = W_EV) -> np.ndarray:
    """Secondary ion pairs made by one photoelectron of energy E.

    Parameters
    ----------
    energy_eV : array_like
        Photoelectron energy (eV).
    threshold_eV : float, optional
        E0 (eV): no ion pair below it.
    w_eV : float, optional
        Energy per ion pair (eV) at high energy.

    Returns
    -------
    ndarray
        Y(E) = max(E - E0, 0) / W, the shape of ``energy_eV``; Y/(E/W) -> 1 as E grows.
    """
    energy = np.asarray(energy_eV, dtype=float)
    return np.maximum(energy - threshold_eV, 0.0) / w_eV


def secondary_ion_pair_production(spectrum: Spectrum, slant_columns: Mapping[str, np.ndarray],
                                  densities_cm3: Mapping[str, np.ndarray], *,
                                  params: SecondaryParameters | None = None,
                                  per_bin_frequencies: Mapping[str, np.ndarray] | None = None
                                  ) -> np.ndarray:
    """Volume rate of secondary ion pairs P_sec (cm-3 s-1).

    Parameters
    ----------
    spectrum : Spectrum
        Top-of-atmosphere fluxes and cross sections.
    slant_columns : dict[str, array_like]
        Species -> slant column (cm-2), shaped (..., altitude).
    densities_cm3 : dict[str, array_like]
        Species -> number density (cm-3), shaped (..., altitude); absorbers missing here
        make no photoelectrons.
    params : SecondaryParameters, optional
        Yield parameters (default :class:`SecondaryParameters`).
    per_bin_frequencies : dict[str, ndarray], optional
        ``photo_frequencies(spectrum, slant_columns, per_bin=True)`` when the caller already
        has it (saves recomputing the attenuation).

    Returns
    -------
    ndarray, shape (..., altitude)
        Secondary ion pairs per cm3 per s.
    """
    params = SecondaryParameters() if params is None else params
    energies = photoelectron_energies_eV(spectrum)
    keys = [k for k in energies if channel_absorber(k) in densities_cm3]
    given = {} if per_bin_frequencies is None else dict(per_bin_frequencies)
    missing = [k for k in keys if k not in given]
    if missing:
        given.update(photo_frequencies(spectrum, slant_columns, channels=missing,
                                       per_bin=True))
    per_bin_frequencies = given
    total = None
    for key in keys:
        y = ionization_yield(energies[key], threshold_eV=params.threshold_eV,
                             w_eV=params.w_eV)
        if not np.any(y > 0):
            continue
        n = np.asarray(densities_cm3[channel_absorber(key)], dtype=float)
        term = n * (per_bin_frequencies[key] @ y)
        total = term if total is None else total + term
    if total is None:
        shape = np.broadcast_shapes(*(np.shape(v) for v in slant_columns.values()),
                                    *(np.shape(v) for v in densities_cm3.values()))
        total = np.zeros(shape)
    return total


def secondary_frequencies(spectrum: Spectrum, slant_columns: Mapping[str, np.ndarray],
                          densities_cm3: Mapping[str, np.ndarray], *, enabled: bool = True,
                          params: SecondaryParameters | None = None,
                          per_bin_frequencies: Mapping[str, np.ndarray] | None = None
                          ) -> dict[str, np.ndarray]:
    """Photoelectron-impact frequencies per target molecule.

    Parameters
    ----------
    spectrum : Spectrum
        Top-of-atmosphere fluxes (already scaled for the Earth-Sun distance) and cross
        sections.
    slant_columns : dict[str, array_like]
        Species -> slant column toward the Sun (cm-2), shaped (..., altitude); ``inf``
        where the ray meets the ground.
    densities_cm3 : dict[str, array_like]
        Species -> local number density (cm-3), shaped (..., altitude): the absorbers (for
        the primary production) and the targets N2, O2, O (for the sharing).
    enabled : bool, optional
        False returns zeros (the scenario's ``[photons] secondary = false``; use it where
        photoelectrons are not absorbed locally, above ~250 km).
    params : SecondaryParameters, optional
        Yield and sharing parameters.
    per_bin_frequencies : dict[str, ndarray], optional
        ``photo_frequencies(spectrum, slant_columns, per_bin=True)`` if already computed.

    Returns
    -------
    dict[str, ndarray]
        Keys of :data:`SECONDARY_CHANNELS` *without* the ``photoelectron:`` prefix
        (``"N2->N2+"``, ``"N2->N+"``, ``"O2->O2+"``, ``"O2->O+"``, ``"O->O+"``,
        ``"O->O+(2D)"``, ``"O->O+(2P)"``, ``"N2->N(2D)+N"``) -> frequency per molecule of
        the target (s-1), shape (..., altitude). ``"N2->N(2D)+N"`` counts dissociations,
        each giving one N(2D) and one N(4S).
    """
    params = SecondaryParameters() if params is None else params
    shape = np.broadcast_shapes(*(np.shape(v) for v in slant_columns.values()),
                                *(np.shape(v) for v in densities_cm3.values()))
    if not enabled:
        return {k: np.zeros(shape) for k in SECONDARY_CHANNELS}
    p_sec = np.broadcast_to(secondary_ion_pair_production(
        spectrum, slant_columns, densities_cm3, params=params,
        per_bin_frequencies=per_bin_frequencies), shape)
    sigma = params.impact_cross_sections_cm2
    weight = np.zeros(shape)
    for target in ("N2", "O2", "O"):
        if target in densities_cm3:
            weight = weight + np.asarray(densities_cm3[target], dtype=float) * sigma[target]
    # Ionizations per target molecule: P_sec sigma_s / sum_k n_k sigma_k.
    per_unit = np.divide(p_sec, weight, out=np.zeros(shape), where=weight > 0)
    f_n2 = per_unit * sigma["N2"]
    f_o2 = per_unit * sigma["O2"]
    f_o = per_unit * sigma["O"]
    s4, s2d, s2p = params.o_plus_states
    return {
        "N2->N2+": f_n2 * (1.0 - params.n2_to_n_plus),
        "N2->N+": f_n2 * params.n2_to_n_plus,
        "O2->O2+": f_o2 * (1.0 - params.o2_to_o_plus),
        "O2->O+": f_o2 * params.o2_to_o_plus,
        "O->O+": f_o * s4,
        "O->O+(2D)": f_o * s2d,
        "O->O+(2P)": f_o * s2p,
        "N2->N(2D)+N": f_n2 * params.n2_dissociation_per_ionization,
    }


__all__ = ["ELECTRON_IMPACT_100EV_CM2", "SECONDARY_CHANNELS", "SecondaryParameters",
           "W_EV", "YIELD_THRESHOLD_EV", "ionization_yield", "secondary_frequencies",
           "secondary_ion_pair_production"]
