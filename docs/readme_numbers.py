"""Regenerate every number and figure the documentation shows, from the current code.

This is the one script for README.md, docs/, reactions/README.md and examples/:

- prose passages marked ``<!-- generated: NAME -->`` … ``<!-- /generated: NAME -->`` are
  recomputed from the demo scenarios (invented sites and dates), rounded as the prose needs
  them (:data:`PASSAGES`, file of each in :data:`FILES`);
- printed command output, marked ``<!-- generated-output: NAME -->`` …
  ``<!-- /generated-output: NAME -->`` around a code block, is the standard output of the
  command shown beside it, run anew (:data:`OUTPUTS`), or an excerpt of a file an
  example writes (:data:`EXCERPTS`);
- with ``--figures``, every figure the docs show is redrawn by the command the docs give
  for it: docs/figures/ by ``docs/figures/make_figures.py`` (its ``COMMANDS``), the rates
  demo's figures by its README's commands in a scratch copy (:data:`EXAMPLE_RUNS`, whose
  printed outputs fill that README's blocks).

    python docs/readme_numbers.py               # rewrite the numbers in place
    python docs/readme_numbers.py --figures     # ... and redraw every figure
    python docs/readme_numbers.py --check       # exit 1 if a number is stale

``tests/test_readme_numbers.py`` runs the check (a change of the chemistry, the environment
or the solver that moves a quoted number fails the suite until the docs are regenerated)
and checks that every figure a Markdown file shows is one this script draws.
"""

from __future__ import annotations

import re
import sys
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))        # the checkout's own code, installed or not
README = ROOT / "README.md"
DEMO = ROOT / "scenarios" / "midlatitude_equinox.toml"
EXPERIMENT = ROOT / "docs" / "experiments" / "n2plus_dr_new.reactions"


def _model(path=DEMO):
    import ionochem
    return ionochem.Model(ionochem.load_scenario(path))


def _at(ds, species, km, var="density"):
    alt = ds["altitude"].values
    a = alt[np.argmin(np.abs(alt - km))]
    return float(ds[var].sel(species=species, altitude=a))


def _pct(x):
    return f"{100.0 * x:+.0f} %" if abs(x) >= 0.005 else "±0 %"


def _km(x):
    return f"{x:.0f} km"


def reading(model, ds):
    """How to read the demo figure: who dominates where, and where O+ is doubtful."""
    alt = ds["altitude"].values
    mol = sum(ds["density"].sel(species=s).values for s in ("NO+", "O2+", "N2+"))
    oplus = ds["density"].sel(species="O+(total)").values
    cross = alt[np.argmax(oplus > mol)] if np.any(oplus > mol) else np.nan
    ne = ds["density"].sel(species="e").values
    band = (alt >= 150) & (alt <= 300)
    share = ds["density"].sel(species="N2+").values[band] / ne[band]
    ratio = [_at(ds, "NO+", km) / _at(ds, "O2+", km) for km in (120.0, 140.0)]
    flag = ds["pce_doubtful"].sel(species="O+").values.astype(bool)
    lowest = alt[flag].min() if flag.any() else None
    i = int(np.argmax(ne))
    text = (f"By day the E region (below ~150 km) is made of molecular ions, NO+ above O2+ "
            f"(NO+/O2+ = {ratio[0]:.1f} at 120 km, {ratio[1]:.1f} at 140 km); O+ takes over "
            f"from the molecular ions at {_km(cross)}; N2+ stays at "
            f"{100 * share.min():.1f}–{100 * share.max():.1f} % of the electrons between 150 "
            f"and 300 km, because charge transfer with O removes it within seconds. The "
            f"electron density peaks at {ne[i]:.2e} cm-3 at {_km(alt[i])}.")
    if lowest is not None:
        text += (f" From {_km(lowest)} up O+ lives longer than it takes to diffuse (the "
                 "dataset's `pce_doubtful` flag, shaded on the figure), so a chemistry-only "
                 "column is not a real ionosphere there.")
    return text


def compare_o2d(model, ds):
    """The O+(2D) + N2 rate-change experiment of the README."""
    from ionochem.analysis.compare import band_summary, compare
    changed = model.with_changes(scale={"O2D_N2": 2.0})
    cmp = compare(model, changed, baseline=ds)
    rows = {(r.species, r.band): r for r in band_summary(cmp)}

    def big(sp, band):
        r = rows[(sp, band)]
        return f"{r.largest_pct:+.0f} % at {_km(r.largest_alt_km)}"

    n2_e, n2_f1 = rows[("N2+", "E")], rows[("N2+", "F1")]
    return (f"In the comparison above, N2+ changes by {n2_e.median_pct:+.1f} % (median) in the "
            f"E region and {n2_f1.median_pct:+.1f} % in the F1 region, where direct "
            f"photoionization of N2 is its main source, and by {big('N2+', 'F2')} in the F2 "
            f"region, where O+(2D) + N2 dominates; O+ (all states) changes by "
            f"{big('O+(total)', 'F2')} and NO+ by {big('NO+', 'F2')}; `rank` and "
            "`run --budget` show which reactions carry each change.")


def levels_experiment(model, ds, samples=200):
    """The invented per-level recombination experiment (docs/experiments/)."""
    import ionochem
    from ionochem.analysis.compare import changed_model, compare
    changed = changed_model(model, replacements=[ionochem.load_mechanism(EXPERIMENT)])
    cmp = compare(model, changed, baseline=ds)
    kms = (200.0, 250.0, 300.0)

    def ratio(sp):
        return ", ".join(_pct(_at(cmp, sp, km, "ratio") - 1.0) for km in kms)

    eff = cmp["effective_rate_change"]
    dim = eff.dims[0]
    fam = [f for f in eff[dim].values if str(f).startswith("DR_N2plus(")][0]
    alt = cmp["altitude"].values
    eff_txt = ", ".join(_pct(float(eff.sel({dim: fam}).values[np.argmin(np.abs(alt - km))])
                             - 1.0) for km in kms)
    frac = ds["level_fraction"].sel(species="N2+(v=0)")
    v0_200 = float(frac.values[np.argmin(np.abs(alt - 200.0))])
    excited_300 = 1.0 - float(frac.values[np.argmin(np.abs(alt - 300.0))])
    from ionochem.analysis.uncertainty import monte_carlo
    mc = monte_carlo(changed, samples, seed=1)
    q = mc["density_quantiles"].sel(species="N2+")
    spread = []
    for km in kms:
        a = mc["altitude"].values[np.argmin(np.abs(mc["altitude"].values - km))]
        hi, lo = float(q.sel(quantile=0.84, altitude=a)), float(q.sel(quantile=0.16,
                                                                       altitude=a))
        spread.append(f"×{np.sqrt(hi / lo):.2f}")
    return (f"`compare` prints the change of each family's effective rate: recombination of "
            f"N2+ as a whole changes by {eff_txt} at 200, 250 and 300 km, and summed N2+ by "
            f"{ratio('N2+')} there (N2+(v=1) by {ratio('N2+(v=1)')}); `rank` shows what "
            f"controls N2+(v=1), and `uncertainty` gives a 68 % spread of N2+ of "
            f"{', '.join(spread)} at the same heights from the uncertainties of all the rates "
            f"({samples} samples). What moved and why: at 200 km relaxation on the dense N2 "
            f"keeps {100 * v0_200:.0f} % of N2+ in v = 0, so a faster v ≥ 1 recombination "
            f"changes little; higher up N2 thins out, O+(2D) + N2 fills the excited levels "
            f"({100 * excited_300:.0f} % of N2+ at 300 km), and there the new rates remove "
            "N2+ faster.")


def e_region(model, ds):
    """Ne at 110 km against the foE formula of Davies (1990) with and without X-rays."""
    import dataclasses

    import ionochem
    scen = model.scenario

    def ratio(ds_):
        f107 = scen.sun.f107
        # F10.7 = 63.7 + 0.728 R + 8.9e-4 R^2 inverted for R12 (common practice).
        a, b, c = 8.9e-4, 0.728, 63.7 - f107
        r12 = (-b + np.sqrt(b * b - 4 * a * c)) / (2 * a)
        chi = float(ds_["solar_zenith_angle"])
        nme = 1.24e4 * (0.9 * ((180 + 1.44 * r12) * np.cos(np.radians(chi))) ** 0.25) ** 2
        return _at(ds_, "e", 110.0) / nme - 1.0

    with_x = ratio(ds)
    no_x = dataclasses.replace(scen, photons=dataclasses.replace(scen.photons,
                                                                 soft_xrays=False))
    without = ratio(ionochem.Model(no_x).solve())
    return (f"Ne at 110 km in the demo is {abs(100 * with_x):.0f} % "
            f"{'below' if with_x < 0 else 'above'} the foE formula of Davies 1990 "
            f"({abs(100 * without):.0f} % {'short' if without < 0 else 'over'} without the "
            "X-rays, `[photons] soft_xrays = false`).")


def default_list_checks(model, ds):
    """reactions/README.md: the default list against the checks of the trade."""
    alt = ds["altitude"].values

    def dens(sp):
        return ds["density"].sel(species=sp).values

    band = (alt >= 120) & (alt <= 140)
    r = dens("NO+")[band] / dens("O2+")[band]
    r100 = _at(ds, "NO+", 100.0) / _at(ds, "O2+", 100.0)
    mol = dens("NO+") + dens("O2+") + dens("N2+")
    over = dens("O+(total)") > mol
    cross = alt[np.argmax(over)] if over.any() else np.nan
    f = (alt >= 150) & (alt <= 250)
    share = dens("N2+")[f] / dens("e")[f]
    peak = alt[f][np.argmax(share)]
    frac = ds["level_fraction"].sel(species="N2+(v=0)").values
    excited = ", ".join(f"{100 * (1 - frac[np.argmin(np.abs(alt - km))]):.0f} %"
                        for km in (150.0, 250.0, 300.0))
    scen = model.scenario
    return (f"On the equinox demo (`scenarios/midlatitude_equinox.toml`: NRLMSIS 2.1, EUVAC "
            f"with soft X-rays, F10.7 = {scen.sun.f107:g}, solar zenith angle "
            f"{float(ds['solar_zenith_angle']):.0f}°), against the checks of the trade "
            f"*(common practice)*: NO+/O2+ is {r.min():.1f}–{r.max():.1f} over 120–140 km "
            f"(expected > 1) and {r100:.2f} at 100 km (expected 0.3–3); O+ exceeds the sum of "
            f"the molecular ions from {_km(cross)} (expected 160–210 km); N2+ is "
            f"{100 * share.min():.2f}–{100 * share.max():.2f} % of the electrons over "
            f"150–250 km (peak near {_km(peak)}; about 0.1–1 % in the usual summaries). The "
            f"excited share of N2+ (v ≥ 1) is {excited} at 150, 250 and 300 km. These "
            "numbers depend on the environment (flux, cross sections, temperatures) as much "
            "as on the list.")


def fit_example(model, ds):
    """The invented Brackenfold fit of the README (a factor-of-two N2+ excess)."""
    import ionochem
    from ionochem.analysis.fit import electron_constrained_model, fit
    scen = ionochem.load_scenario(ROOT / "scenarios" / "tabulated_column.toml")
    obs = ionochem.load_observations(ROOT / "scenarios" / "observations" /
                                     "brackenfold_n2plus_ne.csv")
    base = electron_constrained_model(ionochem.Model(scen), obs)
    free = ["PI_N2", "N2plus_O_NOplus", "DR_N2plus"]
    res = fit(base, obs, free)
    m = {p: float(res["multiplier"].sel(parameter=p)) for p in free}
    corr = float(res["correlation"].sel(parameter="PI_N2", parameter_b="N2plus_O_NOplus"))
    return (f"The fit multiplies N2 photoionization by {m['PI_N2']:.2f}, charge transfer of "
            f"N2+ with O by {m['N2plus_O_NOplus']:.2f} and recombination of N2+ by "
            f"{m['DR_N2plus']:.2f} (χ² {float(res['chi2_baseline']):.0f} → "
            f"{float(res['chi2']):.0f} for {int(res['degrees_of_freedom'])} degrees of "
            f"freedom), but the production of N2+ and its charge transfer with O are "
            f"correlated ({corr:+.2f}): the data constrain their ratio, not each.")


#: Printed command output in the docs: name → (file, argument list after ``ionochem``).
OUTPUTS = {
    "fit-output": (ROOT / "docs" / "observations.md",
                   ["fit", "scenarios/tabulated_column.toml", "--observed",
                    "scenarios/observations/brackenfold_n2plus_ne.csv", "--free", "PI_N2",
                    "--free", "N2plus_O_NOplus", "--free", "DR_N2plus",
                    "--constrain-electrons", "--profile", "N2plus_O_NOplus",
                    "--profile-points", "9"]),
}

#: Runs of examples/rates_demo/ as its README gives them, in order, in a scratch copy after
#: ``python make_inputs.py``: (printed-output name or None, argument list). Each ``--plot``
#: figure is copied back with ``--figures``; each named output fills the README's
#: ``generated-output`` block of that name.
EXAMPLE_RUNS = (
    ("examples/rates_demo", [
        ("demo-maxwellian", [
                "rates", "maxwellian", "sigma_n2plus.csv", "--temperatures", "100:6000:50",
                "-o", "out/rates.csv", "--fit", "broken", "--table",
                "out/dr_n2plus_levels.csv", "--write-entry", "out/dr_n2plus.reactions",
                "--entry", "DR_N2plus", "--reaction", "N2+(v) + e -> N(2D) + N",
                "--fraction", "0.54", "--entry", "DR_N2plus_2D2D", "--reaction",
                "N2+(v) + e -> 2 N(2D)", "--fraction", "0.46", "--plot",
                "figures/maxwellian_fits.png"]),
        ("demo-compare", ["compare", "{root}/scenarios/midlatitude_equinox.toml",
                          "--reactions", "out/dr_n2plus.reactions", "--species", "N2+",
                          "--species", "N2+(v=0)", "--species", "N2+(v=1)", "--species",
                          "NO+", "--plot", "figures/compare.png"]),
        ("demo-beam", ["rates", "beam", "sigma_n2plus.csv", "--kt-perp", "2e-3", "--kt-par",
                       "5e-5", "--detuning", "1e-4:1:2000", "--log", "--measured",
                       "measured_curve.csv", "-o", "out/beam.csv", "--plot",
                       "figures/beam_curve.png"]),
        ("demo-populations", ["rates", "populations", "signals.csv", "--design",
                              "design.csv", "-o", "out/populations.csv"]),
    ]),
)


#: Excerpts of files the example runs write, shown in the docs: name → (Markdown file,
#: example folder, file written there). The excerpt keeps the comment and header lines and
#: the first row of levels 0 and 1, each followed by "...".
EXCERPTS = {
    "demo-level-table": (ROOT / "docs" / "rates.md", "examples/rates_demo",
                         "out/dr_n2plus_levels.csv"),
}


def _excerpt(text):
    """The head of a level-row table: comments, header, first row of v = 0 and of v = 1."""
    lines = text.splitlines()
    head = [ln for ln in lines if ln.startswith("#")]
    rows = [ln for ln in lines if ln and not ln.startswith("#")]
    out = head + rows[:1]
    for v in ("0", "1"):
        first = next((r for r in rows[1:] if r.split(",", 1)[0] == v), None)
        if first is not None:
            out += [first, "..."]
    return "\n".join(out)


def _make_figures():
    """docs/figures/make_figures.py as a module."""
    import importlib.util
    spec = importlib.util.spec_from_file_location("make_figures",
                                                  ROOT / "docs" / "figures" / "make_figures.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def figure_paths():
    """Every figure this script draws (paths relative to the repository root)."""
    out = [f"docs/figures/{name}" for name, _, _ in _make_figures().COMMANDS]
    for folder, runs in EXAMPLE_RUNS:
        out += [f"{folder}/{argv[argv.index('--plot') + 1]}" for _, argv in runs
                if "--plot" in argv]
    return out


def draw_figures():
    """Redraw every figure: docs/figures/ and the examples' (:func:`run_examples`)."""
    import os
    here = os.getcwd()
    try:
        _make_figures().main()
    finally:
        os.chdir(here)
    run_examples(draw=True)


def run_examples(draw=False):
    """Run :data:`EXAMPLE_RUNS` in scratch copies; returns {output name: printed output}.
    With ``draw`` the figures are copied back into the repository."""
    import contextlib
    import io
    import os
    import runpy
    import shutil
    import tempfile

    from ionochem.cli import main as ionochem
    here = os.getcwd()
    printed = {}
    for folder, runs in EXAMPLE_RUNS:
        with tempfile.TemporaryDirectory() as tmp:
            work = Path(tmp) / "demo"
            shutil.copytree(ROOT / folder, work)
            (work / "out").mkdir(exist_ok=True)
            os.chdir(work)
            try:
                with contextlib.redirect_stdout(io.StringIO()):
                    saved, sys.argv = sys.argv, ["make_inputs.py"]   # no caller arguments
                    try:
                        runpy.run_path("make_inputs.py", run_name="__main__")
                    finally:
                        sys.argv = saved
                for name, argv in runs:
                    argv = [a.format(root=ROOT) for a in argv]
                    buf = io.StringIO()
                    with contextlib.redirect_stdout(buf), \
                            contextlib.redirect_stderr(io.StringIO()):
                        code = ionochem(argv)
                    if code != 0:
                        raise SystemExit(f"failed: {folder}: ionochem {' '.join(argv)}")
                    if name:
                        printed[name] = buf.getvalue().rstrip("\n")
                    if draw and "--plot" in argv:
                        fig = argv[argv.index("--plot") + 1]
                        print(f"{folder}/{fig}", flush=True)
                        shutil.copy(work / fig, ROOT / folder / fig)
                for name, (_, where, rel) in EXCERPTS.items():
                    if where == folder:
                        printed[name] = _excerpt((work / rel).read_text(encoding="utf-8"))
            finally:
                os.chdir(here)
    return printed


def command_output(argv):
    """Standard output of ``ionochem ARGV`` run from the repository root."""
    import contextlib
    import io
    import os

    from ionochem.cli import main as ionochem
    here = os.getcwd()
    buf = io.StringIO()
    os.chdir(ROOT)
    try:
        with contextlib.redirect_stdout(buf), contextlib.redirect_stderr(io.StringIO()):
            code = ionochem(list(argv))
    finally:
        os.chdir(here)
    if code != 0:
        raise SystemExit(f"failed: ionochem {' '.join(argv)}")
    return buf.getvalue().rstrip("\n")


def fit_reading(model, ds):
    """docs/observations.md: what the invented Brackenfold fit says, with its numbers."""
    import ionochem
    from ionochem.analysis.fit import electron_constrained_model, fit
    scen = ionochem.load_scenario(ROOT / "scenarios" / "tabulated_column.toml")
    obs = ionochem.load_observations(ROOT / "scenarios" / "observations" /
                                     "brackenfold_n2plus_ne.csv")
    base = electron_constrained_model(ionochem.Model(scen), obs)
    free = ["PI_N2", "N2plus_O_NOplus", "DR_N2plus"]
    res = fit(base, obs, free, profile="N2plus_O_NOplus", profile_points=9)
    m = {p: float(res["multiplier"].sel(parameter=p)) for p in free}
    sig = float(res["log_multiplier_sigma"].sel(parameter="N2plus_O_NOplus"))
    g_lo, g_hi = (m["N2plus_O_NOplus"] * np.exp(s) for s in (-sig, sig))
    p_lo, p_hi = (float(v) for v in res.attrs["profile_interval_68"].split(" to "))
    corr = float(res["correlation"].sel(parameter="PI_N2", parameter_b="N2plus_O_NOplus"))
    weakest = 1.0 / float(res["singular_value"].min())
    dr = float(res["log_multiplier"].sel(parameter="DR_N2plus"))
    dr_prior = float(res["prior_log_sigma"].sel(parameter="DR_N2plus"))
    return (f"The fit closes the gap (χ² from {float(res['chi2_baseline']):.0f} to "
            f"{float(res['chi2']):.0f} for {int(res['degrees_of_freedom'])} degrees of "
            f"freedom) by sharing the factor two between a faster N2 photoionization "
            f"(× {m['PI_N2']:.2g}), a slower charge transfer with O "
            f"(× {m['N2plus_O_NOplus']:.2g}) and a much slower recombination "
            f"(× {m['DR_N2plus']:.2g}). The profile likelihood's Δχ² = 1 interval of the "
            f"charge-transfer multiplier ({p_lo:.2f}–{p_hi:.2f}) matches the Gaussian one "
            f"({g_lo:.2f}–{g_hi:.2f}), so the linear approximation holds. The fit is "
            "**degenerate between production and charge transfer**: below 250 km N2+ is their "
            f"ratio, so the data fix that ratio and not each one (correlation {corr:+.2f}); "
            "how the change is shared between them is decided by their priors. The "
            "recombination is separate from both (it acts higher up) but rests on the few "
            "points above 300 km: the data alone constrain the weakest combination, which is "
            f"mostly `DR_N2plus`, only to a factor e^{weakest:.1f} ≈ {np.exp(weakest):.0f}, "
            f"and the fitted value sits {abs(dr) / dr_prior:.1f} σ "
            f"{'below' if dr < 0 else 'above'} its prior.")


PASSAGES = {"reading": reading, "fit-reading": fit_reading, "fit-example": fit_example,
            "compare-O2D_N2": compare_o2d,
            "levels-experiment": levels_experiment, "e-region": e_region,
            "default-list-checks": default_list_checks}

#: File of each passage (default README.md).
FILES = {"default-list-checks": ROOT / "reactions" / "README.md",
         "fit-reading": ROOT / "docs" / "observations.md"}


def generate():
    """{name: text} of every generated passage."""
    model = _model()
    ds = model.solve()
    return {name: fn(model, ds) for name, fn in PASSAGES.items()}


def _wrap(text, width=96):
    """Wrapped lines, none starting with what Markdown reads as a list item or heading."""
    import textwrap
    lines = textwrap.wrap(text, width=width, break_on_hyphens=False)
    marker = re.compile(r"^([-+*#>]|\d+[.)])(\s|$)")
    i = 1
    while i < len(lines):
        if marker.match(lines[i]):
            first, _, rest = lines[i].partition(" ")
            lines[i - 1] += " " + first
            lines[i] = rest
            if not rest:
                del lines[i]
                continue
        i += 1
    return "\n".join(lines)


def _fenced(text):
    """Printed output as a Markdown code block."""
    return f"```\n{text}\n```"


def render(readme_text, passages, outputs=None):
    """The text with each marked passage (wrapped prose) and each marked command output
    (verbatim) replaced, markers kept."""
    out = readme_text
    for kind, items, fmt in (("generated", passages, _wrap),
                             ("generated-output", outputs or {}, _fenced)):
        for name, text in items.items():
            pat = re.compile(rf"(<!-- {kind}: {re.escape(name)} -->\n).*?"
                             rf"(\n<!-- /{kind}: {re.escape(name)} -->)", re.S)
            if not pat.search(out):
                raise SystemExit(f"no {kind} passage {name!r}")
            out = pat.sub(lambda m, t=text, f=fmt: m.group(1) + f(t) + m.group(2), out)
    return out


def render_all(passages, outputs=None):
    """{path: (old text, new text)} of every file with generated passages or outputs."""
    outputs = outputs or {}
    out = {}
    for path in {README, *FILES.values(), *(_output_file(n) for n in outputs)}:
        mine = {n: t for n, t in passages.items() if FILES.get(n, README) == path}
        printed = {n: t for n, t in outputs.items() if _output_file(n) == path}
        old = path.read_text(encoding="utf-8")
        out[path] = (old, render(old, mine, printed))
    return out


def _output_file(name):
    """The Markdown file holding printed output ``name``."""
    if name in OUTPUTS:
        return OUTPUTS[name][0]
    if name in EXCERPTS:
        return EXCERPTS[name][0]
    for folder, runs in EXAMPLE_RUNS:
        if name in {n for n, _ in runs}:
            return ROOT / folder / "README.md"
    raise KeyError(name)


def generate_outputs(examples=True):
    """{name: printed output} of every command in :data:`OUTPUTS` and, with ``examples``,
    of the named runs of :data:`EXAMPLE_RUNS`."""
    out = {name: command_output(argv) for name, (_, argv) in OUTPUTS.items()}
    return {**out, **run_examples()} if examples else out


def main(argv=None):
    argv = sys.argv[1:] if argv is None else argv
    stale = []
    figures = "--figures" in argv and "--check" not in argv
    if figures:
        import os
        here = os.getcwd()
        try:
            _make_figures().main()
        finally:
            os.chdir(here)
    outputs = {**generate_outputs(examples=False), **run_examples(draw=figures)}
    for path, (old, new) in render_all(generate(), outputs).items():
        if new != old:
            stale.append(path)
            if "--check" not in argv:
                path.write_text(new, encoding="utf-8")
    if stale and "--check" in argv:
        print(f"stale: {', '.join(str(p) for p in stale)}: run python docs/readme_numbers.py",
              file=sys.stderr)
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
