"""Outputs of vibrationally resolved families: level fractions and effective rates.

For every family species (a species resolved into levels, e.g. N2+ as N2+(v=0..4), whose
total the dataset carries as a derived species):

- ``level_fraction(species, altitude)``: density of each member over its family's total
  (NaN for species that are not family members);
- ``effective_rate_coefficient(family_reaction, altitude)``: for every reaction family whose
  members consume a level of a family species (``DR_N2plus(v)``: N2+(v) + e), the
  population-weighted rate coefficient an unresolved model would need,

      k_eff = sum_m k_m n(level of member m) / n(family total),

  i.e. the rate that, applied to the summed density, gives the summed reaction rate (levels
  without a member, such as v = 0 for a relaxation family over v = 1..4, count with k = 0).
  Two-body families are in ``effective_rate_coefficient`` (cm3 s-1), others in
  ``effective_rate_coefficient_first_order`` (s-1) / ``_third_order`` (cm6 s-1), so each
  variable has one unit. Families whose levels are only made (photoionization into N2+(v),
  O+(2D) + N2 -> N2+(v) + O) have no population weight; their total is the sum of their
  members' rate coefficients.
- ``level_loss_share(species, loss_process, altitude)``: for every level of a family species,
  the share of its chemical loss (sum over reactions that consume it, k times the densities
  of the reactants) taken by each process -- a reaction family, or a reaction outside any
  family (NaN where the species is not a level or the process does not act on it). Each
  process has a class in ``loss_process_class(loss_process)``, a CF flag (1..4, meanings in
  its ``flag_meanings``): ``recombination`` (an
  electron in, no ion out), ``electron_collision`` (an electron in, an ion of the same family
  out: vibrational excitation or de-excitation), ``relaxation`` (a neutral in, an ion of the
  same family out) and ``ion_neutral`` (the rest: charge transfer and reactions).
- ``n2plus_vibrational_temperature(altitude)``: the temperature of a Boltzmann distribution
  with the model's N2+(v=1)/N2+(v=0) ratio, T = (E_1 - E_0)/(k ln(n0/n1)), E_1 - E_0 =
  2174.8 cm-1 (3129 K; :func:`ionochem.environment.n2plus_levels.x_level_energies_cm`);
  NaN where n1 >= n0 or either is zero. Present when both levels are in the dataset.

Every array carries leading axes (time) before (altitude, ...): this module is used by the
steady and the transient dataset builders alike.
"""

from __future__ import annotations

import numpy as np

from ionochem.environment.n2plus_levels import CM_TO_K, x_level_energies_cm

__all__ = ["level_output_vars", "level_loss_processes", "LOSS_CLASSES"]

#: Classes of the processes that consume a level, in the order of the flag values 1..4 of
#: ``loss_process_class`` (CF flag_values / flag_meanings).
LOSS_CLASSES = ("recombination", "electron_collision", "relaxation", "ion_neutral")

_ORDER_NAMES = {1: ("effective_rate_coefficient_first_order", "s-1"),
                2: ("effective_rate_coefficient", "cm3 s-1"),
                3: ("effective_rate_coefficient_third_order", "cm6 s-1")}


def family_reactants(model):
    """Reaction families that consume a level of a family species.

    Returns
    -------
    list of (family id, total name, [(reaction index, member species name)], order)
    """
    mech = model.mechanism
    totals = {m: tot.name for tot in mech.derived for m in tot.members if "v=" in m}
    index = {rid: j for j, rid in enumerate(model.reactions)}
    out = []
    for fam, members in getattr(model.reaction_list, "families", {}).items():
        pairs, total, order = [], None, None
        for rid in members:
            if rid not in index:
                continue
            r = model.reaction_objects[index[rid]]
            lv = [sp.name for sp, _ in r.reactants
                  if sp.vib is not None and sp.name in totals]
            if len(lv) != 1:
                pairs = []
                break
            pairs.append((index[rid], lv[0]))
            total = totals[lv[0]]
            order = sum(c for _, c in r.reactants)
        if pairs:
            out.append((fam, total, pairs, order))
    return out


def _loss_class(reaction, family_of):
    """Class of a reaction that consumes a level (module docstring)."""
    ins = [sp for sp, _ in reaction.reactants]
    level_in = {family_of[sp.name] for sp in ins if sp.name in family_of}
    level_out = {family_of[sp.name] for sp, _ in reaction.products if sp.name in family_of}
    has_e = any(sp.name == "e" for sp in ins)
    if has_e and level_in & level_out:
        return "electron_collision"
    if has_e:
        return "recombination"
    if level_in & level_out:
        return "relaxation"
    return "ion_neutral"


def level_loss_processes(model):
    """Processes that consume a level of a family species, grouped by reaction family.

    Returns
    -------
    list of (process name, class, [(reaction index, [(level species, count)],
    [(reactant species, count)])])
    """
    mech = model.mechanism
    family_of = {m: tot.name for tot in mech.derived for m in tot.members if "v=" in m}
    if not family_of:
        return []
    groups: dict[str, list] = {}
    classes: dict[str, str] = {}
    for j, r in enumerate(model.reaction_objects):
        net: dict[str, int] = {}
        for sp, c in r.reactants:
            net[sp.name] = net.get(sp.name, 0) - c
        for sp, c in r.products:
            net[sp.name] = net.get(sp.name, 0) + c
        lost = [(name, -n) for name, n in net.items() if n < 0 and name in family_of]
        if not lost:
            continue
        name = r.family or r.id
        groups.setdefault(name, []).append(
            (j, lost, [(sp.name, c) for sp, c in r.reactants]))
        classes.setdefault(name, _loss_class(r, family_of))
    return [(name, classes[name], members) for name, members in groups.items()]


def _loss_share_vars(model, k, dens, names, lead_dims):
    """``level_loss_share`` and ``loss_process_class`` (module docstring)."""
    procs = model.structural("level_loss_processes", lambda: level_loss_processes(model))
    col = {n: i for i, n in enumerate(names)}
    if not procs or any(s not in col for _, _, m in procs for _, _, rs in m for s, _ in rs):
        return {}
    levels = sorted({s for _, _, m in procs for _, lost, _ in m for s, _ in lost},
                    key=col.get)
    loss = np.zeros((*dens.shape[:-1], len(levels), len(procs)))
    li = {s: i for i, s in enumerate(levels)}
    for p, (_, _, members) in enumerate(procs):
        for j, lost, reactants in members:
            rate = k[..., j].copy()
            for s, c in reactants:
                rate = rate * dens[..., col[s]] ** c
            for s, c in lost:
                loss[..., li[s], p] += c * rate
    total = loss.sum(axis=-1, keepdims=True)
    with np.errstate(invalid="ignore", divide="ignore"):
        share = np.where(total > 0, loss / total, np.nan)
    acts = np.zeros((len(levels), len(procs)), bool)
    for p, (_, _, members) in enumerate(procs):
        for _, lost, _ in members:
            acts[[li[s] for s, _ in lost], p] = True
    share = np.where(acts, share, np.nan)
    full = np.full((*dens.shape[:-1], len(names), len(procs)), np.nan)
    full[..., [col[s] for s in levels], :] = share
    full = np.moveaxis(full, -3, -1)                   # (..., species, process, altitude)
    return {
        "level_loss_share": ((*lead_dims, "species", "loss_process", "altitude"), full,
                             {"units": "1", "long_name": "share of a vibrational level's "
                              "chemical loss taken by each process (NaN where the species "
                              "is not a level or the process does not consume it)"}),
        "loss_process": ("loss_process", np.array([p[0] for p in procs], dtype=object)),
        "loss_process_class": ("loss_process",
                               np.array([LOSS_CLASSES.index(p[1]) + 1 for p in procs],
                                        dtype=np.int8),
                               {"long_name": "class of each loss process",
                                "flag_values": np.arange(1, len(LOSS_CLASSES) + 1,
                                                         dtype=np.int8),
                                "flag_meanings": " ".join(LOSS_CLASSES)}),
    }


def _vibrational_temperature_var(dens, names, lead_dims):
    """``n2plus_vibrational_temperature`` from the v = 1 / v = 0 ratio (module docstring)."""
    if "N2+(v=0)" not in names or "N2+(v=1)" not in names:
        return {}
    n0 = dens[..., names.index("N2+(v=0)")]
    n1 = dens[..., names.index("N2+(v=1)")]
    theta = CM_TO_K * float(x_level_energies_cm(2)[1])
    with np.errstate(invalid="ignore", divide="ignore"):
        t = np.where((n1 > 0) & (n0 > n1), theta / np.log(n0 / n1), np.nan)
    return {"n2plus_vibrational_temperature": (
        (*lead_dims, "altitude"), t,
        {"units": "K", "long_name": "N2+ vibrational temperature from the v = 1/v = 0 "
         "ratio, (E1 - E0)/(k ln(n0/n1)), E1 - E0 = 3129 K (NaN where n1 >= n0)"})}


def level_output_vars(model, k, dens, names, lead_dims=()):
    """Variables ``level_fraction`` and ``effective_rate_coefficient*`` for a dataset.

    Parameters
    ----------
    model : Model
    k : ndarray, shape (..., altitude, reaction)
        Rate coefficients.
    dens : ndarray, shape (..., altitude, species)
        Densities of the dataset's species (cm-3), in the order of ``names``.
    names : list of str
        The dataset's species names (members and their derived totals among them).
    lead_dims : tuple of str
        Names of the leading axes (``("time",)`` for transient datasets).

    Returns
    -------
    dict
        Name -> (dims, values, attrs), ready for ``xarray.Dataset``; empty when the list
        has no families.
    """
    mech = model.mechanism
    col = {n: i for i, n in enumerate(names)}
    out = {}
    # Vibrational families only (O+(total) and other sums of electronic states are not).
    members = {m: tot.name for tot in mech.derived for m in tot.members if "v=" in m}
    if members:
        frac = np.full(dens.shape, np.nan)
        pairs = [(col[m], col[tot]) for m, tot in members.items() if m in col and tot in col]
        if pairs:
            level, total = (list(x) for x in zip(*pairs))
            t = dens[..., total]
            with np.errstate(invalid="ignore", divide="ignore"):
                frac[..., level] = np.where(t > 0, dens[..., level] / t, np.nan)
        out["level_fraction"] = (
            (*lead_dims, "species", "altitude"), np.swapaxes(frac, -1, -2),
            {"units": "1", "long_name": "fraction of the family total in this level "
             "(NaN for species that are not family members)"})
    fams = model.structural("family_reactants", lambda: family_reactants(model))
    if fams:
        # All families at once: k_m n(level of m) for every member m, summed family by
        # family (one family at a time gave the same to 5e-16).
        reaction = [j for _, _, pairs, _ in fams for j, _ in pairs]
        level = [col[s] for _, _, pairs, _ in fams for _, s in pairs]
        starts = np.cumsum([0] + [len(f[2]) for f in fams[:-1]])
        num = np.add.reduceat(k[..., reaction] * dens[..., level], starts, axis=-1)
        t = dens[..., [col[f[1]] for f in fams]]
        with np.errstate(invalid="ignore", divide="ignore"):
            stacked = np.swapaxes(np.where(t > 0, num / t, np.nan), -1, -2)
        # stacked: (..., family, altitude)
        orders = np.array([f[3] for f in fams])
        shape = [1] * stacked.ndim
        shape[-2] = orders.size
        for order, (name, units) in _ORDER_NAMES.items():
            if order != 2 and not np.any(orders == order):
                continue
            out[name] = ((*lead_dims, "family_reaction", "altitude"),
                         np.where((orders == order).reshape(shape), stacked, np.nan),
                         {"units": units, "long_name": "population-weighted rate "
                          "coefficient of a reaction family: the rate an unresolved model "
                          "would need (sum over levels of k n_level / family total; NaN for "
                          "families of another order)"})
    if fams:
        out["family_reaction"] = ("family_reaction", np.array([f[0] for f in fams],
                                                              dtype=object))
        out["family_species"] = ("family_reaction", np.array([f[1] for f in fams],
                                                             dtype=object),
                                 {"long_name": "the family species whose levels react"})
    names = list(names)
    out.update(_loss_share_vars(model, k, dens, names, lead_dims))
    out.update(_vibrational_temperature_var(dens, names, lead_dims))
    return out
