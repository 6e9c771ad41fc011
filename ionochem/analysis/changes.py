"""Which rate changes a changed model carries, and where each came from.

A scenario's ``[changes]`` (``set``, ``scale``) belong to the baseline: they apply to the
baseline and, where nothing on the command line says otherwise, to the changed model too.
The command line takes precedence over the scenario for the reactions it names:

- an entry given with ``--reactions FILE`` (replaced by id), ``--add FILE`` (new id) or
  ``--list FILE`` (an alternative list; only its entries that differ from the baseline
  list's entry of the same id count as given), and a reaction named by ``--set``, replaces
  the scenario's ``set`` *and* ``scale`` of that reaction in the changed model: the rate is
  the one written on the command line;
- ``--scale ID=F`` multiplies the baseline rate of ``ID`` (the scenario's changes
  included), so it composes with them;
- ``--set`` and ``--scale`` apply after the entries of the files.

A scenario change of a family applies level by level, so a file that replaces only some
levels overrides the scenario change at those levels alone. :func:`resolve_changes` returns
the changes to build the changed model with and a record (one line per change, saying what
was applied where), which ``compare`` prints and keeps in the ``changes_applied`` attribute.

This module works on parsed reaction lists and built models; it never reads files.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path


@dataclass
class ChangePlan:
    """The changes of a changed model and where each came from.

    Attributes
    ----------
    set, scale : dict
        Reaction (or family) id → expression / factor, in the order they apply.
    dirs : dict
        Folder the ``table(...)`` paths of each ``set`` expression resolve against.
    log : list of str
        One line per change: its origin, what it does, and whether the changed model
        keeps it (the record printed and stored in ``changes_applied``).
    """

    set: dict = field(default_factory=dict)
    scale: dict = field(default_factory=dict)
    dirs: dict = field(default_factory=dict)
    log: list = field(default_factory=list)


def ids_of(reaction_list, key):
    """The expanded reaction ids a change key names in ``reaction_list`` (a reaction id, a
    family id ``DR(v)`` or its bare name ``DR``), or None when it names none."""
    ids = {r.id for r in reaction_list.reactions}
    if key in ids:
        return [key]
    for fam, members in getattr(reaction_list, "families", {}).items():
        if key in (fam, fam.split("(")[0]):
            return list(members)
    return None


def _entry_key(r):
    """What makes an entry's chemistry: its rate law (with the folder its tables resolve
    against), uncertainty, reactants and products (not its reference)."""
    f = None if r.f is None else r.f.text
    return (r.k.text, f, str(Path(r.file).parent) if r.file else "",
            tuple((s.name, c) for s, c in r.reactants),
            tuple((s.name, c) for s, c in r.products))


def given_entries(baseline_list, *, replacements=(), additions=(), alternative=None):
    """Reaction id → the option that gives its entry on the command line.

    Every entry of ``--reactions`` and ``--add`` files counts; of an alternative list
    (``--list``) the entries that are new or differ from the baseline list's entry of the
    same id.
    """
    given = {}
    if alternative is not None:
        base = {r.id: _entry_key(r) for r in baseline_list.reactions}
        for r in alternative.reactions:
            if base.get(r.id) != _entry_key(r):
                given[r.id] = f"--list {alternative.path}"
    for rl in replacements:
        given.update({r.id: f"--reactions {rl.path}" for r in rl.reactions})
    for rl in additions:
        given.update({r.id: f"--add {rl.path}" for r in rl.reactions})
    return given


def _origin(baseline, kind, key, value):
    scen = baseline.scenario
    own = getattr(getattr(scen, "changes", None), kind, {})
    if key in own and own[key] == value:
        return f"scenario [changes] {kind}"
    return f"baseline {kind}"


def _describe(kind, key, value):
    return f"{key} = {value}" if kind == "set" else f"{key} x {float(value):g}"


def _keep_baseline(plan, baseline, final_list, given, kind):
    """Carry the baseline's ``kind`` changes over, except on the reactions ``given``."""
    dirs = getattr(baseline, "_set_dirs", {})
    list_dir = (Path(baseline.reaction_list.path).parent
                if getattr(baseline.reaction_list, "path", None) else Path("."))
    target = plan.set if kind == "set" else plan.scale
    for key, value in baseline.changes[kind].items():
        origin = _origin(baseline, kind, key, value)
        what = f"{origin} {_describe(kind, key, value)}"
        ids = ids_of(final_list, key)
        if ids is None:
            plan.log.append(f"{what}: baseline only (the changed list has no {key})")
            continue
        kept = [i for i in ids if i not in given]
        if not kept:
            by = sorted({given[i] for i in ids})
            plan.log.append(f"{what}: baseline only; in the changed model {', '.join(by)} "
                            "takes precedence (command line over scenario)")
            continue
        for new_key in ([key] if len(kept) == len(ids) else kept):
            target[new_key] = value
            if kind == "set":
                plan.dirs[new_key] = dirs.get(key, list_dir)
        if len(kept) == len(ids):
            plan.log.append(f"{what}: baseline and changed model")
        else:
            over = [i for i in ids if i in given]
            by = sorted({given[i] for i in over})
            plan.log.append(f"{what}: baseline and changed model except {', '.join(over)} "
                            f"({', '.join(by)} takes precedence)")


def resolve_changes(baseline, final_list, *, given=None, set_dict=None, scale=None,
                    base_dir=None):
    """The changes of the changed model on ``final_list`` (command line over scenario).

    Parameters
    ----------
    baseline : ionochem.Model
        Carries the scenario's (and any earlier) changes in ``baseline.changes``.
    final_list : ReactionList
        The changed model's reaction list (files merged in).
    given : dict, optional
        Reaction id → option, from :func:`given_entries`.
    set_dict, scale : dict, optional
        The command line's ``--set`` and ``--scale``.
    base_dir : path, optional
        Folder of the ``--set`` expressions' table paths.

    Returns
    -------
    ChangePlan
    """
    given = dict(given or {})
    set_dict, scale = dict(set_dict or {}), dict(scale or {})
    for key in set_dict:
        for i in ids_of(final_list, key) or ():
            given[i] = "--set"
    plan = ChangePlan()
    files = {}
    for rid, option in given.items():
        if option != "--set":
            files.setdefault(option, []).append(rid)
    _keep_baseline(plan, baseline, final_list, given, "set")
    _keep_baseline(plan, baseline, final_list, given, "scale")
    for option, rids in files.items():
        shown = ", ".join(rids[:8]) + (f" and {len(rids) - 8} more" if len(rids) > 8 else "")
        plan.log.append(f"{option}: entries {shown} (changed model)")
    for key, text in set_dict.items():
        plan.set.pop(key, None)
        plan.set[key] = text
        if base_dir is not None:
            plan.dirs[key] = Path(base_dir)
        plan.log.append(f"--set {key} = {text} (changed model)")
    for key, f in scale.items():
        plan.scale[key] = plan.scale.get(key, 1.0) * float(f)
        plan.log.append(f"--scale {key} x {float(f):g} (changed model, on the baseline rate)")
    return plan
