"""The map of a sweep: altitude against a swept key.

With sensitivities (``ionochem sweep --sensitivity``) the map shows where a chosen reaction
controls a chosen ion: S = ∂ln n/∂ln k on a diverging colour map centred at zero (red: a
larger k raises the density; blue: lowers it), with contours at |S| = 0.1 and 0.5 so "this
reaction matters here" reads at a glance. Without sensitivities it shows log10 of the
species' density. Other swept dimensions are held at their first value (said in the
title); a diurnal sweep maps against ``local_hour``. Nothing here computes chemistry; the
figure is rendered to memory and written atomically.
"""

from __future__ import annotations

import re

import numpy as np

from ionochem.errors import InputError
from ionochem.io.netcdf import atomic_write_bytes
from ionochem.plot.profiles import _figure_bytes

CMAP = "RdBu_r"
#: One-signed sensitivities (all S ≥ 0 or all S ≤ 0 on the map) get a sequential map from
#: zero instead, so half of a diverging scale is not spent on values that never occur.
CMAP_POSITIVE = "Reds"
CMAP_NEGATIVE = "Blues_r"
LEVELS = (0.1, 0.5)
#: Densities below this are numerical dust of a decaying column (cm-3), left blank.
FLOOR_CM3 = 1e-3
PREFERRED_SPECIES = ("N2+", "O2+", "NO+", "O+", "e")


def _axes_of(ds):
    dims = ds.attrs.get("sweep_dimensions", "").split()
    if "local_hour" in ds.dims and "local_hour" not in dims:
        dims = [*dims, "local_hour"]
    return dims


def plot_sweep_map(ds, path, *, species=None, reaction=None, members=None, axis=None,
                   title=None):
    """Map of a sweep dataset: sensitivity of ``species`` to ``reaction`` (or its density)
    against altitude and the swept ``axis``.

    Parameters
    ----------
    ds : xarray.Dataset
        A sweep (``density`` and, with ``--sensitivity``, ``sensitivity``).
    path : str or Path
        Output figure (PNG, PDF, SVG, from the suffix).
    species : str, optional
        Default: the first of N2+, O2+, NO+, O+, e present.
    reaction : str, optional
        Default: the reaction with the largest |S| of the species over the map.
    members : list of str, optional
        Reaction ids ``reaction`` stands for (a family's members): the map shows the sum of
        their sensitivities, the exact sensitivity to one factor on all of them.
    axis : str, optional
        Swept dimension of the x axis; default the first (``local_hour`` for a diurnal run
        without other keys).
    title : str, optional

    Returns
    -------
    Path
    """
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    dims = _axes_of(ds)
    if not dims:
        raise InputError("the sweep has no swept dimension to map", file="--plot")
    axis = axis or dims[0]
    if axis not in dims:
        raise InputError(f"{axis!r} is not a swept dimension (have {', '.join(dims)})",
                         file="--map-axis")
    names = [str(s) for s in ds["species"].values]
    if species is None:
        species = next((s for s in PREFERRED_SPECIES if s in names), names[0])
    if species not in names:
        raise InputError(f"species {species!r} is not in the sweep", file="--map-species")
    held = {d: 0 for d in dims if d != axis}
    sens = "sensitivity" in ds
    var = ds["sensitivity"] if sens else ds["density"]
    var = var.sel(species=species).isel(held)
    if "time" in var.dims:
        var = var.isel(time=-1)
    label_held = ", ".join(f"{d} = {_text(ds[d].values[0])}" for d in held)
    if sens:
        z, label = _sensitivity_map(ds, var, species, reaction, members, held, axis)
    else:
        z = var.transpose("altitude", axis).values
        with np.errstate(divide="ignore", invalid="ignore"):
            z = np.log10(np.where(z > FLOOR_CM3, z, np.nan))
        label = f"log10 n({species}) (n in cm-3; below {FLOOR_CM3:g} not drawn)"
    x = np.asarray(ds[axis].values)
    alt = ds["altitude"].values
    fig, ax = plt.subplots(figsize=(7.0, 5.0))
    numeric = x.dtype.kind in "fiu"
    xs = x if numeric else np.arange(x.size)
    if sens:
        mesh = _draw_sensitivity(ax, xs, alt, z)
    else:
        mesh = ax.pcolormesh(xs, alt, z, cmap="viridis", shading="nearest")
    cbar = fig.colorbar(mesh, ax=ax)
    cbar.set_label(label)
    ax.set_xlabel(_axis_label(ds, axis))
    if not numeric:
        ax.set_xticks(xs, [str(v) for v in x])
    ax.set_ylabel("altitude (km)")
    head = title or _base_title(ds, axis, x)
    sub = label.split("\n")[0] + (f"; {label_held}" if label_held else "")
    ax.set_title(f"{head}\n{sub}" if head else sub, fontsize=9)
    data = _figure_bytes(fig, path)
    plt.close(fig)
    return atomic_write_bytes(path, data)


def _sensitivity_map(ds, var, species, reaction, members, held, axis):
    """(z on (altitude, axis), colour-bar label) of the sensitivity of ``species`` to
    ``reaction`` (default: the unit, or reaction, with the largest |S| on the map), summed
    over ``members``."""
    rids = [str(r) for r in ds["reaction"].values]
    if reaction is None and "sensitivity_unit" in ds and "reaction_unit" in ds.coords:
        # The unit of analysis (a whole family, a tie) with the largest |S| on the map.
        uvar = ds["sensitivity_unit"].sel(species=species).isel(held)
        uvar = uvar.isel(time=-1) if "time" in uvar.dims else uvar
        units = [str(u) for u in ds["unit"].values]
        big = np.abs(uvar.transpose("unit", ...).values).reshape(len(units), -1)
        reaction = units[int(np.nanargmax(np.nanmax(np.nan_to_num(big), axis=1)))]
        members = [r for r, u in zip(rids, ds["reaction_unit"].values) if u == reaction]
    elif reaction is None:
        big = np.abs(var.transpose("reaction", ...).values).reshape(len(rids), -1)
        reaction = rids[int(np.nanargmax(np.nanmax(np.nan_to_num(big), axis=1)))]
    members = list(members) if members else [reaction]
    missing = [m for m in members if m not in rids]
    if missing:
        raise InputError(f"reaction {missing[0]!r} is not in the sweep",
                         file="--map-reaction")
    z = var.sel(reaction=members).sum("reaction", skipna=False) \
        .transpose("altitude", axis).values
    label = f"S = ∂ln n({species}) / ∂ln k({reaction})"
    eq = _equation(ds, members)
    if eq:
        label += f"\n{reaction}: {eq}"
    return z, label


def _draw_sensitivity(ax, xs, alt, z):
    """The sensitivity map: one-sided colours when S keeps one sign, diverging around 0
    otherwise, with |S| contours; returns the mesh."""
    from matplotlib.colors import TwoSlopeNorm
    lim = float(np.nanmax(np.abs(z))) if np.any(np.isfinite(z)) else 1.0
    lim = lim or 1.0
    if np.nanmin(z) >= 0.0:
        mesh = ax.pcolormesh(xs, alt, z, cmap=CMAP_POSITIVE, shading="nearest",
                             vmin=0.0, vmax=lim)
    elif np.nanmax(z) <= 0.0:
        mesh = ax.pcolormesh(xs, alt, z, cmap=CMAP_NEGATIVE, shading="nearest",
                             vmin=-lim, vmax=0.0)
    else:
        mesh = ax.pcolormesh(xs, alt, z, cmap=CMAP, shading="nearest",
                             norm=TwoSlopeNorm(0.0, -lim, lim))
    if z.shape[1] > 1 and z.shape[0] > 1:
        cs = ax.contour(xs, alt, np.abs(z), levels=[v for v in LEVELS if v < lim],
                        colors="k", linewidths=[0.6, 1.2][:len(LEVELS)])
        ax.clabel(cs, fmt=lambda v: f"|S|={v:g}", fontsize=7)
    return mesh


#: Readable names of the swept keys on the x axis (units from the coordinate).
AXIS_NAMES = {"local_hour": "local solar time", "day_of_year": "day of year",
              "f107": "F10.7", "f107a": "81-day mean F10.7", "ap": "ap index",
              "latitude_deg": "latitude", "longitude_deg": "longitude"}
#: Units written the way a reader expects them on an axis.
UNIT_TEXT = {"1e-22 W m-2 Hz-1": "sfu", "degree_north": "°N", "degree_east": "°E"}


def _axis_label(ds, axis):
    """``local solar time (h)``, ``F10.7 (sfu)``: the swept key in words with its unit."""
    unit = str(ds[axis].attrs.get("units", ""))
    unit = UNIT_TEXT.get(unit, unit)
    return AXIS_NAMES.get(axis, axis) + (f" ({unit})" if unit and unit != "1" else "")


def _base_title(ds, axis, x):
    """The scenario's title as the *base* of the sweep, and what the x axis sweeps: a title
    such as "equinox noon" is no longer the time of every column."""
    head = ds.attrs.get("title", "")
    xs = np.asarray(x)
    span = (f"{_text(xs.min())}–{_text(xs.max())}" if xs.dtype.kind in "fiu" and xs.size > 1
            else ", ".join(_text(v) for v in xs))
    unit = _axis_label(ds, axis)
    name, paren, rest = unit.partition(" (")
    swept = f"swept: {name} {span}" + (f" ({rest}" if paren else "")
    return f"base scenario: {head}; {swept}" if head else swept


def _equation(ds, members):
    """The equation of the mapped reaction (its first member), ``→`` for ``->``."""
    if "equation" not in ds.coords or not members:
        return ""
    try:
        eq = str(ds["equation"].sel(reaction=members[0]).values).replace(" -> ", " → ")
    except (KeyError, IndexError):
        return ""
    # A family's map sums its members: write the level as v.
    return re.sub(r"\(v=\d+\)", "(v)", eq) if len(members) > 1 else eq


def _text(v):
    v = np.asarray(v).item()
    return f"{v:g}" if isinstance(v, float) else str(v)
