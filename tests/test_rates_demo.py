"""The invented worked example of examples/rates_demo runs end to end.

References: the example's own invented truth (level mix 0.6/0.3/0.1/0/0, written into its
generator), which the beam and populations commands must recover within their stated errors;
the rate-table format of docs/reaction-list.md for the written table and entry.
"""

from __future__ import annotations

import csv
import runpy
from pathlib import Path

import numpy as np
import pytest

from ionochem.cli import main

DEMO = Path(__file__).resolve().parents[1] / "examples" / "rates_demo"
SCENARIO = Path(__file__).resolve().parents[1] / "scenarios" / "midlatitude_equinox.toml"
TRUTH = np.array([0.6, 0.3, 0.1, 0.0, 0.0])


@pytest.fixture
def demo(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    runpy.run_path(str(DEMO / "make_inputs.py"), init_globals={"OUT": tmp_path})
    (tmp_path / "out").mkdir()
    return tmp_path


def _rows(path):
    with open(path, newline="") as fh:
        return [r for r in csv.reader(fh) if r and not r[0].startswith("#")]


STEP1 = ["rates", "maxwellian", "sigma_n2plus.csv", "--temperatures", "100:6000:100",
         "--fit", "broken", "--table", "out/dr.csv", "--write-entry", "out/dr.reactions",
         "--entry", "DR_N2plus", "--reaction", "N2+(v) + e -> N(2D) + N", "--fraction", "0.54",
         "--entry", "DR_N2plus_2D2D", "--reaction", "N2+(v) + e -> 2 N(2D)",
         "--fraction", "0.46"]


def test_demo_cross_sections_to_table_and_entries_read_per_level(demo, capsys):
    """Step 1 of the example: a five-level table and the two branch entries of DR_N2plus,
    which the reaction-list parser reads level by level: member v = 2 of DR_N2plus at
    Te = 1000 K is 0.54 times the table's v = 2 row at 1000 K."""
    from ionochem.mechanism.parser import parse_reaction_list
    assert main(STEP1) == 0
    out = capsys.readouterr().out
    rows = _rows(demo / "out" / "dr.csv")
    assert rows[0] == ["v", "Te_K", "k", "k_low", "k_high"]
    assert sorted({int(r[0]) for r in rows[1:]}) == [0, 1, 2, 3, 4]
    assert ('DR_N2plus(v): N2+(v) + e -> N(2D) + N | k = 0.54*table("dr.csv", "k") | f = '
            in (demo / "out" / "dr.reactions").read_text())
    assert main(["check", "--strict", str(demo / "out" / "dr.reactions")]) == 0
    assert "DR_N2plus_2D2D(v)" in out
    k_table = next(float(r[2]) for r in rows[1:] if r[0] == "2" and float(r[1]) == 1000.0)
    rl = parse_reaction_list(demo / "out" / "dr.reactions")
    member = next(r for r in rl.reactions if r.id == "DR_N2plus(v=2)")
    env = {"Te": np.array([1000.0]), "v": 2}
    assert member.k.evaluate(env)[0] == pytest.approx(0.54 * k_table, rel=1e-9)


def test_demo_beam_and_populations_recover_the_invented_mix(demo, capsys):
    """Steps 3 and 4: the fitted level mixes are within 3 stated sigma of the invented truth."""
    assert main(["rates", "beam", "sigma_n2plus.csv", "--kt-perp", "2e-3", "--kt-par", "5e-5",
                 "--measured", "measured_curve.csv", "-o", "out/beam.csv"]) == 0
    assert main(["rates", "populations", "signals.csv", "--design", "design.csv",
                 "-o", "out/pop.csv"]) == 0
    rows = _rows(demo / "out" / "pop.csv")[1:]
    p = np.array([float(r[1]) for r in rows])
    e = np.array([float(r[2]) for r in rows])
    assert np.all(np.abs(p - TRUTH) <= 3 * e + 1e-9)
    text = capsys.readouterr().out
    pops = [float(line.split()[2]) for line in text.splitlines()
            if line.strip().startswith("v") and len(line.split()) >= 4
            and line.split()[1].isdigit()][:5]
    assert np.allclose(pops, TRUTH, atol=0.2)


@pytest.mark.slow
def test_demo_entries_run_in_compare(demo, capsys):
    """Step 2: the written entries replace DR_N2plus(v) and DR_N2plus_2D2D(v) on the demo
    column and compare reports the change of their effective rates."""
    assert main(STEP1) == 0
    capsys.readouterr()
    code = main(["compare", str(SCENARIO), "--reactions", "out/dr.reactions",
                 "--species", "N2+"])
    captured = capsys.readouterr()
    assert code == 0, captured.err
    assert "DR_N2plus(v)" in captured.out and "DR_N2plus_2D2D(v)" in captured.out


def _readme_rates_commands():
    """The commands of README.md's laboratory-toolkit section, continuation lines joined."""
    text = (DEMO.parents[1] / "README.md").read_text()
    section = text.split("<!-- section: laboratory toolkit (rates) -->")[1].split(
        "<!-- end section: laboratory toolkit (rates) -->")[0]
    commands = []
    for block in section.split("```bash")[1:]:
        body = block.split("```")[0].replace("\\\n", " ")
        commands += [ln.strip() for ln in body.splitlines() if ln.strip()]
    return commands


def test_readme_rates_examples_run_from_the_repository_root(tmp_path, monkeypatch, capsys):
    """Every command of README.md's rates section runs as written from a copy of the
    repository root (the demo inputs made by its first line, the others by the ionochem
    command line), and the entries they write pass ``check --strict``."""
    import os
    import shlex
    import shutil
    import subprocess
    import sys
    (tmp_path / "examples" / "rates_demo").mkdir(parents=True)
    shutil.copy(DEMO / "make_inputs.py", tmp_path / "examples" / "rates_demo")
    monkeypatch.chdir(tmp_path)
    commands = _readme_rates_commands()
    assert commands[0].startswith("python ") and len(commands) >= 4
    for cmd in commands:
        words = shlex.split(cmd)
        if words[0] == "python":
            # the package under test, wherever the interpreter would otherwise find one
            env = {**os.environ, "PYTHONPATH": str(DEMO.parents[1])}
            subprocess.run([sys.executable, *words[1:]], check=True, cwd=tmp_path,
                           capture_output=True, env=env)
        else:
            assert words[0] == "ionochem"
            assert main(words[1:]) == 0, (cmd, capsys.readouterr().err)
    written = sorted(p.name for p in tmp_path.glob("*.reactions"))
    assert written == ["dr.reactions", "dr_tabulated.reactions"]
    for name in written:
        assert main(["check", "--strict", name]) == 0
    capsys.readouterr()
