"""Contrasts, the verdict rule, rates and configuration."""

from __future__ import annotations

import numpy as np
import pytest

from divides.assess.contrasts import (
    INSUFFICIENT,
    MIN_SAMPLES,
    Contrast,
    block_bootstrap_mean,
    compute_contrasts,
    divide_samples,
    interval_of_mean,
)
from divides.assess.points import DividePoints
from divides.assess.rate import calibrate, migration_rate, step_celerity
from divides.assess.verdict import decide
from divides.config import AssessConfig
from divides.errors import ParameterError
from divides.terrain.dem_error import DemError


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


def _c(metric, toward, *, balanced=False, why=""):
    return Contrast(metric, "m", 1.0, 0.0, 1.0, (0.5, 1.5), toward, 10, "rule", why_none=why, balanced=balanced)


_RULES = {"chi": "higher χ", "channel_elevation": "higher channel elevation",
          "hillslope_gradient": "lower hillslope gradient", "local_relief": "lower local relief",
          "hillslope_relief": "lower hillslope relief"}
_NEAR = ["channel_elevation", "hillslope_gradient", "local_relief", "hillslope_relief"]


def _toward(metric, side, z, *, n_eff=20.0, balanced=False):
    """A sufficient contrast whose evidence points toward ``side`` with standardised size ``z`` (0: none).

    For independent samples the standard error of the mean is spread / sqrt(n), so the
    consistency (|mean| / spread) that goes with z is z / sqrt(n).
    """
    consistency = z / np.sqrt(n_eff)
    rule = _RULES[metric]
    # a "higher ..." rule moves the divide toward the side with the higher value (Forte & Whipple 2018)
    sign = (1.0 if side == "a" else -1.0) * (1.0 if rule.startswith("higher") else -1.0)
    diff = sign * z
    toward = side if z >= 2 else "none"
    return Contrast(metric, "m", 10.0 + diff, 10.0, diff, (diff - 1.96, diff + 1.96), toward, int(n_eff), rule,
                    consistency=consistency, n_samples=int(n_eff), n_effective=n_eff,
                    balanced=balanced)


def test_verdict_rule():
    # The calibrated rule of divides.assess.verdict.decide (issue 12): probabilities of a, b and
    # stable; an outcome only at min_confidence; confidence = probability of the outcome returned.
    strong = [_toward("chi", "b", 6.0)] + [_toward(m, "b", 8.0) for m in _NEAR]
    agree = decide(strong, robustness_share=1.0)
    # Every near-divide measure far from zero and consistent along the divide toward b: the divide
    # moves toward b (Forte & Whipple 2018's criteria all agreeing; the benchmark's moving cases).
    assert (agree.moves_toward, agree.aggressor, agree.basis) == ("b", "a", "near-divide")
    assert agree.confidence >= 0.8
    assert sum(agree.probabilities.values()) == pytest.approx(1.0, abs=1e-3)
    # confidence is the calibrated probability of the outcome returned (definition; issue 12)
    assert agree.confidence == pytest.approx(agree.probabilities["b"], abs=1e-3)
    # the robustness share is reported, never folded into a calibrated probability
    assert decide(strong, robustness_share=0.5).confidence == agree.confidence
    # mirror image (a and b swapped): the physics has no preferred side, so P(a) and P(b) swap
    mirrored = decide([_toward("chi", "a", 6.0)] + [_toward(m, "a", 8.0) for m in _NEAR])
    assert mirrored.moves_toward == "a"
    assert mirrored.probabilities["a"] == pytest.approx(agree.probabilities["b"], abs=0.01)
    assert mirrored.probabilities["stable"] == pytest.approx(agree.probabilities["stable"], abs=0.01)
    # a threshold above the probability turns the same evidence into "undetermined" (the rule)
    high = decide(strong, min_confidence=min(1.0, agree.confidence + 0.01))
    assert (high.moves_toward, high.reason) == ("undetermined", "below the confidence threshold")
    # χ alone never makes a direction (issue 12; Whipple et al. 2017: steady lopsided divides)
    chi_only = decide([_toward("chi", "a", 12.0)] + [_toward(m, "a", 0.0) for m in _NEAR])
    assert chi_only.moves_toward not in ("a", "b")
    # differences whose 95 % intervals all span zero are no evidence of a direction (common practice)
    weak = decide([_toward(m, "b", 1.0) for m in ["chi", *_NEAR]])
    assert weak.moves_toward not in ("a", "b")
    # balanced evidence is never a direction, and is more likely stable than strong evidence is
    calm = decide([_toward(m, "a", 0.0, balanced=True) for m in ["chi", *_NEAR]])
    assert calm.moves_toward not in ("a", "b")
    assert calm.probabilities["stable"] > agree.probabilities["stable"]
    # no evidence at all, or too few samples: undetermined, "insufficient data", no probabilities
    for evidence in ([], [_c("chi", "none", why=INSUFFICIENT)] + [_c(m, "none", why=INSUFFICIENT) for m in _NEAR]):
        empty = decide(evidence, robustness_share=1.0)
        assert (empty.moves_toward, empty.reason, empty.confidence) == ("undetermined", "insufficient data", 0.0)
        assert empty.probabilities is None


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
                {"erosion_rate_a_mm_yr": 0.1, "erodibility": 1e-6}, {"channel_area_m2": 0},
                # a threshold at or below 1/3 could return an outcome that is not the most probable
                # of three (pigeonhole), above 1 none could be returned
                {"min_confidence": 1 / 3}, {"min_confidence": 1.01}, {"min_confidence": True}):
        with pytest.raises(ParameterError):
            AssessConfig(**bad)
    with pytest.raises(ParameterError, match="unknown option"):
        AssessConfig.from_options(thetaa=0.5)
    assert AssessConfig().min_confidence == 0.8  # issue 12's default threshold


def test_channel_elevation_and_hillslope_relief_mirror_each_other_when_read_at_the_same_cells():
    # Divide elevation = channel elevation + hillslope relief (Scherler & Schwanghart 2020's
    # definition) when both are read at the first channel cell: one measurement seen twice (the
    # decision model was fitted on landscapes where they are, so it weighs them together).
    import divides

    dem = divides.read_dem("demo/uplands.tif")
    result = divides.assess(dem, "west", "east", closed_edges=("north", "south"), robustness=False,
                            n_bootstrap=100)
    pts = result.points
    ce_a, ce_b = pts.values["channel_elevation"]
    hr_a, hr_b = pts.values["hillslope_relief"]
    ok = np.isfinite(ce_a + ce_b + hr_a + hr_b)
    np.testing.assert_allclose((ce_a - ce_b)[ok], -(hr_a - hr_b)[ok], atol=1e-3)


def test_t_calibrated_interval_covers_at_the_minimum_sample_size():
    # With MIN_SAMPLES independent normal values the interval of the mean must cover the true mean
    # about 95 % of the time: Student's t-interval does exactly (Student 1908); the plain
    # percentile bootstrap undercovers at small n (Efron & Tibshirani 1993, ch. 13). Accept 92-98 %.
    rng = np.random.default_rng(5)
    trials = 600
    covered = plain = 0
    for _ in range(trials):
        x = rng.standard_normal(MIN_SAMPLES)
        lo, hi = interval_of_mean(x, block=1, n_effective=MIN_SAMPLES, n_boot=400, rng=rng)
        covered += lo <= 0 <= hi
        q = np.percentile(block_bootstrap_mean(x, block=1, n_boot=400, rng=rng), [2.5, 97.5])
        plain += q[0] <= 0 <= q[1]
    assert 0.92 <= covered / trials <= 0.98
    assert plain / trials < covered / trials  # the calibration is what brings it to the nominal level


def _points(n, head_a, head_b, values, *, facing=1.0):
    """Synthetic divide points along a straight divide (every metric given per point)."""
    x = np.arange(n) * 60.0
    ids = np.asarray(head_a), np.asarray(head_b)
    return DividePoints(x=x, y=np.zeros(n), line=np.zeros(n, int), distance_m=x, elevation_m=np.full(n, 500.0),
                        cell_a=np.arange(n), cell_b=np.arange(n), head_a=ids[0], head_b=ids[1], ref_a=ids[0],
                        ref_b=ids[1], normal=np.tile([1.0, 0.0], (n, 1)), facing=np.full(n, facing), east_m=x,
                        north_m=np.zeros(n), values=values)


def test_samples_are_one_per_pair_of_channel_heads_for_every_metric():
    # 30 divide points draining to 10 pairs of channel heads (3 points each): every metric,
    # hillslope relief included, is read on the same 10 samples (issue: relief counted 84 times
    # from 28 heads). Brute force: the distinct pairs.
    rng = np.random.default_rng(0)
    heads = np.repeat(np.arange(10), 3)
    vals = {m: (rng.random(30) + 1.0, rng.random(30)) for m in
            ("chi", "channel_elevation", "hillslope_gradient", "local_relief", "hillslope_relief")}
    pts = _points(30, heads, heads + 100, vals)
    samples = divide_samples(pts)
    assert samples.size == 10
    for metric, (va, _) in vals.items():
        np.testing.assert_allclose(samples.values[metric][0], va.reshape(10, 3).mean(axis=1))
    contrasts = compute_contrasts(pts, block_points=1, n_boot=200, base_level_m=0.0)
    assert {c.n_samples for c in contrasts} == {10} and {c.n_points for c in contrasts} == {10}


def test_few_samples_are_insufficient_data_with_no_interval_and_no_vote():
    # A divide with 3 points (issue: "a divide of 395 m between two points ... every 95 % interval
    # of zero width"): below MIN_SAMPLES there is no interval and no vote; the verdict abstains.
    vals = {m: (np.array([10.0, 11.0, 12.0]), np.array([1.0, 1.0, 1.0])) for m in
            ("chi", "channel_elevation", "hillslope_gradient", "local_relief", "hillslope_relief")}
    contrasts = compute_contrasts(_points(3, [0, 1, 2], [5, 6, 7], vals), block_points=1, n_boot=200,
                                  base_level_m=0.0)
    assert all(c.why_none == INSUFFICIENT and c.moves_toward == "none" for c in contrasts)
    assert all(np.isnan(c.ci95[0]) and np.isnan(c.ci95[1]) for c in contrasts)
    verdict = decide(contrasts)
    assert (verdict.moves_toward, verdict.reason) == ("undetermined", "insufficient data")
    # many points but all draining to the same pair of heads: one sample, still insufficient
    same = {m: (np.full(40, 10.0), np.full(40, 1.0)) for m in vals}
    contrasts = compute_contrasts(_points(40, np.zeros(40, int), np.ones(40, int), same), block_points=1,
                                  n_boot=200, base_level_m=0.0)
    assert all(c.why_none == INSUFFICIENT for c in contrasts)


def test_no_zero_width_interval_when_the_differences_are_identical():
    # 20 samples whose differences are all exactly 2 m: the spread along the divide is zero, but
    # the DEM error (σ = 1 m) still makes the mean uncertain: the half-width is at least
    # t(0.975, n − 1) · sqrt(2) σ / sqrt(n) for channel elevation (two independent elevations).
    from scipy import stats

    vals = {m: (np.full(20, 12.0), np.full(20, 10.0)) for m in
            ("chi", "channel_elevation", "hillslope_gradient", "local_relief", "hillslope_relief")}
    pts = _points(20, np.arange(20), np.arange(20) + 50, vals)
    by = {c.metric: c for c in compute_contrasts(pts, block_points=1, n_boot=200, base_level_m=0.0,
                                                 dem_error=DemError(1.0, 0.0), cell_m=30.0)}
    ce = by["channel_elevation"]
    half = stats.t.ppf(0.975, 19) * np.sqrt(2.0) / np.sqrt(20)
    assert ce.ci95[0] == pytest.approx(2.0 - half) and ce.ci95[1] == pytest.approx(2.0 + half)
    # χ has no DEM-error floor: with no spread at all it cannot be given an interval
    assert by["chi"].why_none == INSUFFICIENT


def test_correlated_dem_error_along_the_divide_lowers_the_effective_sample_size():
    # 20 samples 60 m apart with DEM error correlated over 600 m count for much less than 20
    # (Bretherton et al. 1999: n_eff = n² / Σρ); with n_eff below MIN_SAMPLES the contrast abstains.
    rng = np.random.default_rng(2)
    vals = {m: (rng.random(20) + 5.0, rng.random(20)) for m in
            ("chi", "channel_elevation", "hillslope_gradient", "local_relief", "hillslope_relief")}
    pts = _points(20, np.arange(20), np.arange(20) + 50, vals)
    white = compute_contrasts(pts, block_points=1, n_boot=200, base_level_m=0.0, dem_error=DemError(1.0, 0.0))
    shared = compute_contrasts(pts, block_points=1, n_boot=200, base_level_m=0.0, dem_error=DemError(1.0, 3000.0))
    assert white[1].n_points == 20
    x = np.arange(20) * 60.0
    expected = 400.0 / np.exp(-np.abs(x[:, None] - x[None, :]) / 3000.0).sum()
    assert shared[1].n_effective == pytest.approx(expected)
    assert expected < MIN_SAMPLES and shared[1].why_none == INSUFFICIENT


def test_mirrored_channel_elevation_and_hillslope_relief_pass_or_fail_together():
    # Read at the same channel cells, channel elevation and hillslope relief (divide elevation minus
    # that elevation; Scherler & Schwanghart 2020) differ across the divide by equal and opposite
    # amounts: one measurement. Here the difference (2 m) is 10 % of the relief (20 m) but only
    # 1 % of the channels' height above the base (200 m): one passes the practical threshold, the
    # other does not — mirrored, neither votes.
    rng = np.random.default_rng(3)
    n = 30
    noise = rng.normal(0, 0.1, n)
    za, zb = 202.0 + noise, 200.0 + 0 * noise
    vals = {"chi": (np.full(n, 5.0) + noise, np.full(n, 5.0)),
            "channel_elevation": (za, zb), "hillslope_relief": (220.0 - za, 220.0 - zb),
            "hillslope_gradient": (np.full(n, 0.3) + noise * 0.01, np.full(n, 0.3)),
            "local_relief": (np.full(n, 50.0) + noise, np.full(n, 50.0))}
    pts = _points(n, np.arange(n), np.arange(n) + 50, vals)
    apart = {c.metric: c for c in compute_contrasts(pts, block_points=1, n_boot=300, base_level_m=0.0)}
    assert apart["channel_elevation"].why_none == "too small" and apart["hillslope_relief"].moves_toward == "a"
    together = {c.metric: c for c in compute_contrasts(pts, block_points=1, n_boot=300, base_level_m=0.0,
                                                       mirrored=True)}
    assert together["channel_elevation"].moves_toward == together["hillslope_relief"].moves_toward == "none"
    assert together["hillslope_relief"].why_none.startswith("too small")


def test_verdict_with_the_forward_run():
    # Issue 12 item 4: the forward run's shift is a line of evidence beside the near-divide measures.
    from divides.assess.verdict import FORWARD_NOISE_CELLS, decision_model

    strong_a = [_toward(m, "a", 8.0) for m in _NEAR]
    near_alone = decide(strong_a)
    assert near_alone.moves_toward == "a" and near_alone.forward_shift_cells is None
    # by default the forward run reports and can veto, but the near-divide model decides
    checked = decide(strong_a, forward_shift=-2.0)
    assert (checked.moves_toward, checked.basis, checked.forward_shift_cells) == ("a", "near-divide", -2.0)
    assert checked.probabilities == near_alone.probabilities
    assert checked.near_divide_probabilities == pytest.approx(near_alone.probabilities, abs=1e-3)
    # strongly disagreeing lines lean to undetermined (rule 5 of decide): the near-divide measures call a
    # at >= min_confidence while the forward run moves the divide a whole cell the other way
    assert near_alone.probabilities["a"] >= 0.8
    for in_model in (False, True):
        clash = decide(strong_a, forward_shift=+1.0, forward_in_decision=in_model)
        assert (clash.moves_toward, clash.reason) == ("undetermined", "lines disagree")
    # a forward shift below FORWARD_NOISE_CELLS points nowhere, so it cannot disagree
    assert decide(strong_a, forward_shift=0.5 * FORWARD_NOISE_CELLS).reason != "lines disagree"
    # the model that reads the forward run: agreeing lines give a direction from both
    both = decide(strong_a, forward_shift=-2.0, forward_in_decision=True)
    assert (both.moves_toward, both.basis) == ("a", "near-divide and forward run")
    # mirror image (a and b swapped, shift negated): P(a) and P(b) swap (no preferred side)
    mirror = decide([_toward(m, "b", 8.0) for m in _NEAR], forward_shift=+2.0, forward_in_decision=True)
    assert mirror.probabilities["b"] == pytest.approx(both.probabilities["a"], abs=0.01)
    # too few near-divide samples: insufficient data, unless the decision reads the forward run,
    # which then speaks alone through the same calibrated model
    few = [_c(m, "none", why=INSUFFICIENT) for m in _NEAR]
    assert decide(few).reason == decide(few, forward_shift=-3.0).reason == "insufficient data"
    alone = decide(few, forward_shift=-3.0, forward_in_decision=True)
    assert alone.probabilities is not None and alone.near_divide_probabilities is None
    assert alone.moves_toward in ("a", "undetermined")
    if alone.moves_toward == "a":
        assert alone.basis == "forward run"
    # the model that reads the forward run is the one packaged for it (docs/validation.md)
    assert {"fwd_shift", "near_missing"} <= set(decision_model(forward=True).features)
    assert "fwd_shift" not in decision_model().features
