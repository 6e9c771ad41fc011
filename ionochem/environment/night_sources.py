"""Night-time photon sources: solar lines scattered into the night sky by the geocorona.

When the Sun is down, the E and F regions are still ionized by solar photons that reach them
after resonant scattering: Lyman alpha (1216 angstrom) and Lyman beta (1026 angstrom)
scattered by geocoronal hydrogen, He II 304 angstrom by plasmaspheric He+, He I 584 angstrom
by interplanetary and geocoronal helium (Strobel et al. 1974, J. Geophys. Res. 79, 3171
*(from memory)*; the rocket maps of Young et al. 1975, Radio Sci. 10, 297: "intensities
vary from several kilorayleighs for Lyman alpha to a few rayleighs for He II"). Lyman
alpha ionizes NO, Lyman beta O2 (its 1025.7 angstrom line lies just shortward of the 1027
angstrom O2 threshold), the helium lines O, N2 and O2.
Together with starlight (not included here) they keep a night E region of (1-4)e3 cm-3
(Strobel, Opal & Meier 1980, Planet. Space Sci. 28, 1027).

Intensities (overhead, at the top of the absorbing atmosphere, rayleigh) in
:data:`NIGHT_LINES`:

- Lyman alpha 3 kR: "several kilorayleighs" (Young et al. 1975); 3 kR is a mid-latitude
  value *(common practice)*.
- Lyman beta 10 R, measured at 227 km (Science 160, 990, 1968, "Detection of Lyman-beta and
  helium resonance radiation in the night sky").
- He I 584 and He II 304: the same rocket's helium filter gave 12 R if the signal was all
  584 angstrom or 4.8 R if all 304; it is taken here as half of each, 6 R and 2.4 R
  *(common practice: an even split of an unresolved signal)*.

Geometry: each line's intensity is taken as isotropic over the upper hemisphere and
attenuated along every slant path of a plane-parallel atmosphere, so the photon flux
arriving at a level from all directions (the quantity ionization rates need) is

    F(z) = 2 pi I E_2(tau(z)),   2 pi I = I_R * 1e6 / 2   photons cm-2 s-1

with tau the vertical optical depth above z and E_2 the exponential integral of order 2
(Chandrasekhar 1960, Radiative Transfer, for a diffuse beam; *(common practice)*);
1 R = 1e6 / (4 pi) photons cm-2 s-1 sr-1 (Hunten, Roach & Chamberlain 1956, J. Atmos.
Terr. Phys. 8, 345 *(from memory)*). Light scattered
up from below is neglected. Cross sections are those of the EUVAC table at the same lines
(``crosssections.py``), and for Lyman alpha its NO and O2 values.

The sources act at every level, day and night; by day they are negligible beside direct
sunlight (the scattered Lyman alpha is ~0.3 % of the solar line). Their photoelectrons (He II
304 angstrom on O gives 27 eV) go through the secondary module like the solar ones.

What this module must not do: know reactions, or move with the Sun (the intensities are
constant); the night sky brightness varies by factors of 2-4 with direction, season and
solar activity, which is left out.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from ionochem.environment.crosssections import (
    LYMAN_ALPHA_A,
    SIGMA_NO_LYMAN_ALPHA_CM2,
    SIGMA_O2_ABS_LYMAN_ALPHA_CM2,
    Spectrum,
    euvac_cross_sections,
)
from ionochem.environment.euvac import euvac_table
from ionochem.environment.photorates import optical_depth

#: Photons cm-2 s-1 per rayleigh of an isotropic hemisphere, 2 pi * 1e6 / (4 pi).
HEMISPHERE_PHOTONS_PER_R = 0.5e6


@dataclass(frozen=True)
class NightLine:
    """One scattered line of the night sky.

    Attributes
    ----------
    name : str
        Human name, carried into the result (``"He II 304 A"``).
    wavelength_A : float
        Line centre (angstrom); for the EUV lines, an EUVAC line bin.
    intensity_R : float
        Overhead intensity at the top of the absorbing atmosphere (rayleigh).
    source : str
        Where the intensity comes from.
    """

    name: str
    wavelength_A: float
    intensity_R: float
    source: str


NIGHT_LINES = (
    NightLine("geocoronal Lyman alpha 1216 A", LYMAN_ALPHA_A, 3000.0,
              "several kR, Young et al. 1975, Radio Sci. 10, 297; 3 kR (common practice)"),
    NightLine("geocoronal Lyman beta 1026 A", 1025.72, 10.0,
              "10 R at 227 km, Science 160, 990 (1968)"),
    NightLine("He I 584 A", 584.33, 6.0,
              "half of the 12 R helium signal, Science 160, 990 (1968) (common practice)"),
    NightLine("He II 304 A", 303.78, 2.4,
              "half of the 4.8 R helium signal, Science 160, 990 (1968) (common practice)"),
)


@lru_cache(maxsize=1)
def night_spectrum() -> Spectrum:
    """The night lines as a :class:`Spectrum` whose flux is the hemispheric photon flux.

    Returns
    -------
    Spectrum
        One line bin per :data:`NIGHT_LINES` entry; ``photons_cm2_s`` is 2 pi I (photons
        cm-2 s-1 over the upper hemisphere, unattenuated); cross sections from the EUVAC
        table at the same lines, and for Lyman alpha NO ionization 2e-18 cm2 and O2
        absorption 1e-20 cm2 (``crosssections.py``).
    """
    table = euvac_table()
    sigma_abs, sigma_chan = euvac_cross_sections()
    lines = np.array([ln.wavelength_A for ln in NIGHT_LINES])
    flux = np.array([ln.intensity_R for ln in NIGHT_LINES]) * HEMISPHERE_PHOTONS_PER_R
    index = []
    for ln in NIGHT_LINES[1:]:
        hit = np.flatnonzero((table["wl_lo_A"] == ln.wavelength_A)
                             & (table["wl_hi_A"] == ln.wavelength_A))
        index.append(int(hit[0]))
    lya_abs = {"NO": SIGMA_NO_LYMAN_ALPHA_CM2, "O2": SIGMA_O2_ABS_LYMAN_ALPHA_CM2}
    abs_ = {k: np.concatenate([[lya_abs.get(k, 0.0)], v[index]])
            for k, v in sigma_abs.items()}
    chan = {k: np.concatenate([[SIGMA_NO_LYMAN_ALPHA_CM2 if k == "NO->NO+" else 0.0],
                               v[index]]) for k, v in sigma_chan.items()}
    return Spectrum(lines, lines, flux, abs_, chan,
                    "night sky: " + ", ".join(ln.name for ln in NIGHT_LINES))


def exponential_integral_e2(x):
    """E_2(x) = ∫_1^∞ exp(−x t) / t² dt for x ≥ 0 (E_2(0) = 1, E_2(∞) = 0), elementwise.

    Written out because scipy.special, the only library function at hand, costs 30–150 ms
    to import for this one call. For x ≤ 1, E_2 = exp(−x) − x E_1(x) with the power series
    E_1(x) = −γ − ln x − Σ_k (−x)^k / (k k!) (Abramowitz & Stegun 1964, 5.1.11 and 5.1.14);
    above, the continued fraction of E_n (A&S 5.1.22) evaluated by the modified Lentz
    method (Press et al., Numerical Recipes, 3rd ed., §6.3). Agrees with
    ``scipy.special.expn(2, x)`` to 1e-13 relative (tests/test_night_sources.py).
    """
    x = np.asarray(x, dtype=float)
    out = np.zeros(x.shape)
    small = (x <= 1.0) & (x > 0)
    out[x == 0] = 1.0
    if small.any():
        xs = x[small]
        term = np.ones_like(xs)
        series = np.zeros_like(xs)
        for k in range(1, _E2_SERIES_TERMS + 1):
            term = term * (-xs) / k
            series += term / k
        e1 = -np.euler_gamma - np.log(xs) - series
        out[small] = np.exp(-xs) - xs * e1
    large = (x > 1.0) & np.isfinite(x)
    if large.any():
        xl = x[large]
        b = xl + 2.0
        c = np.full_like(xl, 1.0 / _E2_TINY)
        d = 1.0 / b
        h = d.copy()
        for i in range(1, _E2_FRACTION_TERMS + 1):
            a = -i * (1.0 + i)
            b = b + 2.0
            d = 1.0 / (a * d + b)
            c = b + a / c
            step = c * d
            h *= step
            if np.all(np.abs(step - 1.0) < 1e-16):
                break
        out[large] = h * np.exp(-xl)
    return out


_E2_SERIES_TERMS = 25      # x <= 1: the next term is below 1/(26 * 26!) ~ 1e-28
_E2_FRACTION_TERMS = 200   # x > 1: the fraction converges in fewer than 60 steps at x = 1
_E2_TINY = 1e-300          # Lentz's stand-in for a zero denominator


def night_frequencies(vertical_columns: Mapping[str, np.ndarray], *,
                      spectrum: Spectrum | None = None,
                      per_bin: bool = False) -> dict[str, np.ndarray]:
    """Photo frequencies of every channel by the scattered night lines.

    Parameters
    ----------
    vertical_columns : dict[str, array_like]
        Absorber -> vertical column above each level (cm-2), shape (altitude,).
    spectrum : Spectrum, optional
        The lines (default :func:`night_spectrum`).
    per_bin : bool, optional
        Return each line's contribution, shape (altitude, line), for the secondaries.

    Returns
    -------
    dict[str, ndarray]
        Channel key -> frequency per absorber molecule (s-1), shape (altitude,):
        sum over lines of sigma_c 2 pi I E_2(tau).
    """
    spectrum = night_spectrum() if spectrum is None else spectrum
    tau = optical_depth(spectrum, vertical_columns)
    flux = spectrum.photons_cm2_s * exponential_integral_e2(tau)
    out = {}
    for key, sigma in spectrum.sigma_channel_cm2.items():
        out[key] = flux * sigma if per_bin else flux @ sigma
    return out


def night_rates(vertical_columns: Mapping[str, np.ndarray],
                densities_cm3: Mapping[str, np.ndarray], *,
                secondary: bool = True) -> tuple[dict[str, np.ndarray], dict[str, np.ndarray]]:
    """Photo and photoelectron frequencies of the night sources on the grid.

    Parameters
    ----------
    vertical_columns : dict[str, array_like]
        Absorber -> vertical column above each level (cm-2), shape (altitude,).
    densities_cm3 : dict[str, array_like]
        Local densities of N2, O2, O (cm-3), shape (altitude,), for the secondaries.
    secondary : bool, optional
        Include photoelectron impact (the scenario's ``[photons] secondary``).

    Returns
    -------
    photo, photoelectron : dict[str, ndarray]
        Channel key (without prefix) -> frequency per absorber molecule (s-1).
    """
    from ionochem.environment.secondary import secondary_frequencies

    spectrum = night_spectrum()
    photo = night_frequencies(vertical_columns, spectrum=spectrum)
    per_bin = night_frequencies(vertical_columns, spectrum=spectrum, per_bin=True)
    pe = secondary_frequencies(spectrum, vertical_columns, densities_cm3, enabled=secondary,
                               per_bin_frequencies=per_bin)
    return photo, pe


def describe() -> list[str]:
    """One line per night source, with its intensity and source, for the result."""
    return [f"{ln.name}, {ln.intensity_R:g} R ({ln.source})" for ln in NIGHT_LINES]


__all__ = ["HEMISPHERE_PHOTONS_PER_R", "NIGHT_LINES", "NightLine", "describe",
           "night_frequencies", "night_rates", "night_spectrum"]
