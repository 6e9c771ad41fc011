"""Effect of each revised N2+ -related rate of the default list on the demo column.

Regenerates the tables of docs/validation.md, "N2+ level kinetics": for every revision, the
density with the revised rate divided by the density with the old rate put back (all other
rates at their new values), for N2+, O+, NO+ and Ne at 150, 200, 250, 300 (and 400) km of
the equinox demo; then the level-distribution assumptions of O+(2D, 2P) + N2; then N2+ at
300 km and its sensitivity to DR of the excited levels.

Run from the project folder:  python docs/n2plus_rate_changes.py
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

import ionochem  # noqa: E402

SCENARIO = ROOT / "scenarios" / "midlatitude_equinox.toml"
ALTS = (150.0, 200.0, 250.0, 300.0)
SPECIES = ("N2+", "O+", "NO+", "e")
_PREV = str(ROOT / "reactions" / "n2plus_dr_levels_previous.csv")
_EQUAL = str(ROOT / "reactions" / "n2plus_dr_levels_equal.csv")
_O2D_SPLIT = ("(0.38858 if v < 0.5 else 0.27910 if v < 1.5 else 0.18376 if v < 2.5 else "
              "0.10384 if v < 3.5 else 0.04167 if v < 4.5 else 0.00305)")

#: label, old rate -> new rate (text), the changes that put the OLD rate back.
REVISIONS = [
    ("O+(2D) + N2 -> N2+ + O", "8.0e-10 -> 1.5e-10",
     {"set": {"O2D_N2": "8.0e-10*" + _O2D_SPLIT}}),
    ("O2+ + N -> NO+ + O", "1.2e-10 -> 7.5e-11 (300/Teff)^0.7 (6.1e-11 above 400 K)",
     {"set": {"O2plus_N": "1.2e-10"}}),
    ("O2+ + N(2D)", "-> N+ + O2 2.5e-10 -> 2.5e-10 exp(-930/Teff); new -> NO+ + O 1.8e-10",
     {"set": {"O2plus_N2D": "2.5e-10"}, "scale": {"O2plus_N2D_NOplus": 0.0}}),
    ("N2+(v) + e DR table", "previous table -> Guberman 2012 v = 0, band from spread",
     {"set": {"DR_N2plus": f'0.54*table("{_PREV}", "k")',
              "DR_N2plus_2D2D": f'0.46*table("{_PREV}", "k")'}}),
    ("e + N2+(v) <-> e + N2+(v')", "absent -> dv = 1, 2 (order of magnitude)",
     {"scale": {"VdE1_N2plus": 0.0, "VE1_N2plus": 0.0, "VdE2_N2plus": 0.0,
                "VE2_N2plus": 0.0}}),
]


def _at(ds, species, alts=ALTS):
    d = ds["density"].sel(species=species)
    return np.array([float(d.sel(altitude=a, method="nearest")) for a in alts])


def _apply(model, change):
    return model.with_changes(change.get("set"), change.get("scale"), base_dir=ROOT)


def revision_table(model, base):
    """Markdown rows: revision, old -> new, new/old - 1 in % per species and altitude."""
    lines = ["| revision | old -> new | " + " | ".join(
        f"{'Ne' if s == 'e' else s} {int(a)}" for s in SPECIES for a in ALTS) + " |",
        "|---|---|" + "---|" * (len(SPECIES) * len(ALTS))]
    everything = {"set": {}, "scale": {}}
    for label, what, change in REVISIONS:
        old = _apply(model, change).solve()
        cells = [f"{100 * (_at(base, s)[i] / _at(old, s)[i] - 1):+.1f}"
                 for s in SPECIES for i in range(len(ALTS))]
        lines.append(f"| {label} | {what} | " + " | ".join(cells) + " |")
        for key in ("set", "scale"):
            everything[key].update(change.get(key, {}))
    old = _apply(model, everything).solve()
    cells = [f"{100 * (_at(base, s)[i] / _at(old, s)[i] - 1):+.1f}"
             for s in SPECIES for i in range(len(ALTS))]
    lines.append("| all revisions together | | " + " | ".join(cells) + " |")
    return "\n".join(lines)


def distribution_table(model, base):
    """N2+ at 250/300/400 km and the v >= 1 share under the three level assumptions."""
    alts = (250.0, 300.0, 400.0)
    cases = [("statistical over open levels (default)", {}),
             ("all into v = 0", {"set": {"O2D_N2": "1.5e-10 if v < 0.5 else 0",
                                         "O2P_N2": "4.8e-10 if v < 0.5 else 0"}}),
             ("statistical, with every level at the v = 0 DR rate",
              {"set": {"DR_N2plus": f'0.54*table("{_EQUAL}", "k")',
                       "DR_N2plus_2D2D": f'0.46*table("{_EQUAL}", "k")'}})]
    ref = _at(base, "N2+", alts)
    lines = ["| assumption | " + " | ".join(f"N2+ {int(a)} km" for a in alts) + " | "
             + " | ".join(f"v>=1 share {int(a)} km" for a in alts) + " |",
             "|---|" + "---|" * (2 * len(alts))]
    for label, change in cases:
        ds = _apply(model, change).solve() if change else base
        n = _at(ds, "N2+", alts)
        v0 = _at(ds, "N2+(v=0)", alts)
        cells = [f"{x:.3g} ({100 * (x / r - 1):+.0f} %)" for x, r in zip(n, ref, strict=True)]
        cells += [f"{100 * (1 - a / b):.0f} %" for a, b in zip(v0, n, strict=True)]
        lines.append(f"| {label} | " + " | ".join(cells) + " |")
    return "\n".join(lines)


def dr_excited_sensitivity(model, base):
    """N2+ at 200/250/300 km and its change when DR of v >= 1 is switched off."""
    alts = (200.0, 250.0, 300.0)
    tab = ROOT / "reactions" / "n2plus_dr_levels.csv"
    off = {"set": {"DR_N2plus": f'0.54*table("{tab}", "k")*(1 if v < 0.5 else 0)',
                   "DR_N2plus_2D2D": f'0.46*table("{tab}", "k")*(1 if v < 0.5 else 0)'}}
    n = _at(base, "N2+", alts)
    n_off = _at(_apply(model, off).solve(), "N2+", alts)
    change = ", ".join(f"{100 * (b / a - 1):+.1f} %" for a, b in zip(n, n_off, strict=True))
    keff = base["effective_rate_coefficient"].sel(family_reaction="DR_N2plus(v)") / 0.54
    k0 = base["rate_coefficient"].sel(reaction="DR_N2plus(v=0)") / 0.54
    ratio = [float((keff / k0).sel(altitude=a, method="nearest")) for a in (150.0, *alts)]
    return (f"N2+ at 200/250/300 km: {n[0]:.3g} / {n[1]:.3g} / {n[2]:.3g} cm-3; "
            f"with DR(v >= 1) = 0: {change}; "
            f"effective DR / DR(v=0) at 150/200/250/300 km: "
            f"{', '.join(f'{r:.3f}' for r in ratio)}")


def main():
    model = ionochem.Model(ionochem.load_scenario(SCENARIO))
    base = model.solve()
    print("Revisions (new/old - 1, %):\n")
    print(revision_table(model, base))
    print("\nLevel distribution of O+(2D, 2P) + N2 products:\n")
    print(distribution_table(model, base))
    print("\n" + dr_excited_sensitivity(model, base))


if __name__ == "__main__":
    main()
