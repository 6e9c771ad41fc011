"""Figure of a fit: profiles before and after, the measurements, residuals, multipliers.

Left: the observed species' densities, baseline dashed and fitted solid, in the project's
colours (:data:`ionochem.plot.palette.STYLE`), with the measurements and their error bars
(:mod:`ionochem.plot.observations`). Middle: normalized residuals (ln obs − ln model)/σ_ln
against altitude, baseline hollow and fitted filled, with the ±1 band. Right: the fitted
multipliers with their 68 % ranges on a log axis (and the prior range, grey). With a
profile likelihood, a fourth panel shows Δχ² against the multiplier. Figures are rendered
to memory and written atomically; nothing here computes chemistry.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ionochem.analysis.fit import observations_of_fit
from ionochem.plot.legend import legend_below
from ionochem.plot.observations import overlay_observations
from ionochem.plot.profiles import STYLE, save_figure, style_density_axes


def plot_fit(ds, path, *, title=None):
    """Write the figure of a fit dataset (:func:`ionochem.analysis.fit.fit`).

    Returns
    -------
    Path
    """
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    obs = observations_of_fit(ds)
    kinds = obs["kind"].values.astype(str)
    names = list(dict.fromkeys(obs["species"].values.astype(str)[kinds != "ratio"]))
    has_profile = "profile_chi2" in ds
    # At most about 1,400 px wide at the project's 130 dpi: with the profile panel the four
    # panels go two by two (one row of four was 2,300 px, too wide to read on a page).
    if has_profile:
        fig, axes = plt.subplots(2, 2, figsize=(10.5, 9.0), layout="constrained")
        axes = axes.ravel()
    else:
        fig, axes = plt.subplots(1, 3, figsize=(10.5, 5.6), layout="constrained",
                                 gridspec_kw={"width_ratios": [1.4, 1.0, 1.0]})
    ax_n, ax_r, ax_m = axes[:3]
    _densities(ax_n, ds, obs, names)
    _residuals(ax_r, ds)
    _multipliers(ax_m, ds)
    if has_profile:
        _profile(axes[3], ds)
    fig.suptitle((title or ds.attrs.get("title", ""))
                 + f"\nfit to {Path(ds.attrs.get('observations', '')).name}", fontsize=10)
    return save_figure(fig, path)


def _densities(ax_n, ds, obs, names):
    """Fitted (solid) and baseline (dashed) densities with the observations."""
    alt = ds["altitude"].values
    curves = []
    for s in names:
        style = dict(STYLE.get(s, dict(lw=1.2)))
        style.pop("ls", None)
        nb = ds["density_baseline"].sel(species=s).values
        nf = ds["density_fitted"].sel(species=s).values
        line, = ax_n.plot(np.where(nf > 0, nf, np.nan), alt, ls="-", label=f"{s} fitted",
                          **style)
        style.setdefault("color", line.get_color())
        ax_n.plot(np.where(nb > 0, nb, np.nan), alt, ls="--", label=f"{s} baseline", **style)
        curves += [nb, nf]
    style_density_axes(ax_n, alt, curves)
    overlay_observations(ax_n, obs, names)
    legend_below(ax_n, bbox_to_anchor=(0.5, -0.11), ncol=2)


def _residuals(ax_r, ds):
    """Residuals in standard deviations of ln n, fitted (filled) and baseline (hollow)."""
    oalt = ds["observation_altitude"].values
    ospec = ds["observation_species"].values.astype(str)
    for s in dict.fromkeys(ospec):
        sel = ospec == s
        colour = STYLE.get(s, {}).get("color", "0.3")
        ax_r.plot(ds["residual_baseline"].values[sel], oalt[sel], "o", mfc="none",
                  color=colour, ms=4)
        ax_r.plot(ds["residual"].values[sel], oalt[sel], "o", color=colour, ms=4, label=s)
    ax_r.axvspan(-1, 1, color="0.85", lw=0)
    ax_r.axvline(0, color="0.4", lw=0.8)
    ax_r.set_xlabel("(ln obs − ln model)/σ  (hollow: baseline)")
    ax_r.set_ylabel("altitude (km)")
    ax_r.set_title(f"χ² {float(ds['chi2_baseline']):.1f} → {float(ds['chi2']):.1f} "
                   f"({int(ds['degrees_of_freedom'])} dof)", fontsize=9)
    ax_r.grid(True, alpha=0.3)
    legend_below(ax_r, bbox_to_anchor=(0.5, -0.11), ncol=3)


def _multipliers(ax_m, ds):
    """Fitted multipliers with their 68 % range, the prior's range in grey."""
    params = list(ds["parameter"].values)
    y = np.arange(len(params))
    m = ds["multiplier"].values
    sig = ds["log_multiplier_sigma"].values
    prior = ds["prior_log_sigma"].values
    finite = np.isfinite(sig)
    lo = np.where(finite, m / np.exp(np.where(finite, sig, 0)), np.nan)
    hi = np.where(finite, m * np.exp(np.where(finite, sig, 0)), np.nan)
    for i in range(len(params)):
        if np.isfinite(prior[i]):
            ax_m.plot([np.exp(-prior[i]), np.exp(prior[i])], [i, i], color="0.75", lw=6,
                      solid_capstyle="butt")
        if finite[i]:
            ax_m.plot([lo[i], hi[i]], [i, i], color="black", lw=1.6)
    ax_m.plot(m, y, "o", color="black")
    ax_m.axvline(1.0, color="0.4", lw=0.8)
    ax_m.set_xscale("log")
    _plain_log_ticks(ax_m)
    ax_m.set_yticks(y)
    ax_m.set_yticklabels(params, fontsize=8)
    ax_m.invert_yaxis()
    ax_m.set_xlabel("multiplier (68 %; grey: prior)")
    ax_m.grid(True, axis="x", which="both", alpha=0.3)


def _profile(ax_p, ds):
    """Δχ² along the profiled parameter (the others refitted)."""
    chi2 = ds["profile_chi2"].values
    ax_p.plot(np.exp(ds["profile_log_multiplier"].values), chi2 - np.nanmin(chi2), "o-",
              color="black", ms=3)
    ax_p.axhline(1.0, color="0.5", ls="--", lw=0.8)
    ax_p.set_xscale("log")
    _plain_log_ticks(ax_p)
    ax_p.set_xlabel(f"multiplier of {ds.attrs.get('profile_parameter', '')}")
    ax_p.set_ylabel("Δχ² (others refitted)")
    ax_p.grid(True, alpha=0.3)


def _plain_log_ticks(ax):
    """Ticks at 1, 2, 5 × 10^k written as plain numbers (multipliers read as 0.5, 2)."""
    from matplotlib.ticker import FuncFormatter, LogLocator, NullFormatter
    ax.xaxis.set_major_locator(LogLocator(base=10, subs=(1.0, 2.0, 5.0)))
    ax.xaxis.set_major_formatter(FuncFormatter(lambda x, _: f"{x:g}"))
    ax.xaxis.set_minor_formatter(NullFormatter())
