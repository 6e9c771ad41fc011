"""Regenerate the figures of docs/figures/ with the README's own commands.

Run from the repository root after any change to the chemistry, the environment or the
plotting code:

    python docs/figures/make_figures.py

Each figure is made by exactly the command the README shows (same scenario, same options:
``--top`` left at its default 10, ``--samples 1000 --seed 1``; for a README command shown
without ``--plot``, that command with it), so what a reader sees in the docs is what the
command gives. All scenarios and experiments are invented demos.
"""

from __future__ import annotations

import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
FIGURES = ROOT / "docs" / "figures"

#: (figure file, command arguments after ``ionochem``, figure option), as in README.md.
COMMANDS = (
    ("midlatitude_equinox.png",
     ["run", "scenarios/midlatitude_equinox.toml", "-o", "{tmp}/midlatitude.nc"], "--plot"),
    ("compare_O2D_N2.png",
     ["compare", "scenarios/midlatitude_equinox.toml", "--scale", "O2D_N2=2"], "--plot"),
    ("rank_N2plus.png",
     ["rank", "scenarios/midlatitude_equinox.toml", "--species", "N2+", "--altitudes",
      "150:300"], "--plot"),
    ("uncertainty_midlatitude.png",
     ["uncertainty", "scenarios/midlatitude_equinox.toml", "--samples", "1000", "--seed", "1",
      "-o", "{tmp}/bands.nc"], "--plot"),
    ("midlatitude_sunset.png",
     ["run", "scenarios/midlatitude_sunset.toml", "-o", "{tmp}/sunset.nc"], "--plot"),
    ("levels_n2plus.png",
     ["run", "scenarios/midlatitude_equinox.toml"], "--plot-levels"),
    ("compare_n2plus_dr_levels.png",
     ["compare", "scenarios/midlatitude_equinox.toml", "--reactions",
      "docs/experiments/n2plus_dr_new.reactions", "--species", "N2+", "--species", "N2+(v=0)",
      "--species", "N2+(v=1)", "--species", "NO+"], "--plot"),
    ("rank_n2plus_levels.png",
     ["rank", "scenarios/midlatitude_equinox.toml", "--species", "N2+(v=1)", "--altitudes",
      "200:300"], "--plot"),
    ("sweep_O2D_N2.png",
     ["sweep", "scenarios/midlatitude_equinox.toml", "--vary", "time.local_hour=6:18:1",
      "--sensitivity", "-o", "{tmp}/sweep.nc", "--map-species", "N2+", "--map-reaction",
      "O2D_N2"], "--plot"),
    ("fit_brackenfold.png",
     ["fit", "scenarios/tabulated_column.toml", "--observed",
      "scenarios/observations/brackenfold_n2plus_ne.csv", "--free", "PI_N2", "--free",
      "N2plus_O_NOplus", "--free", "DR_N2plus", "--constrain-electrons", "--profile",
      "N2plus_O_NOplus", "--profile-points", "9"], "--plot"),
    ("discern_example.png",
     ["discern", "scenarios/midlatitude_equinox.toml", "--reactions",
      "docs/experiments/n2plus_dr_new.reactions", "--observable", "N2+", "--observable",
      "N2+/O+", "--error", "0.25", "--error", "N2+/O+=0.3", "--vary", "sun.f107=70:230:80",
      "--vary", "time.local_hour=8:16:4", "--monte-carlo", "200", "--top", "6", "-o",
      "{tmp}/discern.nc"], "--plot"),
)


def main(names=()):
    """Run the commands (all, or those whose figure name is in ``names``)."""
    import os

    from ionochem.cli import main as ionochem
    os.chdir(ROOT)
    with tempfile.TemporaryDirectory() as tmp:
        for figure, args, flag in COMMANDS:
            if names and figure not in names:
                continue
            argv = [a.format(tmp=tmp) for a in args] + [flag, str(FIGURES / figure)]
            print("ionochem", " ".join(argv), flush=True)
            if ionochem(argv) != 0:
                raise SystemExit(f"failed: {figure}")


if __name__ == "__main__":
    main(sys.argv[1:])
