"""Write the N2+ per-level rate tables of the default reaction list from their sources.

Run from the project folder:  python reactions/make_n2plus_tables.py  [--check]

Every number below carries its source; *(from memory)* marks a value not read in the
source (listed in docs/validation.md, "N2+ level kinetics: values to verify").
``--check`` rewrites nothing and exits 1 when a table on disk differs from what this script
would write (tests/test_n2plus_kinetics.py runs it).

Tables written (level-row tables, docs/reaction-list.md):
- n2plus_dr_levels.csv            default per-level DR, v = 0..5, bands from the spread
- n2plus_dr_levels_equal.csv      alternative: every level at the v = 0 rate
- n2plus_dr_levels_previous.csv   alternative: the table of the previous default list
- n2plus_vib_dv1.csv              e + N2+(v) -> e + N2+(v-1), rows by the UPPER level v
- n2plus_vib_dv2.csv              e + N2+(v) -> e + N2+(v-2), rows by the upper level v
- n2plus_o2d_levels_statistical.csv  template of a user-given product distribution
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
TOP = 5                                   # highest resolved level: "v = 5 and above"
TE_K = np.array([100, 150, 200, 300, 500, 700, 1000, 1200, 1500, 2000, 3000, 4000, 5000.0])


# ------------------------------------------------------------------ DR, v = 0
def dr_v0_determinations(te):
    """Independent determinations of k_DR(N2+ X v=0, Te), cm3 s-1: name -> array.

    - theory: Guberman 2012, J. Chem. Phys. 137, 074309, least-squares fit to the MQDT rate
      constant, 2.2 (+0.2, -0.4) x 1e-7 (Te/300)^-0.40 for Te = 100-3000 K (read in the
      abstract); the quoted error bars enter as two more curves.
    - merged beam / storage ring (review): Sheehan & St.-Maurice 2004, JGR 109, A03302,
      2.2e-7 (Te/300)^-0.39 below 1200 K and 1.95e-7 (Te/300)^-0.57 above (the two-piece
      form as printed in a compiled rate table, not re-read in the paper; docs/physics.md
      §9.2).
    - afterglow: Mehr & Biondi 1969, Phys. Rev. 181, 264, 1.8e-7 at 300 K, Te^-0.39 (abstract
      checked; reactions/README.md, key MB69).
    """
    x = te / 300.0
    return {
        "theory": 2.2e-7 * x ** -0.40,
        "theory_low": 1.8e-7 * x ** -0.40,
        "theory_high": 2.4e-7 * x ** -0.40,
        "merged_beam": np.where(te < 1200, 2.2e-7 * x ** -0.39, 1.95e-7 * x ** -0.57),
        "afterglow": 1.8e-7 * x ** -0.39,
    }


# ------------------------------------------------------------------ DR, v >= 1
#: k_v / k_0 at 100 K, 300 K and from 1000 K up (linear in log Te between, constant above
#: 1000 K). Shape from the ab initio rate constants of Guberman 2014, J. Chem. Phys. 141,
#: 204307 (abstract read: at 100 K the level rates overlap except v = 3; at and above 300 K
#: the excited levels recombine significantly more slowly than v = 0); the ratios themselves
#: *(from memory)*. v = 5 (not computed there) takes the v = 4 ratios *(assumption)*.
DR_RATIOS = {1: (1.00, 0.65, 0.55), 2: (1.00, 0.60, 0.50), 3: (0.60, 0.50, 0.45),
             4: (1.00, 0.60, 0.50), 5: (1.00, 0.60, 0.50)}


def _ratio(nodes, te):
    lt = np.log(np.clip(te, 100.0, 1000.0))
    return np.interp(lt, np.log([100.0, 300.0, 1000.0]), nodes)


def dr_table(te=TE_K):
    """Default per-level DR rows: (v, Te, k, k_low, k_high).

    v = 0: k the theory fit; band the envelope of every determination of
    :func:`dr_v0_determinations` (theory with its error bars, merged beam, afterglow).
    v >= 1: k = ratio x k_0 (Guberman 2014 shape, ratios *(from memory)*). Band: low k/2
    (the ratios were not read: a factor 2 on the low side *(common practice)*), high the
    larger of the v = 0 band's top and 1.3 k, because storage-ring analyses assumed
    comparable rates for v = 0-3 and the theory finds them comparable at zero energy
    (Guberman 2013, J. Chem. Phys. 139, 124318, abstract read) -- so "every level at the
    v = 0 rate" is inside the band.
    """
    d = dr_v0_determinations(te)
    k0 = d["theory"]
    allv = np.vstack(list(d.values()))
    lo0, hi0 = allv.min(axis=0), allv.max(axis=0)
    rows = [(0, t, a, b, c) for t, a, b, c in zip(te, k0, lo0, hi0, strict=True)]
    for v in range(1, TOP + 1):
        k = _ratio(DR_RATIOS[v], te) * k0
        rows += [(v, t, a, a / 2, max(c, 1.3 * a)) for t, a, c in zip(te, k, hi0, strict=True)]
    return rows


def dr_equal_table(te=TE_K):
    """Alternative: every level at the default v = 0 rate, with the v = 0 band."""
    base = [r for r in dr_table(te) if r[0] == 0]
    return [(v, *r[1:]) for v in range(TOP + 1) for r in base]


def dr_previous_table(te=TE_K):
    """Alternative: the previous default (k0 = 2.2e-7 (300/Te)^0.39, Sheehan & St.-Maurice
    2004 after Mehr & Biondi 1969 *(from memory)*, band k/1.3..1.3k; v >= 1 the same ratios,
    band k/2 .. max(2k, 1.3 k0)); v = 5 repeats v = 4."""
    k0 = 2.2e-7 * (300.0 / te) ** 0.39
    rows = [(0, t, a, a / 1.3, 1.3 * a) for t, a in zip(te, k0, strict=True)]
    for v in range(1, TOP + 1):
        k = _ratio(DR_RATIOS[v], te) * k0
        rows += [(v, t, a, a / 2, max(2 * a, 1.3 * b)) for t, a, b in zip(te, k, k0,
                                                                           strict=True)]
    return rows


# ------------------------------------------------------------------ e + N2+(v) -> e + N2+(v')
#: De-excitation e + N2+(v) -> e + N2+(v - dv), k = A_dv (300/Te)^0.5 cm3 s-1 for every
#: upper level, with a one-sigma band k/F .. k F. *(From memory, order of magnitude)*: the
#: MQDT thermal rate coefficients of Abdoulanziz et al. (arXiv:2202.12096; v = 0..5,
#: 100-5000 K, abstract read) could not be read; vibrational de-excitation of diatomic ions
#: by slow electrons is of order 1e-8 to 1e-7 cm3 s-1 near 300 K (docs/physics.md §9.2,
#: from memory), Delta v = 2 weaker. The Te^-1/2 law is that of a cross section falling as
#: 1/E (exoergic process, Wigner threshold law) *(common practice)*. The level independence
#: is an assumption. F = 3.3 makes the band 1e-8 .. 1e-7 at 300 K for Delta v = 1.
VIB_DEEXCITATION = {1: (3.0e-8, 3.3), 2: (1.0e-8, 4.0)}


def vib_table(dv, te=TE_K):
    """Rows (v_upper, Te, k, k_low, k_high) of the Delta v = dv de-excitation."""
    a, f = VIB_DEEXCITATION[dv]
    k = a * (300.0 / te) ** 0.5
    return [(v, t, x, x / f, x * f) for v in range(dv, TOP + 1)
            for t, x in zip(te, k, strict=True)]


# ------------------------------------------------------------------ O+(2D) + N2 product levels
def o2d_levels_template():
    """Statistical prior of O+(2D) + N2 -> N2+(v) + O over v = 0..5 (the list's default,
    written out as a user-editable level-row table; two temperature rows, same value)."""
    sys.path.insert(0, str(HERE.parent))
    from ionochem.environment.n2plus_levels import (
        O2D_N2_EXOTHERMICITY_EV,
        statistical_level_distribution,
    )
    frac = statistical_level_distribution(O2D_N2_EXOTHERMICITY_EV, list(range(TOP + 1)))
    return [(v, t, max(float(p), 1e-6)) for v, p in enumerate(frac) for t in (10.0, 1e5)]


# ------------------------------------------------------------------ writing
_HEAD = {
    "n2plus_dr_levels.csv": """\
# n2plus_dr_levels.csv: dissociative recombination N2+ X(v) + e by vibrational level,
# k with a one-sigma band (k_low .. k_high), cm3 s-1, Te = 100 .. 5000 K, v = 0..5 (v = 5
# stands for "v = 5 and above"). Written by reactions/make_n2plus_tables.py (its docstrings
# give every source). v = 0: theory fit of Guberman 2012, J. Chem. Phys. 137, 074309,
# 2.2e-7 (Te/300)^-0.40 (abstract read; fit range 100-3000 K, extrapolated above); band:
# envelope of that fit's error bars (+0.2/-0.4 e-7), the merged-beam review form of Sheehan &
# St.-Maurice 2004, JGR 109, A03302, and the afterglow value of Mehr & Biondi 1969, Phys.
# Rev. 181, 264. v >= 1: k_v = r_v(Te) k_0 with the shape of the ab initio rate constants of
# Guberman 2014, J. Chem. Phys. 141, 204307 (ratios *(from memory)*; v = 5 as v = 4, an
# assumption); band k_v/2 .. the v = 0 band top (contains "every level at the v = 0 rate").
# Alternatives: n2plus_dr_levels_equal.csv, n2plus_dr_levels_previous.csv.
""",
    "n2plus_dr_levels_equal.csv": """\
# n2plus_dr_levels_equal.csv: alternative "every level recombines at the v = 0 rate" (the
# assumption of level-unresolved schemes): the v = 0 rows of n2plus_dr_levels.csv (Guberman
# 2012 fit, band from the spread of determinations) for every v = 0..5. Written by
# reactions/make_n2plus_tables.py. Switch to it in a scenario with one line:
#   [changes] set = { "DR_N2plus" = "0.54*table(\\"n2plus_dr_levels_equal.csv\\", \\"k\\")",
#                     "DR_N2plus_2D2D" = "0.46*table(\\"n2plus_dr_levels_equal.csv\\", \\"k\\")" }
# (scenario paths resolve against the reaction list's folder when the list is the default;
# on the command line use --set with reactions/n2plus_dr_levels_equal.csv).
""",
    "n2plus_dr_levels_previous.csv": """\
# n2plus_dr_levels_previous.csv: the per-level DR table of the previous default list, kept
# as an alternative: v = 0 2.2e-7 (300/Te)^0.39 (Sheehan & St.-Maurice 2004 after Mehr &
# Biondi 1969) *(from memory)*, band k/1.3 .. 1.3 k; v >= 1 the ratios of
# n2plus_dr_levels.csv *(from memory)*, band k/2 .. max(2k, 1.3 k0); v = 5 repeats v = 4.
# Written by reactions/make_n2plus_tables.py.
""",
    "n2plus_vib_dv1.csv": """\
# n2plus_vib_dv1.csv: electron-impact vibrational de-excitation e + N2+(v) -> e + N2+(v-1),
# rows by the UPPER level v = 1..5, cm3 s-1, one-sigma band. k = 3.0e-8 (300/Te)^0.5 for
# every v, band k/3.3 .. 3.3 k: ORDER OF MAGNITUDE *(from memory)* -- the MQDT rate
# coefficients of Abdoulanziz et al., arXiv:2202.12096 (v = 0..5, up to 5000 K) could not be
# read; replace this table by theirs. The excitation v-1 -> v of the reaction list is this
# table times exp(-(E_v - E_(v-1))/kTe) (detailed balance, N2+ X levels from omega_e =
# 2207.00, omega_e x_e = 16.10 cm-1, Huber & Herzberg 1979 *(from memory)*).
# Written by reactions/make_n2plus_tables.py.
""",
    "n2plus_vib_dv2.csv": """\
# n2plus_vib_dv2.csv: electron-impact vibrational de-excitation e + N2+(v) -> e + N2+(v-2),
# rows by the upper level v = 2..5, cm3 s-1. k = 1.0e-8 (300/Te)^0.5, band k/4 .. 4 k: ORDER
# OF MAGNITUDE *(from memory)*, as n2plus_vib_dv1.csv. Excitation by detailed balance in the
# reaction list. Written by reactions/make_n2plus_tables.py.
""",
    "n2plus_o2d_levels_statistical.csv": """\
# n2plus_o2d_levels_statistical.csv: product distribution of O+(2D) + N2 -> N2+(v) + O over
# v = 0..5 (fractions, sum 1): the statistical prior P(v) ~ (E - E_v)^(3/2), E = 1.36 eV,
# of ionochem.environment.n2plus_levels.statistical_level_distribution (Levine & Bernstein
# 1987 *(from memory)*) -- the default list's assumption written as a table, a TEMPLATE for a
# user-given distribution: copy, edit the fractions (positive; two rows per level, the
# same value) and set in a scenario
#   [changes] set = { "O2D_N2" = "1.5e-10*table(\\"my_levels.csv\\", \\"fraction\\")" }
# The temperature column is required by the table format and unused (constant).
# Written by reactions/make_n2plus_tables.py.
""",
}


def _render(name):
    if name == "n2plus_dr_levels.csv":
        rows, cols = dr_table(), "v,Te_K,k,k_low,k_high"
    elif name == "n2plus_dr_levels_equal.csv":
        rows, cols = dr_equal_table(), "v,Te_K,k,k_low,k_high"
    elif name == "n2plus_dr_levels_previous.csv":
        rows, cols = dr_previous_table(), "v,Te_K,k,k_low,k_high"
    elif name.startswith("n2plus_vib_dv"):
        rows, cols = vib_table(int(name[-5])), "v,Te_K,k,k_low,k_high"
    else:
        rows, cols = o2d_levels_template(), "v,Teff_K,fraction"
    body = "\n".join(",".join([str(int(r[0])), f"{r[1]:g}"] + [f"{x:.5e}" for x in r[2:]])
                     for r in rows)
    return _HEAD[name] + cols + "\n" + body + "\n"


def main(argv=None):
    check = "--check" in (argv if argv is not None else sys.argv[1:])
    stale = []
    for name in _HEAD:
        text = _render(name)
        path = HERE / name
        if check:
            if not path.exists() or path.read_text() != text:
                stale.append(name)
        else:
            path.write_text(text)
    if stale:
        print("out of date: " + ", ".join(stale) + " (run python reactions/make_n2plus_tables.py)")
        return 1
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
