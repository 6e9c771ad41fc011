"""Properties of the figures a reader relies on, checked on the drawn matplotlib objects.

The reference for the geometry is matplotlib's own renderer (window extents of legends,
axes and lines in display pixels); for the marks it is the dataset drawn (the
``pce_doubtful`` flag, the quantiles, the ranking) and, for the transient time axis, the
definition of local mean solar time (UT + longitude/15 h) and the geometric shadow height
(the straight ray to the Sun grazes a sphere of radius R: χ = 90° + arccos(R/(R + z))).
The demo column is the bundled mid-latitude scenario on a coarser grid (invented site).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import xarray as xr

import ionochem
from ionochem.analysis.compare import compare
from ionochem.analysis.rank import rank_reactions
from ionochem.analysis.uncertainty import monte_carlo
from ionochem.errors import InputError
from ionochem.plot.compare import compare_figure
from ionochem.plot.equilibrium import ONSET_MARKER
from ionochem.plot.profiles import STYLE, plot_profiles, profiles_figure, time_series_figure
from ionochem.plot.sensitivity import sensitivity_figure
from ionochem.plot.uncertainty import BAND_ALPHA, bands_figure

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def model(tmp_path_factory):
    """The Quickstart column (invented site) on a 10 km grid, to keep the solves short."""
    text = (ROOT / "scenarios" / "midlatitude_equinox.toml").read_text()
    text = text.replace("../reactions/ionosphere.reactions",
                        str(ROOT / "reactions" / "ionosphere.reactions"))
    text = text.replace("step = 2.0", "step = 10.0")
    path = tmp_path_factory.mktemp("figs") / "coarse.toml"
    path.write_text(text)
    return ionochem.Model(ionochem.load_scenario(path))


@pytest.fixture(scope="module")
def steady(model):
    return model.solve()


@pytest.fixture(scope="module")
def compared(model, steady):
    changed = model.with_changes({"O2D_N2": "1.5e-10"})
    return compare(model, changed, baseline=steady)


def _drawn(fig):
    fig.canvas.draw()
    return fig.canvas.get_renderer()


def _legends(fig):
    out = list(fig.legends)
    out += [ax.get_legend() for ax in fig.axes if ax.get_legend() is not None]
    assert out, "the figure has no legend"
    return out


def assert_legends_clear_of_data(fig):
    """No legend box overlaps an axes' data area, nor contains a point of a drawn line."""
    r = _drawn(fig)
    for leg in _legends(fig):
        box = leg.get_window_extent(r)
        for ax in fig.axes:
            assert not box.overlaps(ax.get_window_extent(r)), \
                f"legend overlaps the axes titled {ax.get_title()!r}"
            for line in ax.get_lines():
                xy = line.get_transform().transform(np.column_stack(line.get_data()))
                xy = xy[np.isfinite(xy).all(axis=1)]
                inside = ((xy[:, 0] > box.x0) & (xy[:, 0] < box.x1)
                          & (xy[:, 1] > box.y0) & (xy[:, 1] < box.y1))
                assert not inside.any(), f"legend covers the line {line.get_label()!r}"


def _line(ax, label):
    found = [ln for ln in ax.get_lines() if ln.get_label() == label]
    assert found, f"no line labelled {label!r}"
    return found[0]


def _shaded_spans(ax):
    """(low, high) altitude of every filled rectangle spanning the panel (a band across
    all species); the equilibrium marks must draw none."""
    from matplotlib.patches import Rectangle
    return [(p.get_y(), p.get_y() + p.get_height()) for p in ax.patches
            if isinstance(p, Rectangle) and p.get_width() >= 0.99 and p.get_visible()]


def _onsets(ax):
    """{colour: [(x, altitude), …]} of the open circles marking where a curve's flagged
    part begins."""
    from matplotlib.colors import to_hex
    out = {}
    for ln in ax.get_lines():
        if ln.get_marker() == ONSET_MARKER["marker"] and ln.get_linestyle() == "None":
            x, y = ln.get_data()
            out.setdefault(to_hex(ln.get_markeredgecolor()), []).extend(zip(x, y))
    return out


def _lowest_flag(ds, names):
    alt = ds["altitude"].values
    lows = [alt[ds["pce_doubtful"].sel(species=s).values > 0].min() for s in names
            if (ds["pce_doubtful"].sel(species=s).values > 0).any()]
    return min(lows)


def test_only_electrons_are_dashed_and_metastables_differ(steady):
    """Electrons are the only dashed curve (O+(2P) was dashed too, issue 24); O+(2D) and
    O+(2P) differ in colour and pattern."""
    fig = profiles_figure(steady)
    ax = fig.axes[0]
    d, p = _line(ax, "O+(2D)"), _line(ax, "O+(2P)")
    assert d.get_color() != p.get_color()
    assert d._unscaled_dash_pattern != p._unscaled_dash_pattern

    def dashed(ln):         # one dash and one gap per period, the dash longer than a dot
        offset, seq = ln._unscaled_dash_pattern
        return seq is not None and len(seq) == 2 and seq[0] >= 2.0
    same = [ln.get_label() for ln in ax.get_lines()
            if dashed(ln) and not ln.get_label().startswith("_")]
    assert same == ["e"]


def test_profile_marks_each_flagged_species_on_its_own_curve(steady):
    """No band across the panel: each species flagged ``pce_doubtful`` gets an open circle
    on its own curve at its lowest flagged level, and no other species gets one (a grey
    band once spanned species in equilibrium, issue 24); the legend names the flagged
    species and heights and stays clear of the data."""
    from matplotlib.colors import to_hex
    fig = profiles_figure(steady)
    assert_legends_clear_of_data(fig)
    ax = fig.axes[0]
    assert _shaded_spans(ax) == []
    alt = steady["altitude"].values
    marks = _onsets(ax)
    drawn = [ln.get_label() for ln in ax.get_lines() if not ln.get_label().startswith("_")]
    flagged = [s for s in drawn if (steady["pce_doubtful"].sel(species=s).values > 0).any()]
    assert flagged, "the demo flags some drawn species"
    for s in drawn:
        colour = to_hex(_line(ax, s).get_color())
        if s in flagged:
            low = alt[steady["pce_doubtful"].sel(species=s).values > 0].min()
            assert any(y == pytest.approx(low) for _, y in marks.get(colour, [])), s
        else:
            assert colour not in marks, f"{s} is in equilibrium but marked"
    text = " ".join(t.get_text() for t in _legends(fig)[0].get_texts())
    assert "not in photochemical" in text and f"{_lowest_flag(steady, drawn):g} km" in text


def test_profile_without_flag_has_no_marks(steady):
    """A dataset without ``pce_doubtful`` (a file written elsewhere) draws no mark."""
    fig = profiles_figure(steady.drop_vars("pce_doubtful"))
    assert _onsets(fig.axes[0]) == {} and _shaded_spans(fig.axes[0]) == []


def test_compare_figure_plain_label_legend_outside_and_marks(compared):
    """The change axis reads "change from baseline (%)"; the legend is clear of both panels;
    both panels mark the baseline's flagged species on their curves, no band (N+, flagged
    in the upper F region of the demo column, is drawn beside the default species so a
    flagged curve is always present)."""
    fig = compare_figure(compared, species=("e", "O+", "O2+", "NO+", "N2+", "N+"))
    ax_n, ax_r = fig.axes[:2]
    assert ax_r.get_xlabel() == "change from baseline (%)"
    assert_legends_clear_of_data(fig)
    assert _onsets(ax_n) and set(_onsets(ax_n)) == set(_onsets(ax_r))
    assert _shaded_spans(ax_n) == [] and _shaded_spans(ax_r) == []
    assert "pce_doubtful" in compared


def test_rank_rows_are_named_by_equation_and_colour_bar_says_what_s_is(model):
    """The heat map's rows are named by the ranked reactions' equations and the factors'
    descriptions (from the sensitivity dataset's own ``equation`` and
    ``factor_description``), in the ranking's order, not by internal ids (issue 24); the
    bar chart beside it shares the rows; the colour bar is labelled as the normalized
    sensitivity ∂ln n/∂ln k."""
    sens = model.sensitivity()
    fig = sensitivity_figure(sens, species=["N2+"], altitude_range=(150, 300), top=6,
                             members=True)
    heat, bars, cbar = fig.axes[0], fig.axes[1], fig.axes[2]
    rows = rank_reactions(sens, "N2+", (150, 300), 6, members=True)
    fig.canvas.draw()
    reactions = list(sens["reaction"].values)
    factors = list(sens["factor"].values)
    want = []
    for r in rows:
        if r.reaction in reactions:
            eq = str(sens["equation"].sel(reaction=r.reaction).values)
            want.append(eq.replace(" -> ", " → "))
        else:
            desc = str(sens["factor_description"].values[factors.index(r.reaction)])
            want.append(desc.split(" (")[0])
    want = [f"{w} [{r.reaction}]" if want.count(w) > 1 else w for w, r in zip(want, rows)]
    assert [t.get_text() for t in heat.get_yticklabels()] == want
    assert len(bars.get_yticks()) == len(rows)
    label = cbar.get_ylabel()
    assert "normalized sensitivity" in label and "∂ln n" in label and "∂ln k" in label
    assert_legends_clear_of_data(fig)


def test_rank_heat_map_hatches_exactly_the_levels_left_out_of_the_ranking(model):
    """Over the whole grid, O+ is below 1 % of its peak at the lowest levels: those levels,
    and only those (ionochem.analysis.rank.where_it_matters), are hatched; the title names
    environment factors beside reactions."""
    from ionochem.analysis.rank import where_it_matters
    sens = model.sensitivity()
    species = "O+(total)" if "O+(total)" in list(sens["species"].values) else "O+"
    fig = sensitivity_figure(sens, species=[species], top=4, min_share=0.01)
    heat = fig.axes[0]
    alt = sens["altitude"].values
    matters = where_it_matters(sens, species, None, 0.01)
    assert (~matters).any() and matters.any()
    hatched = [p for p in heat.patches if p.get_hatch()]
    centres = sorted(p.get_x() + p.get_width() / 2 for p in hatched)
    np.testing.assert_allclose(centres, alt[~matters], atol=1e-6)
    assert "environment factors" in heat.get_title()


def test_uncertainty_90_percent_band_is_visible(model):
    """The 90 % band is filled at least as opaque as 0.2 and edged by lines at the 5 % and
    95 % quantiles of the dataset; the legend is clear of the bands."""
    mc = monte_carlo(model, 12, seed=3)
    fig = bands_figure(mc, species=["NO+", "e"])
    ax = fig.axes[0]
    assert BAND_ALPHA[0.90] >= 0.2
    q = mc["density_quantiles"].sel(species="NO+")
    edges = [ln.get_xdata() for ln in ax.get_lines()]
    for p in (0.05, 0.95):
        want = q.sel(quantile=p).values
        assert any(np.allclose(np.asarray(x, float), want, equal_nan=True) for x in edges)
    assert_legends_clear_of_data(fig)
    labels = [t.get_text() for t in _legends(fig)[0].get_texts()]
    assert "90 % band (5-95 %)" in labels


def test_uncertainty_bands_each_species_in_a_panel_of_its_own(model):
    """The Monte Carlo bands of different species never share a panel (they overlapped
    unreadably on one axis, issue 24): one titled panel per species, two bands in each."""
    mc = monte_carlo(model, 12, seed=3)
    names = ["e", "O2+", "NO+", "N2+"]
    fig = bands_figure(mc, species=names)
    panels = [ax for ax in fig.axes if ax.get_visible()]
    assert [ax.get_title() for ax in panels] == names
    for ax in panels:
        assert len(ax.collections) == 2        # the 90 % and the 68 % band of one species
    assert_legends_clear_of_data(fig)


def test_sweep_map_of_one_signed_sensitivity_titles_and_scale(tmp_path, monkeypatch):
    """A sweep over local time of a scenario titled "noon": the title names it the base
    scenario and says what is swept; the x axis reads "local solar time (h)"; an all-positive
    sensitivity gets a sequential scale from zero, not a symmetric diverging one (issue 24);
    the colour bar carries the reaction's equation."""
    import ionochem.plot.sweep as sweep_plot
    hours = np.array([7.0, 12.0, 17.0])
    alt = np.array([100.0, 200.0, 300.0, 400.0])
    S = np.linspace(0.05, 0.6, hours.size * alt.size).reshape(hours.size, 1, 1, alt.size)
    ds = xr.Dataset(
        {"sensitivity": (("local_hour", "species", "reaction", "altitude"), S),
         "density": (("local_hour", "species", "altitude"), np.ones((3, 1, 4)))},
        coords={"local_hour": ("local_hour", hours, {"units": "h"}), "altitude": alt,
                "species": ["N2+"], "reaction": ["R1"],
                "equation": ("reaction", ["O+(2D) + N2 -> N2+ + O"])},
        attrs={"title": "invented site, equinox noon", "sweep_dimensions": "local_hour"})
    figs = []
    real = sweep_plot._figure_bytes
    monkeypatch.setattr(sweep_plot, "_figure_bytes",
                        lambda fig, path: figs.append(fig) or real(fig, path))
    sweep_plot.plot_sweep_map(ds, tmp_path / "m.png", species="N2+", reaction="R1")
    ax, cax = figs[0].axes[:2]
    title = ax.get_title()
    assert title.startswith("base scenario: invented site, equinox noon")
    assert "swept: local solar time 7–17 (h)" in title
    assert ax.get_xlabel() == "local solar time (h)"
    mesh = ax.collections[0]
    assert mesh.norm.vmin == 0.0 and mesh.norm.vmax == pytest.approx(0.6)
    assert mesh.cmap.name == sweep_plot.CMAP_POSITIVE
    assert "O+(2D) + N2 → N2+ + O" in cax.get_ylabel()


def _transient(alt=(100.0, 200.0, 300.0)):
    """An invented transient dataset: 3 levels, 2 species, zenith angle 70° + 10°/h."""
    t = np.arange(0.0, 5.01, 0.25) * 3600.0
    dens = np.exp(-t / 7200.0)[:, None, None] * np.array([[1e5], [1e4]]) * np.ones(len(alt))
    return xr.Dataset(
        {"density": (("time", "species", "altitude"), dens),
         "solar_zenith_angle": ("time", 70.0 + 10.0 * t / 3600.0)},
        coords={"time": ("time", t, {"units": "s"}), "altitude": ("altitude", list(alt)),
                "species": ["e", "NO+"], "role": ("species", ["electron", "solved"])},
        attrs={"title": "invented", "time_utc": "2025-03-20T15:30:00+00:00",
               "longitude_deg": 15.0})


@pytest.mark.parametrize("time_form", ["seconds", "cf_seconds", "decoded"])
def test_transient_time_axis_local_time_zenith_angle_and_shadow(time_form):
    """Chosen altitudes give one panel each; the top axis reads local mean solar time
    (15:30 UT at 15° E → 16:30) with the zenith angle; the dotted sunset line at 300 km
    sits where χ = 90° + arccos(R/(R+z)) with R = 6371 km (geometric shadow). The same
    for a time coordinate in bare seconds, in CF "seconds since" units, and decoded to
    datetimes (as xarray reads a CF file back)."""
    ds = _transient()
    if time_form == "cf_seconds":
        ds["time"].attrs["units"] = "seconds since 2025-03-20 15:30:00"
    elif time_form == "decoded":
        ds = ds.assign_coords(time=np.datetime64("2025-03-20T15:30:00")
                              + (ds["time"].values * 1e3).astype("timedelta64[ms]"))
    fig = time_series_figure(ds, altitudes_km=[300.0, 200.0])
    panels = [ax for ax in fig.axes if ax.get_title()]
    assert [ax.get_title() for ax in panels] == ["200 km", "300 km"]
    fig.canvas.draw()
    top = panels[1].child_axes[0]
    assert "local solar time" in top.get_xlabel() and "zenith" in top.get_xlabel()
    first = [t.get_text() for t in top.get_xticklabels() if t.get_text()][0]
    assert first.splitlines() == ["16:30", "70°"]
    chi = 90.0 + np.degrees(np.arccos(6371.0 / (6371.0 + 300.0)))
    want_h = (chi - 70.0) / 10.0
    vlines = [ln.get_xdata()[0] for ln in panels[1].get_lines() if ln.get_linestyle() == ":"]
    assert vlines == [pytest.approx(want_h, abs=1e-9)]
    assert_legends_clear_of_data(fig)


def test_transient_altitude_outside_the_grid_is_refused():
    """An altitude far outside the grid is an input error naming --altitudes."""
    with pytest.raises(InputError, match="outside the grid"):
        time_series_figure(_transient(), altitudes_km=[2000.0])


def test_plot_profiles_writes_a_png(steady, tmp_path):
    """The writer renders the figure to a PNG file (magic bytes)."""
    out = plot_profiles(steady, tmp_path / "p.png")
    assert out.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_docs_figures_are_made_with_the_readme_commands():
    """Every scenario command the README shows with ``--plot`` is, option for option (output
    files aside), a command docs/figures/make_figures.py runs for a figure, so the figures in the
    docs show what the README's commands give (e.g. the default top 10 and 1000 samples);
    and every PNG in docs/figures is made by the script."""
    import importlib.util
    import shlex
    spec = importlib.util.spec_from_file_location("make_figures",
                                                  ROOT / "docs" / "figures" / "make_figures.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)

    def options(argv):
        out, skip = [], False
        for a in argv:
            if skip:
                skip = False
            elif a in ("-o", "--plot", "--plot-levels"):
                skip = True
            else:
                out.append(a)
        return out

    made = {tuple(options(args)) for _, args, _ in mod.COMMANDS}
    text = (ROOT / "README.md").read_text().replace("\\\n", " ")
    # Commands on the demo scenarios; the laboratory toolkit's figures are those of its
    # worked example (examples/rates_demo, checked end to end by tests/test_rates_demo.py).
    shown = [shlex.split(ln.strip())[1:] for ln in text.splitlines()
             if ln.startswith("ionochem ") and "--plot" in ln and " scenarios/" in ln]
    assert len(shown) >= 4
    for argv in shown:
        assert tuple(options(argv)) in made, argv
    pngs = {p.name for p in (ROOT / "docs" / "figures").glob("*.png")}
    assert pngs == {figure for figure, _, _ in mod.COMMANDS}


def test_global_sensitivity_figure_legend_is_outside_every_panel():
    """Sobol panels (invented indices on 4 levels, 3 factors, 4 species) keep the factor
    legend outside every panel's data area."""
    from ionochem.plot.uncertainty import global_figure
    rng = np.random.default_rng(0)
    dims = ("species", "factor", "altitude")
    shape = (4, 3, 4)
    ds = xr.Dataset({"S1": (dims, rng.uniform(0, 0.5, shape)),
                     "ST": (dims, rng.uniform(0.5, 1.0, shape))},
                    coords={"species": ["e", "NO+", "O2+", "N2+"],
                            "factor": ["A", "B", "C"], "altitude": [100.0, 150.0, 200.0, 250.0]},
                    attrs={"method": "sobol", "title": "invented", "model_runs": 10})
    assert_legends_clear_of_data(global_figure(ds))


def _cie_lightness(rgb):
    """CIE 1976 L* of an sRGB colour (IEC 61966-2-1 linearisation, D65 luminance
    weights), written out here as the outside reference."""
    lin = [c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4 for c in rgb]
    y = 0.2126 * lin[0] + 0.7152 * lin[1] + 0.0722 * lin[2]
    return 116 * y ** (1 / 3) - 16 if y > (6 / 29) ** 3 else y * (29 / 3) ** 3


def test_level_colours_are_sequential_with_contrast_and_labelled(steady):
    """Vibrational levels v = 0..4 are drawn darkest to lightest with at least 8 units of
    CIE L* between neighbours, v = 4 still dark enough to read on white (L* < 80; pale
    near-identical shades hid v = 4, issue 24), none a palette colour; every level curve of
    a profile figure carries a direct ``v=K`` label in its colour."""
    from matplotlib.colors import to_hex, to_rgb

    from ionochem.plot.profiles import style_of
    L = [_cie_lightness(to_rgb(style_of(f"N2+(v={v})")["color"])) for v in range(5)]
    assert all(b - a >= 8 for a, b in zip(L, L[1:])), L
    assert L[-1] < 80, L
    palette = {to_hex(st["color"]) for st in STYLE.values()}
    assert not {to_hex(style_of(f"N2+(v={v})")["color"]) for v in range(5)} & palette
    levels = [f"N2+(v={v})" for v in range(5)]
    fig = profiles_figure(steady, species=["e", *levels])
    ax = fig.axes[0]
    texts = {t.get_text(): to_hex(t.get_color()) for t in ax.texts}
    for v, s in enumerate(levels):
        assert texts.get(f"v={v}") == to_hex(_line(ax, s).get_color()), (s, texts)
