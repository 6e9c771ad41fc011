"""Photoabsorption and photoionization cross sections, and the photon spectrum they ride on.

A :class:`Spectrum` is the whole photon input of the photo-rate calculation: wavelength bins
(ranges or single lines), the photon flux in each bin at the top of the atmosphere, the
absorption cross section of every absorber and the cross section of every photo channel on
those bins. :func:`solar_spectrum` builds the default one (EUVAC flux, Fennelly & Torr cross
sections, Lyman alpha for NO); :func:`ionochem.environment.user_spectrum.load_user_spectrum`
reads one from a CSV file, e.g. to add soft X-rays, which EUVAC leaves out (below 50
angstrom; without them the lower E region is under-produced).

Channels
--------
A channel key names one photo process per absorber molecule, ``ABSORBER->PRODUCTS``:

====================  =========  ==========  =====================================
key                   absorber   threshold   meaning
====================  =========  ==========  =====================================
``O->O+``             O          13.62 eV    O+(4S) ground state (with cascades)
``O->O+(2D)``         O          16.94 eV    O+(2D) (with cascades)
``O->O+(2P)``         O          18.64 eV    O+(2P) (with cascades)
``N2->N2+``           N2         15.58 eV    N2+ in any bound state
``N2->N+``            N2         24.29 eV    dissociative ionization N+ + N
``O2->O2+``           O2         12.07 eV    O2+ in any bound state
``O2->O+``            O2         18.73 eV    dissociative ionization O+ + O
``NO->NO+``           NO          9.26 eV    NO+ (Lyman alpha only)
``N->N+``             N          14.53 eV    N+ (3P)
``He->He+``           He         24.59 eV    He+
``N2->N(2D)+N``       N2         12.14 eV    neutral dissociation, one N(2D) + one N
====================  =========  ==========  =====================================

Thresholds are the ionization (or dissociation) energies of the NIST tables as listed in
docs/physics.md §4 *(from memory)*; wavelength lambda_th = 12398.42 eV angstrom / E_th.

Threshold rule
--------------
No channel may have a cross section in a bin that lies wholly longward of its threshold: a
line with wavelength above lambda_th, or a range bin whose short edge is at or above
lambda_th. A range bin that *straddles* a threshold keeps its tabulated bin-averaged value
(the average already contains the zero part beyond threshold); cross sections computed here
from analytic fits are averaged over the bin with zero beyond threshold, i.e. for a flat flux
across the bin. :func:`check_thresholds` enforces the rule for every spectrum; for a user
file a violation is an error.

Folding of the O+ states (Fennelly & Torr 1992 give five)
--------------------------------------------------------
O+(4P) (2s2p4 4P) decays to O+(4S) through the 834 angstrom line: counted as ``O->O+``.
O+(2P*) (2s2p4 2P) decays to O+(2D) and O+(2P); it is split equally between ``O->O+(2D)`` and
``O->O+(2P)`` *(common practice; the split is from memory)*. Below 250 angstrom the five
tabulated states fall short of the total (higher states and double ionization); the remainder
is shared over the three folded channels in proportion to their own cross sections, so the
three always add up to the O total *(common practice)*.

Other choices, each with its source
-----------------------------------
- ``O2->O+``: the table carries no O2 dissociative-ionization column, so it is taken as O2
  absorption minus O2+ ionization shortward of the 662 angstrom threshold (the O2 ionization
  yield is close to one there, *(from memory)*), the straddling 650-700 angstrom bin
  receiving the fraction of the bin shortward of threshold. In the 50-100 angstrom bin the
  packaged table gives absorption = O2+ ionization, which would leave that bin without O+
  from O2, although dissociative ionization takes 38-45 % of the O2 ionization in each of
  the three bins next to it (100-250 angstrom, same table: Fennelly & Torr 1992 as averaged
  by Richards et al. 1994) and stays a large share of O2 photoionization at photon energies
  above ~40 eV *(from memory)*. That bin therefore takes the O+ share of the 100-150
  angstrom bin, 38.4 %, out of its O2+ value (:data:`O2_DISSOCIATIVE_SHARE_50_100A`;
  *(common practice: continuation of the neighbouring bin)*). The soft X-ray bins below 50
  angstrom use the same share (``xrays.py``).
- ``N2->N(2D)+N``: N2 absorption minus N2+ and N+ ionization (never below zero). Each
  dissociation is counted as one N(2D) and one N(4S) *(common practice; the lowest
  predissociating states of N2 reached by EUV photons correlate with N(4S) + N(2D))*.
- ``N->N+`` and ``He->He+``: the analytic fits of Verner, Ferland, Korista & Yakovlev (1996),
  Astrophys. J. 465, 487, table 1 *(parameters from memory)*, averaged over each bin.
- ``NO->NO+``: Lyman alpha only, sigma = 2.0e-18 cm2 (Watanabe 1954, J. Chem. Phys. 22, 1564;
  Brasseur & Solomon 2005, Aeronomy of the Middle Atmosphere *(from memory)*). NO EUV cross
  sections are not included (NO is a trace absorber and a minor ion source in the EUV).
- Lyman alpha (1215.67 angstrom) is absorbed by O2 with sigma = 1.0e-20 cm2 (the O2 window;
  Watanabe 1958, Adv. Geophys. 5, 153 *(from memory)*); N2 and O do not absorb it.

User spectrum files (a CSV file with its own cross sections) are read by
:mod:`ionochem.environment.user_spectrum`, which documents their columns.

What this module must not do: it does not attenuate, integrate over altitude, or know about
reactions; fluxes are at 1 AU until the caller scales them (:meth:`Spectrum.scaled`).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from functools import lru_cache
from types import MappingProxyType

import numpy as np

from ionochem.constants import HC_EV_A
from ionochem.environment.euvac import DATA_DIR, euvac_flux
from ionochem.environment.lyman_alpha import lyman_alpha_flux
from ionochem.errors import InputError, ScenarioError
from ionochem.io.tables import read_csv_columns

CROSS_SECTION_PATH = DATA_DIR / "cross_sections.csv"

#: Unit of every ``sigma`` column in the data files, cm2 (1 megabarn).
MEGABARN_CM2 = 1.0e-18

#: Lyman alpha line centre, angstrom.
LYMAN_ALPHA_A = 1215.67
#: The default Lyman alpha flux follows solar activity: see
#: :func:`ionochem.environment.lyman_alpha.lyman_alpha_flux` (cited there); scenarios may
#: give a measured value instead (``lyman_alpha_photons_cm2_s``).
#: NO photoionization cross section at Lyman alpha, cm2 (Watanabe 1954, J. Chem. Phys. 22,
#: 1564 *(from memory)*); taken equal to the NO absorption there.
SIGMA_NO_LYMAN_ALPHA_CM2 = 2.0e-18
#: Share of O2 photoionization that is dissociative (O+ + O) in the 50-100 angstrom bin: the
#: share of the 100-150 angstrom bin of the packaged table, (3.806 - 2.346) / 3.806
#: (Fennelly & Torr 1992 via Richards et al. 1994), continued one bin shortward
#: *(common practice)*; see the module docstring.
O2_DISSOCIATIVE_SHARE_50_100A = (3.806 - 2.346) / 3.806
#: O2 absorption cross section at Lyman alpha, cm2 (Watanabe 1958, Adv. Geophys. 5, 153
#: *(from memory)*).
SIGMA_O2_ABS_LYMAN_ALPHA_CM2 = 1.0e-20


@dataclass(frozen=True)
class Channel:
    """One photo process.

    Attributes
    ----------
    key : str
        Channel key, ``ABSORBER->PRODUCTS``.
    absorber : str
        The molecule or atom that absorbs the photon.
    threshold_eV : float
        Minimum photon energy (eV).
    ionizing : bool
        True when the process frees an electron (a photoelectron of energy
        h nu - threshold), False for neutral dissociation.
    """

    key: str
    absorber: str
    threshold_eV: float
    ionizing: bool = True

    @property
    def threshold_A(self) -> float:
        """Threshold wavelength (angstrom)."""
        return HC_EV_A / self.threshold_eV


# Thresholds: docs/physics.md §4 (NIST ionization energies, *(from memory)*), except
# N -> N+ 14.534 eV and He -> He+ 24.587 eV (NIST atomic ionization energies, *(from memory)*)
# and N2 -> N(4S) + N(2D) 12.14 eV = D0(N2) 9.76 eV + N(2D) excitation 2.38 eV *(from memory)*.
CHANNELS: Mapping[str, Channel] = MappingProxyType({
    c.key: c for c in (
        Channel("O->O+", "O", 13.618),
        Channel("O->O+(2D)", "O", 16.943),
        Channel("O->O+(2P)", "O", 18.635),
        Channel("N2->N2+", "N2", 15.581),
        Channel("N2->N+", "N2", 24.29),
        Channel("O2->O2+", "O2", 12.070),
        Channel("O2->O+", "O2", 18.73),
        Channel("NO->NO+", "NO", 9.264),
        Channel("N->N+", "N", 14.534),
        Channel("He->He+", "He", 24.587),
        Channel("N2->N(2D)+N", "N2", 12.14, ionizing=False),
    )
})

#: Verner et al. (1996), Astrophys. J. 465, 487, table 1 fit parameters for the outer shell
#: *(from memory)*: E_th (eV), E0 (eV), sigma0 (Mb), y_a, P, y_w, y0, y1.
VERNER_1996 = MappingProxyType({
    "N->N+": (14.53, 4.034, 8.235e2, 8.033e1, 3.928, 9.097e-2, 8.598e-1, 2.325),
    "He->He+": (24.59, 13.61, 9.492e2, 1.469, 3.188, 2.039, 4.434e-1, 2.136),
})


def verner_cross_section_cm2(energy_eV, params) -> np.ndarray:
    """Analytic photoionization cross section of Verner et al. (1996).

    Parameters
    ----------
    energy_eV : array_like
        Photon energy (eV).
    params : tuple of 8 floats
        ``(E_th, E0, sigma0_Mb, y_a, P, y_w, y0, y1)``, Verner et al. (1996), Astrophys. J.
        465, 487, eq. 1 and table 1.

    Returns
    -------
    ndarray
        Cross section (cm2), zero below E_th; the shape of ``energy_eV``.
    """
    e_th, e0, s0, ya, p, yw, y0, y1 = params
    energy = np.asarray(energy_eV, dtype=float)
    x = energy / e0 - y0
    y = np.sqrt(x * x + y1 * y1)
    f = ((x - 1.0) ** 2 + yw * yw) * y ** (0.5 * p - 5.5) * (1.0 + np.sqrt(y / ya)) ** (-p)
    return np.where(energy >= e_th, s0 * f * MEGABARN_CM2, 0.0)


def _bin_average(wl_lo_A, wl_hi_A, func, samples: int = 201) -> np.ndarray:
    """Average ``func(wavelength_A)`` over each bin (flat flux in wavelength); a line is
    evaluated at its wavelength."""
    t = np.linspace(0.0, 1.0, samples)
    w = np.full(samples, 1.0 / (samples - 1))
    w[[0, -1]] *= 0.5  # trapezoid weights on [0, 1]
    wl = wl_lo_A[:, None] + (wl_hi_A - wl_lo_A)[:, None] * t[None, :]
    return func(wl) @ w


@dataclass(frozen=True)
class Spectrum:
    """Photon bins, top-of-atmosphere fluxes and cross sections.

    Attributes
    ----------
    wl_lo_A, wl_hi_A : ndarray, shape (bin,)
        Bin edges (angstrom); equal edges make a single line.
    photons_cm2_s : ndarray, shape (..., bin)
        Photon flux per bin (photons cm-2 s-1) at the top of the atmosphere. Leading axes
        (e.g. time) broadcast against the leading axes of the slant columns.
    sigma_abs_cm2 : Mapping[str, ndarray]
        Absorber -> absorption cross section (cm2), shape (bin,).
    sigma_channel_cm2 : Mapping[str, ndarray]
        Channel key -> cross section (cm2), shape (bin,).
    source : str
        Where the spectrum came from (for provenance).
    """

    wl_lo_A: np.ndarray
    wl_hi_A: np.ndarray
    photons_cm2_s: np.ndarray
    sigma_abs_cm2: Mapping[str, np.ndarray]
    sigma_channel_cm2: Mapping[str, np.ndarray]
    source: str = ""

    def __post_init__(self):
        lo = np.array(self.wl_lo_A, dtype=float)
        hi = np.array(self.wl_hi_A, dtype=float)
        if lo.ndim != 1 or lo.shape != hi.shape:
            raise InputError("wl_lo_A and wl_hi_A must be 1-D arrays of the same length")
        flux = np.array(self.photons_cm2_s, dtype=float)
        if flux.shape[-1:] != lo.shape:
            raise InputError(f"photons_cm2_s has shape {flux.shape}; its last axis must have "
                             f"{lo.size} bins")
        abs_ = {k: np.array(v, dtype=float) for k, v in self.sigma_abs_cm2.items()}
        chan = {k: np.array(v, dtype=float) for k, v in self.sigma_channel_cm2.items()}
        for name, arr in (*abs_.items(), *chan.items()):
            if arr.shape != lo.shape:
                raise InputError(f"cross section {name!r} has shape {arr.shape}, expected "
                                 f"{lo.shape}")
        for arr in (lo, hi, flux, *abs_.values(), *chan.values()):
            arr.setflags(write=False)
        object.__setattr__(self, "wl_lo_A", lo)
        object.__setattr__(self, "wl_hi_A", hi)
        object.__setattr__(self, "photons_cm2_s", flux)
        object.__setattr__(self, "sigma_abs_cm2", MappingProxyType(abs_))
        object.__setattr__(self, "sigma_channel_cm2", MappingProxyType(chan))

    @property
    def n_bins(self) -> int:
        """Number of bins."""
        return self.wl_lo_A.size

    @property
    def wl_center_A(self) -> np.ndarray:
        """Bin centres (angstrom), shape (bin,)."""
        return 0.5 * (self.wl_lo_A + self.wl_hi_A)

    @property
    def photon_energy_eV(self) -> np.ndarray:
        """Photon energy at the bin centre (eV), shape (bin,)."""
        return HC_EV_A / self.wl_center_A

    @property
    def channels(self) -> tuple[str, ...]:
        """Channel keys carried by this spectrum."""
        return tuple(self.sigma_channel_cm2)

    @property
    def absorbers(self) -> tuple[str, ...]:
        """Absorbers with an absorption cross section."""
        return tuple(self.sigma_abs_cm2)

    def scaled(self, factor) -> Spectrum:
        """The same spectrum with every flux multiplied by ``factor``.

        Parameters
        ----------
        factor : float or array_like
            E.g. (1 AU / r)^2 for the Earth-Sun distance r; an array with leading axes
            (time,) gives a flux shaped (time, bin).
        """
        factor = np.asarray(factor, dtype=float)
        return self.with_flux(self.photons_cm2_s * factor[..., np.newaxis])

    def with_flux(self, photons_cm2_s) -> Spectrum:
        """The same bins and cross sections with another flux, shape (..., bin)."""
        return Spectrum(self.wl_lo_A, self.wl_hi_A, photons_cm2_s, self.sigma_abs_cm2,
                        self.sigma_channel_cm2, self.source)

    def concatenate(self, other: Spectrum) -> Spectrum:
        """Bins of ``self`` followed by those of ``other``.

        A cross section missing on one side is zero there. The fluxes must broadcast.
        """
        n1, n2 = self.n_bins, other.n_bins

        def join(a: Mapping, b: Mapping) -> dict:
            return {k: np.concatenate([a.get(k, np.zeros(n1)), b.get(k, np.zeros(n2))])
                    for k in (*a, *(k for k in b if k not in a))}

        shape = np.broadcast_shapes(self.photons_cm2_s.shape[:-1],
                                    other.photons_cm2_s.shape[:-1])
        flux = np.concatenate([np.broadcast_to(self.photons_cm2_s, shape + (n1,)),
                               np.broadcast_to(other.photons_cm2_s, shape + (n2,))], axis=-1)
        return Spectrum(np.concatenate([self.wl_lo_A, other.wl_lo_A]),
                        np.concatenate([self.wl_hi_A, other.wl_hi_A]), flux,
                        join(self.sigma_abs_cm2, other.sigma_abs_cm2),
                        join(self.sigma_channel_cm2, other.sigma_channel_cm2),
                        f"{self.source} + {other.source}")


def channel_absorber(key: str) -> str:
    """Absorber of a channel key (``"N2->N+"`` -> ``"N2"``)."""
    if key in CHANNELS:
        return CHANNELS[key].absorber
    absorber, arrow, products = key.partition("->")
    if not arrow or not absorber or not products:
        raise InputError(f"channel key {key!r} is not of the form ABSORBER->PRODUCTS")
    return absorber.strip()


def threshold_violations(spectrum: Spectrum) -> list[tuple[str, int]]:
    """Channel and bin index pairs that break the threshold rule (module docstring).

    Returns
    -------
    list of (str, int)
        ``(channel key, bin index)`` where a channel with a known threshold has a non-zero
        cross section in a bin wholly longward of its threshold.
    """
    bad = []
    lo, hi = spectrum.wl_lo_A, spectrum.wl_hi_A
    for key, sigma in spectrum.sigma_channel_cm2.items():
        if key not in CHANNELS:
            continue
        lam = CHANNELS[key].threshold_A
        beyond = np.where(lo < hi, lo >= lam, lo > lam)
        bad += [(key, int(i)) for i in np.flatnonzero(beyond & (sigma != 0))]
    return bad


def check_thresholds(spectrum: Spectrum, *, file=None, key=None) -> None:
    """Raise when a channel has a cross section beyond its threshold.

    Raises
    ------
    InputError or ScenarioError
        Naming the first offending channel and bin (``ScenarioError`` when ``key`` is given).
    """
    bad = threshold_violations(spectrum)
    if bad:
        name, i = bad[0]
        msg = (f"channel {name!r} has a cross section in bin {i + 1} "
               f"({spectrum.wl_lo_A[i]:g}-{spectrum.wl_hi_A[i]:g} angstrom), longward of its "
               f"threshold {CHANNELS[name].threshold_A:.1f} angstrom "
               f"({len(bad)} such entries)")
        if key is not None:
            raise ScenarioError(msg, file=file, key=key)
        raise InputError(msg, file=file)


@lru_cache(maxsize=1)
def _euvac_cross_sections() -> tuple[dict[str, np.ndarray], dict[str, np.ndarray]]:
    """Absorption and channel cross sections (cm2) on the 37 EUVAC bins (see module doc)."""
    header, data, _ = read_csv_columns(CROSS_SECTION_PATH)
    t = dict(zip(header, data.T, strict=True))
    mb = MEGABARN_CM2
    lo, hi = t["wl_lo_A"], t["wl_hi_A"]

    # O+ states, folded (module docstring).
    s4 = t["O+_4S"] + t["O+_4P"]
    s2d = t["O+_2D"] + 0.5 * t["O+_2Pstar"]
    s2p = t["O+_2P"] + 0.5 * t["O+_2Pstar"]
    folded = s4 + s2d + s2p
    scale = np.divide(t["O_abs"], folded, out=np.ones_like(folded), where=folded > 0)

    # O2 -> O+ + O: absorption minus O2+ shortward of threshold (module docstring).
    lam = CHANNELS["O2->O+"].threshold_A
    frac_short = np.where(lo < hi, np.clip((lam - lo) / np.where(hi > lo, hi - lo, 1.0), 0, 1),
                          (lo <= lam).astype(float))
    o2_dissoc_ion = np.maximum(t["O2_abs"] - t["O2+_ion"], 0.0) * frac_short
    o2_ion = np.array(t["O2+_ion"], dtype=float)
    # 50-100 A: the table has no dissociative ionization there; continue the 100-150 A share
    # (module docstring).
    first = (hi <= 100.0) & (o2_dissoc_ion == 0.0) & (t["O2_abs"] > 0)
    o2_dissoc_ion = np.where(first, O2_DISSOCIATIVE_SHARE_50_100A * t["O2_abs"],
                             o2_dissoc_ion)
    o2_ion = np.where(first, t["O2_abs"] - o2_dissoc_ion, o2_ion)

    n2_dissoc = np.maximum(t["N2_abs"] - t["N2+_ion"] - t["N+_from_N2"], 0.0)

    sigma_abs = {"O": t["O_abs"] * mb, "N2": t["N2_abs"] * mb, "O2": t["O2_abs"] * mb}
    sigma_chan = {
        "O->O+": s4 * scale * mb,
        "O->O+(2D)": s2d * scale * mb,
        "O->O+(2P)": s2p * scale * mb,
        "N2->N2+": t["N2+_ion"] * mb,
        "N2->N+": t["N+_from_N2"] * mb,
        "N2->N(2D)+N": n2_dissoc * mb,
        "O2->O2+": o2_ion * mb,
        "O2->O+": o2_dissoc_ion * mb,
        "NO->NO+": np.zeros_like(lo),
    }
    for key, params in VERNER_1996.items():
        sigma = _bin_average(lo, hi, lambda wl, p=params: verner_cross_section_cm2(
            HC_EV_A / wl, p))
        sigma_chan[key] = sigma
        sigma_abs[CHANNELS[key].absorber] = sigma.copy()
    sigma_abs["NO"] = np.zeros_like(lo)
    return sigma_abs, sigma_chan


def euvac_cross_sections() -> tuple[dict[str, np.ndarray], dict[str, np.ndarray]]:
    """Cross sections (cm2) on the 37 EUVAC bins.

    Returns
    -------
    sigma_abs : dict[str, ndarray]
        Absorber (``O``, ``N2``, ``O2``, ``N``, ``He``, ``NO``) -> absorption, shape (37,).
    sigma_channel : dict[str, ndarray]
        Channel key -> cross section, shape (37,), for every key of :data:`CHANNELS`
        (``NO->NO+`` is zero on these bins: NO is ionized by Lyman alpha only).
    """
    a, c = _euvac_cross_sections()
    return {k: v.copy() for k, v in a.items()}, {k: v.copy() for k, v in c.items()}


def solar_spectrum(f107, f107a, *, lyman_alpha_photons_cm2_s=None) -> Spectrum:
    """The default solar spectrum at 1 AU: 37 EUVAC bins plus the Lyman alpha line.

    Parameters
    ----------
    f107, f107a : float or array_like
        Daily and 81-day mean F10.7 (1e-22 W m-2 Hz-1), adjusted to 1 AU; they broadcast.
    lyman_alpha_photons_cm2_s : float or array_like, optional
        Lyman alpha flux at 1 AU (photons cm-2 s-1); default (None): scaled with solar
        activity by :func:`ionochem.environment.lyman_alpha.lyman_alpha_flux`.

    Returns
    -------
    Spectrum
        38 bins (the last one is Lyman alpha), flux shape ``broadcast(f107, f107a).shape +
        (38,)``, at 1 AU: scale with :meth:`Spectrum.scaled` for the Earth-Sun distance.
    """
    bins = euvac_flux(f107, f107a)
    if lyman_alpha_photons_cm2_s is None:
        lyman_alpha_photons_cm2_s = lyman_alpha_flux(f107, f107a)
    lya = np.asarray(lyman_alpha_photons_cm2_s, dtype=float)
    if not np.all(np.isfinite(lya)) or np.any(lya < 0):
        raise InputError(f"lyman_alpha_photons_cm2_s must be finite and >= 0, got {lya!r}")
    sigma_abs, sigma_chan = euvac_cross_sections()
    euv = bins.photons_cm2_s
    shape = np.broadcast_shapes(euv.shape[:-1], lya.shape)
    flux = np.concatenate([np.broadcast_to(euv, shape + euv.shape[-1:]),
                           np.broadcast_to(lya, shape)[..., np.newaxis]], axis=-1)
    line = {"NO": SIGMA_NO_LYMAN_ALPHA_CM2, "O2": SIGMA_O2_ABS_LYMAN_ALPHA_CM2}
    sigma_abs = {k: np.append(v, line.get(k, 0.0)) for k, v in sigma_abs.items()}
    sigma_chan = {k: np.append(v, SIGMA_NO_LYMAN_ALPHA_CM2 if k == "NO->NO+" else 0.0)
                  for k, v in sigma_chan.items()}
    spectrum = Spectrum(np.append(bins.wl_lo_A, LYMAN_ALPHA_A),
                        np.append(bins.wl_hi_A, LYMAN_ALPHA_A), flux, sigma_abs, sigma_chan,
                        "EUVAC (Richards et al. 1994) with Fennelly & Torr (1992) cross "
                        "sections, plus Lyman alpha")
    check_thresholds(spectrum)
    return spectrum
