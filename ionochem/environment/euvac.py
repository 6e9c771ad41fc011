"""Solar EUV photon flux from the EUVAC model (37 bins, 50-1050 angstrom).

EUVAC (Richards, Fennelly & Torr 1994, J. Geophys. Res. 99, 8981) scales the reference
spectrum F74113 with the mean of the daily and 81-day F10.7 index:

    flux_i = F74113_i * max(0.8, 1 + A_i (P - 80)),   P = (F10.7 + F10.7A) / 2.

The floor of 0.8 on the factor is part of the published model. The table is packaged as
``ionochem/data/euvac.csv`` (its header names the source).

What this module does not do: it does not scale for the Earth-Sun distance (the caller
multiplies by (1 AU / r)^2), and it knows nothing of soft X-rays below 50 angstrom, which
EUVAC leaves out; without them the lower E region is under-produced. F10.7 inputs are the
values adjusted to 1 AU, as the model was built on them.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path

import numpy as np

from ionochem.errors import InputError
from ionochem.io.tables import read_csv_columns

DATA_DIR = Path(__file__).resolve().parent.parent / "data"
EUVAC_TABLE_PATH = DATA_DIR / "euvac.csv"

#: Floor on the EUVAC activity factor (Richards et al. 1994).
EUVAC_FACTOR_FLOOR = 0.8
#: Unit of the F74113 column of the packaged table, photons cm-2 s-1.
F74113_UNIT_PHOTONS_CM2_S = 1.0e9


@dataclass(frozen=True)
class EuvacBins:
    """EUVAC bins and fluxes.

    Attributes
    ----------
    wl_lo_A, wl_hi_A, wl_center_A : ndarray, shape (37,)
        Bin edges and centre in angstrom; a line has ``wl_lo_A == wl_hi_A``.
    photons_cm2_s : ndarray, shape (..., 37)
        Photon flux at 1 AU in photons cm-2 s-1 (leading shape that of the F10.7 inputs).
    """

    wl_lo_A: np.ndarray
    wl_hi_A: np.ndarray
    wl_center_A: np.ndarray
    photons_cm2_s: np.ndarray

    @property
    def is_line(self) -> np.ndarray:
        """Boolean mask, shape (37,): True where the bin is a single emission line."""
        return self.wl_lo_A == self.wl_hi_A


@lru_cache(maxsize=1)
def euvac_table() -> dict[str, np.ndarray]:
    """The packaged EUVAC table (Richards et al. 1994, table 1).

    Returns
    -------
    dict
        ``bin`` (1..37), ``wl_lo_A``, ``wl_hi_A``, ``wl_center_A`` (angstrom),
        ``F74113_photons_cm2_s`` (photons cm-2 s-1) and ``A_i`` (per F10.7 unit),
        each an array of shape (37,). The arrays are read-only.
    """
    header, data, _ = read_csv_columns(EUVAC_TABLE_PATH)
    raw = dict(zip(header, data.T, strict=True))
    table = {
        "bin": np.asarray(raw["bin"], dtype=int),
        "wl_lo_A": np.asarray(raw["wl_lo_A"], dtype=float),
        "wl_hi_A": np.asarray(raw["wl_hi_A"], dtype=float),
        "F74113_photons_cm2_s": np.asarray(raw["F74113_1e9_photons_cm2_s"], dtype=float)
        * F74113_UNIT_PHOTONS_CM2_S,
        "A_i": np.asarray(raw["A_i"], dtype=float),
    }
    table["wl_center_A"] = 0.5 * (table["wl_lo_A"] + table["wl_hi_A"])
    for value in table.values():
        value.setflags(write=False)
    return table


def euvac_flux(f107, f107a) -> EuvacBins:
    """EUVAC photon flux in 37 bins for the given solar activity.

    Parameters
    ----------
    f107 : float or array_like
        Daily F10.7 index (1e-22 W m-2 Hz-1), adjusted to 1 AU.
    f107a : float or array_like
        81-day mean F10.7 (same unit); broadcasts with ``f107``.

    Returns
    -------
    EuvacBins
        Bin edges and centres (angstrom, shape (37,)) and ``photons_cm2_s`` shaped
        ``broadcast(f107, f107a).shape + (37,)`` in photons cm-2 s-1 at 1 AU.

    Raises
    ------
    InputError
        When an index is not finite or not positive.

    Notes
    -----
    flux_i = F74113_i max(0.8, 1 + A_i (P - 80)) with P = (F10.7 + F10.7A)/2
    (Richards, Fennelly & Torr 1994, J. Geophys. Res. 99, 8981).
    """
    f107 = np.asarray(f107, dtype=float)
    f107a = np.asarray(f107a, dtype=float)
    for name, value in (("f107", f107), ("f107a", f107a)):
        if not np.all(np.isfinite(value)) or np.any(value <= 0):
            raise InputError(f"{name} must be a positive finite number, got {value!r}")
    table = euvac_table()
    p = 0.5 * (f107 + f107a)[..., np.newaxis]
    factor = np.maximum(EUVAC_FACTOR_FLOOR, 1.0 + table["A_i"] * (p - 80.0))
    return EuvacBins(
        wl_lo_A=np.array(table["wl_lo_A"]),
        wl_hi_A=np.array(table["wl_hi_A"]),
        wl_center_A=np.array(table["wl_center_A"]),
        photons_cm2_s=table["F74113_photons_cm2_s"] * factor,
    )
