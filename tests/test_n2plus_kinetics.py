"""N2+ level kinetics of the default list: electron-impact vibrational transitions, per-level
recombination, and a box model against an independent master equation.

References: the N2+ X vibrational constants omega_e = 2207.00, omega_e x_e = 16.10 cm-1
(Huber & Herzberg 1979, Constants of Diatomic Molecules *(from memory)*) and h c / k_B =
1.438776877 cm K (CODATA 2018) for detailed balance; the read abstracts of Guberman 2012, J.
Chem. Phys. 137, 074309 (v = 0 fit 2.2 (+0.2, -0.4) e-7 (Te/300)^-0.40, 100-3000 K) and
Guberman 2014, J. Chem. Phys. 141, 204307 (levels overlap at 100 K except v = 3; excited
levels slower at and above 300 K; a 300 K total below 2.0e-7 means excited ions); Mehr &
Biondi 1969, Phys. Rev. 181, 264 (afterglow, 1.8e-7 at 300 K, Te^-0.39, abstract); scipy's
``solve_ivp`` for the master equation.
"""

from __future__ import annotations

import runpy
from pathlib import Path

import numpy as np
import pytest
from scipy.integrate import solve_ivp

import ionochem
from ionochem.mechanism.parser import parse_reaction_list

ROOT = Path(__file__).resolve().parents[1]
LIST_PATH = ROOT / "reactions" / "ionosphere.reactions"
WE, WEXE, C2 = 2207.00, 16.10, 1.438776877           # cm-1, cm-1, cm K
TOP = 5


def _energy_cm(v):
    """G(v) - G(0) of N2+ X (Dunham two-term; Huber & Herzberg 1979 constants)."""
    g = lambda x: WE * (x + 0.5) - WEXE * (x + 0.5) ** 2  # noqa: E731
    return g(np.asarray(v, float)) - g(0.0)


@pytest.fixture(scope="module")
def by_id():
    return {r.id: r for r in parse_reaction_list(LIST_PATH).reactions}


def _k(r, te):
    env = {"Te": np.atleast_1d(np.asarray(te, float)), "v": float(r.level)}
    return np.asarray(r.k.evaluate(env), float)


def _read_table(name):
    rows = [ln for ln in (ROOT / "reactions" / name).read_text().splitlines()
            if ln and not ln.startswith("#")]
    head = rows[0].split(",")
    data = np.array([[float(x) for x in ln.split(",")] for ln in rows[1:]])
    return {h: data[:, i] for i, h in enumerate(head)}


def _table_k(name, v, te, column="k"):
    """Log-log interpolation of a level-row table, written here (docs/reaction-list.md)."""
    t = _read_table(name)
    sel = t["v"] == v
    return np.exp(np.interp(np.log(te), np.log(t["Te_K"][sel]), np.log(t[column][sel])))


@pytest.mark.parametrize("te", [500.0, 1500.0, 3000.0])
def test_detailed_balance_of_every_electron_impact_pair(by_id, te):
    """k(v' -> v) / k(v -> v') = exp(-(E_v - E_v')/k Te) for every excitation/de-excitation
    pair (Delta v = 1 and 2, v <= 5) of the default list at 500, 1500 and 3000 K, with the
    N2+ X levels from the Huber & Herzberg constants (Sigma states: no degeneracy ratio);
    to 1e-9."""
    pairs = 0
    for dv in (1, 2):
        for v in range(dv, TOP + 1):
            down = _k(by_id[f"VdE{dv}_N2plus(v={v})"], te)
            up = _k(by_id[f"VE{dv}_N2plus(v={v})"], te)
            expect = np.exp(-C2 * (_energy_cm(v) - _energy_cm(v - dv)) / te)
            np.testing.assert_allclose(up / down, expect, rtol=1e-9)
            pairs += 1
    assert pairs == 9


def test_electron_impact_families_connect_the_right_levels(by_id):
    """Each VE/VdE member moves an ion between the levels its label says: VdE{dv}(v=k) takes
    N2+(v=k) to N2+(v=k-dv), VE{dv}(v=k) the reverse (docs/reaction-list.md)."""
    for dv in (1, 2):
        for v in range(dv, TOP + 1):
            down, up = by_id[f"VdE{dv}_N2plus(v={v})"], by_id[f"VE{dv}_N2plus(v={v})"]
            names = lambda side: sorted(sp.name for sp, _ in side)  # noqa: E731
            assert names(down.reactants) == sorted([f"N2+(v={v})", "e"])
            assert names(down.products) == sorted([f"N2+(v={v - dv})", "e"])
            assert names(up.reactants) == names(down.products)
            assert names(up.products) == names(down.reactants)


@pytest.mark.parametrize("te", [300.0, 1000.0, 3000.0])
def test_dr_v0_reproduces_the_published_fit_and_its_band_covers_the_others(te):
    """v = 0 row of n2plus_dr_levels.csv = 2.2e-7 (Te/300)^-0.40 (Guberman 2012 fit, abstract)
    at 300, 1000 and 3000 K to 1e-4 (table nodes); its band contains that fit's error bars
    (1.8-2.4e-7 at 300 K scaled by the same law) and the afterglow 1.8e-7 (Te/300)^-0.39 of
    Mehr & Biondi 1969 (abstract)."""
    k = _table_k("n2plus_dr_levels.csv", 0, te)
    lo = _table_k("n2plus_dr_levels.csv", 0, te, "k_low")
    hi = _table_k("n2plus_dr_levels.csv", 0, te, "k_high")
    x = te / 300.0
    np.testing.assert_allclose(k, 2.2e-7 * x ** -0.40, rtol=1e-4)
    for other in (1.8e-7 * x ** -0.40, 2.4e-7 * x ** -0.40, 1.8e-7 * x ** -0.39):
        assert lo * (1 - 1e-4) <= other <= hi * (1 + 1e-4)


def test_dr_excited_levels_follow_the_published_shape():
    """Guberman 2014 (abstract): at 100 K the level rates overlap except v = 3 (here within
    5 %, and v = 3 at most 0.7 of v = 0); at and above 300 K every excited level recombines
    more slowly than v = 0 (checked at 300, 1000, 3000 K); and the v = 0 value at 300 K is at
    least 2.0e-7, the level below which a total means excited ions. The band of every
    excited level reaches the v = 0 rate (the equal-rates alternative lies inside)."""
    k0 = {t: _table_k("n2plus_dr_levels.csv", 0, t) for t in (100.0, 300.0, 1000.0, 3000.0)}
    assert k0[300.0] >= 2.0e-7
    for v in range(1, TOP + 1):
        r100 = _table_k("n2plus_dr_levels.csv", v, 100.0) / k0[100.0]
        if v == 3:
            assert r100 <= 0.7
        else:
            assert abs(r100 - 1) < 0.05
        for t in (300.0, 1000.0, 3000.0):
            assert _table_k("n2plus_dr_levels.csv", v, t) < k0[t]
            assert _table_k("n2plus_dr_levels.csv", v, t, "k_high") >= k0[t]


def test_tables_are_what_the_generator_writes():
    """The per-level tables on disk are those reactions/make_n2plus_tables.py writes from
    its cited sources (so a hand edit of a CSV without its source fails)."""
    ns = runpy.run_path(str(ROOT / "reactions" / "make_n2plus_tables.py"))
    assert ns["main"](["--check"]) == 0


# ----------------------------------------------------------------------------- box model
ALT = np.array([200.0, 250.0, 300.0])
TE = np.array([1000.0, 2000.0, 3000.0])               # table nodes: exact interpolation
NE = np.array([2e5, 6e5, 1e6])                        # invented, cm-3
N_N2 = np.array([2e9, 3e8, 5e7])                      # invented, cm-3
N_O = np.array([5e9, 2e9, 7e8])
Q = np.array([[30.0, 12.0, 6.0, 3.0, 1.5, 0.8]]) * np.array([[1.0], [0.5], [0.2]])  # (A, v)
K_RELAX, K_CT = 5e-10, 1.3e-10


def _box_list():
    tab = ROOT / "reactions"
    lines = [
        "P(v): N2 -> N2+(v) + e | k = prescribed | levels v = 0..5 | ref = invented test",
        f'DR(v): N2+(v) + e -> N + N | k = table("{tab / "n2plus_dr_levels.csv"}", "k") '
        "| levels v = 0..5 | ref = default table",
        f"REL(v): N2+(v) + N2 -> N2+(v=0) + N2 | k = {K_RELAX} | levels v = 1..5 | ref = test",
        f"CT(v): N2+(v) + O -> NO+ + N | k = {K_CT} | levels v = 0..5 | ref = invented test",
        "D: NO+ + e -> N + O | k = 4e-7 | ref = invented test",
        "PO: O -> O+ + e | k = prescribed | ref = invented test",
        "RO: O+ + e -> O + hv | k = 1e-12 | ref = invented test",
    ]
    for dv, de in ((1, "2207.00 - 32.20*v"), (2, "4446.20 - 64.40*v")):
        t = f'table("{tab / f"n2plus_vib_dv{dv}.csv"}", "k")'
        lines.append(f"VdE{dv}(v): N2+(v) + e -> N2+(v-{dv}) + e | k = {t} "
                     f"| levels v = {dv}..5 | ref = default table")
        lines.append(f"VE{dv}(v): N2+(v-{dv}) + e -> N2+(v) + e | k = {t}*exp(-1.438776877*({de})"
                     f"/Te) | levels v = {dv}..5 | ref = default table, detailed balance")
    return "\n".join(lines) + "\n"


def _master_equation_steady(electron_collisions=True):
    """Steady N2+(v) from d n/dt = q + M n integrated with solve_ivp, M built here from the
    CSV tables (own interpolation) and the level energies of the Huber & Herzberg constants."""
    out = np.zeros((ALT.size, TOP + 1))
    for a in range(ALT.size):
        te, ne = TE[a], NE[a]
        M = np.zeros((TOP + 1, TOP + 1))
        for v in range(TOP + 1):
            M[v, v] -= ne * _table_k("n2plus_dr_levels.csv", v, te) + K_CT * N_O[a]
            if v >= 1:
                M[v, v] -= K_RELAX * N_N2[a]
                M[0, v] += K_RELAX * N_N2[a]
        for dv in (1, 2) if electron_collisions else ():
            for v in range(dv, TOP + 1):
                kd = ne * _table_k(f"n2plus_vib_dv{dv}.csv", v, te)
                ku = kd * np.exp(-C2 * (_energy_cm(v) - _energy_cm(v - dv)) / te)
                M[v, v] -= kd
                M[v - dv, v] += kd
                M[v - dv, v - dv] -= ku
                M[v, v - dv] += ku
        sol = solve_ivp(lambda t, n, q=Q[a], m=M: q + m @ n, (0.0, 2e5), np.zeros(TOP + 1),
                        method="Radau", jac=lambda t, n, m=M: m, rtol=1e-12, atol=1e-20)
        assert sol.success
        out[a] = sol.y[:, -1]
    return out


def test_box_levels_match_an_independent_master_equation(column, tmp_path):
    """No photons, fixed Te, Ne (electrons = "table", O+ the balance ion) and neutrals: the
    level populations of the model's steady solve equal the steady state of the master
    equation integrated with scipy's solve_ivp (rates computed independently from the
    tables and the Huber & Herzberg level energies) to 1e-8."""
    (tmp_path / "box_ne.csv").write_text(
        "altitude_km,Ne\n" + "\n".join(f"{a},{n}" for a, n in zip(ALT, NE, strict=True)) + "\n")
    prod = {f"P(v={v})": Q[:, v] for v in range(TOP + 1)}
    prod["PO"] = np.full(ALT.size, 1e3)
    path = column(_box_list(), ALT,
                  neutrals={"N2": N_N2, "O": N_O, "N": np.full(ALT.size, 1e7)},
                  Tn=np.full(ALT.size, 800.0), Te=TE, production=prod, name="box",
                  extra='[solve]\nelectrons = "table"\nelectron_table = "box_ne.csv"\n'
                        'balance_ion = "O+"\nrtol = 1e-13\n')
    ds = ionochem.Model(ionochem.load_scenario(path)).solve()
    model = np.stack([ds["density"].sel(species=f"N2+(v={v})").values
                      for v in range(TOP + 1)], axis=-1)
    ref = _master_equation_steady()
    np.testing.assert_allclose(model, ref, rtol=1e-8)
    # The electron collisions matter in this box (else the test could not see them): the
    # v = 5 population differs from the one without them by more than 1e-3, 1e5 times the
    # tolerance.
    bare = _master_equation_steady(electron_collisions=False)
    assert np.all(np.abs(ref[:, 5] / bare[:, 5] - 1) > 1e-3)


def test_electron_collisions_alone_give_a_boltzmann_distribution_at_te(column, tmp_path):
    """Detailed balance as physics: with production into each level proportional to the
    Boltzmann factor exp(-E_v/k Te) and the same loss frequency for every level (no DR, no
    relaxation), the detailed-balanced electron collisions leave that distribution
    unchanged, so the model's levels are Boltzmann at Te and n2plus_vibrational_temperature
    equals Te (Huber & Herzberg level energies), to 1e-8."""
    (tmp_path / "bz_ne.csv").write_text(
        "altitude_km,Ne\n" + "\n".join(f"{a},{n}" for a, n in zip(ALT, NE, strict=True)) + "\n")
    text = "\n".join(ln for ln in _box_list().splitlines()
                     if not ln.startswith(("DR(v)", "REL(v)"))) + "\n"
    boltz = np.exp(-C2 * _energy_cm(np.arange(TOP + 1))[None, :] / TE[:, None])   # (A, v)
    prod = {f"P(v={v})": 50.0 * boltz[:, v] for v in range(TOP + 1)}
    prod["PO"] = np.full(ALT.size, 1e3)
    path = column(text, ALT, neutrals={"N2": N_N2, "O": N_O, "N": np.full(ALT.size, 1e7)},
                  Tn=np.full(ALT.size, 800.0), Te=TE, production=prod, name="bz",
                  extra='[solve]\nelectrons = "table"\nelectron_table = "bz_ne.csv"\n'
                        'balance_ion = "O+"\nrtol = 1e-13\n')
    ds = ionochem.Model(ionochem.load_scenario(path)).solve()
    n = np.stack([ds["density"].sel(species=f"N2+(v={v})").values for v in range(TOP + 1)], -1)
    np.testing.assert_allclose(n / n[:, :1], boltz, rtol=1e-8)
    np.testing.assert_allclose(ds["n2plus_vibrational_temperature"].values, TE, rtol=1e-8)


# ----------------------------------------------------------------------------- level split
def _demo_with(tmp_path, changes=""):
    """The equinox demo on a 30 km grid, with an optional [changes] section."""
    text = (ROOT / "scenarios" / "midlatitude_equinox.toml").read_text()
    text = text.replace("../reactions/ionosphere.reactions",
                        str(ROOT / "reactions" / "ionosphere.reactions"))
    text = text.replace("step = 2.0", "step = 30.0")
    path = tmp_path / "demo.toml"
    path.write_text(text + ("\n[changes]\n" + changes + "\n" if changes else ""))
    return ionochem.Model(ionochem.load_scenario(path))


def test_product_level_assumption_switches_in_one_scenario_line(tmp_path):
    """The O+(2D) + N2 level split is switched by one [changes] line: the template table
    n2plus_o2d_levels_statistical.csv reproduces the default statistical split (the prior
    P(v) ~ (E - E_v)^(3/2) of Levine & Bernstein, to the list's 5 decimals, 1e-3), and "all
    into v = 0" puts the whole 1.5e-10 (Li et al. 1997 *(from memory)*) into v = 0."""
    ids = [f"O2D_N2(v={v})" for v in range(TOP + 1)]
    base = _demo_with(tmp_path)
    cols = [base.reactions.index(i) for i in ids]
    k_def = base.rate_coefficients()[:, cols]
    table = _demo_with(tmp_path, 'set = { "O2D_N2" = "1.5e-10*table('
                       '\\"n2plus_o2d_levels_statistical.csv\\", \\"fraction\\")" }')
    np.testing.assert_allclose(table.rate_coefficients()[:, cols], k_def, rtol=1e-3)
    ground = _demo_with(tmp_path, 'set = { "O2D_N2" = "1.5e-10 if v < 0.5 else 0" }')
    k = ground.rate_coefficients()[:, cols]
    np.testing.assert_allclose(k[:, 0], 1.5e-10, rtol=1e-12)
    assert np.all(k[:, 1:] == 0.0)
    np.testing.assert_allclose(k_def.sum(axis=1), 1.5e-10, rtol=1e-12)
    # The assumption's uncertainty reaches the Monte Carlo: every level carries f >= 3.
    f = base.uncertainty_factors()
    assert np.all(np.asarray(f)[..., cols] >= 3.0)
