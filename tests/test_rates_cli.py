"""The ``ionochem rates`` command (maxwellian, beam, populations, fit).

References: the closed form of the Maxwellian average of a 1/E cross section
(k = C sqrt(8/(pi m_e kT)), constants from scipy.constants) for the printed and written
rates; Python's csv module reading the written tables back; the rate-table format of
docs/reaction-list.md. Input files are invented test data. Bad files must give one line
``file:line: message`` and exit status 2.
"""

from __future__ import annotations

import csv

import numpy as np
import pytest
from scipy import constants

from ionochem.cli import main

C = 5e-16       # eV cm2: sigma = C/E (invented)


def _write(path, header, rows, comment="invented test data"):
    lines = [f"# {comment}", ",".join(header)]
    lines += [",".join(f"{v:.10g}" for v in row) for row in rows]
    path.write_text("\n".join(lines) + "\n")
    return str(path)


def _f_from_table(path):
    """The entry's expected ``f`` from a written level-row table (read with csv): per level
    the widest one-sigma factor max(k/k_low, k_high/k), rounded up to 3 significant digits;
    one number when the levels agree, else the chain by v."""
    import math
    widest = {}
    with open(path, newline="") as fh:
        for row in csv.DictReader(r for r in fh if not r.startswith("#")):
            k, lo, hi = (float(row[c]) for c in ("k", "k_low", "k_high"))
            v = int(row["v"])
            widest[v] = max(widest.get(v, 1.0), k / lo, hi / k)
    up = {}
    for v, x in sorted(widest.items()):
        scale = 10.0 ** (2 - math.floor(math.log10(x)))
        up[v] = math.ceil(x * scale - 1e-9) / scale
    if len(set(up.values())) == 1:
        return f"{next(iter(up.values())):g}"
    text = f"{up[max(up)]:g}"
    for v in sorted(up)[-2::-1]:
        text = f"{up[v]:g} if v < {v + 0.5:g} else ({text})"
    return text


def _sigma_file(tmp_path, levels=2):
    E = np.geomspace(1e-7, 30.0, 1500)
    cols = [E]
    header = ["energy_eV"]
    for v in range(levels):
        s = (1.0 + 0.5 * v) * C / E
        cols += [s, 0.8 * s, 1.2 * s]
        header += [f"v{v}", f"v{v}_low", f"v{v}_high"]
    return _write(tmp_path / "sigma.csv", header, np.column_stack(cols))


def _exact(T, scale=1.0):
    kT = constants.k * 1e7 * T
    return scale * C * constants.e * 1e7 * np.sqrt(8 / (np.pi * constants.m_e * 1e3 * kT))


def _rows(path):
    with open(path, newline="") as fh:
        return [r for r in csv.reader(fh) if r and not r[0].startswith("#")]


def test_maxwellian_writes_rates_table_and_entry(tmp_path, capsys):
    """Rates of sigma = C/E follow the closed form; --fit power recovers B = -1/2 exactly
    for a 1/E cross section; the level-row table has v, Te_K, k, k_low, k_high; the
    printed and written entry is the family entry over the levels."""
    sigma = _sigma_file(tmp_path)
    out, table = tmp_path / "k.csv", tmp_path / "dr.csv"
    entry = tmp_path / "new.reactions"
    code = main(["rates", "maxwellian", sigma, "--temperatures", "200:3000:100", "-o", str(out),
                 "--fit", "power", "--entry", "DR_X", "--reaction", "N2+(v) + e -> N + N",
                 "--table", str(table), "--write-entry", str(entry),
                 "--plot", str(tmp_path / "k.png")])
    text = capsys.readouterr().out
    assert code == 0
    rows = _rows(out)
    assert rows[0] == ["Te_K", "v0", "v0_low", "v0_high", "v1", "v1_low", "v1_high",
                       "missing_weight"]
    T = np.array([float(r[0]) for r in rows[1:]])
    np.testing.assert_allclose([float(r[1]) for r in rows[1:]], _exact(T), rtol=1e-4)
    np.testing.assert_allclose([float(r[4]) for r in rows[1:]], _exact(T, 1.5), rtol=1e-4)
    assert "B = -0.5" in text
    trows = _rows(table)
    assert trows[0] == ["v", "Te_K", "k", "k_low", "k_high"]
    assert {r[0] for r in trows[1:]} == {"0", "1"}
    v1 = [r for r in trows[1:] if r[0] == "1"]
    assert float(v1[0][3]) == pytest.approx(0.8 * float(v1[0][2]), rel=1e-4)
    expected = ('DR_X(v): N2+(v) + e -> N + N | k = table("dr.csv", "k") | '
                f"f = {_f_from_table(table)} | levels v = 0..1 | "
                "ref = power fit of sigma.csv (ionochem rates)")
    assert expected in text
    assert expected in entry.read_text()
    assert (tmp_path / "k.png").stat().st_size > 1000


def test_maxwellian_flags_temperatures_the_grid_does_not_cover(tmp_path, capsys):
    """A grid ending at 0.3 eV cannot serve 8000 K: a warning naming the file and a
    missing_weight above 1e-3 in the output (the temperature is flagged, not hidden)."""
    E = np.geomspace(1e-7, 0.3, 300)
    sigma = _write(tmp_path / "s.csv", ["energy_eV", "k"], np.column_stack([E, C / E]))
    out = tmp_path / "k.csv"
    assert main(["rates", "maxwellian", sigma, "--temperatures", "100:8000:7900",
                 "-o", str(out)]) == 0
    err = capsys.readouterr().err
    assert err.startswith(f"warning: {sigma}: ") and "misses" in err
    miss = [float(r[-1]) for r in _rows(out)[1:]]
    assert miss[0] < 1e-3 < miss[1]


def test_beam_against_measured_curve_recovers_the_level_mix(tmp_path, capsys):
    """A measured curve made from 75 % v0 + 25 % v1 gives that mix back; the output holds the
    theory curves and the figure is written."""
    from ionochem.rates import beam_rate
    sigma = _sigma_file(tmp_path)
    E = np.geomspace(1e-7, 30.0, 1500)
    S = np.column_stack([C / E, np.where(E > 0.01, 4e-16, 0.0)])
    _write(tmp_path / "sigma.csv", ["energy_eV", "v0", "v1"], np.column_stack([E, S]))
    Ed = np.geomspace(1e-4, 1.0, 30)
    k = beam_rate(E, S, Ed, 3e-3, 1e-4) @ [0.75, 0.25]
    meas = _write(tmp_path / "m.csv", ["detuning_eV", "rate_cm3_s", "sigma_cm3_s"],
                  np.column_stack([Ed, k, 0.02 * k]))
    out = tmp_path / "b.csv"
    code = main(["rates", "beam", sigma, "--kt-perp", "3e-3", "--kt-par", "1e-4",
                 "--measured", meas, "-o", str(out), "--plot", str(tmp_path / "b.png")])
    text = capsys.readouterr().out
    assert code == 0, text
    assert "0.7500" in text and "0.2500" in text
    rows = _rows(out)
    assert rows[0] == ["detuning_eV", "rate_v0", "rate_v1", "measured_cm3_s", "theory_cm3_s"]
    np.testing.assert_allclose([float(r[4]) for r in rows[1:]], k, rtol=1e-5)
    assert (tmp_path / "b.png").stat().st_size > 1000


def test_populations_command(tmp_path, capsys):
    """Noise-free invented signals give the populations exactly; the CSV holds them."""
    design = np.array([[1.0, 0.2, 0.0], [0.1, 1.0, 0.3], [0.0, 0.2, 1.0], [0.5, 0.5, 0.5]])
    truth = np.array([0.5, 0.3, 0.2])
    s = 100 * design @ truth
    sig = _write(tmp_path / "s.csv", ["channel", "signal", "sigma"],
                 np.column_stack([np.arange(4), s, 0.01 * s]))
    des = _write(tmp_path / "d.csv", ["channel", "v0", "v1", "v2"],
                 np.column_stack([np.arange(4), design]))
    out = tmp_path / "p.csv"
    assert main(["rates", "populations", sig, "--design", des, "-o", str(out)]) == 0
    rows = _rows(out)
    np.testing.assert_allclose([float(r[1]) for r in rows[1:]], truth, rtol=1e-5)


def test_fit_command_writes_table_in_the_files_temperature_column(tmp_path, capsys):
    """fit reads Ti_K-keyed rates with _sigma errors, and the table keeps Ti_K (after v)."""
    T = np.geomspace(300, 3000, 12)
    k = 1e-10 * (T / 300) ** -0.8
    rates = _write(tmp_path / "r.csv", ["Ti_K", "v2", "v2_sigma"],
                   np.column_stack([T, k, 0.03 * k]))
    out = tmp_path / "t.csv"
    assert main(["rates", "fit", rates, "--form", "power", "-o", str(out),
                 "--entry", "CT", "--plot", str(tmp_path / "f.png")]) == 0
    assert (tmp_path / "f.png").stat().st_size > 1000
    text = capsys.readouterr().out
    assert "B = -0.8" in text
    assert ('CT(v): REACTANTS(v) -> PRODUCTS | k = table("t.csv", "k") | '
            f"f = {_f_from_table(out)} | levels v = 2..2") in text
    rows = _rows(out)
    assert rows[0] == ["v", "Ti_K", "k", "k_low", "k_high"]
    assert all(r[0] == "2" for r in rows[1:])


@pytest.mark.parametrize("text, line, words", [
    ("energy_eV,v0\n0,1e-16\n0.5,2e-16\n0.4,1e-16\n", 4, "increasing"),
    ("energy_eV,v0\n0,1e-16\n1,-2e-16\n", 3, "non-negative"),
    ("energy_eV,v0\n0,1e-16\n1,abc\n", 3, "not a number"),
    ("energy,v0\n0,1e-16\n1,1e-16\n", 1, "first column"),
    ("energy_eV,a,b\n0,1,1\n1,1,1\n", 1, "v0, v1"),
    ("energy_eV,v0,v0_low\n0,1,1\n1,1,1\n", 1, "partner"),
    ("energy_eV,v0,v0_low,v0_high\n0,1,2,3\n1,1,1,1\n", 2, "must contain"),
])
def test_bad_cross_section_file_is_refused_at_its_line(tmp_path, capsys, text, line, words):
    """Every malformed SIGMA.csv: exit 2, one line FILE:LINE: message, no traceback."""
    path = tmp_path / "bad.csv"
    path.write_text(text)
    code = main(["rates", "maxwellian", str(path), "--fit", "power", "--table",
                 str(tmp_path / "t.csv")])
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2
    assert err[-1].startswith(f"{path}:{line}: "), err
    assert words in err[-1]


@pytest.mark.parametrize("argv, where", [
    (["maxwellian", "{s}", "--temperatures", "300:100:10"], "--temperatures"),
    (["maxwellian", "{s}", "--temperatures", "100:300:7"], "--temperatures"),
    (["beam", "{s}", "--kt-perp", "0", "--kt-par", "1e-4", "--detuning", "0:1:5"],
     "--kt-perp"),
    (["beam", "{s}", "--kt-perp", "1e-3", "--kt-par", "1e-4", "--detuning", "0:1:2.5"],
     "--detuning"),
    (["beam", "{s}", "--kt-perp", "1e-3", "--kt-par", "1e-4", "--detuning", "0:99:5"],
     "{s}"),
    (["maxwellian", "{s}", "--entry", "X"], "--entry"),
    (["maxwellian", "{s}", "--fit", "power", "--table", "{d}/t.csv", "--write-entry",
      "{d}/e.reactions"], "--write-entry"),
])
def test_bad_options_are_refused(tmp_path, capsys, argv, where):
    """Backwards ranges, steps that do not divide, zero temperatures, detuning beyond the
    grid, entry options without a fit: exit 2 naming the option (or the file)."""
    s = _sigma_file(tmp_path, levels=1)
    args = [a.format(s=s, d=tmp_path) for a in argv]
    code = main(["rates", *args])
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2
    assert err[-1].startswith(where.format(s=s)), err


@pytest.mark.parametrize("signals, design, where, words", [
    ("channel,signal,sigma\n0,1,0.1\n5,1,0.1\n", "channel,v0\n0,1\n1,1\n", "s:3", "not in"),
    ("channel,signal,sigma\n0,1,0.1\n0,1,0.1\n", "channel,v0\n0,1\n", "s:3", "twice"),
    ("channel,signal,sigma\n0.5,1,0.1\n", "channel,v0\n0,1\n", "s:2", "whole number"),
    ("channel,signal,sigma\n0,1,0\n", "channel,v0\n0,1\n", "s:2", "positive"),
    ("channel,signal,sigma\n0,1,0.1\n", "channel,v0\n0,-1\n", "d:2", "non-negative"),
    ("channel,signal,sigma\n0,1,0.1\n", "channel,a,b\n0,1,1\n", "d:1", "v0, v1"),
    ("channel,signal\n0,1\n", "channel,v0\n0,1\n", "s:1", "no column 'sigma'"),
])
def test_bad_population_files_are_refused_at_their_line(tmp_path, capsys, signals, design,
                                                        where, words):
    """Channels missing from the design, repeated or fractional, zero errors, negative
    responses, unnamed levels, a missing column: exit 2 at FILE:LINE."""
    s, d = tmp_path / "s.csv", tmp_path / "d.csv"
    s.write_text(signals)
    d.write_text(design)
    code = main(["rates", "populations", str(s), "--design", str(d)])
    err = capsys.readouterr().err.strip().splitlines()
    name, line = where.split(":")
    assert code == 2
    assert err[-1].startswith(f"{tmp_path / (name + '.csv')}:{line}: "), err
    assert words in err[-1]


def test_branching_channels_get_one_entry_each(tmp_path, capsys):
    """Two --entry/--reaction/--fraction triples give two entries reading the same table with
    F*table(...); mismatched counts and fractions outside (0, 1] are refused."""
    sigma = _sigma_file(tmp_path, levels=1)
    base = ["rates", "maxwellian", sigma, "--fit", "power", "--table", str(tmp_path / "t.csv")]
    two = ["--entry", "A", "--reaction", "N2+(v) + e -> N(2D) + N", "--fraction", "0.54",
           "--entry", "B", "--reaction", "N2+(v) + e -> 2 N(2D)", "--fraction", "0.46",
           "--write-entry", str(tmp_path / "e.reactions")]
    assert main(base + two) == 0
    text = (tmp_path / "e.reactions").read_text()
    assert 'A(v): N2+(v) + e -> N(2D) + N | k = 0.54*table("t.csv", "k")' in text
    assert 'B(v): N2+(v) + e -> 2 N(2D) | k = 0.46*table("t.csv", "k")' in text
    capsys.readouterr()
    assert main(base + ["--entry", "A", "--entry", "B", "--reaction", "X(v) -> Y"]) == 2
    assert capsys.readouterr().err.startswith("--reaction: ")
    assert main(base + ["--entry", "A", "--reaction", "X(v) -> Y", "--fraction", "1.5"]) == 2
    assert capsys.readouterr().err.startswith("--fraction: ")



# ------------------------------------------------------------------ rates table
WIDE = """\
# invented per-level rates (test data)
Te_K,v0,v0_low,v0_high,v1,v1_low,v1_high
300,2.0e-7,1.6e-7,2.5e-7,1.0e-7,0.5e-7,2.17e-7
1000,1.2e-7,0.96e-7,1.5e-7,0.6e-7,0.3e-7,1.2e-7
3000,0.7e-7,0.56e-7,0.875e-7,0.35e-7,0.175e-7,0.7e-7
"""
LONG = """\
# invented per-level rates (test data), level-row layout
v,Te_K,k,k_sigma
0,300,2.0e-7,0.2e-7
0,3000,0.7e-7,0.07e-7
1,300,1.0e-7,0.3e-7
1,1000,0.6e-7,0.18e-7
1,3000,0.35e-7,0.105e-7
"""


@pytest.mark.parametrize("layout", ["wide", "long"])
def test_table_job_writes_a_level_row_table_and_strict_entries(tmp_path, capsys, layout):
    """``rates table`` takes a tabulated per-level k(T) (wide columns v0, v1 with bands, or
    long rows v, Te_K, k, k_sigma) without a fit: the level-row table holds the file's
    values (read back with csv), the entries carry f from the table's bands (k_sigma s
    becomes k/(1+s/k)..k(1+s/k)), the user's --ref, and pass ``check --strict``; the
    written entries parse level by level (v = 1 at 300 K is the table's row)."""
    src = tmp_path / f"{layout}.csv"
    src.write_text(WIDE if layout == "wide" else LONG)
    table, entry = tmp_path / "dr_levels.csv", tmp_path / "dr.reactions"
    ref = "storage-ring measurement, invented group, 2026 (unpublished)"
    assert main(["rates", "table", str(src), "-o", str(table), "--entry", "DR_X",
                 "--reaction", "N2+(v) + e -> N + N", "--ref", ref,
                 "--write-entry", str(entry)]) == 0
    out = capsys.readouterr().out
    rows = _rows(table)
    assert rows[0] == ["v", "Te_K", "k", "k_low", "k_high"]
    v1 = [[float(x) for x in r] for r in rows[1:] if r[0] == "1"]
    assert v1[0][:3] == [1.0, 300.0, 1.0e-7]
    if layout == "long":
        assert v1[0][3] == pytest.approx(1.0e-7 / 1.3, rel=1e-5)
        assert v1[0][4] == pytest.approx(1.3e-7, rel=1e-5)
    else:
        assert v1[0][3:] == [0.5e-7, 2.17e-7]
    f = _f_from_table(table)
    text = entry.read_text()
    assert (f'DR_X(v): N2+(v) + e -> N + N | k = table("dr_levels.csv", "k") | f = {f} | '
            f"levels v = 0..1 | ref = {ref}; tabulated in {src.name}") in text
    assert f"f = {f}" in out
    if layout == "wide":
        assert " if v < 0.5 else " in f          # the two levels' bands differ
    assert main(["check", "--strict", str(entry)]) == 0
    capsys.readouterr()
    from ionochem.mechanism.parser import parse_reaction_list
    member = next(r for r in parse_reaction_list(entry).reactions if r.id == "DR_X(v=1)")
    assert member.k.evaluate({"Te": np.array([300.0]), "v": 1})[0] == pytest.approx(1.0e-7)
    assert member.f.evaluate({"v": 1}) == pytest.approx(float(f.split("else (")[-1].rstrip(")"))
                                                        if "else" in f else float(f))


def test_table_job_needs_an_uncertainty(tmp_path, capsys):
    """A table without band columns gets no entry without --f (exit 2, at the file); with
    --f 1.5 the entries carry f = 1.5."""
    src = tmp_path / "r.csv"
    src.write_text("T_K,v0,v1\n300,2e-7,1e-7\n3000,7e-8,3.5e-8\n")
    table = tmp_path / "t.csv"
    assert main(["rates", "table", str(src), "-o", str(table), "--entry", "X",
                 "--reaction", "N2+(v) + e -> N + N"]) == 2
    err = capsys.readouterr().err
    assert err.startswith(f"{src}: ") and "--f F" in err
    assert main(["rates", "table", str(src), "-o", str(table), "--entry", "X",
                 "--reaction", "N2+(v) + e -> N + N", "--f", "1.5"]) == 0
    assert "| f = 1.5 | levels v = 0..1 |" in capsys.readouterr().out
    assert _rows(table)[0] == ["v", "Te_K", "k"]
