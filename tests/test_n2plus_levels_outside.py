"""N2+ level physics checked against closed forms (issue 30: survivors of the mutation run of
``ionochem/environment/n2plus_levels.py`` that change a physical number).

References: the photon energy E = hc/λ with hc = 12398.419843 eV Å (CODATA 2018, exact
constants); the N2 ionization threshold 15.581 eV (NIST *(from memory)*, as the module);
Morse-oscillator term values G(v) = ωe(v + ½) − ωexe(v + ½)² (Morse 1929, Phys. Rev. 34, 57;
Herzberg, Spectra of Diatomic Molecules, ch. III *(from memory)*) with the N2+ X constants
of Huber & Herzberg 1979 *(from memory)*; the statistical prior P(v) ∝ (E − E_v)^(3/2)
(Levine & Bernstein 1987, ch. 5 *(from memory)*); probabilities of exclusive outcomes add up
to 1.
"""

from __future__ import annotations

import numpy as np
import pytest

from ionochem.environment.n2plus_levels import (
    compute_level_fractions,
    n2plus_level_fractions,
    photoionization_split,
    statistical_level_distribution,
)
from ionochem.errors import InputError

HC_EV_A = 12398.419843320026      # eV Å, CODATA 2018 (h, c, e exact)
THRESHOLD_EV = 15.581             # N2 -> N2+ X(0), NIST *(from memory)*
WE, WEXE = 2207.00, 16.10         # N2+ X, cm-1, Huber & Herzberg 1979 *(from memory)*
CM_TO_EV = 1.239841984e-4         # eV per cm-1 (hc/e, CODATA 2018)


def _morse_ev(v):
    """Term value above v = 0 of the Morse oscillator, eV (module docstring)."""
    g = lambda n: WE * (n + 0.5) - WEXE * (n + 0.5) ** 2  # noqa: E731
    return (g(v) - g(0)) * CM_TO_EV


def test_photon_energy_of_each_bin_is_hc_over_its_wavelength():
    """``photon_eV`` of the bin-by-bin split is hc/λ: for a line its wavelength (He I 584 Å,
    and H Lyman α 1216 Å, below threshold, which ionizes nothing), for a range bin its centre,
    and for the bin straddling the threshold (hc/15.581 eV = 795.7 Å) the centre of its part
    shortward of the threshold."""
    lam_th = HC_EV_A / THRESHOLD_EV
    lo = np.array([584.33, 1215.67, 700.0, 750.0])
    hi = np.array([584.33, 1215.67, 750.0, 800.0])
    out = photoionization_split(lo, hi, [0, 1, 2, 3, 4])
    expect = HC_EV_A / np.array([584.33, 1215.67, 725.0, 0.5 * (750.0 + lam_th)])
    np.testing.assert_allclose(out["photon_eV"], expect, rtol=1e-6)
    np.testing.assert_allclose(out["fraction"].sum(-1), [1.0, 0.0, 1.0, 1.0], atol=1e-12)
    every = photoionization_split(lo, hi)                 # default: every level kept
    assert every["fraction"].shape == (4, 16)
    np.testing.assert_allclose(every["fraction"].sum(-1), [1.0, 0.0, 1.0, 1.0], atol=1e-12)


def test_state_shares_are_normalised_whatever_their_scale():
    """Shares given as 4 : 4.5 : 1.5 split exactly as 0.40 : 0.45 : 0.15 (the module
    normalises them: only their ratios are physical), and the level fractions of every
    photoionization add up to 1 (exclusive outcomes)."""
    ref = compute_level_fractions(top=8)
    scaled = compute_level_fractions(top=8, branching={"X": 4.0, "A": 4.5, "B": 1.5})
    np.testing.assert_allclose(scaled["fraction"], ref["fraction"], rtol=1e-12)
    for part in ("direct_X", "via_A", "via_B"):
        np.testing.assert_allclose(scaled[part], ref[part], rtol=1e-12)
    np.testing.assert_allclose(scaled["fraction"].sum(), 1.0, rtol=1e-9)
    np.testing.assert_array_equal(scaled["v"], np.arange(9))


@pytest.mark.parametrize("branching", [{"X": 0.0, "A": 0.0, "B": 0.0},
                                       {"X": -0.1, "A": 0.9, "B": 0.2}],
                         ids=["all-zero", "negative"])
def test_impossible_state_shares_are_refused(branching):
    """Shares that are no probabilities (all zero, or one negative) raise InputError rather
    than give NaN or negative fractions."""
    with pytest.raises(InputError):
        compute_level_fractions(top=8, branching=branching)


def test_statistical_prior_below_one_ev_follows_the_morse_levels():
    """With 0.5 eV available only v = 0 and v = 1 (Morse: 0.2696 eV) are open and
    P(1)/P(0) = ((0.5 − E_1)/0.5)^(3/2); v = 2 (0.535 eV) gets nothing. The module's levels
    come from a finite-difference Hamiltonian: 1e-3 is its accuracy on E_1."""
    e1, e2 = _morse_ev(1), _morse_ev(2)
    assert e1 < 0.5 < e2
    p = statistical_level_distribution(0.5, [0, 1, 2])
    w = np.array([0.5 ** 1.5, (0.5 - e1) ** 1.5, 0.0])
    np.testing.assert_allclose(p, w / w.sum(), rtol=2e-3, atol=1e-12)
    with pytest.raises(InputError):
        statistical_level_distribution(0.0, [0, 1, 2])


@pytest.mark.parametrize("levels", [[], [1, 2], [0, 1, 1], [0, 2, 1]],
                         ids=["empty", "not-from-0", "repeated", "decreasing"])
@pytest.mark.parametrize("split", [
    n2plus_level_fractions,
    lambda lv: statistical_level_distribution(1.36, lv),
    lambda lv: photoionization_split([584.33], [584.33], lv),
], ids=["table", "prior", "bin-by-bin"])
def test_level_lists_that_are_no_partition_are_refused(split, levels):
    """Resolved levels must partition v = 0, 1, ... (strictly increasing from 0): otherwise
    a level would be counted twice or some production lost, so each split refuses them."""
    with pytest.raises(InputError):
        split(levels)
