"""Legends that never cover data: placed outside the axes, to the right of the panels.

A legend inside the axes hides curves wherever matplotlib's "best" spot happens to fall on
data (electrons at 160–240 km, the metastables in the auroral column, the molecular ions in
the uncertainty bands). Every figure of the project puts its legend outside the data area
with these helpers; the saved figure grows to hold it (``bbox_inches="tight"``).
"""

from __future__ import annotations

FONT_SIZE = 9


def legend_right(ax, handles=None, labels=None, **kw):
    """A legend to the right of ``ax``, top-aligned with it; returns the Legend."""
    if handles is None:
        handles, labels = ax.get_legend_handles_labels()
    opts = dict(loc="upper left", bbox_to_anchor=(1.02, 1.0), borderaxespad=0.0,
                fontsize=FONT_SIZE, frameon=False)
    opts.update(kw)
    return ax.legend(handles, labels, **opts)


def legend_figure_right(fig, handles, labels, **kw):
    """A figure legend right of all panels (needs ``layout="constrained"``)."""
    opts = dict(loc="outside right upper", fontsize=FONT_SIZE, frameon=False)
    opts.update(kw)
    return fig.legend(handles, labels, **opts)


def legend_below(ax, handles=None, labels=None, **kw):
    """A legend under ``ax``'s x label, centred on it; returns the Legend."""
    if handles is None:
        handles, labels = ax.get_legend_handles_labels()
    opts = dict(loc="upper center", bbox_to_anchor=(0.5, -0.13), borderaxespad=0.0,
                fontsize=FONT_SIZE - 1, frameon=False)
    opts.update(kw)
    return ax.legend(handles, labels, **opts)
