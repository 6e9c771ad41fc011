"""Solar soft X-rays below 50 angstrom: fluxes, cross sections and channels.

EUVAC starts at 50 angstrom; shortward of it the Sun's soft X-rays are absorbed below about
120 km and, with their many secondary ion pairs, supply most of the E-region ionization of N2
and O2 below ~115 km; without them a model's NmE falls ~30 % short (docs/physics.md §4a).

Flux
----
Five published bins (0.5-4, 4-8, 8-18, 18-32 and 32-50 angstrom; Solomon & Qian 2005,
J. Geophys. Res. 110, A10306, table A1, the last bin cut at 50 angstrom where EUVAC begins),
packaged with their sources in ``ionochem/data/soft_xrays.csv``. Each bin's flux follows the
table's EUVAC-type scaling with the activity proxy P = (F10.7 + F10.7A)/2,

    flux_i = F_i * max(0.8, 1 + A_i (P - 80)),

the floor of 0.8 being EUVAC's (Richards, Fennelly & Torr 1994, J. Geophys. Res. 99, 8981):
with A_i up to 0.62 the bare factor turns negative just below P = 80. Between P = 80 and 150
the hardest bin rises 44-fold, the 32-50 angstrom bin 1.9-fold.

Each published bin is split into sub-bins, geometric in wavelength with a relative width of at
most :data:`SUB_BIN_REL`, carrying the bin's flux in proportion to their width (flat in
wavelength, *(common practice)*): the cross
sections change by a factor of several across a published bin and jump at the K edges of N
(30.2 angstrom) and O (22.8 angstrom), so attenuation with one bin-averaged cross section
would be wrong; the K edges are sub-bin edges.

Cross sections
--------------
At these energies a molecule absorbs like the sum of its atoms (docs/physics.md §4): the
photoabsorption cross sections are those of the Elam, Ravel & Sieber (2002) tables
(Radiat. Phys. Chem. 63, 121, *(volume and page from memory)*) carried by the PyPI
package ``xraydb`` (``mu_elam(..., kind="photo")``, mass absorption coefficient times
atomic mass over Avogadro's number),
averaged over each sub-bin: sigma(N2) = 2 sigma(N), sigma(O2) = 2 sigma(O), sigma(O) =
sigma(O). ``xraydb`` ships its tables; nothing is fetched at run time. Importing it costs
about a second (its database layer), so the sub-bin averages it gives are kept in
``ionochem/data/soft_xray_cross_sections.csv``, written by
``python -m ionochem.environment.xrays`` (:func:`write_cross_section_table`); a test checks
the file against ``xraydb`` itself, and a sub-bin layout the file does not match is computed
from ``xraydb`` directly.

Every absorbed photon ionizes. The products are shared as in EUVAC's shortest bin (50-100
angstrom) of the packaged cross sections (``crosssections.py``): N2 into N2+ and N+ + N, O2
into O2+ and O+ + O (with the dissociative share of that bin), O into O+(4S), O+(2D),
O+(2P) *(common practice: the shortest tabulated bin continued)*. Inner-shell ionization
and its Auger electron change the first ion, not the energy budget: nearly all the photon's
energy goes to ion pairs at W = 35 eV each, which the secondary module
(``secondary.py``, yield (E - 15 eV)/35 eV for a photoelectron of E = h nu - threshold)
already gives; those secondaries, not the primary ions, carry most of the ionization.

What this module must not do: attenuate, integrate over altitude or know reactions; fluxes
are at 1 AU until the caller scales them for the Earth-Sun distance.
"""

from __future__ import annotations

from functools import lru_cache
from pathlib import Path

import numpy as np

from ionochem.constants import AVOGADRO, HC_EV_A
from ionochem.environment.crosssections import (
    MEGABARN_CM2,
    Spectrum,
    euvac_cross_sections,
)
from ionochem.environment.euvac import DATA_DIR
from ionochem.errors import InputError
from ionochem.io.tables import read_csv_columns

SOFT_XRAY_TABLE_PATH = DATA_DIR / "soft_xrays.csv"
CROSS_SECTION_TABLE_PATH = DATA_DIR / "soft_xray_cross_sections.csv"

#: Activity proxy P = (F10.7 + F10.7A)/2 at which the table's reference fluxes hold
#: (Solomon & Qian 2005, table A1, EUVAC-type scaling).
P_REF = 80.0
#: Floor on the activity factor (EUVAC's, Richards et al. 1994).
FACTOR_FLOOR = 0.8
#: Largest relative width of a sub-bin, hi/lo - 1 (a choice: sigma ~ lambda^2.7 changes by
#: < 30 % across one). The X-ray ionization rate of the demo column is then within 1 % of
#: that of 20 times finer sub-bins above 96 km, 2 % low at 94 km and 7 % low at 90 km, where
#: the hardest photons are absorbed (tests/test_xrays.py).
SUB_BIN_REL = 0.1
#: K-shell edges, angstrom: N 409.9 eV and O 543.1 eV (``xraydb.xray_edges``).
K_EDGES_A = (HC_EV_A / 409.9, HC_EV_A / 543.1)
#: Wavelength samples per sub-bin for the cross-section average.
_SAMPLES = 41


@lru_cache(maxsize=1)
def soft_xray_table() -> dict[str, np.ndarray]:
    """The packaged soft X-ray table (Solomon & Qian 2005, table A1).

    Returns
    -------
    dict
        ``wl_lo_A``, ``wl_hi_A`` (angstrom), ``F`` (photons cm-2 s-1 per bin at P = 80),
        ``A_i`` (per F10.7 unit), each shape (5,), read-only.
    """
    header, data, _ = read_csv_columns(SOFT_XRAY_TABLE_PATH)
    raw = dict(zip(header, data.T, strict=True))
    table = {"wl_lo_A": raw["wl_lo_A"], "wl_hi_A": raw["wl_hi_A"],
             "F": raw["F_photons_cm2_s"], "A_i": raw["A_i"]}
    table = {k: np.array(v, dtype=float) for k, v in table.items()}
    for value in table.values():
        value.setflags(write=False)
    return table


def soft_xray_flux(f107, f107a) -> np.ndarray:
    """Photon flux in the five published soft X-ray bins for the given activity.

    Parameters
    ----------
    f107, f107a : float or array_like
        Daily and 81-day mean F10.7 (1e-22 W m-2 Hz-1), adjusted to 1 AU; they broadcast.

    Returns
    -------
    ndarray, shape ``broadcast(f107, f107a).shape + (5,)``
        Photons cm-2 s-1 per bin at 1 AU.
    """
    f107 = np.asarray(f107, dtype=float)
    f107a = np.asarray(f107a, dtype=float)
    for name, value in (("f107", f107), ("f107a", f107a)):
        if not np.all(np.isfinite(value)) or np.any(value <= 0):
            raise InputError(f"{name} must be a positive finite number, got {value!r}")
    t = soft_xray_table()
    p = (0.5 * (f107 + f107a))[..., np.newaxis]
    return t["F"] * np.maximum(FACTOR_FLOOR, 1.0 + t["A_i"] * (p - P_REF))


@lru_cache(maxsize=1)
def _sub_bins() -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Sub-bin edges and the published bin each belongs to."""
    t = soft_xray_table()
    lo_all, hi_all, parent = [], [], []
    for i, (lo, hi) in enumerate(zip(t["wl_lo_A"], t["wl_hi_A"], strict=True)):
        edges = [lo, hi, *(e for e in K_EDGES_A if lo < e < hi)]
        edges = np.unique(edges)
        fine = [edges[0]]
        for a, b in zip(edges[:-1], edges[1:], strict=True):
            n = int(np.ceil(np.log(b / a) / np.log1p(SUB_BIN_REL) - 1e-9))
            fine.extend(np.geomspace(a, b, n + 1)[1:])
        fine = np.asarray(fine)
        lo_all.append(fine[:-1])
        hi_all.append(fine[1:])
        parent.append(np.full(fine.size - 1, i))
    return np.concatenate(lo_all), np.concatenate(hi_all), np.concatenate(parent)


def atomic_cross_section_cm2(element: str, energy_eV) -> np.ndarray:
    """Photoabsorption cross section of one atom (Elam et al. 2002 via ``xraydb``).

    Parameters
    ----------
    element : str
        Element symbol (``"N"``, ``"O"``).
    energy_eV : array_like
        Photon energy (eV), within the tables (about 100 eV to 800 keV).

    Returns
    -------
    ndarray
        Cross section per atom (cm2), the shape of ``energy_eV``.
    """
    import xraydb

    energy = np.asarray(energy_eV, dtype=float)
    mu = xraydb.mu_elam(element, energy.ravel(), kind="photo")    # cm2 g-1
    return (np.asarray(mu) * xraydb.atomic_mass(element) / AVOGADRO).reshape(energy.shape)


def sub_bin_atomic_cross_sections(lo, hi) -> dict[str, np.ndarray]:
    """Average atomic photoabsorption cross sections of N and O over wavelength bins.

    Parameters
    ----------
    lo, hi : array_like, shape (bin,)
        Bin edges (angstrom).

    Returns
    -------
    dict[str, ndarray]
        ``"N"``, ``"O"`` -> cross section per atom (cm2) averaged over each bin (flat in
        wavelength, trapezoid rule on 41 points), computed live with ``xraydb``.
    """
    lo, hi = np.asarray(lo, float), np.asarray(hi, float)
    frac = np.linspace(0.0, 1.0, _SAMPLES)
    wl = lo[:, None] + (hi - lo)[:, None] * frac[None, :]
    return {el: np.trapezoid(atomic_cross_section_cm2(el, HC_EV_A / wl), frac, axis=1)
            for el in ("N", "O")}


def _atomic_cross_sections(lo, hi) -> dict[str, np.ndarray]:
    """The packaged sub-bin averages when they match the layout, else ``xraydb`` live."""
    if CROSS_SECTION_TABLE_PATH.exists():
        header, data, _ = read_csv_columns(CROSS_SECTION_TABLE_PATH)
        t = dict(zip(header, data.T, strict=True))
        if (t["wl_lo_A"].shape == lo.shape and np.allclose(t["wl_lo_A"], lo, rtol=1e-9)
                and np.allclose(t["wl_hi_A"], hi, rtol=1e-9)):
            return {"N": t["sigma_N_Mb"] * MEGABARN_CM2, "O": t["sigma_O_Mb"] * MEGABARN_CM2}
    return sub_bin_atomic_cross_sections(lo, hi)


def write_cross_section_table(path=CROSS_SECTION_TABLE_PATH) -> None:
    """Write the packaged sub-bin cross sections from ``xraydb`` (see the module docstring).

    Parameters
    ----------
    path : str or Path, optional
        Output CSV (default the packaged file).
    """
    import xraydb

    lo, hi, _ = _sub_bins()
    atoms = sub_bin_atomic_cross_sections(lo, hi)
    lines = [
        "# Photoabsorption cross sections of atomic N and O averaged over the soft X-ray "
        "sub-bins of xrays.py",
        "#   (flat in wavelength, 41-point trapezoid rule), unit 1e-18 cm2 (Mb) per atom.",
        "# Source: Elam, Ravel & Sieber (2002), Radiat. Phys. Chem. 63, 121, as carried by the "
        f"PyPI package xraydb {xraydb.__version__}",
        "#   (mu_elam(..., kind='photo') x atomic mass / Avogadro's number).",
        "# Generated by `python -m ionochem.environment.xrays`; tests/test_xrays.py checks it "
        "against xraydb.",
        "wl_lo_A,wl_hi_A,sigma_N_Mb,sigma_O_Mb",
    ]
    for row in zip(lo, hi, atoms["N"] / MEGABARN_CM2, atoms["O"] / MEGABARN_CM2,
                   strict=True):
        lines.append(",".join(f"{v:.10g}" for v in row))
    Path(path).write_text("\n".join(lines) + "\n", encoding="utf-8")


@lru_cache(maxsize=1)
def _cross_sections() -> tuple[dict[str, np.ndarray], dict[str, np.ndarray]]:
    """Absorption and channel cross sections (cm2) on the sub-bins (module docstring)."""
    lo, hi, _ = _sub_bins()
    atoms = _atomic_cross_sections(lo, hi)
    sigma_abs = {"N2": 2.0 * atoms["N"], "O2": 2.0 * atoms["O"], "O": atoms["O"]}
    euv_abs, euv_chan = euvac_cross_sections()
    first = 0                                          # EUVAC bin 1, 50-100 A
    sigma_chan = {}
    for absorber in ("N2", "O2", "O"):
        keys = [k for k in euv_chan if k.split("->")[0] == absorber and k != "N2->N(2D)+N"]
        total = sum(euv_chan[k][first] for k in keys)
        for k in keys:
            sigma_chan[k] = sigma_abs[absorber] * (euv_chan[k][first] / total)
    return sigma_abs, sigma_chan


def soft_xray_spectrum(f107, f107a) -> Spectrum:
    """The soft X-ray part of the solar spectrum at 1 AU, ready to join EUVAC's.

    Parameters
    ----------
    f107, f107a : float or array_like
        Daily and 81-day mean F10.7 (1e-22 W m-2 Hz-1), adjusted to 1 AU; they broadcast.

    Returns
    -------
    Spectrum
        Sub-bins of 0.5-50 angstrom, flux shape ``broadcast(f107, f107a).shape + (bin,)``;
        absorbers N2, O2, O; channels ``N2->N2+``, ``N2->N+``, ``O2->O2+``, ``O2->O+``,
        ``O->O+``, ``O->O+(2D)``, ``O->O+(2P)`` adding up to each absorber's absorption.
        Join it to the EUV spectrum with ``Spectrum.concatenate``.
    """
    lo, hi, parent = _sub_bins()
    t = soft_xray_table()
    width = (t["wl_hi_A"] - t["wl_lo_A"])[parent]
    share = (hi - lo) / width
    flux = soft_xray_flux(f107, f107a)[..., parent] * share
    sigma_abs, sigma_chan = _cross_sections()
    return Spectrum(lo, hi, flux, sigma_abs, sigma_chan,
                    "soft X-rays 0.5-50 A (Solomon & Qian 2005 table A1; xraydb cross "
                    "sections)")


__all__ = ["FACTOR_FLOOR", "P_REF", "atomic_cross_section_cm2", "soft_xray_flux",
           "soft_xray_spectrum", "soft_xray_table", "sub_bin_atomic_cross_sections",
           "write_cross_section_table"]


if __name__ == "__main__":
    write_cross_section_table()
