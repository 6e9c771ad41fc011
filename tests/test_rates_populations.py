"""Level populations from level-resolved signals (ionochem.rates.level_populations).

References: synthetic signals from known populations and a known design with numpy's
Gaussian noise; the recovered populations are compared with the truth in units of their
stated errors (a pull distribution: about 68 % within one sigma); scipy.optimize.nnls is
the algorithm (Lawson & Hanson 1974); beam_rate for the per-level beam curves.
"""

from __future__ import annotations

import numpy as np
import pytest

from ionochem.errors import InputError
from ionochem.rates import beam_populations, level_populations

TRUE = np.array([0.55, 0.25, 0.15, 0.05])
DESIGN = np.array([           # invented per-level responses (e.g. rate coefficients, 1e-7)
    [2.0, 1.0, 0.5, 0.2],
    [0.3, 2.2, 0.8, 0.4],
    [0.1, 0.5, 2.5, 0.9],
    [0.2, 0.3, 0.6, 2.8],
    [1.0, 1.0, 1.0, 1.0],
    [1.5, 0.2, 1.2, 0.3],
])


def test_populations_are_recovered_within_their_stated_errors():
    """Over 300 noise draws, each level's pull (fit - truth)/error is within one sigma in
    68 % +- 8 % of the draws, and the populations sum to one."""
    rng = np.random.default_rng(21)
    scale = 3.0                              # unknown overall factor (beam current)
    clean = scale * DESIGN @ TRUE
    s = 0.02 * clean
    pulls = []
    for _ in range(300):
        res = level_populations(DESIGN, clean + rng.normal(0, s), s)
        assert res.populations.sum() == pytest.approx(1.0)
        pulls.append((res.populations - TRUE) / res.errors)
    inside = (np.abs(np.array(pulls)) <= 1).mean(axis=0)
    assert np.all(np.abs(inside - 0.6827) < 0.08), inside


def test_bootstrap_agrees_with_linearisation_away_from_zero():
    """For populations well away from zero both error methods agree within 25 %."""
    rng = np.random.default_rng(4)
    clean = DESIGN @ TRUE
    s = 0.01 * clean
    y = clean + rng.normal(0, s)
    lin = level_populations(DESIGN, y, s)
    boot = level_populations(DESIGN, y, s, method="bootstrap", n_boot=400, seed=1)
    np.testing.assert_allclose(boot.errors, lin.errors, rtol=0.25)
    np.testing.assert_allclose(boot.populations, lin.populations)


def test_empty_level_stays_at_zero():
    """A level with no population is fitted at (or near) zero, never negative."""
    truth = np.array([0.7, 0.3, 0.0, 0.0])
    clean = DESIGN @ truth
    res = level_populations(DESIGN, clean, 1e-3 * clean)
    assert (res.populations >= 0).all()
    np.testing.assert_allclose(res.populations, truth, atol=1e-6)


def test_beam_curve_mix_is_recovered():
    """A measured beam curve made of 70 % level 0 and 30 % level 1 (invented 1/E and
    resonance-like cross sections) gives back that mix and a scale near one."""
    E = np.geomspace(1e-6, 2.0, 3000)
    s0 = 1e-15 / E
    s1 = 4e-15 / E * np.exp(-E / 0.05) + 2e-16 * np.exp(-0.5 * ((E - 0.2) / 0.02) ** 2)
    Ed = np.geomspace(1e-4, 1.0, 40)
    from ionochem.rates import beam_rate
    curve = beam_rate(E, np.column_stack([s0, s1]), Ed, 3e-3, 1e-4) @ np.array([0.7, 0.3])
    res = beam_populations(E, np.column_stack([s0, s1]), Ed, curve, 0.01 * curve, 3e-3, 1e-4)
    np.testing.assert_allclose(res.populations, [0.7, 0.3], atol=1e-6)
    assert res.scale == pytest.approx(1.0, rel=1e-6)


@pytest.mark.parametrize("args, words", [
    ((DESIGN, np.ones(5), 0.1), "design must be"),
    ((-DESIGN, np.ones(6), 0.1), "non-negative"),
    ((DESIGN, np.ones(6), 0.0), "positive"),
    ((DESIGN, -np.ones(6), 0.1), "zero"),
])
def test_bad_inputs_are_refused(args, words):
    """Shape mismatch, negative design, zero errors, signals nothing can explain: InputError."""
    with pytest.raises(InputError, match=words):
        level_populations(*args)


def test_a_level_fitted_at_zero_gets_its_delta_chi2_upper_limit(tmp_path, capsys):
    """Two channels that each see one level (identity design), signals 1 and -0.5 with
    sigma 1: level 1 sits on the bound (its unconstrained value -0.5 with width 1). Holding
    it at t, chi2 rises by (t + 0.5)^2 - 0.25, so Delta chi2 = 1 at t = sqrt(1.25) - 0.5
    (analytic), a normalised share t/(1 + t). The command line shows that limit instead of
    the linearised "0.0000 +- 0.0000"."""
    res = level_populations(np.eye(2), np.array([1.0, -0.5]), 1.0)
    t = np.sqrt(1.25) - 0.5
    assert res.populations[1] == 0.0
    assert res.upper_limits[1] == pytest.approx(t / (1.0 + t), rel=1e-9)
    assert np.isnan(res.upper_limits[0])
    from ionochem.cli import main
    (tmp_path / "sig.csv").write_text("channel,signal,sigma\n0,1.0,1.0\n1,-0.5,1.0\n")
    (tmp_path / "des.csv").write_text("channel,v0,v1\n0,1,0\n1,0,1\n")
    assert main(["rates", "populations", str(tmp_path / "sig.csv"), "--design",
                 str(tmp_path / "des.csv")]) == 0
    rows = [ln.split() for ln in capsys.readouterr().out.splitlines()
            if ln.split()[:1] == ["1"]]
    assert rows == [["1", "0", "(on", "bound)", "upper", "limit", f"{t / (1 + t):.4f}"]]
