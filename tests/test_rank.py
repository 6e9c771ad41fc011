"""Ranking of reactions by their sensitivities (ionochem.analysis.rank, ``ionochem rank``).

Columns are synthetic (invented rates and densities) with sensitivities known in closed
form.
"""

from __future__ import annotations

import numpy as np
import pytest
import xarray as xr

import ionochem
from ionochem.analysis.rank import rank_reactions
from ionochem.cli import build_parser

ALT = np.linspace(100.0, 300.0, 21)
Q = 80.0 * np.exp(-((ALT - 180.0) / 60.0) ** 2) + 5.0     # invented production, cm-3 s-1
TE = np.linspace(300.0, 2000.0, ALT.size)
N2 = 1e12 * np.exp(-(ALT - 100.0) / 35.0)
K_CT = 1.2e-12

ONE_ION = """\
P1: O -> O+ + e | k = prescribed | ref = invented test
R1: O+ + e -> O | k = 2.0e-7*(300/Te)^0.7 | ref = invented test
"""

# RR is irrelevant: its O+ loss is some 15 orders of magnitude below charge transfer.
CHAIN = f"""\
P1: O -> O+ + e | k = prescribed | ref = invented test
C1: O+ + N2 -> NO+ + N | k = {K_CT:g} | ref = invented test
RR: O+ + e -> O | k = 1e-22 | ref = invented test
D1: NO+ + e -> N + O | k = 4.0e-7*(300/Te)^0.5 | ref = invented test
"""


def _sens(column, text):
    neutrals = {"O": 1e11 * np.exp(-(ALT - 100.0) / 60.0), "N2": N2,
                "N": 1e8 * np.ones_like(ALT)}
    path = column(text, ALT, neutrals=neutrals, Tn=np.linspace(200.0, 900.0, ALT.size),
                  Te=TE, production={"P1": Q})
    return path, ionochem.Model(ionochem.load_scenario(path)).sensitivity()


def _run(argv):
    """Run a subcommand of the ``ionochem`` parser; ionochem.Error propagates (cli.main
    would turn it into one line and exit 2)."""
    args = build_parser().parse_args(argv)
    args.command_line = "ionochem " + " ".join(argv)
    return args.func(args)


def test_one_ion_ranks_production_and_recombination_at_one_half(column):
    """n = sqrt(q/α): P and R rank first and second at |S| = 0.5 with opposite signs, Te
    third at 0.35 (α ∝ Te^-0.7), by both measures (analytic, n = sqrt(q/α))."""
    _, sens = _sens(column, ONE_ION)
    for by in ("max", "mean"):
        rows = rank_reactions(sens, "O+", None, top=3, by=by, min_share=0)
        # P1 and R1 tie at 0.5 (either order), Te follows.
        assert {r.reaction for r in rows[:2]} == {"P1", "R1"} and rows[2].reaction == "Te"
        signed = {r.reaction: r.signed_at_max for r in rows}
        assert signed == pytest.approx({"P1": 0.5, "R1": -0.5, "Te": 0.35}, abs=1e-8)
        assert [r.mean_abs for r in rows] == pytest.approx([0.5, 0.5, 0.35], abs=1e-8)


def test_chain_ranks_closed_form_sensitivities_and_irrelevant_reaction_last(column):
    """NO+ with α x (x + o) = P, o = [O+] = P/(k[N2]): S(D1) = −(x+o)/(2x+o),
    S(P1) = x/(2x+o), S(C1) = o/(2x+o), S(Te) = −S(D1)/2 (α ∝ Te^-0.5) — the largest |S|,
    its altitude and the mean match these to 1e-6, and RR (negligible) ranks last by both
    measures (analytic)."""
    _, sens = _sens(column, CHAIN)
    o = Q / (K_CT * N2)
    x = sens["density"].sel(species="NO+").values
    expect = {"D1": -(x + o) / (2 * x + o), "P1": x / (2 * x + o), "C1": o / (2 * x + o)}
    expect["Te"] = -0.5 * expect["D1"]
    # C1's rate is k [O+][N2]: the local density of N2 acts exactly as k does (analytic).
    expect["n(N2)"] = expect["C1"]
    for by in ("max", "mean"):
        rows = rank_reactions(sens, "NO+", None, top=None, by=by, min_share=0)
        assert len(rows) == 6 and rows[-1].reaction == "RR"
        assert rows[-1].max_abs < 1e-9
        for r in rows[:-1]:
            e = expect[r.reaction]
            i = np.argmax(np.abs(e))
            assert r.signed_at_max == pytest.approx(e[i], abs=1e-6)
            assert r.altitude_km == ALT[i]
            assert r.mean_abs == pytest.approx(np.mean(np.abs(e)), abs=1e-6)
        measure = [r.max_abs if by == "max" else r.mean_abs for r in rows]
        assert measure == sorted(measure, reverse=True)


def test_altitude_range_restricts_the_levels(column):
    """Only levels inside --altitudes count: the altitude of each maximum lies in the range,
    and the mean is over those levels alone (definition of the measures)."""
    _, sens = _sens(column, CHAIN)
    rows = rank_reactions(sens, "NO+", (200.0, 260.0), top=None)
    inside = (ALT >= 200) & (ALT <= 260)
    S = sens["sensitivity"].sel(species="NO+", reaction="D1").values[inside]
    d1 = next(r for r in rows if r.reaction == "D1")
    assert 200.0 <= d1.altitude_km <= 260.0
    assert d1.mean_abs == pytest.approx(np.mean(np.abs(S)), rel=1e-12)


def test_rank_cli_prints_both_tables_and_writes_files(column, tmp_path, capsys):
    """The table lists the reactions by largest and by altitude-mean |S| (both printed);
    the netCDF carries the ranking measures; the PNG is non-empty (README.md, 'What it does';
    docs/outputs.md, 'Rankings')."""
    path, _ = _sens(column, CHAIN)
    out, fig = tmp_path / "r.nc", tmp_path / "r.png"
    assert _run(["rank", str(path), "--species", "NO+", "--top", "3", "-o", str(out),
                 "--plot", str(fig)]) == 0
    text = capsys.readouterr().out
    assert "NO+: top 3 by largest |S|" in text and "NO+: top 3 by altitude-mean |S|" in text
    first = text.split("by largest |S|")[1].splitlines()[2].split()
    assert first[:2] == ["1", "D1"]
    with xr.open_dataset(out) as ds:
        mx = ds["max_abs_sensitivity"].sel(species="NO+")
        assert float(mx.sel(reaction="RR")) < 1e-9 < float(mx.sel(reaction="D1"))
        assert "max_abs_sensitivity_Te" in ds
    data = fig.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n" and len(data) > 10_000


@pytest.mark.parametrize("argv, message", [
    (["--species", "Xe+"], "no species Xe\\+"),
    (["--altitudes", "300"], "LOW_KM:HIGH_KM"),
    (["--altitudes", "500:600"], "no altitude of the grid"),
    (["--top", "0"], "at least 1"),
])
def test_rank_errors_are_one_line_input_errors(column, argv, message):
    """Bad options raise ionochem.InputError with one line (docs/internals.md, errors)."""
    path, _ = _sens(column, CHAIN)
    with pytest.raises(ionochem.InputError, match=message) as info:
        _run(["rank", str(path), *argv])
    assert "\n" not in str(info.value)


def test_rank_through_main(column, capsys):
    """Through the ``ionochem`` entry point: exit 0, and exit 2 with one error line for an
    unknown species (exit status 2 and one line: docs/reaction-list.md, 'Error messages'). Needs
    the subcommand wired into ionochem.cli."""
    from ionochem.cli import main
    path, _ = _sens(column, CHAIN)
    assert main(["rank", str(path)]) == 0
    capsys.readouterr()
    assert main(["rank", str(path), "--species", "Xe+"]) == 2
    err = [ln for ln in capsys.readouterr().err.splitlines()
           if ln.strip() and not ln.startswith("warning:")]
    assert len(err) == 1 and "Xe+" in err[0], err


def test_default_ranking_skips_levels_where_the_ion_is_a_trace(column):
    """O+ = P/(k [N2]) grows ~300-fold from 100 to 300 km (analytic): with the default
    ``min_share`` (1 % of its own peak) the levels where O+ is below 1 % of its peak do not
    count, so every maximum sits where O+ is at least 1 % of its peak; ``min_share=0``
    counts every level again (the defect: O+ ranked by a level where it is 0.13 cm-3)."""
    from ionochem.analysis.rank import DEFAULT_MIN_SHARE, where_it_matters
    _, sens = _sens(column, CHAIN)
    o = sens["density"].sel(species="O+").values
    keep = where_it_matters(sens, "O+")
    np.testing.assert_array_equal(keep, o >= DEFAULT_MIN_SHARE * o.max())
    assert 0 < keep.sum() < keep.size
    for r in rank_reactions(sens, "O+", None, top=None):
        assert o[np.argmin(np.abs(ALT - r.altitude_km))] >= DEFAULT_MIN_SHARE * o.max()
    every = rank_reactions(sens, "O+", None, top=None, min_share=0)
    S = sens["sensitivity"].sel(species="O+", reaction="C1").values
    c1 = next(r for r in every if r.reaction == "C1")
    assert c1.mean_abs == pytest.approx(np.mean(np.abs(S)), rel=1e-12)
    c1_kept = next(r for r in rank_reactions(sens, "O+", None, top=None)
                   if r.reaction == "C1")
    assert c1_kept.mean_abs == pytest.approx(np.mean(np.abs(S[keep])), rel=1e-12)
