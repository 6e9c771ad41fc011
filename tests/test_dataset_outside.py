"""The result dataset's own numbers checked from outside (issue 30, item 3).

The production and loss the dataset reports are recomputed here from first principles, not
through the project's stoichiometry matrices: the law of mass action (the rate of a reaction
is k times the product of its reactants' densities, each to the power of its count; Atkins,
Physical Chemistry, ch. on rate laws) over the parsed reactions' own reactant and product
lists (``Model.reaction_objects``), with k from ``Model.rate_coefficients()`` and the
densities from the dataset. A species' gross production is the sum over the reactions that
make it on balance (net count > 0) of rate × net count, its loss the same over the reactions
that destroy it on balance (docs/outputs.md, ``production``, ``loss``; a derived total leaves
out the exchanges among its members). Every quantity built on them (lifetime n/L, the
electron ionization and recombination rates, their column integrals and balance, the budget
totals) is checked against the same independent sums.
"""

from __future__ import annotations

import warnings
from collections import defaultdict
from pathlib import Path

import numpy as np
import pytest

import ionochem
from ionochem.analysis.budget import budget_table

ROOT = Path(__file__).resolve().parents[1]
DEMOS = sorted((ROOT / "scenarios").glob("*.toml"))


def _species_info(model):
    """Name -> parsed Species of every species the reactions mention."""
    info = {}
    for r in model.reaction_objects:
        for sp, _ in (*r.reactants, *r.products):
            info[sp.name] = sp
    return info


def _members(model, ds):
    """Derived total -> its member species, worked out from the species' own parse (the
    levels of a vibrational family share a base; the electronic states of an ion share
    elements and charge), not from the mechanism's bookkeeping."""
    info = _species_info(model)
    solved = [s for s, role in zip(ds["species"].values, ds["role"].values) if role == "solved"]
    out = {}
    for name, role in zip(ds["species"].values, ds["role"].values):
        if role != "derived":
            continue
        if name.endswith("(total)"):
            ref = info[name[:-len("(total)")]]
            out[name] = [s for s in solved if info[s].elements == ref.elements
                         and info[s].charge == ref.charge]
        else:
            out[name] = [s for s in solved if info[s].base == name and info[s].vib is not None]
        assert out[name], name
    return out


def independent_budget(model, ds, k):
    """Rates (reaction, altitude) and gross production and loss {species: (altitude,)} by
    mass action over the parsed reactions (module docstring); ``ds`` at one time."""
    dens = {s: ds["density"].sel(species=s).values for s in ds["species"].values}
    fixed = [s for s, role in zip(ds["species"].values, ds["role"].values) if role == "fixed"]
    dens.setdefault("M", sum(dens[s] for s in fixed))        # third body: all neutrals
    A = ds.sizes["altitude"]
    rates = np.empty((len(model.reaction_objects), A))
    prod = defaultdict(lambda: np.zeros(A))
    loss = defaultdict(lambda: np.zeros(A))
    members = _members(model, ds)
    for j, r in enumerate(model.reaction_objects):
        rate = np.array(k[:, j], float)
        for sp, count in r.reactants:
            rate = rate * dens[sp.name] ** count
        rates[j] = rate
        net = defaultdict(int)
        for sp, count in r.products:
            net[sp.name] += count
        for sp, count in r.reactants:
            net[sp.name] -= count
        for total, mem in members.items():
            net[total] = sum(net.get(m, 0) for m in mem)
        for name, c in net.items():
            if c > 0:
                prod[name] += c * rate
            elif c < 0:
                loss[name] += -c * rate
    return rates, prod, loss


def _scale(x):
    return 1e-12 * max(float(np.max(np.abs(x))), 1e-300)


@pytest.fixture(scope="module", params=DEMOS, ids=[p.stem for p in DEMOS])
def demo(request):
    """Each demo scenario (invented columns), solved to its steady state."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        model = ionochem.Model(ionochem.load_scenario(request.param))
        ds = model.solve()
    return model, ds


def test_production_and_loss_of_every_species_equal_an_independent_sum(demo):
    """``production`` and ``loss`` of every species of the dataset (solved, electrons, fixed
    neutrals and derived totals) equal the mass-action sums of the module docstring, computed
    here from ``rate_coefficients()``, the dataset's densities and each parsed reaction's
    reactant and product lists, to 1e-10; so does ``reaction_rate``. Swapping production and
    loss anywhere on the way (for a solved species in steady state they are equal, so the
    balance alone cannot tell) fails here."""
    model, ds = demo
    k = model.rate_coefficients()
    rates, prod, loss = independent_budget(model, ds, k)
    np.testing.assert_allclose(ds["reaction_rate"].values, rates, rtol=1e-10,
                               atol=_scale(rates))
    for s in ds["species"].values:
        p, lo = prod.get(s, np.zeros(ds.sizes["altitude"])), loss.get(
            s, np.zeros(ds.sizes["altitude"]))
        np.testing.assert_allclose(ds["production"].sel(species=s).values, p, rtol=1e-10,
                                   atol=_scale(p) + 1e-300, err_msg=f"production of {s}")
        np.testing.assert_allclose(ds["loss"].sel(species=s).values, lo, rtol=1e-10,
                                   atol=_scale(lo) + 1e-300, err_msg=f"loss of {s}")
    # Not vacuous: production and loss differ for some species (a swap would show).
    assert any(not np.allclose(prod[s], loss[s]) for s in prod)


def test_lifetime_ionization_and_column_balance_follow_from_the_independent_sums(demo):
    """lifetime = n / L (chemical lifetime, Schunk & Nagy 2009, Ionospheres, §8 *(from
    memory)*) with L the independent loss; ``ionization_rate`` and ``recombination_rate`` the
    independent production and loss of electrons; their column integrals the trapezoid rule
    over the grid (numpy) and ``column_balance`` = (ionization − recombination) / ionization
    of those integrals."""
    model, ds = demo
    _, prod, loss = independent_budget(model, ds, model.rate_coefficients())
    for s, role in zip(ds["species"].values, ds["role"].values):
        if role == "fixed":
            continue
        n = ds["density"].sel(species=s).values
        L = loss[s]
        with np.errstate(divide="ignore", invalid="ignore"):
            expect = np.where(L > 0, n / L, np.inf)
        np.testing.assert_allclose(ds["lifetime"].sel(species=s).values, expect, rtol=1e-10,
                                   err_msg=s)
    np.testing.assert_allclose(ds["ionization_rate"].values, prod["e"], rtol=1e-10)
    np.testing.assert_allclose(ds["recombination_rate"].values, loss["e"], rtol=1e-10)
    z_cm = ds["altitude"].values * 1e5
    col_ion = np.trapezoid(prod["e"], z_cm)
    col_rec = np.trapezoid(loss["e"], z_cm)
    np.testing.assert_allclose(ds.attrs["column_ionization_cm2_s"], col_ion, rtol=1e-10)
    np.testing.assert_allclose(ds.attrs["column_recombination_cm2_s"], col_rec, rtol=1e-10)
    if "column_balance" in ds.attrs and col_ion > 0:
        # With transport the net boundary inflow (the column of transport_rate, numpy
        # trapezoid) enters the ion budget.
        col_tr = (np.trapezoid(ds["transport_rate"].values, z_cm)
                  if "transport_rate" in ds else 0.0)
        np.testing.assert_allclose(ds.attrs["column_balance"],
                                   (col_ion + col_tr - col_rec) / col_ion, rtol=1e-8,
                                   atol=1e-14)


def test_budget_totals_equal_the_independent_sums(demo):
    """The per-reaction budget (``budget_table(..., members=True)``) of every solved species
    at three levels totals the independent gross production and loss there (each reaction on
    the side of its net count), and its shares add up to 100 %."""
    model, ds = demo
    _, prod, loss = independent_budget(model, ds, model.rate_coefficients())
    alt = ds["altitude"].values
    for a in (alt[0], alt[alt.size // 2], alt[-1]):
        i = int(np.argmin(np.abs(alt - a)))
        for s, role in zip(ds["species"].values, ds["role"].values):
            if role != "solved":
                continue
            b = budget_table(ds, s, float(a), members=True)
            got_p = sum(row[2] for row in b.production)
            got_l = sum(row[2] for row in b.loss)
            np.testing.assert_allclose(got_p, prod[s][i], rtol=1e-9, atol=1e-300,
                                       err_msg=f"{s} at {a} km")
            np.testing.assert_allclose(got_l, loss[s][i], rtol=1e-9, atol=1e-300,
                                       err_msg=f"{s} at {a} km")
            for rows, total in ((b.production, got_p), (b.loss, got_l)):
                if total > 0:
                    assert abs(sum(row[3] for row in rows) - 100.0) < 1e-6


def test_transient_production_and_loss_equal_the_independent_sums():
    """In a time integration through sunset (demo scenario ``midlatitude_sunset``, invented)
    the production and loss at each output time equal the mass-action sums with the rate
    coefficients of that time (``rate_coefficients(t)``: the sun moves) and the densities of
    that time."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        model = ionochem.Model(ionochem.load_scenario(ROOT / "scenarios"
                                                      / "midlatitude_sunset.toml"))
        start = model.solve()
        ds = model.integrate([0.0, 3600.0, 7200.0], initial=start)
    for t in ds["time_s"].values:
        at = ds.sel(time=ds["time"].values[list(ds["time_s"].values).index(t)])
        rates, prod, loss = independent_budget(model, at, model.rate_coefficients(float(t)))
        for s in ("O+", "NO+", "e", "N2+"):
            np.testing.assert_allclose(at["production"].sel(species=s).values, prod[s],
                                       rtol=1e-9, atol=_scale(prod[s]) + 1e-300,
                                       err_msg=f"production of {s} at t = {t} s")
            np.testing.assert_allclose(at["loss"].sel(species=s).values, loss[s],
                                       rtol=1e-9, atol=_scale(loss[s]) + 1e-300,
                                       err_msg=f"loss of {s} at t = {t} s")


def test_derived_totals_are_the_vibrational_families_and_electronic_state_groups(demo):
    """The dataset's derived totals are exactly: one per vibrational family of solved
    species (``N2+`` for N2+(v=0..4)), and one ``<formula>(total)`` per group of solved
    species with the same elements and charge in more than one electronic state (``O+`` with
    O+(2D) and O+(2P); docs/outputs.md), worked out here from the parsed species."""
    model, ds = demo
    info = _species_info(model)
    solved = [s for s, role in zip(ds["species"].values, ds["role"].values)
              if role == "solved"]
    expect = {info[s].base for s in solved if info[s].vib is not None}
    groups = defaultdict(list)
    for s in solved:
        groups[(info[s].elements, info[s].charge)].append(s)
    for members in groups.values():
        if len({info[m].electronic for m in members}) > 1:
            expect.add(min(members, key=len).split("(")[0] + "(total)")
    derived = {s for s, role in zip(ds["species"].values, ds["role"].values)
               if role == "derived"}
    assert derived == expect


def test_roles_follow_from_the_environment_and_the_list(demo):
    """Each species' ``role`` is what the inputs make it (docs/outputs.md): ``electron`` for
    e, ``fixed`` for exactly the neutral source's species in the list, ``derived`` for the
    totals, ``balance`` for the balance ion with a given Ne, else ``solved``."""
    model, ds = demo
    neutrals = set(model.environment.neutrals)
    balance = (model.scenario.solve.balance_ion
               if model.scenario.solve.electrons == "table" else None)
    for s, role in zip(ds["species"].values, ds["role"].values):
        if s == "e":
            assert role == "electron"
        elif s in neutrals:
            assert role == "fixed", s
        elif s == balance:
            assert role == "balance", s
        else:
            assert role in ("solved", "derived"), (s, role)
