"""Measured profiles drawn over a density figure: points with one-sigma error bars.

One helper, :func:`overlay_observations`, that every profile figure calls with its axes
and the species it shows: each measured density of those species becomes a marker in the
species' colour (:data:`ionochem.plot.palette.STYLE`) with a horizontal error bar, and the
density axis is widened to hold them. Ratios are not densities and are not drawn here.
Nothing here computes chemistry.
"""

from __future__ import annotations

import numpy as np

from ionochem.plot.palette import STYLE

MARKERS = ("o", "s", "^", "D", "v", "P", "X")


def overlay_observations(ax, observed, species):
    """Draw the observed densities of ``species`` on a log-density/altitude axis.

    Parameters
    ----------
    ax : matplotlib Axes
        Density (cm-3, log) on x, altitude (km) on y.
    observed : xarray.Dataset or None
        From :func:`ionochem.load_observations`; ``None`` draws nothing.
    species : sequence of str
        The species the figure shows (electrons are ``e``).

    Returns
    -------
    list
        The artists drawn (one per species with observations).
    """
    if observed is None:
        return []
    names = observed["species"].values.astype(str)
    kinds = observed["kind"].values.astype(str)
    alt = observed["altitude_km"].values
    val = observed["density_cm3"].values
    sig = observed["sigma_cm3"].values
    drawn, shown = [], []
    for i, s in enumerate(species):
        sel = (names == s) & (kinds != "ratio")
        if not sel.any():
            continue
        colour = STYLE.get(s, {}).get("color", "0.25")
        # On a log axis the lower bar stops just above zero.
        lower = np.minimum(sig[sel], val[sel] * (1 - 1e-3))
        art = ax.errorbar(val[sel], alt[sel], xerr=[lower, sig[sel]], fmt=MARKERS[i % 7],
                          ms=4, color=colour, mfc="white", mew=1.2, elinewidth=0.9,
                          capsize=2, ls="none", label=f"{s} observed", zorder=5)
        drawn.append(art)
        shown.append(val[sel] + sig[sel])
        shown.append(val[sel])
    if shown:
        vals = np.concatenate(shown)
        lo, hi = ax.get_xlim()
        ax.set_xlim(min(lo, vals.min() / 2), max(hi, vals.max() * 1.5))
    return drawn
