"""Physical upper bounds of rate coefficients by reaction order, to warn of absurd rates.

A rate law such as ``1e-30*exp(1e5/Te)`` parses and evaluates, yet reaches 1e71 cm3 s-1 —
nonsense that would silently dominate the column. After the coefficients are evaluated on
the grid, any ordinary rate law (not a photo, photoelectron or prescribed source) above the
bound for its order gives a warning naming the reaction, its largest value and the bound.

Bounds *(common practice)*, each about a hundred times the fastest known process of its kind:

* unimolecular (s-1): 1e3 — the fastest radiative decay in ionospheric schemes is O+(2P) at
  ~0.2 s-1 and autoionizing or predissociating states are not carried as species;
* bimolecular (cm3 s-1): 1e-6 — dissociative recombination of molecular ions is ≤ ~1e-6 at
  the lowest temperatures and ion–molecule reactions are bounded by the Langevin capture rate
  of ~1e-9 (Schunk & Nagy 2009, Ionospheres, 2nd ed., ch. 8) *(from memory)*;
* termolecular (cm6 s-1): 1e-25 — three-body association rates are ≤ ~1e-27 *(from memory)*.

This module knows only the reactants and the coefficients; it reads no file.
"""

from __future__ import annotations

import numpy as np

__all__ = ["RATE_BOUNDS", "UNITS", "implausible_rates", "reaction_order"]

#: Order (number of reactant molecules, the third body M counted) -> upper bound.
RATE_BOUNDS = {1: 1e3, 2: 1e-6, 3: 1e-25}
UNITS = {1: "s-1", 2: "cm3 s-1", 3: "cm6 s-1"}

_SOURCES = frozenset({"photo", "photoelectron", "prescribed"})


def reaction_order(reaction) -> int:
    """Number of reactant molecules of ``reaction`` (stoichiometric counts, M included)."""
    return int(sum(count for _, count in reaction.reactants))


def implausible_rates(reactions, k) -> list[str]:
    """Warnings for rate coefficients above :data:`RATE_BOUNDS` for their order.

    Parameters
    ----------
    reactions : sequence of Reaction
        The reactions, in the column order of ``k``; each has ``id``, ``reactants``,
        ``k.variables``, ``file`` and ``line``.
    k : ndarray (altitude, reaction)
        Evaluated rate coefficients.

    Returns
    -------
    list of str
        One ``file:line: reaction ID: ...`` message per reaction above its bound.
    """
    out = []
    k = np.asarray(k, float)
    for j, r in enumerate(reactions):
        if _SOURCES & set(getattr(r.k, "variables", ())):
            continue
        order = reaction_order(r)
        bound = RATE_BOUNDS.get(order)
        if bound is None:
            continue
        col = k[:, j]
        with np.errstate(invalid="ignore"):
            top = np.nanmax(col) if np.any(np.isfinite(col)) else np.inf
        if not top <= bound:
            where = f"{r.file}:{r.line}: " if getattr(r, "file", None) else ""
            out.append(f"{where}reaction {r.id}: rate coefficient reaches {top:.3g} "
                       f"{UNITS[order]}, far above the physical bound {bound:g} "
                       f"{UNITS[order]} for order {order}; check the rate law")
    return out
