"""Per-reaction numbers gathered into units of analysis (a plain reaction, a whole family of
vibrational levels, or a tie of the list: :mod:`ionochem.mechanism.units`).

A unit's normalized sensitivity is the derivative with respect to one common multiplier of
all its members, S_unit = Σ_{j ∈ unit} S_j (exact: ln k_j = ln k_j⁰ + ln λ for every member,
so ∂ln n/∂ln λ = Σ_j ∂ln n/∂ln k_j, with no extra solve); its budget line is the sum of its
members' net contributions. Arrays in, arrays out; this module reads no files.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np

from ionochem.io.dataset import unit_coordinates

__all__ = ["UnitMap", "unit_map", "unit_map_from_dataset", "unit_coords", "sum_over_units"]

_LEVEL = re.compile(r"\(v=-?[0-9]+\)$")


@dataclass(frozen=True)
class UnitMap:
    """Which unit each reaction belongs to.

    Attributes
    ----------
    names : tuple of str
        Unit names, in reaction-list order of their first member.
    kinds : tuple of str
        ``reaction``, ``family`` or ``tied`` per unit.
    labels : tuple of str
        A readable equation per unit (a family's with ``(v)``).
    index : ndarray (R,) of int
        The unit of each reaction.
    reactions : tuple of str
        The reaction ids, in order.
    """

    names: tuple[str, ...]
    kinds: tuple[str, ...]
    labels: tuple[str, ...]
    index: np.ndarray
    reactions: tuple[str, ...]

    @property
    def matrix(self) -> np.ndarray:
        """(U, R) 0/1 matrix: M[u, j] = 1 when reaction j is in unit u."""
        out = np.zeros((len(self.names), len(self.reactions)))
        out[self.index, np.arange(len(self.reactions))] = 1.0
        return out

    def members(self, unit: str) -> list[str]:
        """The reaction ids of ``unit``."""
        u = self.names.index(unit)
        return [r for r, i in zip(self.reactions, self.index) if i == u]

    @property
    def grouped(self) -> bool:
        """True when some unit has more than one member."""
        return len(self.names) < len(self.reactions)


def unit_map(model) -> UnitMap:
    """The unit map of a model's reactions (``model.units``)."""
    import xarray as xr

    coords = dict(unit_coordinates(model))
    coords["reaction"] = ("reaction", np.array(model.reactions, dtype=object))
    return unit_map_from_dataset(xr.Dataset(coords=coords))


def unit_map_from_dataset(ds) -> UnitMap:
    """The unit map a result carries (``reaction_unit`` and the ``unit`` coordinates).

    Files written before units existed have neither: each family member (``X(v=K)``) then
    joins its family ``X(v)`` and every other reaction is its own unit.
    """
    ids = tuple(str(r) for r in ds["reaction"].values)
    eqs = ([str(e) for e in ds["equation"].values] if "equation" in ds.coords
           else [""] * len(ids))
    if "reaction_unit" in ds.coords and "unit" in ds.coords:
        names = tuple(str(u) for u in ds["unit"].values)
        pos = {n: i for i, n in enumerate(names)}
        index = np.array([pos[str(u)] for u in ds["reaction_unit"].values], int)
        kinds = (tuple(str(k) for k in ds["unit_kind"].values) if "unit_kind" in ds.coords
                 else tuple("reaction" for _ in names))
        labels = (tuple(str(k) for k in ds["unit_equation"].values)
                  if "unit_equation" in ds.coords else names)
        return UnitMap(names, kinds, labels, index, ids)
    names, kinds, labels, index = [], [], [], []
    for rid, eq in zip(ids, eqs):
        m = _LEVEL.search(rid)
        name = rid[:m.start()] + "(v)" if m else rid
        if name not in names:
            names.append(name)
            kinds.append("family" if m else "reaction")
            labels.append(eq.replace(m.group(0), "(v)") if m else eq)
        index.append(names.index(name))
    return UnitMap(tuple(names), tuple(kinds), tuple(labels), np.array(index, int), ids)


def unit_coords(umap: UnitMap) -> dict:
    """The coordinates of :func:`ionochem.io.dataset.unit_coordinates` from a unit map."""
    return {
        "reaction_unit": ("reaction", np.array([umap.names[i] for i in umap.index],
                                               dtype=object), {"long_name": UNIT_OF}),
        "unit": ("unit", np.array(umap.names, dtype=object), {"long_name": UNIT}),
        "unit_kind": ("unit", np.array(umap.kinds, dtype=object),
                      {"long_name": "reaction, family or tied"}),
        "unit_equation": ("unit", np.array(umap.labels, dtype=object),
                          {"long_name": "equations of the unit's members"}),
    }


UNIT_OF = ("unit of analysis the reaction belongs to (itself, its vibrational family, or a "
           "tie of the reaction list)")
UNIT = ("unit of analysis: a reaction, a family of vibrational levels, or reactions tied in "
        "the reaction list")


def sum_over_units(values, umap: UnitMap, axis: int):
    """Sum ``values`` over the members of each unit along ``axis`` (length R → U).

    NaN stays NaN (a dark level's sensitivities).
    """
    values = np.asarray(values, float)
    moved = np.moveaxis(values, axis, -1)
    out = np.empty(moved.shape[:-1] + (len(umap.names),))
    for u in range(len(umap.names)):
        out[..., u] = moved[..., umap.index == u].sum(axis=-1)
    return np.moveaxis(out, -1, axis)
