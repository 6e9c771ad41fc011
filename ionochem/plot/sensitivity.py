"""Figures of normalized sensitivities: a heat map over altitude and a bar chart.

One row of panels per species: on the left, S = ∂ln n/∂ln k of its top N reactions (and Te)
against altitude on a diverging colour map centred at zero (red raises the density, blue
lowers it); on the right, the same reactions as bars: the value of S where |S| is largest
(filled, labelled with that altitude) and the altitude-mean |S| (outlined), each row named
by its reaction. The ranking comes from
:mod:`ionochem.analysis.rank`; nothing here computes chemistry. Figures are rendered to
memory and written atomically.
"""

from __future__ import annotations

import numpy as np

from ionochem.analysis.rank import default_species, rank_reactions, sensitivity_matrix
from ionochem.errors import InputError
from ionochem.plot.profiles import STYLE, save_figure

#: Diverging map (matplotlib's ``RdBu_r``): positive S red, negative blue, zero white.
CMAP = "RdBu_r"
POSITIVE = "#b2182b"
NEGATIVE = "#2166ac"


def sensitivity_figure(sens_ds, *, species=None, altitude_range=None, top=10,
                     title=None):
    """Heat map and bar chart of the top ``top`` reactions of each species.

    Parameters
    ----------
    sens_ds : xarray.Dataset
        ``sensitivity`` (species, reaction, altitude) and ``sensitivity_Te``.
    species : sequence of str, optional
        One row of panels each; default the main ions present.
    altitude_range : (float, float), optional
        km; default the whole grid.
    top : int
        Reactions shown per species (ranked by the largest |S|).
    title : str, optional

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from matplotlib.colors import TwoSlopeNorm
    from matplotlib.patches import Patch
    species = list(species) if species else default_species(sens_ds["species"].values)
    panels = []
    for s in species:
        rows = rank_reactions(sens_ds, s, altitude_range, top)
        if rows:
            panels.append((s, rows))
    if not panels:
        raise InputError("no sensitivities to plot: every level in the range is dark",
                         file="--plot")
    height = max(2.6, 0.32 * max(len(r) for _, r in panels) + 1.2)
    fig, axes = plt.subplots(len(panels), 2, figsize=(12.0, height * len(panels)),
                             squeeze=False, gridspec_kw={"width_ratios": [2.2, 1.0]},
                             layout="constrained")
    for (s, rows), (ax_h, ax_b) in zip(panels, axes, strict=True):
        ids, _, S, alt = sensitivity_matrix(sens_ds, s, altitude_range)
        pick = [ids.index(r.reaction) for r in rows]
        M = S[pick]                                        # (top, level)
        lim = np.nanmax(np.abs(M)) if np.isfinite(M).any() else 1.0
        lim = lim if lim > 0 else 1.0
        edges = _edges(alt)
        mesh = ax_h.pcolormesh(edges, np.arange(len(rows) + 1), np.ma.masked_invalid(M),
                               cmap=CMAP, norm=TwoSlopeNorm(0.0, -lim, lim), shading="flat")
        ax_h.set_yticks(np.arange(len(rows)) + 0.5)
        ax_h.set_yticklabels([r.reaction for r in rows], fontsize=8)
        ax_h.invert_yaxis()
        ax_h.set_xlabel("altitude (km)")
        colour = STYLE.get(s, {}).get("color", "black")
        ax_h.set_title(f"{s}: S = ∂ln n/∂ln k (top {len(rows)} by largest |S|)",
                       fontsize=10, color=colour)
        fig.colorbar(mesh, ax=ax_h, pad=0.01,
                     label="normalized sensitivity\nS = ∂ln n / ∂ln k")
        y = np.arange(len(rows))
        signed = np.array([r.signed_at_max for r in rows])
        mean = np.array([r.mean_abs for r in rows])
        ax_b.barh(y, signed, height=0.6,
                  color=np.where(signed >= 0, POSITIVE, NEGATIVE), alpha=0.85)
        ax_b.barh(y, mean, height=0.6, fill=False, edgecolor="0.2", lw=1.0)
        ax_b.set_yticks(y)
        ax_b.set_yticklabels([r.reaction for r in rows], fontsize=8)
        ax_b.invert_yaxis()
        ax_b.axvline(0.0, color="0.4", lw=0.8)
        # The altitude of the largest |S| beside each bar, outside its end.
        reach = float(np.max(np.abs(np.concatenate([signed, mean])))) or 1.0
        ax_b.set_xlim(min(-0.05, signed.min()) - 0.5 * reach,
                      max(0.05, signed.max(), mean.max()) + 0.5 * reach)
        for yi, r, v, m in zip(y, rows, signed, mean, strict=True):
            end = max(v, m) if v >= 0 else v
            ax_b.text(end + (0.03 if v >= 0 else -0.03) * reach, yi,
                      f"{r.altitude_km:g} km", va="center", fontsize=7, color="0.25",
                      ha="left" if v >= 0 else "right")
        ax_b.set_xlabel("S where |S| is largest (at the altitude written)\n"
                        "outline: altitude-mean |S|")
        ax_b.grid(True, axis="x", alpha=0.3)
    fig.legend(handles=[Patch(color=POSITIVE, label="S > 0 (raises the density)"),
                        Patch(color=NEGATIVE, label="S < 0 (lowers it)"),
                        Patch(fill=False, edgecolor="0.2", label="altitude-mean |S|")],
               fontsize=8, loc="outside lower center", ncol=3)
    alt_all = sens_ds["altitude"].values
    lo, hi = altitude_range if altitude_range is not None else (alt_all.min(), alt_all.max())
    fig.suptitle((title or sens_ds.attrs.get("title", ""))
                 + f"\nnormalized sensitivities, {lo:g}-{hi:g} km", fontsize=11)
    return fig


def plot_sensitivity(sens_ds, path, *, species=None, altitude_range=None, top=10,
                     title=None):
    """Write :func:`sensitivity_figure` to ``path`` (PNG, PDF or SVG, from the suffix).

    Returns
    -------
    Path
    """
    fig = sensitivity_figure(sens_ds, species=species, altitude_range=altitude_range, top=top,
                             title=title)
    return save_figure(fig, path)


def _edges(alt):
    """Cell edges around level altitudes (km) for pcolormesh, shape (level + 1,)."""
    alt = np.asarray(alt, float)
    if alt.size == 1:
        return np.array([alt[0] - 0.5, alt[0] + 0.5])
    mid = 0.5 * (alt[1:] + alt[:-1])
    return np.concatenate([[alt[0] - (mid[0] - alt[0])], mid, [alt[-1] + (alt[-1] - mid[-1])]])
