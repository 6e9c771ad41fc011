"""Marks on profile figures where a species is not in photochemical equilibrium.

A result dataset flags, per species and level, where the chemical lifetime n/L is longer than
the O+ ambipolar diffusion time (``pce_doubtful``, see
:mod:`ionochem.analysis.diagnostics`): there a chemistry-only column misrepresents the
species. Every profile and comparison figure shows it the same way: the altitudes where any
drawn species is flagged are shaded light grey, and each curve is drawn faded where its own
species is flagged. This module only reads the flag; it computes nothing.
"""

from __future__ import annotations

import numpy as np

#: Opacity of a curve where its species is flagged (the project's choice).
FADED_ALPHA = 0.3
#: Fill of the shaded altitudes (light grey, behind the curves).
SHADE_COLOUR = "0.88"


def doubtful_mask(ds, species, var="pce_doubtful"):
    """Levels where ``species`` is flagged, bool (altitude,); all False without the flag.

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
    return line


def shade_doubtful(ax, alt, masks, *, vertical=True):
    """Shade the altitudes where any of ``masks`` is True; return a legend handle or None.

    Parameters
    ----------
    ax : matplotlib.axes.Axes
    alt : ndarray (altitude,)
        km, increasing.
    masks : dict of str to ndarray of bool (altitude,)
        Per drawn species, the flagged levels.
    vertical : bool
        True: altitude on the y axis.

    Returns
    -------
    matplotlib.patches.Patch or None
        A handle labelled with the flagged species and their lowest flagged altitude.
    """
    from matplotlib.patches import Patch
    flagged = {s: m for s, m in masks.items() if np.any(m)}
    if not flagged:
        return None
    union = np.any(np.stack(list(flagged.values())), axis=0)
    for lo, hi in _runs(np.asarray(alt, float), union):
        span = ax.axhspan if vertical else ax.axvspan
        span(lo, hi, color=SHADE_COLOUR, zorder=0, lw=0)
    starts = sorted(((float(np.asarray(alt)[m].min()), s) for s, m in flagged.items()))
    where = "\n".join(f"  {s} above {a:g} km" for a, s in starts)
    return Patch(facecolor=SHADE_COLOUR, edgecolor="0.6",
                 label="not in photochemical equilibrium\n(lifetime > O+ diffusion time;\n"
                       f"curve faded there):\n{where}")


def _runs(alt, mask):
    """(low, high) km of each run of True levels, widened by half a level spacing."""
    out = []
    idx = np.flatnonzero(mask)
    if idx.size == 0:
        return out
    breaks = np.flatnonzero(np.diff(idx) > 1)
    firsts = np.concatenate([[idx[0]], idx[breaks + 1]])
    lasts = np.concatenate([idx[breaks], [idx[-1]]])
    for i, j in zip(firsts, lasts, strict=True):
        lo = alt[i] - (0.5 * (alt[i] - alt[i - 1]) if i > 0 else 0.0)
        hi = alt[j] + (0.5 * (alt[j + 1] - alt[j]) if j + 1 < alt.size else 0.0)
        out.append((lo, hi))
    return out

