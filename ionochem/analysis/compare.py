"""Baseline against changed rates: what a new rate coefficient does to the column.

Two models share one environment (same neutrals, temperatures and photon sources); only
their rate laws differ. :func:`compare` solves both and returns the two density profiles and
their ratio; :func:`band_summary` reduces the ratio to the few numbers a reader wants first —
the median and the largest percentage change of each main ion in the E, F1 and lower F2
regions, and where the largest change sits.

This module calls models; it never reads files. Building the changed model from a
replacement or alternative reaction list (already parsed) is :func:`changed_model`.
"""

from __future__ import annotations

import dataclasses
import hashlib
from dataclasses import dataclass

import numpy as np
import xarray as xr

from ionochem import Model
from ionochem.analysis.changes import given_entries, resolve_changes
from ionochem.errors import InputError, MechanismError
from ionochem.mechanism.units import check_ties

#: Altitude bands of the summary, km: the E region (90-150 km), F1 (150-200 km) and the
#: lower F2 region (200-300 km) as in docs/physics.md §1 *(common practice)*. On a grid the
#: summary uses :func:`default_bands`: these cut to the grid, with "D" below 90 km and
#: "upper" from 300 km to the top of the grid when it reaches beyond them.
DEFAULT_BANDS = {"E": (90.0, 150.0), "F1": (150.0, 200.0), "F2": (200.0, 300.0)}


def default_bands(altitude_km):
    """:data:`DEFAULT_BANDS` cut to the grid ``altitude_km``, with ``D`` (grid bottom to
    90 km) and ``upper`` (300 km to the grid top) where the grid reaches beyond them, so
    the summary covers the whole column. Returns ``{name: (low_km, high_km)}``."""
    alt = np.asarray(altitude_km, float)
    lo, hi = float(alt.min()), float(alt.max())
    first, last = min(b[0] for b in DEFAULT_BANDS.values()), max(
        b[1] for b in DEFAULT_BANDS.values())
    out = {}
    if lo < first:
        out["D"] = (lo, first)
    for name, (a, b) in DEFAULT_BANDS.items():
        if b >= lo and a <= hi:
            out[name] = (max(a, lo), min(b, hi))
    if hi > last:
        out["upper"] = (last, hi)
    return out

#: Main ions summarised (O+(total) stands for O+ when metastable O+ states are solved).
MAIN_IONS = ("N2+", "O2+", "NO+", "O+(total)", "O+", "e")


def main_species(names):
    """The main ions present among ``names``: N2+, O2+, NO+, O+(total) or else O+, e."""
    names = list(names)
    out = [s for s in MAIN_IONS if s in names]
    if "O+(total)" in out and "O+" in out:
        out.remove("O+")
    return out


# ------------------------------------------------------------------ building the change
def _needs(model):
    return getattr(model, "needs", frozenset())


def _extra_scales(before, after):
    """Scale factors of ``after`` relative to ``before`` (both id → factor), changed only."""
    out = {}
    for key, f in after.items():
        base = before.get(key, 1.0)
        if f != base:
            out[key] = f / base if base else float("inf")
    return out


def merge_replacements(baseline_list, replacements):
    """The baseline reaction list with the entries of ``replacements`` swapped in by id.

    Each replacement entry replaces the whole baseline entry (rate law, uncertainty factor,
    products and reference); everything else stays. Every id of ``replacements`` must be in
    the baseline (a new id is an addition: :func:`merge_additions`). The result's ``sha256``
    is that of the two lists together, so provenance tells the merged list apart.
    """
    new = {r.id: r for r in replacements.reactions}
    have = {r.id for r in baseline_list.reactions}
    missing = [i for i in new if i not in have]
    if missing:
        raise InputError(f"replacement entries name reactions not in the baseline list: "
                         f"{', '.join(missing)} (new reactions belong in `additions`)",
                         file=str(replacements.path))
    reactions = tuple(new.get(r.id, r) for r in baseline_list.reactions)
    return _merged(baseline_list, replacements, reactions, dict(baseline_list.families))


def merge_additions(baseline_list, additions):
    """The baseline reaction list with the entries of ``additions`` appended.

    Every id of ``additions`` must be new (an existing id is a replacement:
    :func:`merge_replacements`).
    """
    have = {r.id for r in baseline_list.reactions}
    clash = [r.id for r in additions.reactions if r.id in have]
    if clash:
        raise InputError(f"added entries repeat ids of the baseline list: {', '.join(clash)} "
                         "(replacements of baseline entries belong in `replacements`)",
                         file=str(additions.path))
    families = dict(baseline_list.families)
    families.update(additions.families)
    merged = _merged(baseline_list, additions, tuple(baseline_list.reactions)
                     + tuple(additions.reactions), families)
    ties = tuple(getattr(baseline_list, "ties", ())) + tuple(getattr(additions, "ties", ()))
    if ties != merged.ties:
        problem = check_ties(ties, {r.id for r in merged.reactions}, families)
        if problem is not None:
            raise InputError(f"line {problem[0]}: {problem[1]}", file=str(additions.path))
        merged = dataclasses.replace(merged, ties=ties)
        merged.replacements_from = _merged_from(baseline_list, additions)
    return merged


def _merged_from(baseline_list, other):
    return tuple(getattr(baseline_list, "replacements_from", ())) + (str(other.path),)


def _merged(baseline_list, other, reactions, families):
    sha = hashlib.sha256((baseline_list.sha256 + other.sha256).encode()).hexdigest()
    merged = dataclasses.replace(baseline_list, reactions=reactions, sha256=sha,
                                 families=families,
                                 warnings=list(baseline_list.warnings))
    # The merged list keeps the baseline's path (expressions given later with --set resolve
    # table paths against it); where the entries came from is recorded beside it.
    merged.replacements_from = _merged_from(baseline_list, other)
    return merged


def changed_model(baseline, *, set_dict=None, scale=None, replacements=(), additions=(),
                  alternative=None, base_dir=None, log=None):
    """The baseline model with rate changes applied, on the same environment.

    The command line takes precedence over the scenario (:mod:`ionochem.analysis.changes`):
    a reaction whose entry a file gives, or that ``set_dict`` names, keeps none of the
    baseline's ``set``/``scale`` changes in the changed model; ``scale`` multiplies the
    baseline rate; ``set_dict`` and ``scale`` apply after the files.

    Parameters
    ----------
    baseline : ionochem.Model
    set_dict : dict[str, str], optional
        Reaction id (or family id) → new rate expression.
    scale : dict[str, float], optional
        Reaction id (or family id) → factor on k (0 switches a reaction off).
    replacements : sequence of ReactionList, optional
        Entries that replace baseline entries of the same id (:func:`merge_replacements`).
    additions : sequence of ReactionList, optional
        Entries with new ids, added to the list (:func:`merge_additions`).
    alternative : ReactionList, optional
        A whole other reaction list on the same column (applied first).
    base_dir : path, optional
        Folder that table paths in ``set_dict`` resolve against (default: the reaction
        list's folder).
    log : list, optional
        Receives one line per change: where it came from and which model carries it.

    Returns
    -------
    ionochem.Model
    """
    final = baseline.reaction_list if alternative is None else alternative
    for rl in replacements:
        final = merge_replacements(final, rl)
    for rl in additions:
        final = merge_additions(final, rl)
    given = given_entries(baseline.reaction_list, replacements=replacements,
                          additions=additions, alternative=alternative)
    plan = resolve_changes(baseline, final, given=given, set_dict=set_dict, scale=scale,
                           base_dir=base_dir)
    if log is not None:
        log.extend(plan.log)
    return _model_with(baseline, final, plan)


def _model_with(baseline, reaction_list, plan):
    """A model of ``reaction_list`` with ``plan``'s changes on the baseline's column (its
    environment reused unless the new list or expressions need more)."""
    changes = (plan.set, plan.scale, "api", plan.dirs)
    scen = baseline.scenario
    try:
        new = Model(scen, mechanism=reaction_list, environment=baseline.environment,
                    _changes=changes)
        if new.needs <= _needs(baseline):
            return new
    except MechanismError:
        # The baseline's environment may lack a photo channel or a neutral the other list
        # needs; a fresh environment for the new list has them (or says why not).
        pass
    return Model(scen, mechanism=reaction_list, _changes=changes)


# ------------------------------------------------------------------ the comparison
def _densities(ds, names):
    have = list(ds["species"].values)
    out = np.full((len(names), ds.sizes["altitude"]), np.nan)
    for i, s in enumerate(names):
        if s in have:
            out[i] = ds["density"].sel(species=s).values
    return out


def _change_attrs(baseline, changed, reaction_lists):
    sets = {k: v for k, v in changed.changes["set"].items()
            if baseline.changes["set"].get(k) != v}
    scales = _extra_scales(baseline.changes["scale"], changed.changes["scale"])
    lists = [str(getattr(rl, "path", rl)) for rl in reaction_lists]
    if not lists and changed.reaction_list.sha256 != baseline.reaction_list.sha256:
        lists = list(getattr(changed.reaction_list, "replacements_from", ())) or [
            str(changed.reaction_list.path)]
    return {
        "changes_set": "; ".join(f"{k} = {v}" for k, v in sets.items()),
        "changes_scale": "; ".join(f"{k} x {v:g}" for k, v in scales.items()),
        "changes_reactions": "; ".join(lists),
        "changed_reaction_list_sha256": changed.reaction_list.sha256,
    }


def _add_equilibrium_flag(out, ds_b, names):
    """The baseline's ``pce_doubtful`` (species, altitude) on ``out``'s species, 0 for a
    species only the changed model has; nothing when the baseline has no flag."""
    if "pce_doubtful" not in ds_b:
        return
    flag = ds_b["pce_doubtful"]
    have = list(flag["species"].values)
    rows = [flag.sel(species=s).values if s in have else np.zeros(ds_b["altitude"].size, np.int8)
            for s in names]
    out["pce_doubtful"] = (("species", "altitude"), np.array(rows, np.int8),
                           dict(flag.attrs, long_name=flag.attrs.get("long_name", "")
                                + " (baseline)"))


def compare(baseline_model, changed_model, *, baseline=None, changed=None,
            reaction_lists=(), change_log=()):
    """Solve a baseline and a changed model and compare their steady densities.

    Parameters
    ----------
    baseline_model, changed_model : ionochem.Model
        Models on the same altitude grid (normally sharing one environment).
    baseline, changed : xarray.Dataset, optional
        Their steady solutions, if already computed.
    reaction_lists : sequence, optional
        The reaction lists (or their paths) that made the change, for the attributes.
    change_log : sequence of str, optional
        Where each change came from (``log`` of :func:`changed_model`): the attribute
        ``changes_applied``.

    Returns
    -------
    xarray.Dataset
        ``density_baseline`` and ``density_changed`` (species, altitude) in cm-3 and
        ``ratio`` = changed / baseline (NaN where the baseline density is 0, or where the
        species is absent from one of the models), with the provenance of the baseline and
        the changes as attributes ``changes_set``, ``changes_scale``, ``changes_reactions``,
        and the baseline's ``pce_doubtful`` flag (species, altitude) when it has one.
    """
    ds_b = baseline_model.solve() if baseline is None else baseline
    ds_c = changed_model.solve() if changed is None else changed
    alt_b, alt_c = ds_b["altitude"].values, ds_c["altitude"].values
    if alt_b.shape != alt_c.shape or not np.allclose(alt_b, alt_c, rtol=0, atol=1e-9):
        raise InputError("compare: the baseline and the changed model are on different "
                         "altitude grids")
    names = list(ds_b["species"].values)
    names += [s for s in ds_c["species"].values if s not in names]
    nb, nc = _densities(ds_b, names), _densities(ds_c, names)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(nb > 0, nc / nb, np.nan)
    roles_b = dict(zip(ds_b["species"].values, ds_b["role"].values, strict=True))
    roles_c = dict(zip(ds_c["species"].values, ds_c["role"].values, strict=True))
    roles = [roles_b.get(s, roles_c.get(s, "")) for s in names]
    out = xr.Dataset(
        {
            "density_baseline": (("species", "altitude"), nb,
                                 {"units": "cm-3", "long_name": "number density, baseline"}),
            "density_changed": (("species", "altitude"), nc,
                                {"units": "cm-3", "long_name": "number density, changed "
                                 "rates"}),
            "ratio": (("species", "altitude"), ratio,
                      {"units": "1", "long_name": "changed / baseline density (NaN where "
                       "the baseline density is zero)"}),
        },
        coords={
            "species": ("species", np.array(names, dtype=object)),
            "role": ("species", np.array(roles, dtype=object),
                     {"long_name": "role in the baseline (solved, fixed, electron, balance "
                      "or derived)"}),
            "altitude": ds_b["altitude"],
        },
        attrs=dict(ds_b.attrs),
    )
    _add_effective_rates(out, ds_b, ds_c)
    # The baseline's own (scenario) changes keep their names with a prefix; the changes
    # compared take the plain names.
    for key in ("changes_set", "changes_scale"):
        out.attrs[f"baseline_{key}"] = ds_b.attrs.get(key, "")
    out.attrs.update(_change_attrs(baseline_model, changed_model, reaction_lists))
    out.attrs["changes_applied"] = "; ".join(change_log)
    out.attrs["analysis"] = "compare: baseline and changed rates on the same environment"
    _add_equilibrium_flag(out, ds_b, names)
    return out


EFFECTIVE_VARIABLES = ("effective_rate_coefficient", "effective_rate_coefficient_first_order",
                       "effective_rate_coefficient_third_order")


def _effective(ds):
    """All orders of ``effective_rate_coefficient`` in one (family_reaction, altitude)
    array (each family has one order, NaN in the others), or None."""
    have = [ds[v] for v in EFFECTIVE_VARIABLES if v in ds]
    if not have:
        return None
    out = have[0]
    for other in have[1:]:
        out = out.fillna(other)
    return out


def _add_effective_rates(out, ds_b, ds_c):
    """The population-weighted rate coefficients of the reaction families both results
    carry (docs/design.md §7), baseline and changed (``effective_rate_coefficient_baseline`` /
    ``_changed``, and the ``_first_order``/``_third_order`` variants, each in its own unit),
    and ``effective_rate_change`` = changed / baseline: what a per-level change does to the
    rate an unresolved model would need."""
    eb, ec = _effective(ds_b), _effective(ds_c)
    if eb is None or ec is None:
        return
    have_c = set(ec["family_reaction"].values)
    fams = [f for f in eb["family_reaction"].values if f in have_c]
    if not fams:
        return
    vb = eb.sel(family_reaction=fams).values
    vc = ec.sel(family_reaction=fams).values
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(vb > 0, vc / vb, np.nan)
    out.coords["family_reaction"] = ("family_reaction", np.array(fams, dtype=object))
    dims = ("family_reaction", "altitude")
    for name in EFFECTIVE_VARIABLES:
        if name not in ds_b or name not in ds_c:
            continue
        for tag, ds in (("baseline", ds_b), ("changed", ds_c)):
            var = ds[name].sel(family_reaction=fams)
            out[f"{name}_{tag}"] = (dims, var.values,
                                    {"units": var.attrs.get("units", ""),
                                     "long_name": f"{var.attrs.get('long_name', name)}, "
                                                  f"{tag}"})
    out["effective_rate_change"] = (dims, ratio, {"units": "1", "long_name": "changed / "
                                                  "baseline population-weighted rate "
                                                  "coefficient of the family"})


# ------------------------------------------------------------------ the summary
@dataclass(frozen=True)
class BandRow:
    """Percentage change of one species in one altitude band.

    ``median_pct`` and ``largest_pct`` are 100 (changed/baseline − 1); ``largest_pct`` is
    the change of largest magnitude, with its sign, found at ``largest_alt_km``. NaN when the
    band has no level with a baseline density.
    """

    species: str
    band: str
    low_km: float
    high_km: float
    levels: int
    median_pct: float
    largest_pct: float
    largest_alt_km: float


def parse_bands(text):
    """``"E=90:150,F1=150:200"`` → ``{"E": (90.0, 150.0), "F1": (150.0, 200.0)}``."""
    bands = {}
    for item in (p.strip() for p in str(text).split(",")):
        if not item:
            continue
        name, sep, span = item.partition("=")
        lo, sep2, hi = span.partition(":")
        try:
            if not (sep and sep2 and name.strip()):
                raise ValueError
            lo_f, hi_f = float(lo), float(hi)
        except ValueError:
            raise InputError(f"band {item!r} must look like NAME=LOW_KM:HIGH_KM (E=90:150)",
                             file="bands") from None
        if not (np.isfinite(lo_f) and np.isfinite(hi_f)) or hi_f <= lo_f:
            raise InputError(f"band {item!r}: the upper altitude must exceed the lower",
                             file="bands")
        bands[name.strip()] = (lo_f, hi_f)
    if not bands:
        raise InputError("no altitude band given", file="bands")
    return bands


def band_summary(ds, bands=None, species=None):
    """Median and largest percentage change per species and altitude band.

    Parameters
    ----------
    ds : xarray.Dataset
        From :func:`compare` (needs ``ratio``).
    bands : dict[str, (float, float)] or sequence of (name, low_km, high_km), optional
        Altitude bands, km, both ends included; default :func:`default_bands` of the
        dataset's grid.
    species : sequence of str, optional
        Default: the main ions present (:func:`main_species`).

    Returns
    -------
    list of BandRow
        Species-major order.
    """
    bands = default_bands(ds["altitude"].values) if bands is None else bands
    if not isinstance(bands, dict):
        bands = {name: (lo, hi) for name, lo, hi in bands}
    names = list(ds["species"].values)
    species = main_species(names) if species is None else list(species)
    unknown = [s for s in species if s not in names]
    if unknown:
        raise InputError(f"compare: no species {', '.join(unknown)} in the result")
    rows = []
    for s in species:
        rows += change_rows(s, ds["ratio"].sel(species=s).values, ds["altitude"].values,
                            bands)
    return rows


def change_rows(name, ratio, altitude_km, bands):
    """:class:`BandRow` of one ratio profile (changed/baseline) in each band; ``name``
    labels the rows (a species or a family reaction)."""
    alt = np.asarray(altitude_km, float)
    pct = 100.0 * (np.asarray(ratio, float) - 1.0)
    rows = []
    for band, (lo, hi) in bands.items():
        inside = (alt >= lo - 1e-9) & (alt <= hi + 1e-9)
        vals = pct[inside]
        good = np.isfinite(vals)
        if not good.any():
            rows.append(BandRow(name, band, lo, hi, int(inside.sum()), np.nan, np.nan,
                                np.nan))
            continue
        i = np.nanargmax(np.abs(np.where(good, vals, np.nan)))
        rows.append(BandRow(name, band, float(lo), float(hi), int(good.sum()),
                            float(np.median(vals[good])), float(vals[i]),
                            float(alt[inside][i])))
    return rows


def format_band_summary(rows, title=None):
    """The summary as a text table (one line per species and band)."""
    lines = []
    if title:
        lines.append(title)
    lines.append("percentage change of the changed model against the baseline "
                 "(100 (changed/baseline - 1))")
    lines.append(f"  {'species':<10}{'band':<16}{'median %':>11}{'largest %':>12}"
                 f"{'at km':>9}")

    def pct(x):
        return f"{x:+.2f}" if np.isfinite(x) else "-"

    for r in rows:
        band = f"{r.band} {r.low_km:g}-{r.high_km:g}"
        at = f"{r.largest_alt_km:g}" if np.isfinite(r.largest_alt_km) else "-"
        lines.append(f"  {r.species:<10}{band:<16}{pct(r.median_pct):>11}"
                     f"{pct(r.largest_pct):>12}{at:>9}")
    return "\n".join(lines)
