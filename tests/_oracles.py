"""Independent oracles shared by the tests: readers of the published reference data in
tests/reference/ and formulas typed from their papers.

Nothing here imports ionochem: these are the outside references the package is checked
against, so they must not share its code (CSV files are read with the standard library).
"""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
REFERENCE = HERE / "reference"
PACKAGE_DATA = HERE.parent / "ionochem" / "data"


def read_csv(path) -> dict[str, np.ndarray]:
    """Columns of a CSV file with ``#`` comment lines before its header, as float arrays
    (non-numeric columns stay strings)."""
    with Path(path).open(newline="", encoding="utf-8") as fh:
        rows = [r for r in csv.reader(line for line in fh if not line.startswith("#")) if r]
    header, body = rows[0], rows[1:]
    out = {}
    for j, name in enumerate(header):
        col = [r[j].strip() for r in body]
        try:
            out[name.strip()] = np.array([float(x) for x in col])
        except ValueError:
            out[name.strip()] = np.array(col)
    return out


def euvac_reference_table() -> dict[str, np.ndarray]:
    """Richards, Fennelly & Torr (1994), J. Geophys. Res. 99, 8981, table 1 (the copy in
    tests/reference/euvac_richards1994_table1.csv)."""
    return read_csv(REFERENCE / "euvac_richards1994_table1.csv")


def euvac_reference_flux(f107, f107a) -> np.ndarray:
    """EUVAC photon flux per bin, photons cm-2 s-1, shape (37,): Richards et al. (1994)
    eq. 1, flux_i = F74113_i (1 + A_i (P - 80)), P = (F10.7 + F10.7A)/2, with the factor
    floored at 0.8 as stated there."""
    t = euvac_reference_table()
    p = 0.5 * (float(f107) + float(f107a))
    factor = np.maximum(1.0 + t["A_i"] * (p - 80.0), 0.8)
    return t["F74113_1e9_photons_cm2_s"] * 1e9 * factor


def raw_cross_sections() -> dict[str, np.ndarray]:
    """The packaged cross-section table (Fennelly & Torr 1992 as binned by Richards et al.
    1994, table 2) read as plain numbers in megabarn, without the package's folding."""
    return read_csv(PACKAGE_DATA / "cross_sections.csv")


def o2_to_o2plus_mb(raw) -> np.ndarray:
    """O2 -> O2+ cross section (Mb) on the EUVAC bins: the table's O2+ column, except in the
    50-100 angstrom bin, where the table gives all of the absorption as O2+ (it has no
    dissociative ionization there) and the documented rule continues the O+ + O share of the
    100-150 angstrom bin, (O2_abs - O2+_ion) / O2_abs there (ionochem/environment/
    crosssections.py, *(from memory)*)."""
    o2 = np.array(raw["O2+_ion"], dtype=float)
    nxt = (raw["wl_lo_A"] == 100.0) & (raw["wl_hi_A"] == 150.0)
    share = float(((raw["O2_abs"] - raw["O2+_ion"]) / raw["O2_abs"])[nxt][0])
    first = raw["wl_hi_A"] <= 100.0
    o2[first] = raw["O2_abs"][first] * (1.0 - share)
    return o2


def huebner_1992() -> dict[str, tuple[float, float]]:
    """Unattenuated photoionization rates at 1 AU, s-1: species -> (quiet, active)
    (tests/reference/huebner1992_photorates.csv; see its header for the status)."""
    t = read_csv(REFERENCE / "huebner1992_photorates.csv")
    return {str(s): (float(q), float(a))
            for s, q, a in zip(t["absorber"], t["quiet_s-1"], t["active_s-1"], strict=True)}
