"""Marks on profile figures where a species is not in photochemical equilibrium.

A result dataset flags, per species and altitude, where the chemical lifetime n/L is longer than
the O+ ambipolar diffusion time (``pce_doubtful``, see
:mod:`ionochem.analysis.diagnostics`): there a chemistry-only column misrepresents the
species. Every profile and comparison figure shows it the same way, per species: each curve is
drawn faded where its own species is flagged, and an open circle on the curve marks where the
flagged part begins. (A grey band across the panel once marked the union of the flagged
heights, which wrongly tarred the species that are in equilibrium there.) This module only
reads the flag; it computes nothing.
"""

from __future__ import annotations

import numpy as np

#: Opacity of a curve where its species is flagged (the project's choice).
FADED_ALPHA = 0.3
#: Marker at the start of a flagged part of a curve (open circle in the curve's colour).
ONSET_MARKER = dict(marker="o", ms=5.5, mfc="white", mew=1.3, ls="none", zorder=4)


def doubtful_mask(ds, species, var="pce_doubtful"):
    """Altitudes where ``species`` is flagged, bool (altitude,); all False without the flag.

    Parameters
    ----------
    ds : xarray.Dataset
        A result with ``var`` (species, altitude) of 0/1.
    species : str
    var : str
        The flag variable's name.
    """
    n_alt = ds["altitude"].size
    if var not in ds or species not in list(ds[var]["species"].values):
        return np.zeros(n_alt, bool)
    return np.asarray(ds[var].sel(species=species).values, float) > 0.5


def plot_marked(ax, x, alt, mask, *, vertical=True, **style):
    """Draw a curve full where ``mask`` is False and faded where it is True.

    The faded part overlaps the full one by one point at each boundary so the curve stays
    continuous. Returns the full-opacity line (for the legend).

    Parameters
    ----------
    ax : matplotlib.axes.Axes
    x : ndarray (altitude,)
        Values along the curve (NaN for gaps).
    alt : ndarray (altitude,)
        km.
    mask : ndarray of bool (altitude,)
    vertical : bool
        True: altitude on the y axis (profiles); False: altitude on the x axis.
    style
        Line properties (colour, width, style, label).
    """
    x = np.asarray(x, float)
    mask = np.asarray(mask, bool)
    grown = mask.copy()
    grown[1:] |= mask[:-1]
    grown[:-1] |= mask[1:]
    full = np.where(mask, np.nan, x)
    # Keep isolated boundary points of the full curve joined to their faded neighbours.
    faded = np.where(grown, x, np.nan)
    label = style.pop("label", None)

    def xy(v):
        return (v, alt) if vertical else (alt, v)

    line, = ax.plot(*xy(full), label=label, **style)
    if mask.any():
        style = dict(style)
        style["color"] = line.get_color()
        style.pop("alpha", None)
        ax.plot(*xy(faded), alpha=FADED_ALPHA, **style)
        onset = np.flatnonzero(mask & ~np.concatenate([[False], mask[:-1]]))
        onset = onset[np.isfinite(x[onset])]
        if onset.size:
            pts = (x[onset], alt[onset]) if vertical else (alt[onset], x[onset])
            ax.plot(*pts, mec=line.get_color(), **ONSET_MARKER)
    return line


def shade_doubtful(ax, alt, masks, *, vertical=True):
    """A legend handle saying what the faded parts and their circles mean, or None.

    Nothing is drawn across the panel: :func:`plot_marked` marks each species on its own
    curve (the name is kept for the callers).

    Parameters
    ----------
    ax : matplotlib.axes.Axes
    alt : ndarray (altitude,)
        km, increasing.
    masks : dict of str to ndarray of bool (altitude,)
        Per drawn species, the flagged altitudes.
    vertical : bool
        Unused (kept for the callers).

    Returns
    -------
    matplotlib.lines.Line2D or None
        A handle labelled with the flagged species and their lowest flagged altitude.
    """
    from matplotlib.lines import Line2D
    flagged = {s: m for s, m in masks.items() if np.any(m)}
    if not flagged:
        return None
    starts = sorted(((float(np.asarray(alt)[m].min()), s) for s, m in flagged.items()))
    where = "\n".join(f"  {s} above {a:g} km" for a, s in starts)
    return Line2D([], [], color="0.4", alpha=FADED_ALPHA + 0.2, lw=1.5, mec="0.3",
                  **{k: v for k, v in ONSET_MARKER.items() if k != "ls"},
                  label="faded from ○ up: not in photochemical\nequilibrium (lifetime > O+ "
                        f"diffusion time):\n{where}")
