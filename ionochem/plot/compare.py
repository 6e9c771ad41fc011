"""Figure of a baseline-versus-changed comparison.

Left panel: density profiles, baseline solid and changed dashed, one colour per species
from the project's palette (:data:`ionochem.plot.profiles.STYLE`). Right panel: the change
100 (changed/baseline − 1) in % against altitude. The figure is rendered to memory and
written atomically; nothing here computes chemistry.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ionochem.io.netcdf import atomic_write_bytes
from ionochem.plot.profiles import STYLE, _figure_bytes

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


def plot_compare(ds, path, *, species=None, title=None, observed=None):
    """Profiles (baseline solid, changed dashed) beside the percentage change.

    Parameters
    ----------
    ds : xarray.Dataset
        From :func:`ionochem.analysis.compare.compare`.
    path : str or Path
        Output figure (PNG, PDF or SVG, from the suffix).
    species : sequence of str, optional
        Default: electrons and the main ions present.
    title : str, optional
        Default: the dataset's title and the changes.
    observed : xarray.Dataset, optional
        Measurements (:func:`ionochem.load_observations`) drawn on the profiles.

    Returns
    -------
    Path
    """
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    names = list(species) if species else _species(ds, COMPARE_SPECIES)
    alt = ds["altitude"].values
    fig, (ax_n, ax_r) = plt.subplots(1, 2, figsize=(10.5, 6.0), sharey=True,
                                     gridspec_kw={"width_ratios": [1.3, 1.0]})
    positive = []
    for s in names:
        style = dict(STYLE.get(s, dict(lw=1.2)))
        style.pop("ls", None)
        nb = ds["density_baseline"].sel(species=s).values
        nc = ds["density_changed"].sel(species=s).values
        line, = ax_n.plot(np.where(nb > 0, nb, np.nan), alt, ls="-", label=s, **style)
        style.setdefault("color", line.get_color())
        ax_n.plot(np.where(nc > 0, nc, np.nan), alt, ls="--", **style)
        pct = 100.0 * (ds["ratio"].sel(species=s).values - 1.0)
        ax_r.plot(pct, alt, ls="-", label=s, **style)
        positive.append(nb[nb > 0])
        positive.append(nc[nc > 0])
    ax_n.set_xscale("log")
    vals = np.concatenate(positive) if positive else np.array([])
    if vals.size:
        ax_n.set_xlim(max(vals.min(), vals.max() * 1e-6) / 2, vals.max() * 2)
    ax_n.set_ylim(alt.min(), alt.max())
    ax_n.set_xlabel("number density (cm$^{-3}$)")
    ax_n.set_ylabel("altitude (km)")
    ax_n.grid(True, which="major", alpha=0.3)
    from ionochem.plot.observations import overlay_observations
    overlay_observations(ax_n, observed, names)
    handles, labels = ax_n.get_legend_handles_labels()
    from matplotlib.lines import Line2D
    handles += [Line2D([], [], color="0.3", ls="-"), Line2D([], [], color="0.3", ls="--")]
    labels += ["baseline", "changed"]
    ax_n.legend(handles, labels, loc="best", fontsize=9, framealpha=0.9)
    ax_r.axvline(0.0, color="0.5", lw=0.8)
    ax_r.set_xlabel("change, 100 (changed/baseline − 1) (%)")
    ax_r.grid(True, alpha=0.3)
    changes = [ds.attrs.get(k, "") for k in ("changes_set", "changes_scale",
                                               "changes_reactions")]
    changes = "; ".join(c for c in changes if c)
    head = title or ds.attrs.get("title", "")
    fig.suptitle(head + (f"\nchanged: {changes}" if changes else ""), fontsize=10)
    data = _figure_bytes(fig, path)
    plt.close(fig)
    atomic_write_bytes(path, data)
    return Path(path)
