"""Physical constants and atomic masses, one definition each, with their sources.

Every module that needs one imports it from here (the masses of species follow from
:data:`ATOMIC_MASS_AMU`). Nothing here knows about reactions, the column or the files.
"""

from __future__ import annotations

import re

#: Boltzmann constant, J K-1 (exact in the SI since 2019; CODATA 2018, Tiesinga et al. 2021,
#: Rev. Mod. Phys. 93, 025010).
K_B = 1.380649e-23
#: Atomic mass constant, kg (CODATA 2018, Tiesinga et al. 2021, Rev. Mod. Phys. 93, 025010).
AMU_KG = 1.66053906660e-27
#: Elementary charge, C (exact in the SI since 2019; CODATA 2018).
E_CHARGE_C = 1.602176634e-19
#: Electron mass in u, CODATA 2018 recommended value (Tiesinga et al. 2021) *(from memory)*.
ELECTRON_MASS_AMU = 5.48579909065e-4
#: Standard acceleration of gravity, m s-2 (3rd CGPM, 1901; exact by definition).
G0_M_S2 = 9.80665
#: Planck constant, J s (exact in the SI since 2019; CODATA 2018).
PLANCK_J_S = 6.62607015e-34
#: Speed of light in vacuum, cm s-1 (exact by definition of the metre).
SPEED_OF_LIGHT_CM_S = 2.99792458e10
#: h c / e in eV cm: the energy (eV) of one wavenumber (cm-1), from the exact CODATA 2018 h,
#: c and e.
HC_EV_CM = 1.239841984e-4
#: Avogadro constant, mol-1 (exact in the SI since 2019; CODATA 2018).
AVOGADRO = 6.02214076e23
#: h c in eV angstrom, from the CODATA 2018 values of h, c and e (all three exact in the SI):
#: 6.62607015e-34 J s × 299792458 m s-1 / 1.602176634e-19 C × 1e10 angstrom m-1.
HC_EV_A = 12398.419843320026
#: Mean radius of the Earth, km (IUGG mean radius R1 = 6371.0088 km, Moritz 1980, Bull.
#: Géodésique 54, 395, rounded) *(from memory)*.
EARTH_RADIUS_KM = 6371.0

#: Standard atomic weights (u), IUPAC/CIAAW standard atomic weights, abridged/conventional
#: values (CIAAW, "Standard atomic weights", Pure Appl. Chem. 2021 revision) *(from memory)*.
ATOMIC_MASS_AMU: dict[str, float] = {
    "H": 1.008, "He": 4.0026, "C": 12.011, "N": 14.007, "O": 15.999, "Ne": 20.180,
    "Na": 22.990, "Mg": 24.305, "Al": 26.982, "Si": 28.085, "P": 30.974, "S": 32.06,
    "Cl": 35.45, "Ar": 39.95, "K": 39.098, "Ca": 40.078, "Fe": 55.845, "Kr": 83.798,
    "Xe": 131.29,
}

_ELEMENT = re.compile(r"([A-Z][a-z]?)(\d*)")


def formula_mass_amu(formula: str) -> float:
    """Mass (u) of a neutral formula such as ``N2``, ``NO`` or ``N(2D)`` (a state in
    parentheses does not change the mass at this precision).

    Raises ``ValueError`` for text that is not a formula of known elements. Species names of
    reaction lists (charges, levels) are read by :mod:`ionochem.species`.
    """
    body = formula.split("(", 1)[0]
    parts = _ELEMENT.findall(body)
    if not body or "".join(s + c for s, c in parts) != body:
        raise ValueError(f"cannot read a neutral formula from {formula!r}")
    total = 0.0
    for sym, count in parts:
        if sym not in ATOMIC_MASS_AMU:
            raise ValueError(f"no atomic weight for element {sym!r} in {formula!r}")
        total += ATOMIC_MASS_AMU[sym] * (int(count) if count else 1)
    return total
