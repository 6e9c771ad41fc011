"""Profile and time-series figures of a result dataset.

The colours and line styles are the project's own: one fixed colour per main ion so that a
reader learns them once, electrons always black and dashed, minor species thin. Figures are
rendered to memory and written atomically.
"""

from __future__ import annotations

import io
import re
from pathlib import Path

import numpy as np

from ionochem.environment.slant import EARTH_RADIUS_KM
from ionochem.errors import InputError
from ionochem.io.netcdf import atomic_write_bytes
from ionochem.plot.equilibrium import doubtful_mask, plot_marked, shade_doubtful
from ionochem.plot.legend import legend_figure_right, legend_right
from ionochem.plot.observations import overlay_observations
from ionochem.plot.palette import (  # noqa: F401 (re-exported: figures import them from here)
    EXTRA_COLOURS,
    LEVEL_MAP,
    LEVEL_SPAN,
    STYLE,
    level_colour,
    style_of,
)


def label_levels(ax, lines, *, vertical=True):
    """Write ``v=K`` beside each level curve among ``lines``, in its colour, near the top
    of the altitude axis, each level a little lower than the one before so that labels of
    neighbouring curves do not overlap (direct labels: the reader need not match shades in a
    legend)."""
    levels = [(ln, m) for ln in lines
              if (m := re.fullmatch(r".+\(v=(\d+)\)", str(ln.get_label())))]
    for j, (line, m) in enumerate(levels):
        x, y = (np.asarray(a, float) for a in line.get_data())
        alt, val = (y, x) if vertical else (x, y)
        ok = np.isfinite(val) & np.isfinite(alt)
        if not ok.any():
            continue
        lo, hi = ax.get_ylim() if vertical else ax.get_xlim()
        target = lo + (0.93 - 0.06 * j) * (hi - lo)
        i = np.flatnonzero(ok)[np.argmin(np.abs(alt[ok] - target))]
        xy = (val[i], alt[i]) if vertical else (alt[i], val[i])
        ax.annotate(f"v={m.group(1)}", xy, xytext=(3, 0), textcoords="offset points",
                    color=line.get_color(), fontsize=7, va="center", ha="left",
                    annotation_clip=True)


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


def save_figure(fig, path):
    """Render ``fig`` in the format of the suffix of ``path``, close it, write atomically.

    Returns
    -------
    Path
    """
    import matplotlib.pyplot as plt
    try:
        data = _figure_bytes(fig, path)
    finally:
        plt.close(fig)
    atomic_write_bytes(path, data)
    return Path(path)


def profiles_figure(ds, *, species=None, title=None, observed=None):
    """Densities against altitude on a log density axis (steady results).

    ``observed`` (from :func:`ionochem.load_observations`) adds the measurements of the
    species shown, with error bars (:mod:`ionochem.plot.observations`).

    Altitudes where a drawn species is not in photochemical equilibrium (``pce_doubtful``) are
    shaded and its curve is faded there (:mod:`ionochem.plot.equilibrium`); the legend sits
    right of the axes, clear of the curves.
    """
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    names = species or _species_to_draw(ds)
    alt = ds["altitude"].values
    fig, ax = plt.subplots(figsize=(6.4, 6.0))
    masks = {s: doubtful_mask(ds, s) for s in names}
    for s in names:
        n = ds["density"].sel(species=s).values
        plot_marked(ax, np.where(n > 0, n, np.nan), alt, masks[s], label=s,
                    **style_of(s, names[:names.index(s)]))
    style_density_axes(ax, alt, [ds["density"].sel(species=s).values for s in names])
    label_levels(ax, ax.get_lines())
    overlay_observations(ax, observed, names)
    handles, labels = ax.get_legend_handles_labels()
    shade = shade_doubtful(ax, alt, masks)
    if shade is not None:
        handles.append(shade)
        labels.append(shade.get_label())
    legend_right(ax, handles, labels)
    sza = ds.get("solar_zenith_angle")
    subtitle = ""
    if sza is not None and sza.ndim == 0 and np.isfinite(sza.item()):
        state = ("O+ transport, other ions in photochemical equilibrium"
                 if ds.attrs.get("transport") else "photochemical equilibrium")
        subtitle = f"\nsolar zenith angle {sza.item():.1f}°, {state}"
    ax.set_title((title or ds.attrs.get("title", "")) + subtitle, fontsize=10)
    return fig


def plot_profiles(ds, path, *, species=None, title=None, observed=None):
    """Write :func:`profiles_figure` to ``path`` (PNG, PDF or SVG, from the suffix).

    Returns
    -------
    Path
    """
    return save_figure(profiles_figure(ds, species=species, title=title,
                                       observed=observed), path)


def chosen_altitudes(ds, altitudes_km):
    """Grid altitudes nearest to the requested altitudes (km), sorted, without repeats.

    Raises
    ------
    InputError
        An altitude outside the grid (by more than one grid spacing), or none given.
    """
    alt = np.asarray(ds["altitude"].values, float)
    wanted = np.atleast_1d(np.asarray(altitudes_km, float))
    if wanted.size == 0:
        raise InputError("give at least one altitude to plot", file="--altitudes")
    step = float(np.max(np.diff(alt))) if alt.size > 1 else 0.0
    outside = wanted[(wanted < alt.min() - step) | (wanted > alt.max() + step)
                     | ~np.isfinite(wanted)]
    if outside.size:
        raise InputError(f"altitude {outside[0]:g} km is outside the grid "
                         f"({alt.min():g}-{alt.max():g} km)", file="--altitudes")
    return sorted({float(alt[np.argmin(np.abs(alt - a))]) for a in wanted})


def time_series_figure(ds, *, altitudes_km=(120.0, 200.0, 300.0), species=None,
                     title=None):
    """Densities against time at chosen altitudes (transient results), one panel each.

    Parameters
    ----------
    ds : xarray.Dataset
        A transient result (``density`` (time, species, altitude)).
    path : str or Path
        Output figure (PNG, PDF or SVG, from the suffix).
    altitudes_km : sequence of float
        One panel per altitude, at the nearest grid altitude.
    species : sequence of str, optional
    title : str, optional

    Notes
    -----
    The bottom axis is hours since the scenario time; the top axis gives the local mean solar
    time (UT + longitude/15 h, *common practice*) and the solar zenith angle at the ticks,
    when the dataset carries them. A dotted line marks sunset at the panel's altitude: the
    time the zenith angle passes 90° + arccos(R/(R + z)), where the straight ray to the Sun
    grazes the solid Earth (the model's own darkness rule, :mod:`ionochem.environment.slant`).
    """
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    names = species or _species_to_draw(ds)
    chosen = chosen_altitudes(ds, altitudes_km)
    fig, axes = plt.subplots(1, len(chosen), figsize=(3.9 * len(chosen) + 0.6, 4.8),
                             sharey=True, squeeze=False, layout="constrained")
    t_h, local_h = _time_hours(ds)
    sza = ds["solar_zenith_angle"].values if "solar_zenith_angle" in ds else None
    for ax, a in zip(axes[0], chosen, strict=True):
        top = 0.0
        for s in names:
            n = ds["density"].sel(species=s, altitude=a).values
            ax.plot(t_h, np.where(n > 0, n, np.nan), label=s,
                    **style_of(s, names[:names.index(s)]))
            top = max(top, float(np.nanmax(n)))
        ax.set_yscale("log")
        if top > 0:
            # Densities decay without bound after sunset; show six decades below the top.
            ax.set_ylim(max(1e-2, top * 1e-6), top * 3)
        ax.set_xlim(t_h.min(), t_h.max())
        ax.set_xlabel("time since the scenario time (h)")
        ax.set_title(f"{a:g} km", fontsize=10)
        ax.grid(True, alpha=0.3)
        if sza is not None:
            _mark_sunset(ax, t_h, sza, a)
        if local_h is not None:
            _top_time_axis(ax, t_h, local_h, sza)
    axes[0][0].set_ylabel("number density (cm$^{-3}$)")
    handles, labels = axes[0][0].get_legend_handles_labels()
    if sza is not None:
        from matplotlib.lines import Line2D
        handles.append(Line2D([], [], color="0.35", ls=":", lw=1.2))
        labels.append("geometric sunset at that\naltitude (solid Earth's shadow;\n"
                      "EUV fades earlier, absorbed\nalong the grazing path)")
    legend_figure_right(fig, handles, labels)
    fig.suptitle(title or ds.attrs.get("title", ""), fontsize=11)
    return fig


def plot_time_series(ds, path, *, altitudes_km=(120.0, 200.0, 300.0), species=None,
                     title=None):
    """Write :func:`time_series_figure` to ``path`` (PNG, PDF or SVG, from the suffix).

    Returns
    -------
    Path
    """
    fig = time_series_figure(ds, altitudes_km=altitudes_km, species=species, title=title)
    return save_figure(fig, path)


def _time_hours(ds):
    """Hours since the scenario time (time,) and local mean solar time in hours (or None).

    Accepts a time coordinate in seconds (bare, or CF "seconds since ...") or decoded
    datetimes.
    """
    t = ds["time"].values
    start = ds.attrs.get("time_utc")
    units = str(ds["time"].attrs.get("units", ""))
    if np.issubdtype(t.dtype, np.datetime64):
        ref = np.datetime64(start.replace("+00:00", "")) if start else t[0]
        seconds = (t - ref) / np.timedelta64(1, "s")
    else:
        seconds = np.asarray(t, float)
        if " since " in units:
            start = units.split(" since ", 1)[1].strip()
    hours = seconds / 3600.0
    lon = ds.attrs.get("longitude_deg")
    if start is None or lon is None:
        return hours, None
    ref = np.datetime64(str(start).replace("+00:00", "").replace("Z", "").strip())
    ut0 = (ref - ref.astype("datetime64[D]")) / np.timedelta64(1, "s") / 3600.0
    return hours, ut0 + hours + float(lon) / 15.0


def _top_time_axis(ax, t_h, local_h, sza):
    """Local time (and zenith angle) at the bottom axis's ticks, on a top axis."""
    from matplotlib.ticker import FixedLocator, FuncFormatter
    offset = float(local_h[0] - t_h[0])
    top = ax.secondary_xaxis("top", functions=(lambda x: x + offset, lambda x: x - offset))
    ticks = [x for x in ax.get_xticks() if t_h.min() - 1e-9 <= x <= t_h.max() + 1e-9]
    top.xaxis.set_major_locator(FixedLocator([x + offset for x in ticks]))

    def fmt(v, _pos):
        m = int(round((v % 24.0) * 60.0)) % (24 * 60)
        text = f"{m // 60:02d}:{m % 60:02d}"
        if sza is not None:
            text += f"\n{np.interp(v - offset, t_h, sza):.0f}°"
        return text

    top.xaxis.set_major_formatter(FuncFormatter(fmt))
    top.tick_params(labelsize=8)
    top.set_xlabel("local solar time" + (", solar zenith angle" if sza is not None else ""),
                   fontsize=9)


def _mark_sunset(ax, t_h, sza, altitude_km):
    """Dotted line where the zenith angle passes the shadow limit of the altitude."""
    limit = 90.0 + np.degrees(np.arccos(EARTH_RADIUS_KM / (EARTH_RADIUS_KM + altitude_km)))
    above = np.asarray(sza, float) > limit
    cross = np.flatnonzero(~above[:-1] & above[1:])
    for i in cross:
        frac = (limit - sza[i]) / (sza[i + 1] - sza[i])
        ax.axvline(t_h[i] + frac * (t_h[i + 1] - t_h[i]), color="0.35", ls=":", lw=1.2,
                   zorder=1)


def plot_result(ds, path, **kw):
    """Profiles for a steady result, time series for a transient one (``observed`` is
    drawn on profiles only)."""
    if "time" in ds.dims:
        kw.pop("observed", None)
        return plot_time_series(ds, path, **kw)
    return plot_profiles(ds, path, **kw)
