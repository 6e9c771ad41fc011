"""The ``--observed FILE`` option shared by ``run``, ``compare``, ``uncertainty`` and ``fit``.

Adds the option, loads the file (errors at ``file:line``, exit 2) and prints the misfit of
a model column against it: χ² in log density per species and altitude band
(:mod:`ionochem.analysis.misfit`). Not a command itself.
"""

from __future__ import annotations

from ionochem.cli.options import Table


def add_observed_option(parser):
    """Add ``--observed FILE`` to a subcommand's parser."""
    parser.add_argument("--observed", metavar="FILE",
                        help="measured profiles (CSV: altitude_km, species, density_cm3, "
                             "sigma_cm3[, kind]; or netCDF): drawn on the figure with error "
                             "bars, misfit printed (chi-square in log density)")


def load_observed(args):
    """The observations named by ``--observed`` (``None`` when not given)."""
    path = getattr(args, "observed", None)
    if not path:
        return None
    from ionochem.io.observations import load_observations
    return load_observations(path)


def misfit_table(obs, fits):
    """Aligned table of χ² per species and band for one or more model columns.

    ``fits`` maps a label (``"model"``, ``"baseline"``, ``"changed"``) to a
    :class:`ionochem.analysis.misfit.Misfit` of the same observations (or its list of
    :class:`~ionochem.analysis.misfit.MisfitRow`).
    """
    fits = {label: getattr(mf, "rows", mf) for label, mf in fits.items()}
    labels = list(fits)
    header = ["species", "band", "points"]
    for label in labels:
        header += [f"chi2 {label}", f"chi2/pt {label}", f"model/obs {label}"]
    table = Table(header, align=["<", "<"] + [">"] * (len(header) - 2))
    keyed = {label: {(r.species, r.band): r for r in rows} for label, rows in fits.items()}
    for row in fits[labels[0]]:
        cells = [row.species, f"{row.band} {row.low_km:g}-{row.high_km:g}", row.points]
        for label in labels:
            r = keyed[label].get((row.species, row.band))
            if r is None:
                cells += ["-", "-", "-"]
            else:
                cells += [f"{r.chi2:.2f}", f"{r.chi2 / r.points:.2f}",
                          f"{r.median_ratio:.3g}"]
        table.add(*cells)
    return table


def print_misfit(obs, fits, out=None):
    """Print the misfit summary: total χ² per model column, then the band table."""
    import sys

    import numpy as np
    out = sys.stdout if out is None else out
    n = obs.sizes["observation"]
    print(f"misfit against {obs.attrs.get('source', 'observations')} ({n} points; chi2 in "
          "log density, (ln obs - ln model)/sigma_ln squared)", file=out)
    for label, mf in fits.items():
        missing = n - mf.points
        note = f"; {missing} point(s) where the model is zero left out" if missing else ""
        per = mf.chi2 / mf.points if mf.points else np.nan
        print(f"  {label}: chi2 = {mf.chi2:.2f} for {mf.points} points "
              f"(chi2/point {per:.2f}){note}", file=out)
    print(misfit_table(obs, fits).text(), file=out)
