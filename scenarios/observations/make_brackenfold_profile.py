"""Write the invented observation file of the fitting example (docs/observations.md).

INVENTED DATA. The "measurements" are the demo scenario's own modelled profiles
(scenarios/tabulated_column.toml, the invented site Brackenfold) with an invented
factor-of-two N2+ excess put in by hand and invented noise:

- N2+ (an imagined rocket ion mass spectrometer): 2 x the model's N2+ every 10 km from 130
  to 320 km, 15 % one-sigma errors, log-normal noise of that width;
- Ne (an imagined incoherent-scatter radar): the model's electron density every 5 km from
  95 to 400 km, 6 % one-sigma errors, log-normal noise of that width.

Run from the repository root: ``python scenarios/observations/make_brackenfold_profile.py``.
"""

from pathlib import Path

import numpy as np

import ionochem

HERE = Path(__file__).resolve().parent
SEED = 20250922          # invented


def main():
    scen = ionochem.load_scenario(HERE.parent / "tabulated_column.toml")
    ds = ionochem.Model(scen).solve()
    rng = np.random.default_rng(SEED)
    rows = []
    for species, factor, rel, altitudes in (
            ("N2+", 2.0, 0.15, np.arange(130.0, 321.0, 10.0)),
            ("e", 1.0, 0.06, np.arange(95.0, 401.0, 5.0))):
        n = factor * ds["density"].sel(species=species, altitude=altitudes).values
        y = n * np.exp(rel * rng.standard_normal(n.size))
        kind = "electron_density" if species == "e" else "density"
        rows += [(a, species, v, rel * v, kind) for a, v in zip(altitudes, y)]
    lines = [
        "# INVENTED DATA for the fitting example (docs/observations.md): not a measurement.",
        "# Brackenfold (invented site), 2025-09-22 10:45 UTC (invented). Made by",
        "# make_brackenfold_profile.py from the model of scenarios/tabulated_column.toml:",
        "# N2+ = 2 x model (an invented excess), 15 % errors; Ne = model, 6 % errors;",
        f"# log-normal noise of the stated widths, numpy default_rng({SEED}).",
        "altitude_km,species,density_cm3,sigma_cm3,kind",
    ]
    lines += [f"{a:g},{s},{v:.4g},{e:.3g},{k}" for a, s, v, e, k in rows]
    (HERE / "brackenfold_n2plus_ne.csv").write_text("\n".join(lines) + "\n")


if __name__ == "__main__":
    main()
