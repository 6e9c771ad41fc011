"""Production and loss budget of one species at one altitude, ranked with shares.

Users read these to see why a density, or a sensitivity, is what it is. Works on a result
dataset alone (``reaction_rate`` and ``net_stoichiometry``), so it applies to files written
earlier too.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ionochem.analysis.units import sum_over_units, unit_map_from_dataset
from ionochem.errors import InputError


@dataclass
class Budget:
    species: str
    altitude_km: float
    density: float
    production: list      # (unit or reaction id, equation, rate cm-3 s-1, share %)
    loss: list
    members: bool = False  # True: one line per reaction; False: per unit of analysis


def budget_table(ds, species: str, altitude_km: float, *, members: bool = False) -> Budget:
    """Rank the units of analysis (or, with ``members``, the reactions one by one) producing
    and destroying ``species`` at the level nearest ``altitude_km``; shares are percentages
    of the gross production or loss.

    A unit (a whole family of levels, a tie of the list: :mod:`ionochem.analysis.units`) is
    one line carrying the sum of its members' net contributions ν_ij r_j, on the production
    side when the sum is positive. Members that make and destroy the species (a relaxation
    N2+(v) → N2+(v=0) seen from N2+(v=0)) net out inside their unit, so the unit totals equal
    the member totals only when no unit has members of both signs; the reactions' own gross
    figures are what ``members`` shows.
    """
    if "time" in ds["density"].dims:
        raise InputError("the result has a time axis; select one time first "
                         "(ds.isel(time=-1))", file="ds")
    names = list(ds["species"].values)
    if species not in names:
        raise InputError(f"no species {species!r} in the result "
                         f"(species: {', '.join(names)})", file="species")
    alt = ds["altitude"].values
    if not alt.min() - 1e-9 <= altitude_km <= alt.max() + 1e-9:
        raise InputError(f"{altitude_km:g} km is outside the grid "
                         f"{alt.min():g}-{alt.max():g} km", file="altitude_km")
    a = int(np.argmin(np.abs(alt - altitude_km)))
    nu = ds["net_stoichiometry"].sel(species=species).values
    rate = ds["reaction_rate"].values[:, a]
    contrib = nu * rate
    ids = list(ds["reaction"].values)
    eqs = list(ds["equation"].values)
    if not members:
        umap = unit_map_from_dataset(ds)
        contrib = sum_over_units(contrib, umap, 0)
        ids, eqs = list(umap.names), list(umap.labels)

    def ranked(mask, values):
        total = values[mask].sum()
        order = [j for j in np.argsort(-values) if mask[j] and values[j] > 0]
        return [(ids[j], eqs[j], float(values[j]),
                 100.0 * float(values[j]) / total if total > 0 else 0.0) for j in order]

    return Budget(species, float(alt[a]), float(ds["density"].sel(species=species).values[a]),
                  ranked(contrib > 0, contrib), ranked(contrib < 0, -contrib), members)


def format_budget(b: Budget, top: int = 10) -> str:
    """The budget as text: production then loss, each ranked, ids aligned."""
    lines = [f"budget of {b.species} at {b.altitude_km:g} km (density {b.density:.3e} cm-3)"
             + ("" if b.members else "; a family or tie is one line (--members: apart)")]
    width = max([len(r[0]) for r in (*b.production[:top], *b.loss[:top])] + [8])
    for title, rows in (("production", b.production), ("loss", b.loss)):
        total = sum(r[2] for r in rows)
        lines.append(f"  {title}: {total:.3e} cm-3 s-1")
        for rid, eq, val, share in rows[:top]:
            lines.append(f"    {share:6.2f} %  {val:10.3e}  {rid:<{width}}  {eq}")
        if len(rows) > top:
            rest = sum(r[3] for r in rows[top:])
            lines.append(f"    {rest:6.2f} %  ({len(rows) - top} more)")
    return "\n".join(lines)
