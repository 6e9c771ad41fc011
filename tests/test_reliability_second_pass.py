"""Reliability, second pass (issue 23): the observation and laboratory inputs, outputs,
bounds, full disks, interruptions and meaningless settings, one group per class.

Most cases run the command in this process (``ionochem.cli.main``, exit status and stderr
captured) so the group stays in the quick suite; those that need a process of their own
(standard output to ``/dev/full``, a file-size limit, an interrupt) run a subprocess with a
timeout. The promise checked is the one of docs/reaction-list.md ("Error messages") and
docs/scenario.md ("Rules"): exit 2 and one line naming the file, key or option, never a
traceback, a hang or a silent result, and never the content of a file that is not the
user's structured input.

External references: POSIX file types (``os.mkfifo``; ``/dev/zero`` and ``/dev/full`` are
character devices, writes to ``/dev/full`` fail with ENOSPC), ``RLIMIT_FSIZE`` (a write past
the limit fails with EFBIG once SIGXFSZ is ignored, as CPython does at start-up), the
Chapman production function (Chapman 1931, Proc. Phys. Soc. 43, 26) for a layer whose peak
lies above a grid, and the unit factors 1 m-3 = 1e-6 cm-3, 1 eV = 11604.5 K, 1 Mb = 1e-18 cm2
(CODATA 2018).
"""

from __future__ import annotations

import os
import resource
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from ionochem.cli import main
from ionochem.errors import InputError

ROOT = Path(__file__).resolve().parent.parent

REACTIONS = """\
# invented two-ion test chain
P1: N2 -> N2+ + e | k = prescribed | ref = invented
R1: N2+ + O -> NO+ + N | k = 1.4e-10 | f = 1.3 | ref = invented
R2: NO+ + e -> N + O | k = 4e-7*(300/Te)^0.5 | f = 1.2 | ref = invented
"""
NEUTRALS = "altitude_km,O,N2,O2,N,Tn_K\n100,1e11,1e13,2e12,1e7,200\n400,1e9,1e8,1e6,1e6,900\n"
TEMPS = "altitude_km,Te_K,Ti_K\n100,200,200\n400,2000,1000\n"
PRODUCTION = "altitude_km,P1\n100,10\n400,1\n"
OBS = "altitude_km, species, density_cm3, sigma_cm3\n150, NO+, 1e4, 1e3\n200, NO+, 2e4, 2e3\n"


def _scenario(extra="", reactions="c.reactions", neutrals="n.csv", temps="t.csv",
              production="p.csv"):
    return f"""title = "second-pass test column (invented)"
reactions = "{reactions}"
[grid]
altitude_km = {{ start = 100.0, stop = 400.0, step = 50.0 }}
[neutrals]
model = "table"
table = "{neutrals}"
[temperatures]
electron = "table"
ion = "table"
table = "{temps}"
[production]
table = "{production}"
{extra}"""


@pytest.fixture
def col(tmp_path, monkeypatch):
    for name, text in (("c.reactions", REACTIONS), ("n.csv", NEUTRALS), ("t.csv", TEMPS),
                       ("p.csv", PRODUCTION), ("obs.csv", OBS), ("s.toml", _scenario())):
        (tmp_path / name).write_text(text)
    E = np.linspace(0.01, 10.0, 40)
    (tmp_path / "sigma.csv").write_text(
        "energy_eV,v0\n" + "".join(f"{e:.6g},{1e-15 / e:.6g}\n" for e in E))
    monkeypatch.chdir(tmp_path)
    return tmp_path


def run_cli(capsys, *args):
    """``ionochem ARGS`` in this process: (status, stdout, last stderr line, stderr)."""
    code = main([str(a) for a in args])
    out, err = capsys.readouterr()
    lines = [ln for ln in err.strip().splitlines() if ln.strip()]
    return code, out, lines[-1] if lines else "", err


def refused(capsys, *args, where=None, words=()):
    code, _, last, err = run_cli(capsys, *args)
    assert code == 2, (code, err[-1500:])
    assert "Traceback" not in err
    if where is not None:
        assert last.startswith(str(where)), last
    for w in words:
        assert w in last, last
    return last, err


def subprocess_cli(*args, cwd, timeout=60, preexec_fn=None, stdout=subprocess.PIPE):
    env = dict(os.environ, PYTHONPATH=str(ROOT), OPENBLAS_NUM_THREADS="1", MPLBACKEND="Agg")
    return subprocess.run([sys.executable, "-m", "ionochem", *map(str, args)], cwd=cwd,
                          env=env, stdout=stdout, stderr=subprocess.PIPE, text=True,
                          timeout=timeout, preexec_fn=preexec_fn)


# ------------------------------------------------ class 1: one guarded reader, redaction
SECRET = "hunter2-secret"


@pytest.mark.parametrize("make, words", [
    (lambda d: Path("/dev/zero"), "not a regular file"),
    (lambda d: (d / "env.csv").write_bytes(f"A={SECRET}\0B=1\0".encode()) and d / "env.csv",
     "NUL"),
    (lambda d: (d / "pw.csv").write_text(f"root:x:0:0:{SECRET}:/root:/bin/bash\n")
     and d / "pw.csv", "not a column name"),
    (lambda d: (d / "cred.csv").write_text("altitude_km, species, density_cm3, sigma_cm3\n"
                                           f"150, NO+, token={SECRET}, 1\n") and d / "cred.csv",
     "is not a number"),
])
def test_observation_files_go_through_the_guarded_reader(col, capsys, make, words):
    """`--observed` on a FIFO, /dev/zero, an environ-like binary file, a password-like file
    and a credential-like cell: exit 2 at once, the file named, its content never quoted
    (on the original tree: a hang, a MemoryError, and the lines echoed back)."""
    path = make(col)
    _, err = refused(capsys, "run", "s.toml", "--observed", path, where=path, words=[words])
    assert SECRET not in err and "root:x" not in err


def test_load_observations_of_the_library_is_guarded(col):
    """The library's ``load_observations`` applies the same guard: a FIFO is refused, not
    opened (run in a subprocess with a timeout, so a regression fails instead of hanging)."""
    os.mkfifo(col / "f.csv")
    code = ("import ionochem\ntry:\n    ionochem.load_observations('f.csv')\n"
            "except ionochem.InputError as exc:\n    print(exc)\n")
    proc = subprocess.run([sys.executable, "-c", code], cwd=col, capture_output=True,
                          text=True, timeout=30, env=dict(os.environ, PYTHONPATH=str(ROOT)))
    assert "f.csv: is not a regular file" in proc.stdout, proc.stderr[-1500:]


def test_observation_count_and_tiny_sigma_are_refused(col, monkeypatch):
    """More rows than MAX_OBSERVATIONS, and sigma = 1e-300 (χ² = inf on the original tree),
    are refused at the file; the matrix bound is checked from the sizes before allocation."""
    import ionochem
    from ionochem.io import observations
    monkeypatch.setattr(observations, "MAX_OBSERVATIONS", 3)
    rows = "".join(f"{100 + i}, NO+, 1e4, 1e3\n" for i in range(5))
    (col / "many.csv").write_text("altitude_km, species, density_cm3, sigma_cm3\n" + rows)
    with pytest.raises(InputError, match="more than the 3 observations"):
        ionochem.load_observations(col / "many.csv")
    (col / "tiny.csv").write_text("altitude_km, species, density_cm3, sigma_cm3\n"
                                  "150, NO+, 1e4, 1e-300\n")
    with pytest.raises(InputError, match="no measurement is that precise"):
        ionochem.load_observations(col / "tiny.csv")
    with pytest.raises(InputError, match="interpolation matrix"):
        observations.check_matrix_size(300_000, 12, 401)


@pytest.mark.parametrize("args", [
    ("beam", "sigma.csv", "--kt-perp", "0.002", "--kt-par", "1e-4", "--measured", "pw.csv"),
    ("maxwellian", "pw.csv"),
    ("maxwellian", "cred.csv"),
    ("maxwellian", "formula.csv"),
])
def test_lab_inputs_never_echo_content(col, capsys, args):
    """`rates ... --measured /etc/passwd`-like files, a credential-like cross-section cell and
    a spreadsheet-formula header: refused without quoting (the original tree echoed the
    `root:x:0:0` line and the cell)."""
    (col / "pw.csv").write_text(f"root:x:0:0:{SECRET}:/root:/bin/bash\n")
    (col / "cred.csv").write_text(f"energy_eV,v0\n0.1,1e-16\n1,password={SECRET}\n")
    (col / "formula.csv").write_text(f'energy_eV,=HYPERLINK("{SECRET}")\n0.1,1e-16\n1,1e-16\n')
    _, err = refused(capsys, "rates", *args)
    assert SECRET not in err and "root:x" not in err


@settings(max_examples=40, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(text=st.builds(lambda a, b: f"x{a}:{b}x", *[st.text(
    st.characters(blacklist_categories=("Cs", "Cc", "Zl", "Zp"), blacklist_characters=',#"'),
    max_size=20)] * 2))
def test_no_header_text_reaches_a_message(col, text):
    """Property: whatever text a header cell holds (here: any with a colon, so never a
    column name), the error message of the observation reader and of the laboratory reader
    does not contain it."""
    import ionochem
    from ionochem.rates.tables import read_numeric_csv
    p = col / "h.csv"
    p.write_text(f"altitude_km, {text}\n1, 2\n", encoding="utf-8")
    for read in (ionochem.load_observations, read_numeric_csv):
        with pytest.raises(InputError) as info:
            read(p)
        assert text.strip() not in str(info.value)


# ------------------------------------------------ class 2: outputs against every input
def test_output_equal_to_observed_is_refused_and_the_file_kept(col, capsys):
    """`uncertainty ... --observed obs.csv -o obs.csv` (exit 0 and the observations
    overwritten on the original tree) is refused before any work."""
    before = (col / "obs.csv").read_bytes()
    refused(capsys, "uncertainty", "s.toml", "--samples", "4", "--observed", "obs.csv",
            "-o", "obs.csv", where="obs.csv", words=["overwrite the input file"])
    assert (col / "obs.csv").read_bytes() == before


def test_plot_and_plot_levels_onto_one_file_are_refused(col, capsys):
    refused(capsys, "run", "s.toml", "--plot", "a.png", "--plot-levels", "a.png",
            words=["--plot and --plot-levels name the same file"])
    assert not (col / "a.png").exists()


def test_lab_output_equal_to_its_measured_curve_is_refused(col, capsys):
    (col / "m.csv").write_text("detuning_eV,rate_cm3_s\n0,1e-7\n0.5,5e-8\n")
    refused(capsys, "rates", "beam", "sigma.csv", "--kt-perp", "0.002", "--kt-par", "1e-4",
            "--measured", "m.csv", "-o", "m.csv", words=["--measured"])


# ------------------------------------------------ class 3: bounds from the arguments
@pytest.mark.parametrize("args, option", [
    (("sweep", "s.toml", "--vary", "sun.f107=30:600:1e-6", "-o", "w.nc"), "--vary"),
    (("sweep", "s.toml", "--diurnal", "--days", "1000000", "-o", "w.nc"), "--days"),
    (("run", "s.toml", "--scale", "R1=1e308"), "--scale"),
])
def test_unbounded_work_is_refused_up_front(col, capsys, args, option):
    """A sweep range of 5.7e8 values (a hang on the original tree), a million diurnal
    days (an AttributeError) and --scale 1e308 (residual nan): exit 2 naming the option,
    in well under a second."""
    t0 = time.perf_counter()
    refused(capsys, *args, where=option)
    assert time.perf_counter() - t0 < 5


@pytest.mark.parametrize("args", [
    ("fit", "s.toml", "--observed", "obs.csv", "--free", "R1", "--profile", "R1",
     "--profile-points", "1000000"),
    ("rates", "populations", "sig.csv", "--design", "d.csv", "--bootstrap", "1e9"),
    ("uncertainty", "s.toml", "--samples", "4", "--seed", "1" * 38),
])
def test_count_options_are_bounded_while_parsing(col, capsys, args):
    """Profile points, bootstrap refits and a 38-digit seed (a hang, 22 GiB and a crash
    when writing on the original tree) are refused by the parser: exit 2."""
    with pytest.raises(SystemExit) as info:
        main(list(args))
    assert info.value.code == 2
    assert "whole number from" in capsys.readouterr().err


@settings(max_examples=60, deadline=None)
@given(step=st.floats(1e-12, 1.0), span=st.floats(1.0, 1e4))
def test_sweep_range_is_counted_before_it_is_built(step, span):
    """Property: a range with more than MAX_SWEEP_POINTS values is refused from its three
    numbers, one with fewer is built with exactly (stop - start)/step + 1 values."""
    from ionochem.analysis.sweep_axes import MAX_SWEEP_POINTS, parse_values
    count = span / step
    text = f"0:{span!r}:{step!r}"
    if count + 1 > MAX_SWEEP_POINTS:
        with pytest.raises(InputError, match="points a sweep may have"):
            parse_values(text, "sun.f107")
    elif abs(count - round(count)) <= 1e-9 * max(1.0, count):
        assert len(parse_values(text, "sun.f107")) == round(count) + 1


@settings(max_examples=30, deadline=None)
@given(n=st.one_of(st.integers(-10, 1), st.integers(100_001, 10 ** 12)))
def test_library_applies_the_same_bounds(n):
    """Property: the library functions refuse what the options refuse, before allocating:
    bootstrap refits, profile points, seeds and diurnal days outside their bounds."""
    from ionochem.analysis.diurnal import diurnal_times
    from ionochem.analysis.fit import fit
    from ionochem.analysis.uncertainty import monte_carlo
    from ionochem.rates.populations import level_populations
    with pytest.raises(InputError, match="n_boot"):
        level_populations(np.eye(2), np.ones(2), 0.1, method="bootstrap", n_boot=n)
    with pytest.raises(InputError, match="--profile-points"):
        fit(None, None, ["R1"], profile="R1", profile_points=n * 1000 if n > 1 else n)
    with pytest.raises(InputError, match="--seed"):
        monte_carlo(None, 10, seed=-1 if n < 2 else 2 ** 63 + n)
    with pytest.raises(InputError, match="--days"):
        diurnal_times(n - 1 if n <= 1 else n, 900.0)


# ------------------------------------------------ class 4: full disk
def test_netcdf_write_beyond_the_file_size_limit_is_one_line_and_leaves_nothing(col):
    """`ulimit -f` (RuntimeError: NetCDF: HDF error traceback on the original tree): exit 2,
    one line naming the file, no temporary file left."""
    def limit():
        resource.setrlimit(resource.RLIMIT_FSIZE, (20_000, 20_000))
    proc = subprocess_cli("run", "s.toml", "-o", "out.nc", cwd=col, preexec_fn=limit)
    assert proc.returncode == 2, proc.stderr[-1500:]
    assert "Traceback" not in proc.stderr
    assert proc.stderr.strip().splitlines()[-1].startswith("out.nc: cannot write the output")
    assert not [p for p in os.listdir(col) if "out.nc" in p]


def test_stdout_to_a_full_device_is_one_line(col):
    """`ionochem run s.toml > /dev/full` (an OSError traceback on the original tree)."""
    if not os.path.exists("/dev/full"):
        pytest.skip("no /dev/full")
    with open("/dev/full", "w") as full:
        proc = subprocess_cli("run", "s.toml", cwd=col, stdout=full)
    assert proc.returncode == 2, proc.stderr
    assert proc.stderr.strip() == "cannot write the output: No space left on device"


# ------------------------------------------------ class 5: interruption and resume
INTERRUPT_ON_IMPORT = """
import runpy, sys
class Interrupt:
    def find_spec(self, name, *args):
        if name == "ionochem.cli":
            raise KeyboardInterrupt
sys.meta_path.insert(0, Interrupt())
sys.argv = ["ionochem", "run", "s.toml"]
runpy.run_module("ionochem", run_name="__main__")
"""


def test_interrupt_while_loading_is_one_line(col):
    """Ctrl-C while the command line is still being imported (a KeyboardInterrupt
    traceback on the original tree): one line and status 130. The interrupt is raised by an
    import hook at the import of ``ionochem.cli``, the earliest moment, deterministically."""
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    proc = subprocess.run([sys.executable, "-c", INTERRUPT_ON_IMPORT], cwd=col, env=env,
                          capture_output=True, text=True, timeout=60)
    assert proc.returncode == 130, proc.stderr
    assert proc.stderr.strip() == "interrupted"


def test_interrupt_while_parsing_is_one_line(col, capsys, monkeypatch):
    """Ctrl-C inside ``main`` before a command runs (while parsing): status 130."""
    import ionochem.cli as cli
    def interrupted(argv):
        raise KeyboardInterrupt
    monkeypatch.setattr(cli, "_main", interrupted)
    assert cli.main(["run", "s.toml"]) == 130
    assert capsys.readouterr().err.strip() == "interrupted"


@pytest.mark.parametrize("changed", ["t.csv", "rate.csv"])
def test_sweep_resume_refuses_a_changed_input_file(col, changed):
    """A resumed sweep reused points after a temperature or rate-table file changed (3.6x
    off on the original tree); its store now holds the files' digests and names the one
    that changed, and with the files unchanged the resume equals a fresh run."""
    import ionochem
    from ionochem.analysis.sweep import make_spec, run_sweep
    from ionochem.analysis.sweep_axes import parse_vary
    (col / "rate.csv").write_text("Te_K,k\n100,7e-7\n10000,7e-8\n")
    (col / "c.reactions").write_text(REACTIONS.replace("4e-7*(300/Te)^0.5",
                                                       'table("rate.csv", "k")'))
    (col / "s.toml").write_text(_scenario("[sun]\nf107 = 100\nf107a = 100\n"))
    axes = parse_vary(["sun.f107=100,150"])

    def spec():
        return make_spec(ionochem.load_scenario(col / "s.toml"), axes)
    fresh = run_sweep(spec(), output=col / "a.nc").dataset
    first = run_sweep(spec(), output=col / "b.nc", keep_store=True)
    first.dataset.close()
    os.unlink(col / "b.nc")
    again = run_sweep(spec(), output=col / "b.nc", resume=True).dataset
    np.testing.assert_array_equal(again["density"].values, fresh["density"].values)
    again.close()
    fresh.close()
    run_sweep(spec(), output=col / "c.nc", keep_store=True).dataset.close()
    os.unlink(col / "c.nc")
    text = (col / changed).read_text()
    (col / changed).write_text(text.replace("2000,1000", "3000,1000").replace("7e-8", "9e-8"))
    with pytest.raises(InputError, match=f"changed since: .*{changed}"):
        run_sweep(spec(), output=col / "c.nc", resume=True)


# ------------------------------------------------ class 6: non-finite values named
@settings(max_examples=15, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(exponent=st.integers(26, 308), which=st.sampled_from(["t", "p", "n"]))
def test_huge_table_values_are_refused_at_their_line(col, capsys, exponent, which):
    """Property: Te = 1e300 (blamed on the reaction list on the original tree) or a
    density or production beyond any atmosphere (NaN with numpy warnings) is refused at the
    table's line, before the solver sees it."""
    files = {"t": ("t.csv", TEMPS.replace("2000,1000", f"1e{exponent},1000")),
             "p": ("p.csv", PRODUCTION.replace("400,1", f"400,1e{exponent}")),
             "n": ("n.csv", NEUTRALS.replace("1e8,1e6,1e6,900", f"1e{exponent},1e6,1e6,900"))}
    name, text = files[which]
    (col / name).write_text(text)
    try:
        refused(capsys, "run", "s.toml", words=[f"{name} line 3", "beyond any atmosphere"])
    finally:
        for n, t in (("t.csv", TEMPS), ("p.csv", PRODUCTION), ("n.csv", NEUTRALS)):
            (col / n).write_text(t)


# ------------------------------------------------ class 7: plausibility warnings
@pytest.mark.parametrize("name, text, words", [
    ("n.csv", NEUTRALS.replace("1e11,1e13,2e12", "1e17,1e19,2e18"), "per m3"),
    ("t.csv", "altitude_km,Te_K,Ti_K\n100,0.02,0.02\n400,0.2,0.09\n", "in eV"),
])
def test_unit_slips_in_tables_are_warned(col, capsys, name, text, words):
    """A neutral table in m-3 (1e6 times cm-3) and temperatures in eV run, but warn."""
    (col / name).write_text(text)
    _, _, _, err = run_cli(capsys, "run", "s.toml")
    assert words in err, err


def test_observations_per_m3_are_warned(col):
    """An observation file in m-3 (1e6 times cm-3) loads, with a warning naming its line."""
    import ionochem
    (col / "m3.csv").write_text(OBS.replace("1e4, 1e3", "1e10, 1e9"))
    with pytest.warns(UserWarning, match="m3.csv:2: .* is the file per m3"):
        ionochem.load_observations(col / "m3.csv")


def test_cross_sections_in_megabarn_are_warned(col, capsys):
    (col / "mb.csv").write_text("energy_eV,v0\n0.1,30\n1,3\n10,0.3\n")
    _, _, _, err = run_cli(capsys, "rates", "maxwellian", "mb.csv")
    assert "are they in Mb" in err, err


@pytest.mark.parametrize("method, samples", [("sobol", 4), ("morris", 2),
                                             ("montecarlo", 3)])
def test_meaningless_sample_counts_are_warned(col, capsys, method, samples):
    _, _, _, err = run_cli(capsys, "uncertainty", "s.toml", "--samples", samples,
                           "--method", method, "--top", "2")
    assert "give a meaningless answer" in err, err


def test_grid_top_below_a_chapman_peak_is_warned():
    """A Chapman layer (Chapman 1931: q ∝ exp(1 - z - e^-z), z the height in scale heights
    above the peak) cut two scale heights below its peak still rises at the top: warned;
    the whole layer, or a grid above 400 km, is not."""
    from ionochem.io.plausibility import peak_above_grid
    h = np.linspace(100.0, 300.0, 41)
    z = (h - 250.0) / 25.0
    q = np.exp(1 - z - np.exp(-z))
    below = h <= 200.0
    assert "F peak lies above the grid" in peak_above_grid(h[below], q[below])
    assert peak_above_grid(h, q) is None
    assert peak_above_grid(h[below], q[below], dark=np.ones(below.sum(), bool)) is None


# ------------------------------------------------ class 8: reactants nobody supplies
def test_reactant_nobody_supplies_is_an_error_at_its_line(col, capsys):
    """R3 needs O3, which the table does not give and nothing makes: on the original tree
    its density was silently zero; now exit 2 at the reaction's line."""
    (col / "c.reactions").write_text(
        REACTIONS + "R3: NO+ + O3 -> O2+ + NO2 | k = 1e-10 | ref = invented\n"
        "R4: O2+ + e -> O + O | k = 2e-7 | ref = invented\n"
        "R5: NO2 -> NO + O | k = 1e-2 | ref = invented\n"
        "R6: NO -> N + O | k = 1e-2 | ref = invented\n")
    refused(capsys, "run", "s.toml", words=["c.reactions:5", "R3 needs O3"])


# ------------------------------------------------ class 9: balance_ion
@pytest.mark.parametrize("ion, words", [("N2", "neutral"), ("Xe+", "not a species of the"),
                                        ("e", "electron density itself"),
                                        ("O-", "negative ion")])
def test_balance_ion_is_refused_at_its_key(col, capsys, ion, words):
    (col / "ne.csv").write_text("altitude_km,Ne\n100,1e5\n400,1e5\n")
    (col / "s.toml").write_text(_scenario(
        f'[solve]\nelectrons = "table"\nelectron_table = "ne.csv"\nbalance_ion = "{ion}"\n'))
    refused(capsys, "run", "s.toml", where="s.toml: solve.balance_ion:", words=[words])


def test_fit_balance_ion_e_is_refused(col, capsys):
    """`fit --constrain-electrons --balance-ion e` ended with exit 0 on the original tree."""
    refused(capsys, "fit", "s.toml", "--observed", "obs.csv", "--free", "R1",
            "--constrain-electrons", "--balance-ion", "e", where="--balance-ion")


# ------------------------------------------------ class 10: laboratory values
@pytest.mark.parametrize("args, words", [
    (("maxwellian", "big.csv"), "above the 10000 eV"),
    (("maxwellian", "sigma.csv", "--temperatures", "1e299:1e300:1e299"), "outside 1 to"),
    (("beam", "sigma.csv", "--kt-perp", "0.002", "--kt-par", "1e-300", "--detuning",
      "0:1:3"), "kT_par_eV"),
    (("maxwellian", "sigma.csv", "--fit", "power", "--table", "tab.csv", "--entry", "X",
      "--reaction", "garbage ->"), "not a valid family entry"),
])
def test_absurd_laboratory_values_are_refused(col, capsys, args, words):
    """Energies of 1e308 eV, T = 1e300 K and kT = 1e-300 eV (nan or Overflow on the original
    tree) and `--reaction 'garbage ->'` (written into an entry) are refused; no table is
    written."""
    (col / "big.csv").write_text("energy_eV,v0\n0.1,1e-16\n1e308,1e-16\n")
    refused(capsys, "rates", *args, words=[words])
    assert not (col / "tab.csv").exists()


@settings(max_examples=40, deadline=None)
@given(T=st.one_of(st.floats(1e-300, 0.99), st.floats(1.01e6, 1e300)))
def test_maxwellian_refuses_temperatures_outside_its_range(T):
    """Property: any temperature outside 1 K to 1e6 K is refused by the library."""
    from ionochem.rates import maxwellian_rate
    E = np.linspace(0.0, 10.0, 50)
    with pytest.raises(InputError, match="temperature_K"):
        maxwellian_rate(E, np.full(E.size, 1e-16), [300.0, T])
