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

Every array carries leading axes (time) before (altitude, ...): this module is used by the
steady and the transient dataset builders alike.
"""

from __future__ import annotations

import numpy as np

__all__ = ["level_output_vars"]

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
    return out
