"""Contrasts, the verdict rule, rates and configuration."""

from __future__ import annotations

import numpy as np
import pytest

from divides.assess.contrasts import Contrast, block_bootstrap_mean
from divides.assess.rate import calibrate, migration_rate, step_celerity
from divides.assess.verdict import decide
from divides.config import AssessConfig
from divides.errors import ParameterError


def test_block_bootstrap_interval_covers_the_mean_at_the_nominal_rate():
    # AR(1) series with known mean 0: the moving-block bootstrap 95 % interval should cover
    # zero in roughly 95 % of replicates (Künsch 1989; Lahiri 2003). We accept 88-99 %.
    rng = np.random.default_rng(0)
    covered = 0
    trials = 200
    for _ in range(trials):
        e = rng.standard_normal(300)
        x = np.empty(300)
        x[0] = e[0]
        for i in range(1, 300):
            x[i] = 0.7 * x[i - 1] + e[i]
        boots = block_bootstrap_mean(x, block=15, n_boot=300, rng=rng)
        lo, hi = np.percentile(boots, [2.5, 97.5])
        covered += lo <= 0 <= hi
    assert 0.88 <= covered / trials <= 0.99


def _c(metric, toward):
    return Contrast(metric, "m", 1.0, 0.0, 1.0, (0.5, 1.5), toward, 10, "rule")


def test_verdict_rule():
    # The documented rule of divides.assess.verdict.decide (Forte & Whipple 2018: near-divide
    # metrics for present motion, χ for the long-run tendency).
    near = ["channel_elevation", "hillslope_gradient", "local_relief", "hillslope_relief"]
    agree = decide([_c("chi", "b")] + [_c(m, "b") for m in near], robustness_share=1.0)
    assert (agree.moves_toward, agree.aggressor, agree.basis) == ("b", "a", "near-divide")
    assert agree.confidence >= 0.9
    # 2 vs 1 is a conflict
    split = decide([_c("chi", "none"), _c(near[0], "a"), _c(near[1], "a"), _c(near[2], "b"), _c(near[3], "none")])
    assert split.moves_toward == "undetermined" and split.confidence == 0.0
    # 3 vs 1 keeps the majority with a lower confidence
    three = decide([_c("chi", "none"), _c(near[0], "a"), _c(near[1], "a"), _c(near[2], "a"), _c(near[3], "b")],
                   robustness_share=1.0)
    assert three.moves_toward == "a" and three.confidence < agree.confidence
    # χ alone: its direction, flagged, with a low confidence
    chi_only = decide([_c("chi", "a")] + [_c(m, "none") for m in near], robustness_share=1.0)
    assert chi_only.basis == "chi" and chi_only.moves_toward == "a" and chi_only.confidence < 0.5
    # χ alone but under 10 % of its mean: not enough for a direction
    weak = Contrast("chi", "m", 1.0, 0.95, 0.05, (0.01, 0.09), "a", 10, "rule")
    assert decide([weak] + [_c(m, "none") for m in near]).moves_toward == "stable"
    # nothing significant: stable
    stable = decide([_c("chi", "none")] + [_c(m, "none") for m in near], robustness_share=1.0)
    assert stable.moves_toward == "stable" and stable.aggressor is None
    # robustness scales confidence
    shaky = decide([_c("chi", "b")] + [_c(m, "b") for m in near], robustness_share=0.5)
    assert shaky.confidence == pytest.approx(agree.confidence * 0.5, abs=1e-3)


def test_migration_rate_of_two_planes():
    # Kinematics: crest between slopes tan α_a = 0.5 and tan α_b = 0.3 lowered at 1 and 0.2 mm/yr
    # moves toward b at (1 - 0.2) / (0.5 + 0.3) = 1 mm/yr (worked by hand).
    assert migration_rate(1e-3, 0.2e-3, 0.5, 0.3) == pytest.approx(1e-3)
    assert migration_rate(0.2e-3, 1e-3, 0.5, 0.3) == pytest.approx(-1e-3)


def test_calibration_from_one_side_and_step_celerity():
    # E = K ksn^n: with E_a = 0.1 mm/yr and ksn_a = 100, ksn_b = 50, n = 1: E_b = 0.05 mm/yr (by hand).
    cal = calibrate(ksn_a=np.array([100.0]), ksn_b=np.array([50.0]), n=1.0, erosion_rate_a_mm_yr=0.1)
    assert cal.erosion_b[0] == pytest.approx(0.05e-3)
    assert cal.k[0] == pytest.approx(1e-6)
    # n = 2: E_b = E_a (50/100)^2
    cal2 = calibrate(ksn_a=np.array([100.0]), ksn_b=np.array([50.0]), n=2.0, erosion_rate_a_mm_yr=0.1)
    assert cal2.erosion_b[0] == pytest.approx(0.025e-3)
    # step celerity: 1 for n = 1; (k1^2 - k2^2)/(k1 - k2) = k1 + k2 for n = 2; n k^(n-1) as k2 -> k1
    assert step_celerity(100.0, 50.0, 1.0) == pytest.approx(1.0)
    assert step_celerity(100.0, 50.0, 2.0) == pytest.approx(150.0)
    assert step_celerity(100.0, 100.0, 1.5) == pytest.approx(1.5 * 100.0**0.5)
    assert not calibrate(ksn_a=np.ones(3), ksn_b=np.ones(3), n=1.0).available


def test_config_validation():
    assert AssessConfig().theta == 0.45
    for bad in ({"theta": -1}, {"theta": "best"}, {"n": 0}, {"dem_error_m": -1}, {"n_bootstrap": 3},
                {"erosion_rate_a_mm_yr": 5000.0}, {"conditioning": "smooth"},
                {"erosion_rate_a_mm_yr": 0.1, "erodibility": 1e-6}, {"channel_area_m2": 0}):
        with pytest.raises(ParameterError):
            AssessConfig(**bad)
    with pytest.raises(ParameterError, match="unknown option"):
        AssessConfig.from_options(thetaa=0.5)


def test_channel_elevation_and_hillslope_relief_vote_once_when_read_at_the_same_cells():
    # Divide elevation = channel elevation + hillslope relief (Scherler & Schwanghart 2020's
    # definition) when both are read at the first channel cell: one measurement, one vote.
    import divides

    dem = divides.read_dem("demo/uplands.tif")
    result = divides.assess(dem, "west", "east", closed_edges=("north", "south"), robustness=False,
                            n_bootstrap=100)
    pts = result.points
    ce_a, ce_b = pts.values["channel_elevation"]
    hr_a, hr_b = pts.values["hillslope_relief"]
    ok = np.isfinite(ce_a + ce_b + hr_a + hr_b)
    np.testing.assert_allclose((ce_a - ce_b)[ok], -(hr_a - hr_b)[ok], atol=1e-3)
    pair = [_c("channel_elevation", "b"), _c("hillslope_relief", "b"), _c("hillslope_gradient", "none"),
            _c("local_relief", "none"), _c("chi", "none")]
    once = decide(pair, robustness_share=1.0, same_channel=True)
    twice = decide(pair, robustness_share=1.0, same_channel=False)
    assert once.moves_toward == twice.moves_toward == "b"
    assert once.confidence == pytest.approx(0.35 + 0.2)  # one vote of three
    assert twice.confidence == pytest.approx(0.35 + 2 * 0.15)  # two votes of four
