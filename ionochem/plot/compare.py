"""Figure of a baseline-versus-changed comparison.

Left panel: density profiles, baseline solid and changed dashed, one colour per species
from the project's palette (:data:`ionochem.plot.palette.STYLE`). Right panel: the change
from baseline, 100 (changed/baseline − 1) in %, against altitude. Both panels shade the
altitudes where the baseline is not in photochemical equilibrium
(:mod:`ionochem.plot.equilibrium`); the legend sits right of the panels. The figure is
rendered to memory and written atomically; nothing here computes chemistry.
"""

from __future__ import annotations

import numpy as np

from ionochem.plot.equilibrium import doubtful_mask, plot_marked, shade_doubtful
from ionochem.plot.legend import legend_figure_right
from ionochem.plot.observations import overlay_observations
from ionochem.plot.profiles import label_levels, save_figure, style_density_axes, style_of

COMPARE_SPECIES = ("e", "O+(total)", "O+", "O2+", "NO+", "N2+")


def _species(ds, wanted):
    names = list(ds["species"].values)
    out = [s for s in wanted if s in names]
    if "O+(total)" in out and "O+" in out:
        out.remove("O+")
    if not out:
        roles = ds["role"].values
        out = [s for s, r in zip(names, roles, strict=True)
               if r in ("solved", "electron", "derived")][:6]
    return out


def compare_figure(ds, *, species=None, title=None, observed=None):
    """Profiles (baseline solid, changed dashed) beside the percentage change.

    Parameters
    ----------
    ds : xarray.Dataset
        From :func:`ionochem.analysis.compare.compare`.
    species : sequence of str, optional
        Default: electrons and the main ions present.
    title : str, optional
        Default: the dataset's title and the changes.
    observed : xarray.Dataset, optional
        Measurements (:func:`ionochem.load_observations`) drawn on the profiles.

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from matplotlib.lines import Line2D
    names = list(species) if species else _species(ds, COMPARE_SPECIES)
    alt = ds["altitude"].values
    fig, (ax_n, ax_r) = plt.subplots(1, 2, figsize=(11.5, 6.0), sharey=True,
                                     gridspec_kw={"width_ratios": [1.3, 1.0]},
                                     layout="constrained")
    masks = {s: doubtful_mask(ds, s) for s in names}
    positive = []
    for s in names:
        style = style_of(s, names[:names.index(s)])
        style.pop("ls", None)
        nb = ds["density_baseline"].sel(species=s).values
        nc = ds["density_changed"].sel(species=s).values
        line = plot_marked(ax_n, np.where(nb > 0, nb, np.nan), alt, masks[s], ls="-",
                           label=s, **style)
        style["color"] = line.get_color()
        plot_marked(ax_n, np.where(nc > 0, nc, np.nan), alt, masks[s], ls="--", **style)
        pct = 100.0 * (ds["ratio"].sel(species=s).values - 1.0)
        plot_marked(ax_r, pct, alt, masks[s], ls="-", label=s, **style)
        positive.append(nb[nb > 0])
        positive.append(nc[nc > 0])
    style_density_axes(ax_n, alt, positive)
    label_levels(ax_n, [ln for ln in ax_n.get_lines() if ln.get_label() in names])
    label_levels(ax_r, [ln for ln in ax_r.get_lines() if ln.get_label() in names])
    ax_r.axvline(0.0, color="0.5", lw=0.8)
    ax_r.set_xlabel("change from baseline (%)")
    ax_r.grid(True, alpha=0.3)
    overlay_observations(ax_n, observed, names)
    handles, labels = ax_n.get_legend_handles_labels()
    handles += [Line2D([], [], color="0.3", ls="-"), Line2D([], [], color="0.3", ls="--")]
    labels += ["baseline", "changed"]
    shade = shade_doubtful(ax_n, alt, masks)
    if shade is not None:
        shade_doubtful(ax_r, alt, masks)
        handles.append(shade)
        labels.append(shade.get_label())
    legend_figure_right(fig, handles, labels)
    changes = [ds.attrs.get(k, "") for k in ("changes_set", "changes_scale",
                                               "changes_reactions")]
    changes = "; ".join(c for c in changes if c)
    head = title or ds.attrs.get("title", "")
    fig.suptitle(head + (f"\nchanged: {changes}" if changes else ""), fontsize=10)
    return fig


def plot_compare(ds, path, *, species=None, title=None, observed=None):
    """Write :func:`compare_figure` to ``path`` (PNG, PDF or SVG, from the suffix).

    Returns
    -------
    Path
    """
    return save_figure(compare_figure(ds, species=species, title=title, observed=observed),
                       path)
