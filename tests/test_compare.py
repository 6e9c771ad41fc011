"""Baseline-versus-changed comparisons (ionochem.analysis.compare, ``ionochem compare``).

The column is synthetic (invented rates and densities): O+ is produced at a prescribed rate
and lost only by charge transfer O+ + N2 → NO+ + N; NO+ recombines. Then
[O+] = P/(k [N2]) exactly, and NO+ solves α x (x + [O+]) = P.
"""

from __future__ import annotations

import numpy as np
import pytest
import xarray as xr

import ionochem
from ionochem.analysis.compare import band_summary, changed_model, compare
from ionochem.cli import build_parser

ALT = np.linspace(100.0, 300.0, 21)
Q = 80.0 * np.exp(-((ALT - 180.0) / 60.0) ** 2) + 5.0     # invented production, cm-3 s-1
TE = np.linspace(300.0, 2000.0, ALT.size)
N2 = 1e12 * np.exp(-(ALT - 100.0) / 35.0)
K_CT = 1.2e-12                                            # invented, cm3 s-1

CHAIN = f"""\
P1: O -> O+ + e | k = prescribed | ref = invented test
C1: O+ + N2 -> NO+ + N | k = {K_CT:g} | ref = invented test
D1: NO+ + e -> N + O | k = 4.0e-7*(300/Te)^0.5 | ref = invented test
"""


def _scenario(column, q=Q, name="s"):
    neutrals = {"O": 1e11 * np.exp(-(ALT - 100.0) / 60.0), "N2": N2,
                "N": 1e8 * np.ones_like(ALT)}
    return column(CHAIN, ALT, neutrals=neutrals, Tn=np.linspace(200.0, 900.0, ALT.size),
                  Te=TE, production={"P1": q}, name=name)


def _run(argv):
    """Run a subcommand of the ``ionochem`` parser; ionochem.Error propagates (cli.main
    would turn it into one line and exit 2)."""
    args = build_parser().parse_args(argv)
    args.command_line = "ionochem " + " ".join(argv)
    return args.func(args)


def _no_plus(q, ne_other, alpha):
    """Positive root of α x (x + ne_other) = q."""
    return 0.5 * (-ne_other + np.sqrt(ne_other ** 2 + 4.0 * q / alpha))


def test_halving_the_only_loss_of_an_ion_doubles_it(column):
    """[O+] = P/(k [N2]) when charge transfer is its only loss (analytic): halving k gives
    ratio 2 to 1e-8 at every level, and NO+ follows the closed-form root of
    α x (x + [O+]) = P in both models."""
    base = ionochem.Model(ionochem.load_scenario(_scenario(column)))
    ds = compare(base, changed_model(base, scale={"C1": 0.5}))
    np.testing.assert_allclose(ds["ratio"].sel(species="O+").values, 2.0, rtol=1e-8)
    np.testing.assert_allclose(ds["density_baseline"].sel(species="O+").values,
                               Q / (K_CT * N2), rtol=1e-8)
    alpha = 4.0e-7 * (300.0 / TE) ** 0.5
    for var, factor in (("density_baseline", 1.0), ("density_changed", 2.0)):
        o_plus = factor * Q / (K_CT * N2)
        np.testing.assert_allclose(ds[var].sel(species="NO+").values,
                                   _no_plus(Q, o_plus, alpha), rtol=1e-8)
    assert ds.attrs["changes_scale"] == "C1 x 0.5"
    rows = [r for r in band_summary(ds) if r.species == "O+"]
    assert [r.band for r in rows] == ["E", "F1", "F2"]
    for r in rows:
        assert r.median_pct == pytest.approx(100.0, abs=1e-5)
        assert r.largest_pct == pytest.approx(100.0, abs=1e-5)


def test_ratio_is_nan_where_the_baseline_density_is_zero(column):
    """Levels without production have zero densities: the ratio is NaN there (not 0 or inf)
    and the band statistics skip them (definition of the ratio; docs/outputs.md, 'Comparisons')."""
    q = np.where(ALT < 160.0, 0.0, Q)
    base = ionochem.Model(ionochem.load_scenario(_scenario(column, q=q)))
    ds = compare(base, changed_model(base, scale={"C1": 0.5}))
    ratio = ds["ratio"].sel(species="O+").values
    assert np.all(np.isnan(ratio[ALT < 160.0]))
    np.testing.assert_allclose(ratio[ALT >= 160.0], 2.0, rtol=1e-8)
    rows = {r.band: r for r in band_summary(ds, species=["O+"])}
    assert np.isnan(rows["E"].median_pct)
    assert rows["F1"].levels == int(((ALT >= 160) & (ALT <= 200)).sum())


def test_compare_cli_prints_plus_100_percent_and_writes_files(column, tmp_path, capsys):
    """The terminal table shows +100.00 % for O+ in every band (analytic doubling); the
    netCDF opens with the three variables and the change attributes; the PNG is a
    non-empty PNG file."""
    out, fig = tmp_path / "c.nc", tmp_path / "c.png"
    assert _run(["compare", str(_scenario(column)), "--scale", "C1=0.5", "-o", str(out),
                 "--plot", str(fig)]) == 0
    text = capsys.readouterr().out
    lines = [ln.split() for ln in text.splitlines() if ln.split()[:1] == ["O+"]]
    assert len(lines) == 3
    for ln in lines:
        assert ln[-3:-1] == ["+100.00", "+100.00"]
    with xr.open_dataset(out) as ds:
        for var in ("density_baseline", "density_changed", "ratio"):
            assert ds[var].dims == ("species", "altitude")
        assert ds.attrs["changes_scale"] == "C1 x 0.5"
        np.testing.assert_allclose(ds["ratio"].sel(species="O+").values, 2.0, rtol=1e-8)
    data = fig.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n" and len(data) > 10_000


def test_replacement_entries_and_whole_list_give_the_analytic_doubling(column, tmp_path,
                                                                      capsys):
    """A file with one replacement entry (C1 at half the rate, ``--reactions``) and a whole
    alternative list (ids renamed, same chemistry at half the rate, ``--list``) both give
    [O+] ratio 2 (analytic)."""
    scen = _scenario(column)
    half = f"{K_CT / 2:g}"
    repl = tmp_path / "repl.reactions"
    repl.write_text(f"C1: O+ + N2 -> NO+ + N | k = {half} | ref = invented test\n")
    alt_list = tmp_path / "alt.reactions"
    alt_list.write_text(CHAIN.replace("C1:", "CT_new:").replace(f"k = {K_CT:g}",
                                                                 f"k = {half}"))
    for f, flag, key in ((repl, "--reactions", "replacements"),
                         (alt_list, "--list", "alternative")):
        out = tmp_path / f"{f.stem}.nc"
        assert _run(["compare", str(scen), flag, str(f), "-o", str(out)]) == 0
        with xr.open_dataset(out) as ds:
            np.testing.assert_allclose(ds["ratio"].sel(species="O+").values, 2.0, rtol=1e-8)
            assert ds.attrs["changes_reactions"] == str(f)
        # The Python API records the same.
        base = ionochem.Model(ionochem.load_scenario(scen))
        rl = ionochem.load_mechanism(f)
        kw = {key: [rl]} if key == "replacements" else {key: rl}
        ds = compare(base, changed_model(base, **kw), reaction_lists=[f])
        np.testing.assert_allclose(ds["ratio"].sel(species="O+").values, 2.0, rtol=1e-8)
        assert ds.attrs["changes_reactions"] == str(f)
    capsys.readouterr()


def test_added_loss_entry_halves_the_ion_and_ids_must_match_the_option(column, tmp_path,
                                                                      capsys):
    """``--add`` appends a second O+ loss equal to C1 (new id): [O+] = P/(2 k [N2]) halves
    (analytic). A new id under ``--reactions`` and an existing id under ``--add`` are each
    refused with the file named and the other option suggested."""
    scen = _scenario(column)
    extra = tmp_path / "extra.reactions"
    extra.write_text(f"C2: O+ + N2 -> NO+ + N | k = {K_CT:g} | ref = invented test\n")
    out = tmp_path / "add.nc"
    assert _run(["compare", str(scen), "--add", str(extra), "-o", str(out)]) == 0
    with xr.open_dataset(out) as ds:
        np.testing.assert_allclose(ds["ratio"].sel(species="O+").values, 0.5, rtol=1e-8)
    with pytest.raises(ionochem.InputError, match="--add") as exc:
        _run(["compare", str(scen), "--reactions", str(extra)])
    assert exc.value.file == str(extra)
    same = tmp_path / "same.reactions"
    same.write_text(f"C1: O+ + N2 -> NO+ + N | k = {K_CT:g} | ref = invented test\n")
    with pytest.raises(ionochem.InputError, match="--reactions"):
        _run(["compare", str(scen), "--add", str(same)])
    capsys.readouterr()


def test_custom_bands_are_used(column, capsys):
    """``--bands`` replaces the default E/F1/F2 bands (command line: README.md, 'What it does');
    O+ still shows +100 % in each."""
    assert _run(["compare", str(_scenario(column)), "--scale", "C1=0.5",
                 "--bands", "low=100:200,high=200:300"]) == 0
    text = capsys.readouterr().out
    assert "low 100-200" in text and "high 200-300" in text and "F1 150-200" not in text


@pytest.mark.parametrize("argv, message", [
    (["--scale", "NOPE=0.5"], "no reaction with id 'NOPE'"),
    ([], "at least one change"),
    (["--scale", "C1=half"], "not a number"),
    (["--scale", "C1=0.5", "--bands", "E=150:90"], "upper altitude"),
])
def test_compare_errors_are_one_line_input_errors(column, argv, message):
    """Bad input raises ionochem.InputError with a one-line message (error contract,
    docs/reaction-list.md, 'Error messages')."""
    with pytest.raises(ionochem.InputError, match=message) as info:
        _run(["compare", str(_scenario(column)), *argv])
    assert "\n" not in str(info.value)


def test_compare_through_main_exits_2_on_unknown_id(column, capsys):
    """Through the ``ionochem`` entry point: exit 0 on success, exit 2 with one line on stderr
    for an unknown reaction id (exit status 2 and one line: docs/reaction-list.md, 'Error
    messages'). Needs the subcommand wired into ionochem.cli."""
    from ionochem.cli import main
    scen = str(_scenario(column))
    assert main(["compare", scen, "--scale", "C1=0.5"]) == 0
    capsys.readouterr()
    assert main(["compare", scen, "--scale", "NOPE=0.5"]) == 2
    err = [ln for ln in capsys.readouterr().err.splitlines()
           if ln.strip() and not ln.startswith("warning:")]
    assert len(err) == 1 and "NOPE" in err[0] and "Traceback" not in err[0], err


@pytest.mark.parametrize("flag", ["--reactions", "--list", "--set"])
def test_command_line_changes_take_precedence_over_the_scenarios(column, tmp_path, capsys,
                                                                 flag):
    """The scenario's ``[changes]`` set C1 to twice (or scale it by a half); the command line
    gives C1 anew (a replacement entry, an alternative list at half the rate, or ``--set``).
    The command line wins in the changed model, so [O+] = P/(k [N2]) changes by the
    analytic factor 2, 4 (0.5 with the scale) instead of 0.00 % (the scenario silently
    overriding the command line), and ``changes_applied`` says what came from where."""
    scale_case = flag == "--set"
    extra = ("[changes]\nscale = { C1 = 0.5 }\n" if scale_case
             else f'[changes]\nset = {{ C1 = "{2 * K_CT:g}" }}\n')
    neutrals = {"O": 1e11 * np.exp(-(ALT - 100.0) / 60.0), "N2": N2,
                "N": 1e8 * np.ones_like(ALT)}
    scen = column(CHAIN, ALT, neutrals=neutrals, Tn=np.linspace(200.0, 900.0, ALT.size),
                  Te=TE, production={"P1": Q}, extra=extra)
    repl = tmp_path / "repl.reactions"
    repl.write_text(f"C1: O+ + N2 -> NO+ + N | k = {K_CT:g} | ref = invented test\n")
    alt_list = tmp_path / "alt.reactions"
    alt_list.write_text(CHAIN.replace(f"k = {K_CT:g}", f"k = {K_CT / 2:g}"))
    arg = {"--reactions": str(repl), "--list": str(alt_list), "--set": f"C1={K_CT:g}"}[flag]
    out = tmp_path / "c.nc"
    assert _run(["compare", str(scen), flag, arg, "-o", str(out)]) == 0
    text = capsys.readouterr().out
    # [O+] ∝ 1/k: the baseline's k is 2 K_CT (K_CT/2 with the scale); the changed one K_CT
    # (K_CT/2 in the alternative list)
    expected = {"--reactions": 2.0, "--list": 4.0, "--set": 0.5}[flag]
    with xr.open_dataset(out) as ds:
        np.testing.assert_allclose(ds["ratio"].sel(species="O+").values, expected, rtol=1e-8)
        applied = ds.attrs["changes_applied"]
    kind = "scale" if scale_case else "set"
    assert f"scenario [changes] {kind} C1" in applied
    assert "takes precedence" in applied and flag in applied
    assert "command line takes precedence over the scenario" in text
    assert f"scenario [changes] {kind} C1" in text


def test_scenario_change_of_a_family_is_kept_on_the_levels_the_command_line_leaves(column):
    """A scenario scale on a two-level family stays on the level ``--set`` leaves alone and
    is dropped on the level it sets (rates compared directly: 3 x 1e-15 and 2e-15)."""
    chain = (CHAIN + "L(v): O+ + N -> NO+ | k = 1e-15 | levels v = 0..1 "
             "| ref = invented test\n")
    neutrals = {"O": 1e11 * np.exp(-(ALT - 100.0) / 60.0), "N2": N2,
                "N": 1e8 * np.ones_like(ALT)}
    scen = column(chain, ALT, neutrals=neutrals, Tn=np.linspace(200.0, 900.0, ALT.size),
                  Te=TE, production={"P1": Q}, extra="[changes]\nscale = { \"L(v)\" = 3.0 }\n")
    base = ionochem.Model(ionochem.load_scenario(scen))
    log = []
    new = changed_model(base, set_dict={"L(v=1)": "2e-15"}, log=log)
    k = new.rate_coefficients()
    j0, j1 = new.reactions.index("L(v=0)"), new.reactions.index("L(v=1)")
    np.testing.assert_allclose(k[:, j0], 3e-15, rtol=1e-12)
    np.testing.assert_allclose(k[:, j1], 2e-15, rtol=1e-12)
    assert any("except L(v=1)" in line for line in log)


FAMILY_CHAIN = """\
PN(v): N2 -> N2+(v) + e | k = 1e-10 | levels v = 0..1 | ref = invented test
DR(v): N2+(v) + e -> N + N | k = 2e-7 | levels v = 0..1 | ref = invented test
CT(v): N2+(v) + O -> NO+ + N | k = 1e-10 | levels v = 0..1 | ref = invented test
DN: NO+ + e -> N + O | k = 4e-7 | ref = invented test
"""


def test_default_bands_cover_the_grid_and_every_changed_effective_rate_is_printed(
        column, capsys):
    """On a 100-600 km column the summary's bands reach the top of the grid (an ``upper``
    band 300-600 km after E, F1, F2); the effective rate of the recombination family, which
    a faster v = 1 recombination changes, is printed per band, and that of the charge
    transfer, equal for both levels (so k_eff = k exactly, whatever the populations), is
    listed as unchanged."""
    alt = np.linspace(100.0, 600.0, 26)
    path = column(FAMILY_CHAIN, alt, neutrals={"N2": 1e12 * np.exp(-(alt - 100) / 30.0),
                                               "O": 1e11 * np.exp(-(alt - 100) / 50.0),
                                               "N": 1e8},
                  Tn=800.0)
    assert _run(["compare", str(path), "--set", "DR(v=1)=6e-7"]) == 0
    out = capsys.readouterr().out
    assert "upper 300-600" in out
    section = out.split("effective (population-weighted) rate coefficient")[1]
    dr = [ln.split() for ln in section.splitlines() if ln.split()[:1] == ["DR(v)"]]
    assert [ln[1] for ln in dr] == ["E", "F1", "F2", "upper"]
    assert all(float(ln[-3]) > 0 for ln in dr)          # faster v = 1: k_eff rises
    assert "effective rate coefficients unchanged (below 0.0001 %): CT(v)" in out
