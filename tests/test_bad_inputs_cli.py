"""Every malformed input of tests/bad_inputs/ is refused through the command line with exit
status 2, one line naming the file and the line (or scenario key), and no traceback.

The expected location and message of each file are listed in the manifests
``reactions.tsv`` (file, line, contains) and ``scenarios.tsv`` (file, key, contains).
"""

from __future__ import annotations

import csv
import subprocess
import sys
from pathlib import Path

import pytest

from ionochem.cli import main

HERE = Path(__file__).parent / "bad_inputs"


def _rows(name):
    """Rows of a manifest. A missing or empty manifest is an error at collection (the run
    fails), never an empty parametrisation that pytest would report as a skip."""
    path = HERE / name
    if not path.is_file():
        raise FileNotFoundError(f"bad-input manifest {path} is missing: the corpus tests "
                                "cannot run without it")
    with path.open(newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh, delimiter="\t"))
    if not rows:
        raise ValueError(f"bad-input manifest {path} lists no file")
    return rows


REACTION_ROWS = _rows("reactions.tsv")
SCENARIO_ROWS = _rows("scenarios.tsv")


def test_corpus_is_large_enough_and_every_file_is_listed():
    """The issue asks for at least 40 malformed inputs in the corpus; every corpus file is in
    a manifest and every manifest row names an existing file (none silently left out)."""
    assert len(REACTION_ROWS) + len(SCENARIO_ROWS) >= 40
    listed = {r["file"] for r in REACTION_ROWS + SCENARIO_ROWS}
    present = {p.name for p in HERE.iterdir() if p.suffix in (".reactions", ".toml")}
    assert listed == present, (sorted(listed - present), sorted(present - listed))


@pytest.mark.parametrize("row", REACTION_ROWS, ids=[r["file"] for r in REACTION_ROWS])
def test_bad_reaction_list_is_refused_at_its_line(row, capsys):
    path = str(HERE / row["file"])
    code = main(["check", path])
    err = capsys.readouterr().err
    assert code == 2, err
    first = err.strip().splitlines()[-1]
    assert first.startswith(f"{path}:{row['line']}:"), first
    assert row["contains"].lower() in first.lower(), first
    assert "Traceback" not in err


@pytest.mark.parametrize("row", SCENARIO_ROWS, ids=[r["file"] for r in SCENARIO_ROWS])
def test_bad_scenario_is_refused_at_its_key(row, capsys):
    path = str(HERE / row["file"])
    code = main(["run", path])
    err = capsys.readouterr().err
    assert code == 2, err
    line = err.strip().splitlines()[-1]
    key = row["key"]
    prefix = f"{path}:{key[5:]}:" if key.startswith("line:") else f"{path}: {key}:"
    assert line.startswith(prefix), line
    assert row["contains"].lower() in line.lower(), line
    assert "Traceback" not in err


def test_cli_subprocess_reports_one_line_and_exit_2(tmp_path):
    """The installed entry point (a separate interpreter) gives exit 2 and no traceback."""
    bad = tmp_path / "bad.reactions"
    bad.write_text("R1: O+ + e -> O+ | k = 1e-12\n")
    proc = subprocess.run([sys.executable, "-m", "ionochem.cli", "check", str(bad)],
                          capture_output=True, text=True)
    assert proc.returncode == 2
    assert proc.stderr.startswith(f"{bad}:1:")
    assert "Traceback" not in proc.stderr
