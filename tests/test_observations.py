"""Observation files (ionochem.io.observations), the misfit in log density
(ionochem.analysis.misfit) and the ``--observed`` option of run, compare and uncertainty.

The column is synthetic (invented rates and densities); misfits are checked against the
χ² written out by hand from its definition and against numpy's own linear interpolation.
"""

from __future__ import annotations

import numpy as np
import pytest

import ionochem
from ionochem.analysis.misfit import interpolation_matrix, log_density, misfit
from ionochem.cli import main

ALT = np.linspace(120.0, 300.0, 10)

CHEM = """\
P1: O -> O+ + e | k = prescribed | ref = invented test
P2: N2 -> N2+ + e | k = prescribed | ref = invented test
R1: O+ + N2 -> NO+ + N | k = 1.2e-12 | f = 1.3 | ref = invented test
R2: N2+ + O -> NO+ + N | k = 1.4e-10 | f = 1.3 | ref = invented test
R3: NO+ + e -> N + O | k = 4.0e-7*(300/Te)^0.5 | f = 1.2 | ref = invented test
R4: N2+ + e -> N + N | k = 2.2e-7*(300/Te)^0.39 | f = 1.3 | ref = invented test
R5: O+ + e -> O | k = 4.0e-12 | ref = invented test
"""


def small_column(column, name="s", extra=""):
    """A four-ion synthetic column (invented) on 10 levels."""
    z = ALT
    neutrals = {"O": 5e8 * np.exp(-(z - 120) / 45), "N2": 2e11 * np.exp(-(z - 120) / 30),
                "N": 1e7 * np.ones_like(z)}
    prod = {"P1": 2e3 * np.exp(-((z - 180) / 60) ** 2),
            "P2": 8e2 * np.exp(-((z - 160) / 40) ** 2)}
    return column(CHEM, z, neutrals=neutrals, Tn=np.linspace(400, 1000, z.size),
                  Te=np.linspace(400, 2200, z.size), production=prod, name=name,
                  extra=extra)


GOOD = """\
# invented observations
altitude_km, species, density_cm3, sigma_cm3, kind
150, N2+, 30, 6,
200, N2+, 80, 16, density
200, e, 2.4e4, 2e3, electron_density
175, NO+/O+, 1.5, 0.3, ratio
"""


def test_load_observations_reads_every_kind(tmp_path):
    """The documented CSV form: kinds default to density, ``e`` is electron density, ratios
    keep their A/B name; lines are remembered for error messages."""
    path = tmp_path / "obs.csv"
    path.write_text(GOOD)
    obs = ionochem.load_observations(path)
    assert list(obs["species"].values) == ["N2+", "N2+", "e", "NO+/O+"]
    assert list(obs["kind"].values) == ["density", "density", "electron_density", "ratio"]
    assert list(obs["line"].values) == [3, 4, 5, 6]
    np.testing.assert_allclose(obs["sigma_cm3"].values, [6, 16, 2e3, 0.3])


def test_netcdf_form_round_trips(tmp_path):
    """The netCDF form (variables along ``observation``) loads to the same data."""
    path = tmp_path / "obs.csv"
    path.write_text(GOOD)
    obs = ionochem.load_observations(path)
    from ionochem.io.netcdf import write_netcdf
    write_netcdf(obs.drop_vars("line"), tmp_path / "obs.nc")
    back = ionochem.load_observations(tmp_path / "obs.nc")
    for v in ("altitude_km", "density_cm3", "sigma_cm3"):
        np.testing.assert_array_equal(back[v].values, obs[v].values)
    assert list(back["species"].values) == list(obs["species"].values)


BAD_FILES = [
    # (name, text, line, words in the message)
    ("unknown_column", "altitude_km, species, density_cm3, sigma_cm3, error\n150,N2+,1,1,1\n",
     1, "unknown column"),
    ("missing_column", "altitude_km, species, density_cm3\n150,N2+,1\n", 1, "sigma_cm3"),
    ("negative_sigma", "altitude_km,species,density_cm3,sigma_cm3\n150,N2+,10,1\n"
     "200,N2+,10,-1\n", 3, "sigma"),
    ("zero_sigma", "altitude_km,species,density_cm3,sigma_cm3\n150,N2+,10,0\n", 2, "positive"),
    ("zero_density", "altitude_km,species,density_cm3,sigma_cm3\n150,N2+,0,1\n", 2,
     "positive"),
    ("not_a_number", "# c\naltitude_km,species,density_cm3,sigma_cm3\n150,N2+,ten,1\n", 3,
     "not a number"),
    ("nan", "altitude_km,species,density_cm3,sigma_cm3\n150,N2+,nan,1\n", 2, "finite"),
    ("duplicate", "altitude_km,species,density_cm3,sigma_cm3\n150,N2+,10,1\n200,N2+,10,1\n"
     "150,N2+,12,1\n", 4, "twice"),
    ("bad_kind", "altitude_km,species,density_cm3,sigma_cm3,kind\n150,N2+,10,1,flux\n", 2,
     "kind"),
    ("bad_species", "altitude_km,species,density_cm3,sigma_cm3\n150,Q2+,10,1\n", 2,
     "unknown element"),
    ("short_row", "altitude_km,species,density_cm3,sigma_cm3\n150,N2+,10\n", 2, "cells"),
    ("empty", "# nothing\n", None, "empty"),
    ("unknown_species", "altitude_km,species,density_cm3,sigma_cm3\n150,N2+,10,1\n"
     "160,He+,10,1\n", 3, "not in the model"),
    ("outside_grid", "altitude_km,species,density_cm3,sigma_cm3\n150,N2+,10,1\n"
     "500,N2+,10,1\n", 3, "outside the model grid"),
]


@pytest.mark.parametrize("name,text,line,words", BAD_FILES, ids=[b[0] for b in BAD_FILES])
def test_bad_observation_file_exits_2_at_its_line(column, tmp_path, capsys, name, text,
                                                  line, words):
    """Every bad observation file is refused by ``run --observed`` with exit 2 and one line
    ``file:line: message`` (file-level problems: ``file: message``), no traceback."""
    scen = small_column(column)
    path = tmp_path / f"{name}.csv"
    path.write_text(text)
    code = main(["run", str(scen), "--observed", str(path)])
    err = capsys.readouterr().err
    assert code == 2, err
    last = err.strip().splitlines()[-1]
    prefix = f"{path}:{line}:" if line else f"{path}:"
    assert last.startswith(prefix), last
    assert words in last, last
    assert "Traceback" not in err


def test_interpolation_matrix_matches_numpy_interp():
    """W maps ln n on the grid to the observations as numpy.interp does (linear in
    altitude), and a ratio row is the difference of its two species' rows."""
    import xarray as xr
    rng = np.random.default_rng(1)
    alt = np.array([100.0, 130.0, 170.0, 220.0])
    log_n = rng.normal(size=(3, alt.size))
    obs = xr.Dataset({"altitude_km": ("observation", [100.0, 150.0, 219.0, 220.0]),
                      "species": ("observation", np.array(["a", "b", "c", "a/c"], object)),
                      "kind": ("observation", np.array(["density"] * 3 + ["ratio"], object))})
    W = interpolation_matrix(obs, ["a", "b", "c"], alt[::-1])
    got = W @ log_n[:, ::-1].ravel()
    want = [np.interp(100.0, alt, log_n[0]), np.interp(150.0, alt, log_n[1]),
            np.interp(219.0, alt, log_n[2]), log_n[0, -1] - log_n[2, -1]]
    np.testing.assert_allclose(got, want, rtol=1e-12)


def test_misfit_is_the_chi_square_in_log_density(column, tmp_path):
    """χ² = Σ ((ln y − ln m)/s)², s = sqrt(ln(1 + (σ/y)²)), written out by hand at grid
    levels of the synthetic column; the electron-density row compares with ``e``."""
    model = ionochem.Model(ionochem.load_scenario(small_column(column)))
    ds = model.solve()
    a1, a2 = float(ALT[2]), float(ALT[6])
    m1 = float(ds["density"].sel(species="N2+", altitude=a1))
    m2 = float(ds["density"].sel(species="e", altitude=a2))
    y1, s1, y2, s2 = 2 * m1, 0.3 * m1, m2, 0.1 * m2
    path = tmp_path / "o.csv"
    path.write_text("altitude_km,species,density_cm3,sigma_cm3\n"
                    f"{a1!r},N2+,{y1!r},{s1!r}\n{a2!r},e,{y2!r},{s2!r}\n")
    obs = ionochem.load_observations(path)
    mf = misfit(obs, ds["species"].values, ds["altitude"].values, log_density(ds))
    want = (np.log(2) / np.sqrt(np.log1p((s1 / y1) ** 2))) ** 2
    assert mf.chi2 == pytest.approx(want, rel=1e-9)
    assert [(r.species, r.points) for r in mf.rows] == [("N2+", 1), ("e", 1)]
    assert mf.rows[0].median_ratio == pytest.approx(0.5, rel=1e-9)


def test_run_compare_uncertainty_print_misfit_and_draw(column, tmp_path, capsys):
    """``--observed`` prints the misfit table and the figures are written with the
    observations drawn (run, compare, uncertainty)."""
    scen = small_column(column)
    obs = tmp_path / "o.csv"
    obs.write_text("altitude_km,species,density_cm3,sigma_cm3\n150,N2+,30,6\n"
                   "200,e,2e4,2e3\n260,NO+,1e3,2e2\n")
    assert main(["run", str(scen), "--observed", str(obs), "--plot",
                 str(tmp_path / "r.png")]) == 0
    out = capsys.readouterr().out
    assert "misfit against" in out and "chi2 model" in out
    assert main(["compare", str(scen), "--scale", "R4=0.5", "--observed", str(obs),
                 "--plot", str(tmp_path / "c.png")]) == 0
    out = capsys.readouterr().out
    assert "chi2 baseline" in out and "chi2 changed" in out
    assert main(["uncertainty", str(scen), "--samples", "8", "--no-progress",
                 "--observed", str(obs), "--plot", str(tmp_path / "u.png")]) == 0
    out = capsys.readouterr().out
    assert "chi2 median" in out
    for f in ("r.png", "c.png", "u.png"):
        assert (tmp_path / f).stat().st_size > 1000


def test_overlay_draws_the_shown_species_only(tmp_path):
    """The overlay draws one error-bar set per shown species with observations, none for
    ratios or species not shown, and widens the density axis to hold the points."""
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from ionochem.plot.observations import overlay_observations
    path = tmp_path / "obs.csv"
    path.write_text(GOOD)
    obs = ionochem.load_observations(path)
    fig, ax = plt.subplots()
    ax.set_xscale("log")
    ax.set_xlim(1e3, 1e4)
    drawn = overlay_observations(ax, obs, ["N2+", "e", "NO+"])
    assert len(drawn) == 2
    lo, hi = ax.get_xlim()
    assert lo <= 30 / 2 and hi >= 2.6e4
    assert overlay_observations(ax, None, ["N2+"]) == []
    plt.close(fig)
