"""Figures of an uncertainty result: Monte Carlo bands, Sobol indices, Morris screening.

Monte Carlo: the median profile of each main species with its 68 % (16–84 %) band shaded
darker and its 90 % (5–95 %) band lighter with thin edges, in the project's colours
(:data:`ionochem.plot.palette.STYLE`). Sobol and Morris: one panel per species, the index
of each factor against altitude. Figures are rendered to memory and written atomically;
nothing here computes chemistry.
"""

from __future__ import annotations

import numpy as np

from ionochem.plot.equilibrium import doubtful_mask, plot_marked, shade_doubtful
from ionochem.plot.legend import legend_figure_right
from ionochem.plot.observations import overlay_observations
from ionochem.plot.profiles import (
    _species_to_draw,
    save_figure,
    style_density_axes,
    style_of,
)

#: Fill opacity of each band (the inner band is drawn over the outer one) and the width of the
#: 90 % band's edge lines (the project's choice).
BAND_ALPHA = {0.90: 0.2, 0.68: 0.35}
EDGE_WIDTH = 0.7


def plot_uncertainty(ds, path, *, species=None, title=None, observed=None):
    """Write the figure of an uncertainty dataset (by its ``method`` attribute); the
    measurements ``observed`` are drawn on the Monte Carlo bands."""
    if ds.attrs.get("method") in ("sobol", "morris"):
        return plot_global(ds, path, species=species, title=title)
    return plot_bands(ds, path, species=species, title=title, observed=observed)


def _pyplot():
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    return plt


def bands_figure(ds, *, species=None, title=None, observed=None):
    """Median densities against altitude with shaded 68 % and 90 % Monte Carlo bands, one
    panel per species (shared altitude axis).

    The bands of several species on one axis overlapped unreadably (the molecular ions
    cross between 200 and 300 km); in panels of their own each band reads cleanly. The 90 %
    band is a light fill with thin edges at the 5 % and 95 % quantiles; where the central
    solution is not in photochemical equilibrium the median is faded from an open circle
    (:mod:`ionochem.plot.equilibrium`).
    """
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch
    plt = _pyplot()
    names = species or [s for s in _species_to_draw(ds) if s not in ("O+(2D)", "O+(2P)")]
    alt = ds["altitude"].values
    q = ds["density_quantiles"]
    ncols = min(3, len(names))
    nrows = -(-len(names) // ncols)
    fig, axes = plt.subplots(nrows, ncols, figsize=(3.5 * ncols, 4.2 * nrows), sharey=True,
                             squeeze=False, layout="constrained")
    masks = {s: doubtful_mask(ds, s) for s in names}
    for ax, s in zip(axes.ravel(), names):
        style = style_of(s, names[:names.index(s)])
        colour = style.get("color", "grey")

        def quant(p, s=s):
            v = q.sel(quantile=p, species=s).values
            return np.where(v > 0, v, np.nan)

        for (lo, hi), width in (((0.05, 0.95), 0.90), ((0.16, 0.84), 0.68)):
            ax.fill_betweenx(alt, quant(lo), quant(hi), color=colour, alpha=BAND_ALPHA[width],
                             lw=0)
        for p in (0.05, 0.95):
            ax.plot(quant(p), alt, color=colour, lw=EDGE_WIDTH, alpha=0.9)
        plot_marked(ax, quant(0.5), alt, masks[s], label=s, **style)
        style_density_axes(ax, alt, [quant(0.05), quant(0.95)])
        overlay_observations(ax, observed, [s])
        ax.set_title(s, fontsize=10, color=colour)
        if ax not in axes[:, 0]:
            ax.set_ylabel("")
    for ax in axes.ravel()[len(names):]:
        ax.set_visible(False)
    handles = [Line2D([], [], color="0.3", lw=1.8),
               Patch(facecolor="0.3", alpha=BAND_ALPHA[0.68] + BAND_ALPHA[0.90], lw=0),
               Patch(facecolor=(0.3, 0.3, 0.3, BAND_ALPHA[0.90]), edgecolor="0.3",
                     lw=EDGE_WIDTH)]
    labels = ["median of the samples", "68 % band (16-84 %)", "90 % band (5-95 %)"]
    shade = shade_doubtful(axes[0, 0], alt, masks)
    if shade is not None:
        handles.append(shade)
        labels.append(shade.get_label())
    legend_figure_right(fig, handles, labels)
    sub = f"\nMonte Carlo over rate uncertainties, {ds.attrs.get('samples', '?')} samples"
    if ds.attrs.get("environment_spreads"):
        sub += f" (environment {ds.attrs['environment_spreads']})"
    fig.suptitle((title or ds.attrs.get("title", "")) + sub, fontsize=10)
    return fig


def plot_bands(ds, path, *, species=None, title=None, observed=None):
    """Write :func:`bands_figure` to ``path`` (PNG, PDF or SVG, from the suffix).

    Returns
    -------
    Path
    """
    return save_figure(bands_figure(ds, species=species, title=title, observed=observed),
                       path)


def global_figure(ds, *, species=None, title=None):
    """Sobol total indices (first-order dashed) or Morris μ* against altitude, per species."""
    plt = _pyplot()
    method = ds.attrs.get("method")
    names = list(species or ds["species"].values)
    factors = list(ds["factor"].values)
    alt = ds["altitude"].values
    cols = min(3, len(names))
    rows = int(np.ceil(len(names) / cols))
    fig, axes = plt.subplots(rows, cols, figsize=(4.2 * cols, 4.2 * rows), sharey=True,
                             squeeze=False, layout="constrained")
    cmap = plt.get_cmap("tab10" if len(factors) <= 10 else "tab20")
    main = "ST" if method == "sobol" else "mu_star"
    for ax, s in zip(axes.flat, names):
        for f, name in enumerate(factors):
            colour = cmap(f % cmap.N)
            v = ds[main].sel(species=s, factor=name).values
            ax.plot(v, alt, marker="o", ms=3, color=colour, lw=1.4, label=name)
            if method == "sobol":
                ax.plot(ds["S1"].sel(species=s, factor=name).values, alt, ls="--",
                        color=colour, lw=0.9)
        ax.set_title(s, fontsize=10, color=style_of(s)["color"])
        if method == "sobol":
            vals = ds[["S1", "ST"]].sel(species=s).to_array().values
            vals = vals[np.isfinite(vals)]
            hi = max(1.02, vals.max() + 0.02) if vals.size else 1.02
            lo = min(-0.02, vals.min() - 0.02) if vals.size else -0.02
            ax.set_xlim(lo, hi)
        ax.grid(True, alpha=0.3)
    for ax in axes.flat[len(names):]:
        ax.set_visible(False)
    for ax in axes[:, 0]:
        ax.set_ylabel("altitude (km)")
    handles, labels = axes.flat[0].get_legend_handles_labels()
    legend_figure_right(fig, handles, labels, fontsize=7)
    fig.supxlabel("total (solid) and first-order (dashed) Sobol index of ln n"
                  if method == "sobol" else "Morris μ* of ln n per unit ε", fontsize=10)
    fig.suptitle(f"{title or ds.attrs.get('title', '')}\n{method}, "
                 f"{ds.attrs.get('model_runs', '?')} solves", fontsize=11)
    return fig


def plot_global(ds, path, *, species=None, title=None):
    """Write :func:`global_figure` to ``path`` (PNG, PDF or SVG, from the suffix).

    Returns
    -------
    Path
    """
    return save_figure(global_figure(ds, species=species, title=title), path)
