"""Figure of ``ionochem discern``: where a measurement separates two rate sets.

One panel per observable (at most six). Without a sweep: the separation against altitude
(x: combined standard deviations, y: altitude), with dotted lines at 1, 2 and 3 σ and the
Monte Carlo check's points with their error bars when it ran. With a sweep: a map of the
separation, altitude against the first swept key (other swept dimensions at the condition
where the separation is largest, said in the title), contours at 1, 2 and 3 σ. Altitudes where
linear propagation is doubtful (``linear_doubtful``) are hatched in both. Legends and notes
sit outside the data. Nothing here computes chemistry; the figure is written atomically.
"""

from __future__ import annotations

import numpy as np

from ionochem.plot.profiles import save_figure

SIGMA_LINES = (1.0, 2.0, 3.0)
MAX_PANELS = 6


def plot_discern(ds, path):
    """Write the separation figure of a ``discern`` dataset to ``path``; returns the Path."""
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    dims = ds.attrs.get("sweep_dimensions", "").split()
    names = [str(o) for o in ds["observable"].values][:MAX_PANELS]
    ncol = min(3, len(names))
    nrow = -(-len(names) // ncol)
    fig, axes = plt.subplots(nrow, ncol, figsize=(3.6 * ncol + 1.0, 4.0 * nrow),
                             squeeze=False, sharey=True)
    for k, name in enumerate(names):
        ax = axes.flat[k]
        if dims:
            _map(fig, ax, ds, name, dims)
        else:
            _profile(ax, ds, name)
        ax.set_title(name, fontsize=9)
        if k % ncol == 0:
            ax.set_ylabel("altitude (km)")
    for ax in list(axes.flat)[len(names):]:
        ax.set_visible(False)
    note = ("hatched: linear propagation doubtful (model spread of ln y > "
            f"{_threshold(ds)}); dotted/contours: 1, 2, 3 combined standard deviations")
    fig.suptitle(f"{ds.attrs.get('title', '')}\nseparation of changed from baseline rates",
                 fontsize=10)
    fig.text(0.5, -0.01, note, ha="center", va="top", fontsize=8)
    fig.tight_layout()
    return save_figure(fig, path)


def _threshold(ds):
    return f"{float(ds['linear_doubtful'].attrs.get('doubtful_log_std', np.nan)):g}"


def _profile(ax, ds, name):
    from matplotlib.ticker import MaxNLocator
    alt = ds["altitude"].values
    sep = ds["separation"].sel(observable=name).values
    bad = ds["linear_doubtful"].sel(observable=name).values.astype(bool)
    ax.plot(sep, alt, color="k", lw=1.2)
    top = max(3.5, float(np.nanmax(sep)) * 1.1 if np.any(np.isfinite(sep)) else 3.5)
    for s in SIGMA_LINES:
        ax.axvline(s, color="0.5", ls=":", lw=0.8)
    ax.fill_betweenx(alt, 0, top, where=bad, facecolor="none", hatch="//",
                     edgecolor="0.7", lw=0.0)
    if "separation_montecarlo" in ds:
        mc = ds["separation_montecarlo"].sel(observable=name).isel(check_point=0).values
        se = ds["separation_montecarlo_stderr"].sel(observable=name).isel(check_point=0)
        step = max(1, alt.size // 25)
        ax.errorbar(mc[::step], alt[::step], xerr=se.values[::step], fmt="o", ms=3,
                    color="tab:red", lw=0.8)
        ax.text(1.0, 1.01, "red: Monte Carlo check", transform=ax.transAxes, ha="right",
                va="bottom", fontsize=7, color="tab:red")
    ax.set_xlim(0, top)
    ax.xaxis.set_major_locator(MaxNLocator(5, prune="upper"))
    ax.set_xlabel("separation (combined standard deviations)")


def _map(fig, ax, ds, name, dims):
    axis = dims[0]
    var = ds["separation"].sel(observable=name)
    held = {}
    if len(dims) > 1:
        band = ds["separation_band"].sel(observable=name).max("band")
        flat = np.nan_to_num(band.transpose(*dims).values, nan=-1.0)
        idx = np.unravel_index(int(np.argmax(flat)), flat.shape)
        held = {d: int(i) for d, i in zip(dims, idx) if d != axis}
    z = var.isel(held).transpose("altitude", axis).values
    bad = ds["linear_doubtful"].sel(observable=name).isel(held).transpose("altitude", axis)
    x = np.asarray(ds[axis].values)
    xs = x if x.dtype.kind in "fiu" else np.arange(x.size)
    alt = ds["altitude"].values
    mesh = ax.pcolormesh(xs, alt, z, cmap="viridis", shading="nearest", vmin=0.0)
    if z.shape[1] > 1:
        cs = ax.contour(xs, alt, z, levels=list(SIGMA_LINES), colors="w", linewidths=0.8)
        ax.clabel(cs, fmt=lambda v: f"{v:g}σ", fontsize=7)
    _hatch(ax, xs, alt, bad.values.astype(bool))
    fig.colorbar(mesh, ax=ax).set_label("separation (combined std. dev.)")
    unit = ds[axis].attrs.get("units", "")
    ax.set_xlabel(axis + (f" ({unit})" if unit and unit != "1" else ""))
    if x.dtype.kind not in "fiu":
        ax.set_xticks(xs, [str(v) for v in x])
    if held:
        ax.text(0.0, 1.01, ", ".join(f"{d} = {ds[d].values[i]:g}" for d, i in held.items()),
                transform=ax.transAxes, fontsize=7, va="bottom")


def _edges(c):
    c = np.asarray(c, float)
    if c.size == 1:
        return np.array([c[0] - 0.5, c[0] + 0.5])
    mid = 0.5 * (c[1:] + c[:-1])
    return np.concatenate([[2 * c[0] - mid[0]], mid, [2 * c[-1] - mid[-1]]])


def _hatch(ax, x, alt, bad):
    """Hatch the cells (altitude, x) where ``bad``, over the same cells the map draws."""
    if not bad.any():
        return
    coll = ax.pcolor(_edges(x), _edges(alt), np.ma.masked_where(~bad, bad.astype(float)),
                     hatch="//", linewidth=0.0)
    coll.set_facecolor("none")
    coll.set_edgecolor("k")
