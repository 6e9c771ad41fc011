"""Figures of the laboratory toolkit: rate coefficients against temperature (with fits and
their bands) and merged-beam rate curves against detuning energy (with a measured curve and
its residuals).

Axes carry their quantity and unit; legends sit outside the plotting area, never over data.
Figures are rendered to memory and written atomically; nothing here computes rates.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ionochem.io.netcdf import atomic_write_bytes
from ionochem.plot.profiles import _figure_bytes

#: Line colours of successive levels (the project's palette order).
LEVEL_COLOURS = ("#2c5aa0", "#c0392b", "#1b7f5b", "#d68910", "#7d3c98", "#8d6e63",
                 "#48c9b0", "#34495e")


def _outside_legend(ax):
    handles, labels = ax.get_legend_handles_labels()
    if handles:
        ax.legend(loc="upper left", bbox_to_anchor=(1.02, 1.0), fontsize=8, frameon=False,
                  borderaxespad=0.0)


def _positive(a):
    a = np.asarray(a, float)
    return np.where(a > 0, a, np.nan)


def plot_rate_curves(temperature_K, curves, path, *, fits=None, bands=None, title=None,
                     temperature_label="electron temperature T$_e$ (K)"):
    """Rate coefficients against temperature, log-log.

    Parameters
    ----------
    temperature_K : array_like, shape (temperature,)
    curves : dict of str to array_like
        Computed (or measured) rate coefficients per column (cm3 s-1), drawn as points.
    path : str or Path
        Output figure; the format follows the suffix.
    fits : dict of str to array_like, optional
        Fitted k(T) per column, drawn as lines.
    bands : dict of str to (low, high), optional
        Shaded band per column.
    title : str, optional
    temperature_label : str
        Label of the temperature axis, with its unit.
    """
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    T = np.asarray(temperature_K, float)
    fig, ax = plt.subplots(figsize=(7.6, 5.0))
    for i, (name, k) in enumerate(curves.items()):
        colour = LEVEL_COLOURS[i % len(LEVEL_COLOURS)]
        ax.plot(T, _positive(k), "o", ms=3, color=colour, label=f"{name}")
        if bands and name in bands:
            lo, hi = bands[name]
            ax.fill_between(T, _positive(lo), _positive(hi), color=colour, alpha=0.18, lw=0,
                            label=f"{name} band")
        if fits and name in fits:
            ax.plot(T, _positive(fits[name]), "-", lw=1.4, color=colour, label=f"{name} fit")
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlabel(temperature_label)
    ax.set_ylabel("rate coefficient (cm$^3$ s$^{-1}$)")
    ax.grid(True, which="major", alpha=0.3)
    _outside_legend(ax)
    if title:
        ax.set_title(title, fontsize=10)
    data = _figure_bytes(fig, path)
    plt.close(fig)
    atomic_write_bytes(path, data)
    return Path(path)


def plot_beam_curve(detuning_eV, theory, path, *, measured=None, measured_sigma=None,
                    total=None, total_label="theory at the measured points", title=None):
    """Merged-beam rate coefficient against detuning energy, log-log, with residuals.

    Parameters
    ----------
    detuning_eV : array_like, shape (point,)
        Detuning energies of the theory curves (eV).
    theory : dict of str to array_like
        Theory curves (cm3 s-1) per column.
    path : str or Path
    measured : (detuning_eV, rate_cm3_s), optional
        A measured curve, drawn as points; a lower panel then shows the residuals
        (measured - theory) / error (or relative residuals without errors).
    measured_sigma : array_like, optional
        One-sigma errors of the measured rates (cm3 s-1).
    total : array_like, optional
        The theory curve compared with the measurement (at the measured detunings): the
        only column, or the fitted level mix.
    total_label : str
        Legend label of ``total``.
    title : str, optional
    """
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    Ed = np.asarray(detuning_eV, float)
    show = Ed > 0                              # log axis: zero detuning is not drawn
    if measured is not None:
        fig, (ax, ax_r) = plt.subplots(2, 1, figsize=(7.6, 6.4), sharex=True,
                                       gridspec_kw={"height_ratios": [3, 1.2]})
    else:
        fig, ax = plt.subplots(figsize=(7.6, 5.0))
        ax_r = None
    for i, (name, k) in enumerate(theory.items()):
        ax.plot(Ed[show], _positive(np.asarray(k)[show]), "-", lw=1.3,
                color=LEVEL_COLOURS[i % len(LEVEL_COLOURS)], label=f"theory {name}")
    if measured is not None:
        mE, mk = (np.asarray(a, float) for a in measured)
        ms = mE > 0
        err = None if measured_sigma is None else np.asarray(measured_sigma, float)[ms]
        ax.errorbar(mE[ms], _positive(mk[ms]), yerr=err, fmt="o", ms=3, color="black",
                    elinewidth=0.8, label="measured")
        if total is not None:
            tot = np.asarray(total, float)
            ax.plot(mE[ms], _positive(tot[ms]), "--", lw=1.2, color="#555555",
                    label=total_label)
            if measured_sigma is not None:
                r = (mk - tot) / np.asarray(measured_sigma, float)
                ax_r.set_ylabel("residual / error")
            else:
                r = mk / tot - 1.0
                ax_r.set_ylabel("relative residual")
            ax_r.axhline(0.0, color="#888888", lw=0.8)
            ax_r.plot(mE[ms], r[ms], "o", ms=3, color="black")
            ax_r.grid(True, alpha=0.3)
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_ylabel("rate coefficient (cm$^3$ s$^{-1}$)")
    (ax_r if ax_r is not None else ax).set_xlabel("detuning energy E$_d$ (eV)")
    ax.grid(True, which="major", alpha=0.3)
    _outside_legend(ax)
    if title:
        ax.set_title(title, fontsize=10)
    data = _figure_bytes(fig, path)
    plt.close(fig)
    atomic_write_bytes(path, data)
    return Path(path)
