"""``ionochem reactions`` shows the uncertainty that ``uncertainty`` samples.

A level-row rate table with a band (invented values) is read by a family entry whose own
``f`` says 2; the Monte Carlo samples the band (analysis/sampling.py), so the listing must
show the band's factors, k/k_low below and k_high/k above, computed here from the CSV with
the standard library.
"""

from __future__ import annotations

import csv

import numpy as np
import pytest

import ionochem
from ionochem.cli import main

TABLE = """\
v,Te_K,k,k_low,k_high
0,300,2.0e-7,1.5e-7,2.6e-7
0,3000,1.0e-7,0.75e-7,1.3e-7
1,300,1.0e-7,0.5e-7,2.17e-7
1,3000,0.5e-7,0.25e-7,1.085e-7
"""
ENTRIES = """\
P1: O -> O+ + e | k = prescribed | f = 1.2 | ref = invented test
PN(v): N2 -> N2+(v) + e | k = 1e-12 | f = 1.3 | levels v = 0..1 | ref = invented test
DR(v): N2+(v) + e -> N + N | k = table("dr.csv", "k") | f = 2 | levels v = 0..1 \
| ref = invented test
CT(v): N2+(v) + O -> O+ + N2 | k = 1e-12 | f = 1.3 | levels v = 0..1 | ref = invented test
R1: O+ + e -> O | k = 2e-7 | f = 1.3 | ref = invented test
"""


def _band_at_300(v):
    with open(_band_at_300.path, newline="") as fh:
        for row in csv.DictReader(fh):
            if int(row["v"]) == v and float(row["Te_K"]) == 300.0:
                k, lo, hi = (float(row[c]) for c in ("k", "k_low", "k_high"))
                return k / lo, hi / k
    raise AssertionError


def test_listing_shows_the_sampled_band_not_the_entrys_f(column, tmp_path, capsys):
    """At 300 K the v = 1 band is k/2 .. 2.17 k: the list shows ``/2 x2.17 (band)`` (not
    f = 2) and v = 0 its symmetric-enough 1.33/1.3 factors; on a column the shown factors
    are exactly what the Monte Carlo's kernel uses (exp of its one-sigma ln factors)."""
    alt = np.linspace(100.0, 300.0, 5)
    path = column(ENTRIES, alt, neutrals={"O": 1e11, "N2": 1e10, "N": 1e8}, Tn=300.0,
                  production={"P1": 10.0})
    (tmp_path / "dr.csv").write_text(TABLE)
    _band_at_300.path = tmp_path / "dr.csv"
    assert main(["reactions", str(path.with_suffix(".reactions")), "--temperature",
                 "300"]) == 0
    out = capsys.readouterr().out
    rows = {ln.split()[0]: ln for ln in out.splitlines() if ln.strip().startswith("DR(")}
    below, above = _band_at_300(1)
    assert f"/{below:.3g} x{above:.3g} (band)" in rows["DR(v=1)"]
    below0, above0 = _band_at_300(0)
    assert f"/{below0:.3g} x{above0:.3g} (band)" in rows["DR(v=0)"]
    assert "sampled instead of the entry's f" in out
    # On the column (Te = 300 K everywhere): the listing equals the sampling kernel.
    assert main(["reactions", str(path), "--altitude", "200", "--species", "N2+"]) == 0
    out = capsys.readouterr().out
    from ionochem.analysis.sampling import SampleKernel
    model = ionochem.Model(ionochem.load_scenario(path))
    kern = SampleKernel(model)
    j = model.reactions.index("DR(v=1)")
    a = int(np.argmin(np.abs(model.altitude_km - 200.0)))
    lo, hi = np.exp(kern.sigma_low[a, j]), np.exp(kern.sigma_high[a, j])
    assert lo == pytest.approx(below) and hi == pytest.approx(above)
    line = next(ln for ln in out.splitlines() if ln.strip().startswith("DR(v=1)"))
    assert f"/{lo:.3g} x{hi:.3g} (band)" in line
