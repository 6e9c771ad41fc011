"""The level-distribution figure: how a vibrational family is shared among its levels.

Left panel: ``level_fraction`` of each level against altitude (log axis, so the small
excited shares are readable); right panel: the population-weighted (effective) rate
coefficient of each loss family divided by its v = 0 member's rate coefficient: what an
unresolved model would have to assume at each height relative to the ground-state rate
(families without a v = 0 member, such as relaxation, are left out). When the dataset has
them, a third panel shows each class of process's share of the loss of v = 0 (dashed) and
v = 1 (solid) (``level_loss_share`` summed over ``loss_process_class``), and a fourth the
N2+ vibrational temperature from the v = 1/v = 0 ratio beside Te and Tn. The figure reads
one steady result dataset. Draws only; computes no chemistry.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ionochem.errors import InputError
from ionochem.io.netcdf import atomic_write_bytes
from ionochem.plot.legend import legend_below
from ionochem.plot.profiles import _figure_bytes, label_levels, level_colour

_DASHES = ("-", (0, (6, 2)), (0, (2, 2)), (0, (6, 2, 1, 2)), (0, (1, 1)), (0, (10, 3)))

__all__ = ["plot_levels", "family_members"]

_EFFECTIVE = ("effective_rate_coefficient", "effective_rate_coefficient_first_order",
              "effective_rate_coefficient_third_order")


def family_members(ds, family: str) -> list[str]:
    """Level species of ``family`` (e.g. ``"N2+"``) in the dataset, in level order."""
    names = [str(s) for s in ds["species"].values]
    members = [s for s in names if s.startswith(f"{family}(") and "v=" in s
               and s.split("(", 1)[0] == family.split("(", 1)[0]]
    def level(s):
        state = s[s.index("(") + 1:-1]
        return int(state.split("v=")[1].split(",")[0])
    return sorted(members, key=level)


_CLASS_COLOURS = {"recombination": "tab:red", "electron_collision": "tab:purple",
                  "relaxation": "tab:green", "ion_neutral": "tab:blue"}


def _loss_share_panel(ax, ds, members):
    """Share of the loss of v = 0 (dashed) and v = 1 (solid) by class of process."""
    alt = ds["altitude"].values
    share = ds["level_loss_share"]
    flags = ds["loss_process_class"]
    meanings = str(flags.attrs.get("flag_meanings", "")).split()
    values = [int(x) for x in np.atleast_1d(flags.attrs.get("flag_values", []))]
    names = dict(zip(values, meanings, strict=False))
    classes = np.array([names.get(int(x), "") for x in flags.values])
    for lvl, style in zip(members[:2], ("--", "-"), strict=False):
        x = share.sel(species=lvl).values                       # (process, altitude)
        for cls, colour in _CLASS_COLOURS.items():
            rows = classes == cls
            if not rows.any():
                continue
            y = np.nansum(x[rows], axis=0)
            ax.plot(y, alt, ls=style, color=colour, lw=1.5,
                    label=f"{cls.replace('_', ' ')}, {lvl}")
    ax.set_xlim(0.0, 1.0)
    ax.set_xlabel("share of the level's loss")
    ax.grid(True, alpha=0.3)
    legend_below(ax, ncol=2, fontsize=7)


def _temperature_panel(ax, ds, family):
    """N2+ vibrational temperature (v = 1/v = 0) beside Te and Tn."""
    alt = ds["altitude"].values
    if family == "N2+" and "n2plus_vibrational_temperature" in ds:
        ax.plot(ds["n2plus_vibrational_temperature"].values, alt, color="k", lw=2.0,
                label="N2+ vibrational (v=1/v=0)")
    for name, colour in (("Te", "tab:orange"), ("Tn", "tab:gray")):
        if name in ds and ds[name].dims == ("altitude",):
            ax.plot(ds[name].values, alt, color=colour, lw=1.2, ls=":", label=name)
    ax.set_xlabel("temperature (K)")
    ax.grid(True, alpha=0.3)
    legend_below(ax, ncol=1, fontsize=7)


def plot_levels(ds, path, *, family: str = "N2+", title=None):
    """Write the level-distribution figure of ``family`` for a steady result dataset.

    Parameters
    ----------
    ds : xarray.Dataset
        A steady result with ``level_fraction`` (and, if present,
        ``effective_rate_coefficient``).
    path : str or Path
        Output file (PNG, PDF or SVG by suffix), written atomically.
    family : str
        The family species (its derived total's name), default ``"N2+"``.

    Raises
    ------
    InputError
        The dataset has no level fractions for ``family`` (or is transient).
    """
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    if "level_fraction" not in ds or "time" in ds["level_fraction"].dims:
        raise InputError("the level figure needs a steady result with level_fraction")
    members = family_members(ds, family)
    if not members:
        raise InputError(f"no vibrational levels of {family} in the result")
    alt = ds["altitude"].values
    extra = "level_loss_share" in ds and "loss_process_class" in ds
    ncol = 4 if extra else 2
    fig, axes = plt.subplots(1, ncol, figsize=(5.0 * ncol, 5.6), sharey=True,
                             layout="constrained")
    ax, bx = axes[0], axes[1]
    top = max(len(members) - 1, 1)
    for i, s in enumerate(members):
        f = ds["level_fraction"].sel(species=s).values
        ax.plot(np.where(f > 0, f, np.nan), alt, label=s,
                color=level_colour(i, top), lw=2.0 if i == 0 else 1.4)
    ax.set_xscale("log")
    ax.set_xlim(1e-4, 1.5)
    ax.set_xlabel(f"fraction of {family} in each level")
    ax.set_ylabel("altitude (km)")
    ax.set_ylim(alt.min(), alt.max())
    ax.grid(True, which="major", alpha=0.3)
    label_levels(ax, ax.get_lines())
    legend_below(ax, ncol=3)
    drawn = 0
    k_all = None
    for name in ("rate_coefficient", "rate_coefficient_first_order",
                 "rate_coefficient_third_order"):
        if name in ds:
            k_all = ds[name] if k_all is None else k_all.fillna(ds[name])
    reactions = set(ds["reaction"].values) if "reaction" in ds.coords else set()
    curves = []
    for name in _EFFECTIVE:
        if name not in ds or k_all is None:
            continue
        var = ds[name]
        species = ds.coords["family_species"].values if "family_species" in ds.coords \
            else [family] * var.sizes["family_reaction"]
        for fam, sp in zip(var["family_reaction"].values, species, strict=True):
            ground = str(fam).replace("(v)", "(v=0)")
            if sp != family or ground not in reactions:
                continue     # e.g. relaxation, which has no v = 0 member
            k = var.sel(family_reaction=fam).values
            k0 = k_all.sel(reaction=ground).values
            with np.errstate(divide="ignore", invalid="ignore"):
                ratio = np.where(k0 > 0, k / k0, np.nan)
            if not np.any(np.isfinite(ratio)):
                continue
            curves.append((str(fam), ratio))
    # Families often coincide (ratio 1 where no level data exist; branches of one
    # recombination): one curve each, labelled with every family it stands for.
    groups = []
    for fam, ratio in curves:
        for g in groups:
            if np.allclose(g[1], ratio, rtol=1e-9, atol=0.0, equal_nan=True):
                g[0].append(fam)
                break
        else:
            groups.append(([fam], ratio))
    for fams, ratio in groups:
        bx.plot(ratio, alt, lw=1.6, ls=_DASHES[drawn % len(_DASHES)], label=",\n".join(fams))
        drawn += 1
    bx.axvline(1.0, color="0.5", lw=0.8, ls=":")
    bx.set_xlabel("effective rate coefficient / rate of v = 0")
    bx.grid(True, alpha=0.3)
    if drawn:
        legend_below(bx, ncol=len(groups), fontsize=7)
    if extra:
        _loss_share_panel(axes[2], ds, members)
        _temperature_panel(axes[3], ds, family)
    fig.suptitle((title or ds.attrs.get("title", "")) + f"\nlevels of {family}", fontsize=10)
    data = _figure_bytes(fig, path)
    plt.close(fig)
    atomic_write_bytes(path, data)
    return Path(path)
