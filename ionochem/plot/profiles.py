"""Profile and time-series figures of a result dataset.

The colours and line styles are the project's own: one fixed colour per main ion so that a
reader learns them once, electrons always black and dashed, minor species thin. Figures are
rendered to memory and written atomically.
"""

from __future__ import annotations

import io
from pathlib import Path

import numpy as np

from ionochem.io.netcdf import atomic_write_bytes

# The project's palette (its own choice; colour-blind-distinguishable hues).
STYLE = {
    "O+(total)": dict(color="#1b7f5b", lw=2.4, ls="-"),
    "O+": dict(color="#1b7f5b", lw=2.4, ls="-"),
    "O2+": dict(color="#c0392b", lw=2.0, ls="-"),
    "NO+": dict(color="#2c5aa0", lw=2.0, ls="-"),
    "N2+": dict(color="#d68910", lw=2.0, ls="-"),
    "N+": dict(color="#7d3c98", lw=1.6, ls="-."),
    "O+(2D)": dict(color="#48c9b0", lw=1.2, ls=":"),
    "O+(2P)": dict(color="#76d7c4", lw=1.2, ls=(0, (1, 2))),
    "N(2D)": dict(color="#8d6e63", lw=1.2, ls=(0, (5, 2, 1, 2))),
    "e": dict(color="black", lw=1.8, ls="--"),
}
PROFILE_SPECIES = ("e", "O+(total)", "O2+", "NO+", "N2+", "N+", "O+(2D)", "O+(2P)")


def _species_to_draw(ds, wanted=PROFILE_SPECIES):
    names = list(ds["species"].values)
    out = [s for s in wanted if s in names]
    if "O+(total)" in out and "O+" in out:
        out.remove("O+")
    if "O+(total)" not in names and "O+" in names and "O+" not in out:
        out.insert(1, "O+")
    if not out:
        roles = ds["role"].values
        out = [s for s, r in zip(names, roles) if r in ("solved", "electron", "derived")][:8]
    return out


def style_density_axes(ax, alt, curves):
    """Log density axis spanning at most six decades below the largest value, altitude axis,
    units and grid: the project's profile layout (shared by the profile figures)."""
    ax.set_xscale("log")
    vals = np.concatenate([np.ravel(c) for c in curves]) if len(curves) else np.array([])
    vals = vals[np.isfinite(vals) & (vals > 0)]
    if vals.size:
        ax.set_xlim(max(vals.min(), vals.max() * 1e-6) / 2, vals.max() * 2)
    ax.set_ylim(alt.min(), alt.max())
    ax.set_xlabel("number density (cm$^{-3}$)")
    ax.set_ylabel("altitude (km)")
    ax.grid(True, which="major", alpha=0.3)


def _figure_bytes(fig, path):
    buf = io.BytesIO()
    fmt = Path(path).suffix.lstrip(".").lower() or "png"
    fig.savefig(buf, format=fmt, dpi=130, bbox_inches="tight")
    return buf.getvalue()


def plot_profiles(ds, path, *, species=None, title=None, observed=None):
    """Densities against altitude on a log density axis (steady results).

    ``observed`` (from :func:`ionochem.load_observations`) adds the measurements of the
    species shown, with error bars.
    """
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    names = species or _species_to_draw(ds)
    alt = ds["altitude"].values
    fig, ax = plt.subplots(figsize=(6.4, 6.0))
    for s in names:
        n = ds["density"].sel(species=s).values
        shown = np.where(n > 0, n, np.nan)
        ax.plot(shown, alt, label=s, **STYLE.get(s, dict(lw=1.0)))
    style_density_axes(ax, alt, [ds["density"].sel(species=s).values for s in names])
    from ionochem.plot.observations import overlay_observations
    overlay_observations(ax, observed, names)
    ax.legend(loc="best", fontsize=9, framealpha=0.9)
    sza = ds.get("solar_zenith_angle")
    subtitle = ""
    if sza is not None and sza.ndim == 0 and np.isfinite(sza.item()):
        subtitle = f"\nsolar zenith angle {sza.item():.1f}°, photochemical equilibrium"
    ax.set_title((title or ds.attrs.get("title", "")) + subtitle, fontsize=10)
    data = _figure_bytes(fig, path)
    plt.close(fig)
    atomic_write_bytes(path, data)
    return Path(path)


def plot_time_series(ds, path, *, altitudes_km=(120.0, 200.0, 300.0), species=None,
                     title=None):
    """Densities against time at a few altitudes (transient results), one panel each."""
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    names = species or _species_to_draw(ds)
    alt = ds["altitude"].values
    chosen = sorted({float(alt[np.argmin(np.abs(alt - a))]) for a in altitudes_km})
    fig, axes = plt.subplots(1, len(chosen), figsize=(4.2 * len(chosen), 4.6), sharey=True,
                             squeeze=False)
    t_h = ds["time"].values / 3600.0
    for ax, a in zip(axes[0], chosen):
        for s in names:
            n = ds["density"].sel(species=s, altitude=a).values
            ax.plot(t_h, np.where(n > 0, n, np.nan), label=s, **STYLE.get(s, dict(lw=1.0)))
        ax.set_yscale("log")
        top = max(float(np.nanmax(ds["density"].sel(species=s, altitude=a).values))
                  for s in names)
        if top > 0:
            # Densities decay without bound after sunset; show six decades below the top.
            ax.set_ylim(max(1e-2, top * 1e-6), top * 3)
        ax.set_xlabel("time since start (h)")
        ax.set_title(f"{a:g} km", fontsize=10)
        ax.grid(True, alpha=0.3)
    axes[0][0].set_ylabel("number density (cm$^{-3}$)")
    axes[0][-1].legend(loc="best", fontsize=8)
    fig.suptitle(title or ds.attrs.get("title", ""), fontsize=11)
    data = _figure_bytes(fig, path)
    plt.close(fig)
    atomic_write_bytes(path, data)
    return Path(path)


def plot_result(ds, path, **kw):
    """Profiles for a steady result, time series for a transient one (``observed`` is
    drawn on profiles only)."""
    if "time" in ds.dims:
        kw.pop("observed", None)
        return plot_time_series(ds, path, **kw)
    return plot_profiles(ds, path, **kw)
