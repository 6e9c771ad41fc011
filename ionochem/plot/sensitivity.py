"""Figures of normalized sensitivities: a heat map over altitude and a bar chart.

One row of panels per species: on the left, S = ∂ln n/∂ln k of its top N reactions (and
∂ln n/∂ln x of the environment factors x ranked beside them: Te, EUV, neutral densities…)
against altitude on a diverging colour map centred at zero (red raises the density, blue
lowers it), with the altitudes left out of the ranking (the species below ``min_share`` of its
peak) hatched; on the right, the same rows as bars named by reaction: the value of S where
|S| is largest (filled, labelled with that altitude) and the altitude-mean |S| (outlined).
The ranking comes from :mod:`ionochem.analysis.rank`; nothing here computes chemistry.
Figures are rendered to memory and written atomically.
"""

from __future__ import annotations

import numpy as np

from ionochem.analysis.rank import (
    DEFAULT_MIN_SHARE,
    default_species,
    rank_reactions,
    sensitivity_matrix,
    where_it_matters,
)
from ionochem.errors import InputError
from ionochem.plot.profiles import save_figure, style_of

#: Diverging map (matplotlib's ``RdBu_r``): positive S red, negative blue, zero white.
CMAP = "RdBu_r"
POSITIVE = "#b2182b"
NEGATIVE = "#2166ac"


def sensitivity_figure(sens_ds, *, species=None, altitude_range=None, top=10,
                       title=None, by="max", min_share=DEFAULT_MIN_SHARE, members=False):
    """Heat map and bar chart of the top ``top`` reactions (and environment factors) of each
    species, ranked as :func:`ionochem.analysis.rank.rank_reactions` ranks them.

    Parameters
    ----------
    sens_ds : xarray.Dataset
        ``sensitivity`` (species, reaction, altitude) and ``sensitivity_Te``.
    species : sequence of str, optional
        One row of panels each; default the main ions present.
    altitude_range : (float, float), optional
        km; default the whole grid.
    top : int
        Rows shown per species.
    title : str, optional
    by : {"max", "mean"}
        Order by the largest |S| or by the altitude-mean |S|.
    min_share : float
        Rank over the altitudes where the species is at least this share of its peak density;
        the other altitudes are hatched on the heat map.
    members : bool
        Rows are reactions one by one (family levels apart) instead of units of analysis.

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from matplotlib.patches import Patch
    species = list(species) if species else default_species(sens_ds["species"].values)
    panels = []
    for s in species:
        rows = rank_reactions(sens_ds, s, altitude_range, top, by=by, min_share=min_share,
                              members=members)
        if rows:
            panels.append((s, rows))
    if not panels:
        raise InputError("no sensitivities to plot: every altitude in the range is dark",
                         file="--plot")
    height = max(2.6, 0.32 * max(len(r) for _, r in panels) + 1.2)
    fig, axes = plt.subplots(len(panels), 2, figsize=(12.0, height * len(panels)),
                             squeeze=False, gridspec_kw={"width_ratios": [2.2, 1.0]},
                             layout="constrained")
    hatched = False
    for (s, rows), (ax_h, ax_b) in zip(panels, axes, strict=True):
        hatched |= _heat_map(fig, ax_h, sens_ds, s, rows, altitude_range, min_share, by,
                             members)
        _bars(ax_b, rows)
    handles = [Patch(color=POSITIVE, label="S > 0 (raises the density)"),
               Patch(color=NEGATIVE, label="S < 0 (lowers it)"),
               Patch(fill=False, edgecolor="0.2", label="altitude-mean |S|")]
    if hatched:
        handles.append(Patch(facecolor="none", edgecolor="0.55", hatch="////",
                             label=f"not ranked: species below {100 * min_share:g} % of its "
                                   "peak"))
    fig.legend(handles=handles, fontsize=8, loc="outside lower center", ncol=len(handles))
    alt_all = sens_ds["altitude"].values
    lo, hi = altitude_range if altitude_range is not None else (alt_all.min(), alt_all.max())
    fig.suptitle((title or sens_ds.attrs.get("title", ""))
                 + f"\nnormalized sensitivities, {lo:g}-{hi:g} km", fontsize=11)
    return fig


def _heat_map(fig, ax_h, sens_ds, s, rows, altitude_range, min_share, by, members):
    """S of the ranked ``rows`` of species ``s`` against altitude, the altitudes left out of
    the ranking hatched; returns whether any were."""
    from matplotlib.colors import TwoSlopeNorm
    ids, _, S, alt = sensitivity_matrix(sens_ds, s, altitude_range, members=members)
    matters = where_it_matters(sens_ds, s, altitude_range, min_share)
    pick = [ids.index(r.reaction) for r in rows]
    M = S[pick]                                        # (top, altitude)
    lim = np.nanmax(np.abs(M)) if np.isfinite(M).any() else 1.0
    lim = lim if lim > 0 else 1.0
    edges = _edges(alt)
    mesh = ax_h.pcolormesh(edges, np.arange(len(rows) + 1), np.ma.masked_invalid(M),
                           cmap=CMAP, norm=TwoSlopeNorm(0.0, -lim, lim), shading="flat")
    ax_h.set_yticks(np.arange(len(rows)) + 0.5)
    ax_h.set_yticklabels(row_labels(rows), fontsize=8)
    ax_h.invert_yaxis()
    ax_h.set_xlabel("altitude (km)")
    colour = style_of(s)["color"]
    edges_alt = np.asarray(edges)
    hatched = False
    for i in np.flatnonzero(~matters):
        ax_h.axvspan(edges_alt[i], edges_alt[i + 1], facecolor="none", edgecolor="0.55",
                     hatch="////", lw=0)
        hatched = True
    measure = "largest |S|" if by == "max" else "altitude-mean |S|"
    ax_h.set_title(f"{s}: top {len(rows)} reactions and environment factors by {measure}",
                   fontsize=10, color=colour)
    fig.colorbar(mesh, ax=ax_h, pad=0.01,
                 label="normalized sensitivity\nS = ∂ln n / ∂ln k (reaction),\n"
                       "∂ln n / ∂ln x (environment x)")
    return hatched


def _bars(ax_b, rows):
    """S where |S| is largest (filled, with its altitude written) and the altitude-mean |S|
    (outline) of each ranked row."""
    y = np.arange(len(rows))
    signed = np.array([r.signed_at_max for r in rows])
    mean = np.array([r.mean_abs for r in rows])
    ax_b.barh(y, signed, height=0.6,
              color=np.where(signed >= 0, POSITIVE, NEGATIVE), alpha=0.85)
    ax_b.barh(y, mean, height=0.6, fill=False, edgecolor="0.2", lw=1.0)
    ax_b.set_yticks(y)
    ax_b.set_yticklabels([])           # the same rows as the heat map, named there
    ax_b.invert_yaxis()
    ax_b.axvline(0.0, color="0.4", lw=0.8)
    # The altitude of the largest |S| beside each bar, outside its end.
    reach = float(np.max(np.abs(np.concatenate([signed, mean])))) or 1.0
    ax_b.set_xlim(min(-0.05, signed.min()) - 0.65 * reach,
                  max(0.05, signed.max(), mean.max()) + 0.65 * reach)
    for yi, r, v, m in zip(y, rows, signed, mean, strict=True):
        end = max(v, m) if v >= 0 else v
        ax_b.text(end + (0.03 if v >= 0 else -0.03) * reach, yi,
                  f"{r.altitude_km:g} km", va="center", fontsize=7, color="0.25",
                  ha="left" if v >= 0 else "right")
    ax_b.set_xlabel("S where |S| is largest (at the altitude written)\n"
                    "outline: altitude-mean |S|")
    ax_b.grid(True, axis="x", alpha=0.3)


def row_labels(rows):
    """Readable names of ranked rows: a reaction's equation (``→`` for ``->``; its id in
    brackets when two rows share an equation, such as photoionization and photoelectron
    impact of one gas), an environment factor's description up to its parenthesis. The ids
    stay in the printed table and the output file."""
    def text(r):
        eq = str(r.equation or r.reaction)
        return eq.split(" (", 1)[0] if " -> " not in eq else eq.replace(" -> ", " → ")
    texts = [text(r) for r in rows]
    return [f"{t} [{r.reaction}]" if texts.count(t) > 1 else t
            for t, r in zip(texts, rows, strict=True)]


def plot_sensitivity(sens_ds, path, *, species=None, altitude_range=None, top=10,
                     title=None, by="max", min_share=DEFAULT_MIN_SHARE, members=False):
    """Write :func:`sensitivity_figure` to ``path`` (PNG, PDF or SVG, from the suffix).

    Returns
    -------
    Path
    """
    fig = sensitivity_figure(sens_ds, species=species, altitude_range=altitude_range, top=top,
                             title=title, by=by, min_share=min_share, members=members)
    return save_figure(fig, path)


def _edges(alt):
    """Cell edges around the grid altitudes (km) for pcolormesh, shape (altitude + 1,)."""
    alt = np.asarray(alt, float)
    if alt.size == 1:
        return np.array([alt[0] - 0.5, alt[0] + 0.5])
    mid = 0.5 * (alt[1:] + alt[:-1])
    return np.concatenate([[alt[0] - (mid[0] - alt[0])], mid, [alt[-1] + (alt[-1] - mid[-1])]])
