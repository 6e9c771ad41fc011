"""N2+ production by vibrational level: the bin-by-bin photoionization split, the
electron-impact split, and the production the model hands to each level.

References: Franck-Condon factors of Gilmore, Laher & Espy (1992), J. Phys. Chem. Ref. Data
21, 1005 (values quoted from memory, as in tests/test_photorates.py); state thresholds of
NIST ionization energies *(from memory)* (N2+ X 15.58 eV / 796 Å, A 16.7 eV / 743 Å,
B 18.75 eV / 661 Å).
"""

from __future__ import annotations

import numpy as np
import pytest

from ionochem.environment.n2plus_levels import (
    compute_level_fractions,
    electron_impact_split,
    level_requests,
    photoionization_split,
)

LEVELS = range(6)


def _split(wl, **kw):
    return photoionization_split([wl], [wl], LEVELS, **kw)


def test_direct_ionization_reproduces_published_franck_condon_factors():
    """With only the X state (304 Å, far above every threshold and outside the
    autoionization range) the split is the N2 X(0) -> N2+ X(v) Franck-Condon factors,
    0.916 and 0.080 for v = 0, 1 (Gilmore et al. 1992), to 0.01; with only B, before the
    cascade, B(0), B(1) = 0.886, 0.107: the B -> X cascade then puts into X(0)
    0.886 B(0->0) + 0.107 B(1->0), with B(0->0) = 0.66 (Gilmore et al. 1992)."""
    d = _split(303.78, branching={"X": 1.0, "A": 0.0, "B": 0.0})
    assert d["fraction"][0, :2] == pytest.approx([0.916, 0.080], abs=0.01)
    assert d["via_A"].sum() == 0 and d["via_B"].sum() == 0
    b = _split(303.78, branching={"X": 0.0, "A": 0.0, "B": 1.0})
    assert b["direct_X"].sum() == 0
    assert b["fraction"][0, 0] > 0.886 * 0.66 - 0.02
    assert b["fraction"].sum() == pytest.approx(1.0, abs=1e-12)


def test_bin_below_the_a_threshold_feeds_no_cascade():
    """770.41 Å (16.09 eV) is below the A threshold (16.7 eV, 743 Å) and the B threshold:
    nothing goes through A or B cascades, and only X levels within 0.51 eV of X(0) (v = 0,
    1; E_1 = 0.27 eV, E_2 = 0.54 eV) are made. The same for the 750-800 Å range bin, whose
    ionizing part (750-796 Å) lies below 16.5 eV."""
    for lo, hi in ((770.41, 770.41), (750.0, 800.0)):
        d = photoionization_split([lo], [hi], LEVELS)
        assert d["via_A"].sum() == 0.0 and d["via_B"].sum() == 0.0
        assert d["fraction"][0, 2:].sum() == 0.0
        assert d["fraction"].sum() == pytest.approx(1.0, abs=1e-12)


def test_bin_between_a_and_b_thresholds_feeds_a_but_not_b():
    """703.36 Å (17.63 eV): A is open (16.7 eV), B is not (18.75 eV)."""
    d = _split(703.36)
    assert d["via_A"].sum() > 0.1 and d["via_B"].sum() == 0.0


def test_autoionization_bins_carry_the_stated_vibrational_share():
    """Between the X and B thresholds the X-state ions go to v >= 1 with the stated share
    (0.25 by default) instead of the Franck-Condon 0.08; None restores Franck-Condon."""
    d = _split(770.41, branching={"X": 1.0, "A": 0.0, "B": 0.0})
    assert d["fraction"][0, 1:].sum() == pytest.approx(0.25, abs=1e-12)
    fc = _split(770.41, branching={"X": 1.0, "A": 0.0, "B": 0.0},
                autoionization_v1_share=None)
    # Only v = 0, 1 are open: FC factors 0.916 : 0.080 renormalised.
    assert fc["fraction"][0, 1] == pytest.approx(0.080 / (0.916 + 0.080), abs=0.01)


def test_high_energy_bins_equal_the_fixed_split_they_replace():
    """Above the autoionization range and far above every threshold (304 Å), the bin-by-bin
    split with the default state shares is the packaged fixed split (same physics)."""
    d = _split(303.78)
    ref = compute_level_fractions(top=15)["fraction"]
    np.testing.assert_allclose(d["fraction"][0], np.append(ref[:5], ref[5:].sum()),
                               atol=1e-9)


def test_electron_impact_split_is_franck_condon_with_its_state_shares():
    """Photoelectron impact: X only gives the Franck-Condon factors (Born limit, where
    electron-impact and optical Franck-Condon factors agree); the default shares give a
    distribution summing to one with v = 0 dominant."""
    x = electron_impact_split(LEVELS, branching={"X": 1.0, "A": 0.0, "B": 0.0})
    assert x[:2] == pytest.approx([0.916, 0.080], abs=0.01)
    d = electron_impact_split(LEVELS)
    assert d.sum() == pytest.approx(1.0, abs=1e-12) and d[0] > 0.6


def test_level_requests_parse_the_needs_of_a_mechanism():
    """Needs of the form photo:N2->N2+(v=k) are gathered per channel, sorted."""
    req = level_requests({"photo:N2->N2+", "photo:N2->N2+(v=1)", "photo:N2->N2+(v=0)",
                          "photoelectron:N2->N2+(v=0)", "photo:O->O+"})
    assert req == {"photo:N2->N2+": [0, 1], "photoelectron:N2->N2+": [0]}


@pytest.fixture(scope="module")
def demo():
    from pathlib import Path

    import ionochem
    path = Path(__file__).resolve().parents[1] / "scenarios" / "midlatitude_equinox.toml"
    model = ionochem.Model(ionochem.load_scenario(path))
    return model, model.solve()


def test_level_production_adds_up_to_the_channel_total(demo):
    """Per-level photo and photoelectron rates of N2 -> N2+ add up to the channel totals of
    the environment (conservation, to 1e-12) and differ between heights (the split follows
    the attenuated spectrum bin by bin)."""
    model, _ = demo
    src = model.environment.sources(None)
    k = model.rate_coefficients()
    for fam, key in (("PI_N2", "photo:N2->N2+"), ("PE_N2", "photoelectron:N2->N2+")):
        cols = [model.reactions.index(f"{fam}(v={v})") for v in LEVELS]
        np.testing.assert_allclose(k[:, cols].sum(axis=1), src[key], rtol=1e-12, atol=0)
    cols = [model.reactions.index(f"PI_N2(v={v})") for v in LEVELS]
    share = k[:, cols] / k[:, cols].sum(axis=1, keepdims=True)
    lit = src["photo:N2->N2+"] > 0
    assert np.ptp(share[lit, 1]) > 1e-4


def test_modelled_vibrational_distribution_150_to_300_km(demo):
    """The modelled N2+ X(v) distribution against the published picture of the daytime
    F region (Fox & Dalgarno 1985, JGR 90, 7557, and Abdou et al. 1984, JGR 89, 9069:
    vibrationally excited N2+ is made mostly by O+(2D) + N2 and matters more with height,
    where N2, which relaxes it, thins out) *(from memory; no published numbers at hand)*:
    v = 0 is the most populated level everywhere, the excited share rises monotonically
    from 150 to 300 km, from a few per cent at 150 km to tens of per cent at 300 km."""
    _, ds = demo
    alt = ds["altitude"].values
    pick = (alt >= 150) & (alt <= 300)
    dens = ds["density"]
    tot = dens.sel(species="N2+").values[pick]
    levels = np.stack([dens.sel(species=f"N2+(v={v})").values[pick] for v in LEVELS])
    frac = levels / tot
    excited = 1 - frac[0]
    assert np.all(frac[0] >= frac[1:].max(axis=0))
    assert np.all(np.diff(excited) > 0)
    assert 0.01 < excited[0] < 0.15 and 0.2 < excited[-1] < 0.7
