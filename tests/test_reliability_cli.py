"""Hostile, extreme and malformed inputs through the ``ionochem`` command (issue 8).

A corpus of our own, one group per class of the issue (paths, outputs, scenario values,
mechanisms, unbounded work, resume), beyond tests/bad_inputs. Every case runs the real
command in a subprocess with a wall-clock timeout and an address-space limit
(``resource.setrlimit(RLIMIT_AS)``), so a hang or an unbounded read fails the test instead of
the machine. The promise checked is the one of docs/reaction-list.md ('Error messages') and
docs/scenario.md ('Rules'): bad input gives exit status 2 and one line
``file: key: message`` or ``file:line: message`` naming the file — never a traceback, a
hang or a silent result — and outputs are refused before any work.

External references: POSIX file types (``/dev/zero`` and ``/dev/urandom`` are character
devices, ``os.mkfifo`` makes a FIFO whose open blocks without a writer), and the ranges'
own sources cited in docs/scenario.md.
"""

from __future__ import annotations

import os
import resource
import stat
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
ADDRESS_SPACE = 3 * 1024 ** 3          # bytes: numpy, scipy, pymsis and a column fit easily
TIMEOUT_S = 90

REACTIONS = """\
# invented two-ion test chain
P1: N2 -> N2+ + e | k = prescribed | ref = invented
R1: N2+ + O -> NO+ + N | k = 1.4e-10 | ref = invented
R2: NO+ + e -> N + O | k = 4e-7*(300/Te)^0.5 | ref = invented
"""
NEUTRALS = "altitude_km,O,N2,O2,N,Tn_K\n100,1e11,1e13,2e12,1e7,200\n400,1e9,1e8,1e6,1e6,900\n"
TEMPS = "altitude_km,Te_K,Ti_K\n100,200,200\n400,2000,1000\n"
PRODUCTION = "altitude_km,P1\n100,10\n400,1\n"


def _scenario(extra="", *, reactions="c.reactions", neutrals="n.csv", grid=None):
    grid = grid or "{ start = 100.0, stop = 400.0, step = 50.0 }"
    return f"""title = "hostile-input test column (invented)"
reactions = "{reactions}"
[grid]
altitude_km = {grid}
[neutrals]
model = "table"
table = "{neutrals}"
[temperatures]
electron = "table"
ion = "table"
table = "t.csv"
[production]
table = "p.csv"
{extra}"""


@pytest.fixture
def col(tmp_path):
    (tmp_path / "c.reactions").write_text(REACTIONS)
    (tmp_path / "n.csv").write_text(NEUTRALS)
    (tmp_path / "t.csv").write_text(TEMPS)
    (tmp_path / "p.csv").write_text(PRODUCTION)
    (tmp_path / "s.toml").write_text(_scenario())
    return tmp_path


def _limits():
    resource.setrlimit(resource.RLIMIT_AS, (ADDRESS_SPACE, ADDRESS_SPACE))


def cli(*args, cwd, timeout=TIMEOUT_S):
    """Run ``ionochem ARGS`` under the limits; returns the CompletedProcess."""
    env = dict(os.environ, PYTHONPATH=str(ROOT), OPENBLAS_NUM_THREADS="1",
               OMP_NUM_THREADS="1", MPLBACKEND="Agg")
    return subprocess.run([sys.executable, "-m", "ionochem.cli", *map(str, args)], cwd=cwd,
                          env=env, capture_output=True, text=True, timeout=timeout,
                          preexec_fn=_limits)


def refused(proc, *fragments, where=None):
    """Exit 2, one line on stderr naming ``where`` and holding every fragment."""
    err = proc.stderr.strip()
    assert proc.returncode == 2, (proc.returncode, err[-2000:])
    assert "Traceback" not in err, err[-2000:]
    last = err.splitlines()[-1]
    if where is not None:
        assert last.startswith(str(where)), last
    for f in fragments:
        assert f in last, last
    return last


# ------------------------------------------------------------------ class 1: paths
@pytest.mark.parametrize("device", ["/dev/zero", "/dev/urandom"])
def test_check_of_a_device_is_refused_without_reading_it(col, device):
    """`check /dev/zero` no longer reads gigabytes: a device is not a regular file."""
    if not os.path.exists(device):
        pytest.skip(f"{device} absent")
    refused(cli("check", device, cwd=col), "not a regular file", where=device)


def test_check_and_run_of_a_fifo_do_not_block(col):
    """A FIFO named on the command line is refused at once (no reader blocks forever)."""
    fifo = col / "pipe.reactions"
    os.mkfifo(fifo)
    refused(cli("check", fifo, cwd=col, timeout=30), "not a regular file")
    fifo2 = col / "pipe.toml"
    os.mkfifo(fifo2)
    refused(cli("run", fifo2, cwd=col, timeout=30), "not a regular file")


def test_oversized_input_is_refused_by_its_size(col):
    """A 30 MB (sparse) reaction list is refused by size, not read."""
    big = col / "big.reactions"
    with open(big, "wb") as fh:
        fh.truncate(30_000_000)
    refused(cli("check", big, cwd=col), "limit for input files", where=big)


def test_folder_on_the_command_line_is_refused(col):
    refused(cli("check", col, cwd=col), "is a folder")


@pytest.mark.parametrize("value, words", [
    ("~no_such_user_ionochem/x.reactions", "no such user"),
    ("loop/x.reactions", "loops through symbolic links"),
    ("a\\u0000b.reactions", "NUL"),
    ("/dev/zero", "not a regular file"),
])
def test_bad_reaction_list_paths_in_a_scenario(col, value, words):
    """~user of nobody, a symlink loop, a NUL byte and a device: an error at `reactions`."""
    (col / "loop").symlink_to(col / "loop")
    (col / "bad.toml").write_text(_scenario(reactions=value))
    refused(cli("run", "bad.toml", cwd=col), words, where="bad.toml: reactions:")


@pytest.mark.parametrize("table", ["/dev/zero", "loop.csv", "~no_such_user_ionochem/t.csv"])
def test_bad_table_paths_in_a_scenario(col, table):
    (col / "loop.csv").symlink_to(col / "loop.csv")
    (col / "bad.toml").write_text(_scenario(neutrals=table))
    refused(cli("run", "bad.toml", cwd=col), where="bad.toml: neutrals.table:")


def test_rate_table_errors_quote_no_content_and_say_where_tables_may_point(col):
    """table() of an arbitrary readable file: the error names the table, not its lines."""
    secret = col / "secret.txt"
    secret.write_text("hunter2:x:0:0:do not print me\nmore private text\n")
    (col / "bad.reactions").write_text(REACTIONS + 'R3: NO+ + O2 -> O2+ + NO | k = '
                                       'table("secret.txt", "k")\n')
    line = refused(cli("check", "bad.reactions", cwd=col), where="bad.reactions:5:")
    assert "hunter2" not in line and "private" not in line
    (col / "bad2.reactions").write_text(REACTIONS + 'R3: NO+ + O2 -> O2+ + NO | k = '
                                        'table("nowhere.csv", "k")\n')
    line = refused(cli("check", "bad2.reactions", cwd=col), "table paths are absolute or "
                   "relative to")


# ------------------------------------------------------------------ class 2: outputs
def test_output_onto_a_folder_is_refused_before_the_solve(col):
    (col / "outdir").mkdir()
    refused(cli("run", "s.toml", "-o", "outdir", cwd=col), "is a folder", where="outdir")
    assert not any(col.glob("outdir/*"))


def test_output_onto_a_device_or_the_input_is_refused(col):
    """-o /dev/null stays a device; -o equal to the scenario leaves it unchanged."""
    refused(cli("run", "s.toml", "-o", "/dev/null", cwd=col), "not a regular file")
    assert stat.S_ISCHR(os.stat("/dev/null").st_mode)
    before = (col / "s.toml").read_bytes()
    refused(cli("run", "s.toml", "-o", "s.toml", cwd=col), "overwrite the input")
    refused(cli("run", "s.toml", "-o", "n.csv", cwd=col), "overwrite the input")
    assert (col / "s.toml").read_bytes() == before


@pytest.mark.parametrize("args, words", [
    (["-o", ""], "empty output path"),
    (["-o", "nofolder/out.nc"], "does not exist"),
    (["-o", "out.nc", "--plot", "fig.xyz"], "not supported"),
    (["-o", "x.csv", "--csv", "x.csv"], "name the same file"),
])
def test_bad_output_targets_write_nothing(col, args, words):
    refused(cli("run", "s.toml", *args, cwd=col), words)
    assert not (col / "out.nc").exists() and not (col / "x.csv").exists()


def test_read_only_folder_is_refused_before_the_solve(col):
    if os.geteuid() == 0:
        pytest.skip("root writes into read-only folders")
    ro = col / "ro"
    ro.mkdir()
    ro.chmod(0o555)
    try:
        refused(cli("run", "s.toml", "-o", "ro/out.nc", cwd=col), "not writable")
    finally:
        ro.chmod(0o755)


# ------------------------------------------------------------------ class 3: values
@pytest.mark.parametrize("extra, key, words", [
    ("[sun]\nf107 = 1e6\nf107a = 150.0\n", "sun.f107", "between 30 and 600 sfu"),
    ("[time]\nutc = 0001-01-01T00:30:00+02:00\n", "time.utc", "1901–2099"),
    ("[solve]\nrtol = 1e-300\n", "solve.rtol", "between 1e-14 and 0.01"),
])
def test_out_of_range_scenario_values(col, extra, key, words):
    (col / "bad.toml").write_text(_scenario(extra))
    refused(cli("run", "bad.toml", cwd=col), words, where=f"bad.toml: {key}:")


def test_absurd_te_profile_is_refused(col):
    text = _scenario().replace('electron = "table"', 'electron = "profile"')
    text += "[temperatures.profile]\nte_peak_K = 1e300\n"
    text = text.replace("[production]", "[temperatures.x]\n[production]")
    text = text.replace("[temperatures.x]\n", "")
    (col / "bad.toml").write_text(text)
    refused(cli("run", "bad.toml", cwd=col), "above 0 and at most 20000 K",
            where="bad.toml: temperatures.profile.te_peak_K:")


def test_deep_toml_is_one_line(col):
    (col / "deep.toml").write_text('title = "t"\nx = ' + "[" * 1000 + "]" * 1000 + "\n")
    refused(cli("run", "deep.toml", cwd=col), where="deep.toml")


# ------------------------------------------------------------------ class 4: mechanisms
def test_empty_and_all_fixed_lists_are_refused_by_run(col):
    (col / "empty.reactions").write_text("# nothing\n")
    (col / "e.toml").write_text(_scenario(reactions="empty.reactions").replace(
        "[production]\ntable = \"p.csv\"\n", ""))
    refused(cli("run", "e.toml", cwd=col), "holds no reactions")
    (col / "fixed.reactions").write_text("R1: O + O + M -> O2 + M | k = 4.7e-33\n")
    (col / "f.toml").write_text(_scenario(reactions="fixed.reactions").replace(
        "[production]\ntable = \"p.csv\"\n", ""))
    refused(cli("run", "f.toml", cwd=col), "no species to solve")


def test_neutral_table_with_an_ion_column_is_refused(col):
    (col / "ion.csv").write_text(NEUTRALS.replace(",N,", ",NO+,"))
    (col / "i.toml").write_text(_scenario(neutrals="ion.csv"))
    refused(cli("run", "i.toml", cwd=col), "'NO+' is charged",
            where="i.toml: neutrals.table:")


@pytest.mark.parametrize("text, words", [
    ("R1: O\u0662+ + e -> O + O | k = 1e-7\n", "not an ASCII digit"),
    ("R1: O2+ + e -> O + O | k = \uff11e-\uff11\uff12\n", "not an ASCII digit"),
    ("R1(v): N2+(v) + e -> N + N | k = 1e-7 | levels v = \u0660..\u0663\n", "ASCII digits"),
])
def test_unicode_digits_are_refused(col, text, words):
    (col / "u.reactions").write_text(text, encoding="utf-8")
    refused(cli("check", "u.reactions", cwd=col), words, where="u.reactions:1:")


def test_absurd_rate_coefficient_warns(col):
    (col / "w.reactions").write_text(REACTIONS.replace("4e-7*(300/Te)^0.5",
                                                       "1e-30*exp(1e5/Te)"))
    (col / "w.toml").write_text(_scenario(reactions="w.reactions"))
    proc = cli("run", "w.toml", cwd=col)
    assert proc.returncode == 0, proc.stderr
    assert "far above the physical bound 1e-06 cm3 s-1" in proc.stderr


# ------------------------------------------------------------------ class 5: work
def test_transient_over_thirty_years_is_refused_up_front(col):
    (col / "long.toml").write_text(_scenario('[solve]\nmode = "transient"\n'
                                             "times_s = [0.0, 1e9]\n"))
    refused(cli("run", "long.toml", cwd=col, timeout=60), "--allow-long",
            where="long.toml: solve.times_s:")


def test_a_billion_samples_are_refused_up_front(col):
    refused(cli("uncertainty", "s.toml", "--samples", "1000000000", cwd=col, timeout=60),
            "ceiling", where="--samples")
    refused(cli("uncertainty", "s.toml", "--samples", "400000", cwd=col, timeout=60),
            "--allow-long", where="--samples")


# ------------------------------------------------------------------ class 8: resume
def test_store_folder_without_manifest_is_explained(col):
    (col / "mc.nc.samples").mkdir()
    (col / "mc.nc.samples" / "mine.txt").write_text("x")
    refused(cli("uncertainty", "s.toml", "--samples", "8", "-o", "mc.nc", "--resume",
                cwd=col), "not an ionochem sample store")


def test_profile_table_errors_quote_no_content(col):
    """A neutral table pointing at an arbitrary text file names the file, not its lines."""
    (col / "private.txt").write_text("alice:secret-token-123\nbob:another-secret\n")
    (col / "p.toml").write_text(_scenario(neutrals="private.txt"))
    line = refused(cli("run", "p.toml", cwd=col), where="p.toml: neutrals.table:")
    assert "secret" not in line and "alice" not in line


def test_set_table_paths_obey_the_same_rules(col):
    """--set with table("/dev/zero", ...) is refused at the option's line, without reading."""
    refused(cli("run", "s.toml", "--set", 'R1=table("/dev/zero", "k")', cwd=col),
            "not a regular file")


def test_symlink_loop_on_the_command_line(col):
    (col / "loop.toml").symlink_to(col / "loop.toml")
    refused(cli("run", "loop.toml", cwd=col), "symbolic links", where="loop.toml")
