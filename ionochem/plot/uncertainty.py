"""Figures of an uncertainty result: Monte Carlo bands, Sobol indices, Morris screening.

Monte Carlo: the median profile of each main species with its 68 % (16–84 %) band shaded
darker and its 90 % (5–95 %) band lighter, in the project's colours
(:data:`ionochem.plot.profiles.STYLE`). Sobol and Morris: one panel per species, the index
of each factor against altitude. Figures are rendered to memory and written atomically;
nothing here computes chemistry.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ionochem.io.netcdf import atomic_write_bytes
from ionochem.plot.profiles import STYLE, _figure_bytes, _species_to_draw, style_density_axes

BAND_ALPHA = {0.90: 0.15, 0.68: 0.32}


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


def plot_bands(ds, path, *, species=None, title=None, observed=None):
    """Median densities against altitude with shaded 68 % and 90 % Monte Carlo bands."""
    plt = _pyplot()
    names = species or [s for s in _species_to_draw(ds) if s not in ("O+(2D)", "O+(2P)")]
    alt = ds["altitude"].values
    q = ds["density_quantiles"]
    fig, ax = plt.subplots(figsize=(6.4, 6.0))
    shown_vals = []
    for s in names:
        style = STYLE.get(s, dict(lw=1.0))
        colour = style.get("color", "grey")

        def quant(p, s=s):
            v = q.sel(quantile=p, species=s).values
            return np.where(v > 0, v, np.nan)

        for (lo, hi), width in (((0.05, 0.95), 0.90), ((0.16, 0.84), 0.68)):
            ax.fill_betweenx(alt, quant(lo), quant(hi), color=colour, alpha=BAND_ALPHA[width],
                             lw=0)
        med = quant(0.5)
        ax.plot(med, alt, label=s, **style)
        shown_vals.append(quant(0.05))
        shown_vals.append(quant(0.95))
    style_density_axes(ax, alt, shown_vals)
    from ionochem.plot.observations import overlay_observations
    overlay_observations(ax, observed, names)
    ax.legend(loc="best", fontsize=9, framealpha=0.9,
              title="median; 68 % and 90 % bands", title_fontsize=8)
    sub = f"\nMonte Carlo over rate uncertainties, {ds.attrs.get('samples', '?')} samples"
    if ds.attrs.get("environment_spreads"):
        sub += f" (environment {ds.attrs['environment_spreads']})"
    ax.set_title((title or ds.attrs.get("title", "")) + sub, fontsize=10)
    data = _figure_bytes(fig, path)
    plt.close(fig)
    atomic_write_bytes(path, data)
    return Path(path)


def plot_global(ds, path, *, species=None, title=None):
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
        ax.set_title(s, fontsize=10, color=STYLE.get(s, {}).get("color", "black"))
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
    axes.flat[0].legend(loc="best", fontsize=7)
    fig.supxlabel("total (solid) and first-order (dashed) Sobol index of ln n"
                  if method == "sobol" else "Morris μ* of ln n per unit ε", fontsize=10)
    fig.suptitle(f"{title or ds.attrs.get('title', '')}\n{method}, "
                 f"{ds.attrs.get('model_runs', '?')} solves", fontsize=11)
    data = _figure_bytes(fig, path)
    plt.close(fig)
    atomic_write_bytes(path, data)
    return Path(path)
