"""Rate changes on a reaction list: replaced rate laws (``set``) and factors (``scale``).

A change names a reaction id, a family (all its vibrational levels) or a unit of analysis
(a tie of the list, :mod:`ionochem.mechanism.units`). Replaced laws compile against the
folder their ``table(...)`` paths resolve in; factors must be finite and non-negative. Errors
name where the change came from: the scenario file, ``--set`` or ``--scale``.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ionochem.errors import InputError
from ionochem.mechanism.expressions import compile_expression


def change_indices(key, reactions, reaction_list, units, where=None):
    """Indices of the reactions a change ``key`` names (reaction, family or unit id)."""
    ids = {r.id: j for j, r in enumerate(reactions)}
    if key in ids:
        return [ids[key]]
    for fam, members in getattr(reaction_list, "families", {}).items():
        if key in (fam, fam.split("(")[0]):
            return [ids[m] for m in members]
    for unit in units:
        if unit.name == key:
            return [ids[m] for m in unit.members]
    raise InputError(f"no reaction with id {key!r} in {reaction_list.path}", file=where)


def apply_changes(reactions, reaction_list, units, expressions, scale, changes, *, where):
    """Apply ``changes = (set_dict, scale_dict, origin, set_dirs)`` in place to the compiled
    ``expressions`` (list) and the factors ``scale`` (ndarray (R,)).

    ``where`` is the scenario file, used when ``origin == "scenario"``; other origins name
    the options ``--set`` and ``--scale``.
    """
    set_dict, scale_dict, origin, set_dirs = changes
    path = reaction_list.path
    base_dir = Path(path).parent if path else Path(".")
    at = where if origin == "scenario" else "--set"
    for key, text in set_dict.items():
        for j in change_indices(key, reactions, reaction_list, units, at):
            expressions[j] = compile_expression(str(text), file=at, line=None,
                                                base_dir=set_dirs.get(key, base_dir),
                                                level=reactions[j].level)
    at = where if origin == "scenario" else "--scale"
    for key, factor in scale_dict.items():
        factor = float(factor)
        if not np.isfinite(factor) or factor < 0:
            raise InputError(f"scale factor for {key} must be a non-negative number", file=at)
        for j in change_indices(key, reactions, reaction_list, units, at):
            scale[j] *= factor
