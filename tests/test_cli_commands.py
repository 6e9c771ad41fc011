"""The command layer (ionochem.cli): checks before work, explicit changes, new commands.

Columns are synthetic (invented rates and densities, tests/conftest.py); expected values are
closed forms of the one-ion column n = sqrt(q/α) (Chapman 1931; S(n, q) = ½ and S(n, α) = −½
exactly).
"""

from __future__ import annotations

import numpy as np
import pytest
import xarray as xr

from ionochem import __version__
from ionochem.cli import main

ALT = np.linspace(100.0, 300.0, 11)
Q = 50.0                                           # invented production, cm-3 s-1
ALPHA = 2.0e-7                                     # invented recombination, cm3 s-1

ONE_ION = f"""\
P1: O -> O+ + e | k = prescribed | f = 1.2 | ref = invented test
R1: O+ + e -> O | k = {ALPHA:g} | f = 1.3 | ref = invented test
"""


@pytest.fixture
def one_ion(column):
    return column(ONE_ION, ALT, neutrals={"O": 1e11}, Tn=600.0, production={"P1": Q})


def _err(capsys):
    return capsys.readouterr().err.strip().splitlines()


def test_version_is_printed(capsys):
    """``ionochem --version`` prints the package version (argparse's version action)."""
    with pytest.raises(SystemExit) as exc:
        main(["--version"])
    assert exc.value.code == 0
    assert capsys.readouterr().out.strip() == f"ionochem {__version__}"


@pytest.mark.parametrize("argv_tail, words", [
    (["--plot", "x.jpgx"], "figure format"),
    (["--plot", "x"], "figure format"),
    (["-o", "."], "folder"),
    (["-o", "/dev/null"], "not a regular file"),
    (["-o", "no_such_folder/x.nc"], "does not exist"),
    (["-o", ""], "empty"),
])
def test_bad_output_targets_are_refused_before_any_work(one_ion, tmp_path, monkeypatch,
                                                        capsys, argv_tail, words):
    """Every output target is checked before the solve: exit 2, one line naming the option
    or path, and nothing written (the defect: a traceback after the whole solve)."""
    monkeypatch.chdir(tmp_path)
    before = sorted(p.name for p in tmp_path.iterdir())
    assert main(["run", str(one_ion), *argv_tail]) == 2
    err = _err(capsys)
    assert len(err) == 1 and words in err[0]
    assert sorted(p.name for p in tmp_path.iterdir()) == before


def test_output_onto_an_input_file_is_refused(one_ion, capsys):
    """``-o`` naming the scenario itself would destroy the input: refused (exit 2)."""
    text = one_ion.read_text()
    assert main(["run", str(one_ion), "-o", str(one_ion)]) == 2
    assert "input" in _err(capsys)[0]
    assert one_ion.read_text() == text


def test_set_table_path_resolves_against_the_working_directory(one_ion, tmp_path,
                                                               monkeypatch, capsys):
    """``--set 'R1=table("k.csv", "k")'`` reads k.csv from the working directory (not the
    reaction list's folder): a table of 4α gives n = sqrt(q/(4α)) = half the baseline
    (analytic)."""
    work = tmp_path / "elsewhere"
    work.mkdir()
    (work / "k.csv").write_text("Te_K,k\n100,{0:g}\n5000,{0:g}\n".format(4 * ALPHA))
    monkeypatch.chdir(work)
    out = work / "r.nc"
    assert main(["run", str(one_ion), "--set", 'R1=table("k.csv", "k")', "-o", str(out)]) == 0
    with xr.open_dataset(out) as ds:
        np.testing.assert_allclose(ds["density"].sel(species="O+").values,
                                   np.sqrt(Q / (4 * ALPHA)), rtol=1e-8)
    capsys.readouterr()


def test_scale_zero_switches_a_reaction_off(column, capsys):
    """``--scale R2=0`` removes a second loss: n = sqrt(q/α) again (docs: F ≥ 0)."""
    path = column(ONE_ION + f"R2: O+ + e -> O | k = {ALPHA:g} | ref = invented test\n", ALT,
                  neutrals={"O": 1e11}, Tn=600.0, production={"P1": Q})
    import ionochem
    model = ionochem.Model(ionochem.load_scenario(path)).with_changes(scale={"R2": 0.0})
    np.testing.assert_allclose(model.solve()["density"].sel(species="O+").values,
                               np.sqrt(Q / ALPHA), rtol=1e-8)
    assert main(["run", str(path), "--scale", "R2=-1"]) == 2
    assert "≥ 0" in _err(capsys)[0]


def test_reactions_command_lists_rates_at_a_temperature_and_on_a_column(one_ion, tmp_path,
                                                                         capsys):
    """``reactions`` evaluates k and f at a temperature (list) or at a level (scenario) and
    filters by species; ``--csv`` writes the same rows."""
    rl = one_ion.with_suffix(".reactions")
    assert main(["reactions", str(rl), "--temperature", "500"]) == 0
    out = capsys.readouterr().out
    assert "(prescribed)" in out and f"{ALPHA:.3e}" in out and "1.3" in out
    csv = tmp_path / "r.csv"
    assert main(["reactions", str(one_ion), "--altitude", "200", "--species", "O+",
                 "--csv", str(csv)]) == 0
    rows = csv.read_text().splitlines()
    assert rows[0] == "id,equation,k,f,ref" and len(rows) == 3
    # On the column the prescribed rate is q/[O] per O atom (s-1).
    assert f"{Q / 1e11:.3e}" in capsys.readouterr().out
    assert main(["reactions", str(rl), "--species", "N2+"]) == 2
    assert main(["reactions", str(rl), "--altitude", "200"]) == 2


def test_check_counts_in_words(tmp_path, capsys):
    """``check`` says "1 family" and "1 reaction", not "1 families"."""
    f = tmp_path / "fam.reactions"
    f.write_text("P(v): N2 -> N2+(v) + e | k = 1e-7 | levels v = 0..0\n"
                 "L(v): N2+(v) + e -> N + N | k = 2e-7 | levels v = 0..0\n")
    assert main(["check", str(f)]) == 0
    out = capsys.readouterr().out
    assert "2 reactions (2 families expanded)" in out
    f.write_text("L: N2+ + e -> N + N | k = 2e-7\n")
    assert main(["check", str(f)]) == 0
    assert ": 1 reaction\n" in capsys.readouterr().out


def test_empty_list_is_refused_by_check(tmp_path, capsys):
    """A list with no reaction, or nothing to solve, is an error, not a summary."""
    f = tmp_path / "empty.reactions"
    f.write_text("# nothing\n")
    assert main(["check", str(f)]) == 2
    assert "no reactions" in _err(capsys)[0]


def test_csv_of_the_run_table_matches_the_dataset(one_ion, tmp_path, capsys):
    """``run --csv`` writes the printed densities; they equal the dataset's to 3 digits."""
    csv, out = tmp_path / "t.csv", tmp_path / "t.nc"
    assert main(["run", str(one_ion), "--csv", str(csv), "-o", str(out),
                 "--altitudes", "100,200"]) == 0
    lines = csv.read_text().splitlines()
    header = lines[0].split(",")
    assert header[0] == "alt_km" and "O+" in header and len(lines) == 3
    col = header.index("O+")
    with xr.open_dataset(out) as ds:
        for line in lines[1:]:
            cells = line.split(",")
            expect = ds["density"].sel(species="O+", altitude=float(cells[0])).item()
            assert float(cells[col]) == pytest.approx(expect, rel=5e-3)
    capsys.readouterr()


def test_transient_budget_is_given_at_the_last_output_time(column, capsys):
    """A transient run with ``--budget O+@200`` reports the budget at the last time:
    production q and loss α n(t)², with n(t) = sqrt(q/α) tanh(sqrt(q α) t) (analytic
    solution of dn/dt = q − α n²)."""
    t_end = 2000.0
    path = column(ONE_ION, ALT, neutrals={"O": 1e11}, Tn=600.0, production={"P1": Q},
                  extra=f'[solve]\nmode = "transient"\ntimes_s = [0.0, 100.0, {t_end}]\n')
    assert main(["run", str(path), "--budget", "O+@200"]) == 0
    out = capsys.readouterr().out
    assert f"budgets at the last output time, t = {t_end:g} s" in out
    n = np.sqrt(Q / ALPHA) * np.tanh(np.sqrt(Q * ALPHA) * t_end)
    prod = float(out.split("production: ")[1].split()[0])
    loss = float(out.split("loss: ")[1].split()[0])
    assert prod == pytest.approx(Q, rel=1e-3)
    assert loss == pytest.approx(ALPHA * n * n, rel=1e-3)
