"""The project's palette: line styles of species and shades of vibrational levels.

Every figure takes its colours from here, so a species looks the same in every figure.
"""

from __future__ import annotations

import re

# The project's palette (its own choice; colour-blind-distinguishable hues). Only electrons
# are dashed; the two O+ metastables differ in colour and pattern (dotted, solid thin) so
# that they can be told apart in print.
STYLE = {
    "O+(total)": dict(color="#1b7f5b", lw=2.4, ls="-"),
    "O+": dict(color="#1b7f5b", lw=2.4, ls="-"),
    "O2+": dict(color="#c0392b", lw=2.0, ls="-"),
    "NO+": dict(color="#2c5aa0", lw=2.0, ls="-"),
    "N2+": dict(color="#d68910", lw=2.0, ls="-"),
    "N+": dict(color="#7d3c98", lw=1.6, ls="-."),
    "O+(2D)": dict(color="#0097a7", lw=1.5, ls=(0, (1, 1.5))),
    "O+(2P)": dict(color="#d81b60", lw=1.1, ls="-"),
    "N(2D)": dict(color="#8d6e63", lw=1.2, ls=(0, (5, 2, 1, 2))),
    # Electrons on top of the ion they equal (NO+ after sunset, O+ high up).
    "e": dict(color="black", lw=1.8, ls="--", zorder=3),
}
# Colours for species outside the palette, chosen apart from its hues.
EXTRA_COLOURS = ("#6b8e23", "#5d6d7e", "#b7950b", "#a04000", "#117a65", "#884ea0")
# Vibrational levels: a sequential map (cividis, dark blue to olive yellow, monotonic in
# lightness and readable by colour-blind readers) over this range, v = 0 darkest; the top
# stays dark enough to read on white. Every level curve is also labelled at its end.
LEVEL_MAP = ("cividis", 0.0, 0.78)
#: Highest level the map spreads over (a higher one takes the last colour).
LEVEL_SPAN = 4


def style_of(name, others=()):
    """Line style of a species: the palette's, a level's shade of its family's colour, or
    the next of :data:`EXTRA_COLOURS` (``others``: the names drawn before it).

    Returns
    -------
    dict
        Matplotlib line properties (``color``, ``lw`` and, for palette species, ``ls``).
    """
    if name in STYLE:
        return dict(STYLE[name])
    m = re.fullmatch(r"(.+)\(v=(\d+)\)", str(name))
    if m:
        return dict(color=level_colour(int(m.group(2))), lw=1.4)
    unknown = [o for o in others if o not in STYLE and not re.fullmatch(r".+\(v=\d+\)", o)]
    return dict(color=EXTRA_COLOURS[len(unknown) % len(EXTRA_COLOURS)], lw=1.2)


def level_colour(v, top=LEVEL_SPAN):
    """Colour of vibrational level ``v`` (0 … ``top``) on :data:`LEVEL_MAP`, RGB tuple."""
    from matplotlib import colormaps
    name, lo, hi = LEVEL_MAP
    t = lo + (hi - lo) * min(max(int(v), 0), top) / max(top, 1)
    return tuple(float(c) for c in colormaps[name](t)[:3])
