"""Knickpoint travel times and divide speeds from rate.py against the forward model and crest kinematics.

The model runs are the measurement; the predictions come from the published
celerity (Royden & Perron 2013) and the kinematics of a crest between two
lowering slopes (Gilbert 1877; Mudd & Furbish 2005; Forte & Whipple 2018).
No expected value is taken from the code under test.
"""

from __future__ import annotations

import numpy as np
import pytest

import divides
from divides.assess.rate import calibrate, divide_rate, migration_rate, travel_time
from divides.errors import ParameterError
from divides.model import divide_positions, edge_catchments, open_edge, simulate
from divides.model.scenarios import ridge_surface

DX = 100.0
U = 1e-3  # uplift, m/yr
THETA = 0.45
WALLS = {"north": "closed", "south": "closed"}


def _steady(n: float, k: float) -> divides.Dem:
    """A ridge between open west and east edges grown to steady state under uniform U and K."""
    start = ridge_surface((16, 40), cell_size=DX, relief=20.0, noise=1.0, seed=2)
    grown = simulate(start, duration=3e6, dt=5e3, uplift=U, erodibility=k, m=THETA * n, n=n, edges=WALLS).final
    # steady: another 100 kyr changes nothing (E = U everywhere)
    again = simulate(grown, duration=1e5, dt=5e3, uplift=U, erodibility=k, m=THETA * n, n=n, edges=WALLS).final
    np.testing.assert_allclose(again.elevation, grown.elevation, atol=1e-6)
    return grown


def _head_and_path(surface: divides.Dem) -> tuple[int, np.ndarray, np.ndarray, np.ndarray]:
    """The west side's channel head nearest the divide (area >= 5 cells), its flow path to the
    west edge, and the length and drainage area of each step of that path."""
    flow = divides.route(surface, closed_edges=("north", "south"))
    area = flow.area.ravel()
    cols = surface.shape[1]
    west = edge_catchments(flow, ["west", "east"]).ravel() == 1
    candidates = np.flatnonzero(west & (area >= 5 * DX * DX))
    head = int(candidates[np.argmax(candidates % cols)])
    path = [head]
    while flow.receivers[path[-1]] != path[-1]:
        path.append(int(flow.receivers[path[-1]]))
    steps = np.asarray(path[:-1])  # each node erodes toward its receiver with its own area
    return head, steps, np.asarray(flow.distance).ravel()[steps], area[steps]


@pytest.mark.parametrize(
    ("n", "k", "fall"),
    [
        (1.0, 1e-4, {"elevation": -10.0}),  # base level drops 10 m at once
        (2.0, 1e-5, {"lowering_rate": 2e-3}),  # base level starts falling at 2 mm/yr: a shock for n > 1
        (1.5, 3e-5, {"lowering_rate": 2e-3}),
    ],
)
def test_knickpoint_reaches_the_channel_head_when_its_celerity_says(n, k, fall):
    # Royden & Perron 2013: for n = 1 a knickpoint climbs at K A^m whatever its shape; for n > 1 a
    # break whose steeper reach lies downstream climbs as a shock at K A^m (S1^n - S2^n)/(S1 - S2).
    # The travel time to the channel head nearest the divide must match the time the run takes
    # to lower that head (by half the drop, or to half the new lowering rate) within 30 %.
    surface = _steady(n, k)
    head, _, length, area = _head_and_path(surface)
    times = np.arange(0.0, 1.5e5 + 1.0, 1e3)
    common = dict(duration=times[-1], dt=100.0, uplift=U, erodibility=k, m=THETA * n, n=n, snapshot_times=times)
    run = simulate(surface, edges={**WALLS, "west": open_edge(**fall)}, **common)
    control = simulate(surface, edges=WALLS, **common)
    drop = np.array([c.elevation.ravel()[head] - s.elevation.ravel()[head]
                     for s, c in zip(run.snapshots, control.snapshots)])
    if "elevation" in fall:
        arrived = drop >= 0.5 * 10.0
    else:
        arrived = np.gradient(drop, times) >= 0.5 * fall["lowering_rate"]
    assert arrived.any()
    measured = times[np.argmax(arrived)]
    predictions = []
    for a0 in (1.0, 1e6):  # reference area 1 m² and 1 km²
        chi = float(np.sum(length * (a0 / area) ** THETA))
        steep = {}
        if n != 1.0:
            # steady steepness at A0: S (A/A0)^θ = (U / (K A0^m))^(1/n) (Whipple & Tucker 1999)
            steep = {"ksn_below": ((U + fall["lowering_rate"]) / (k * a0 ** (THETA * n))) ** (1 / n),
                     "ksn_above": (U / (k * a0 ** (THETA * n))) ** (1 / n)}
        predictions.append(float(travel_time(chi, erodibility=k, theta=THETA, n=n, a0_m2=a0, **steep)))
    assert predictions[1] == pytest.approx(predictions[0], rel=1e-9)  # A0 cancels (issue 13, item 4)
    assert predictions[0] == pytest.approx(measured, rel=0.3), (predictions[0], measured)


def test_travel_time_for_n_other_than_one_needs_the_steepness():
    # The step celerity depends on the slopes on both sides when n != 1 (Royden & Perron 2013).
    with pytest.raises(ParameterError, match="ksn_below"):
        travel_time(1.0, erodibility=1e-5, theta=0.45, n=2.0)
    # n = 1: χ / (K A0^m) (Perron & Royden 2013), here 2 / (1e-4 x 100^0.45)
    assert float(travel_time(2.0, erodibility=1e-4, theta=0.45, a0_m2=100.0)) == pytest.approx(2e4 / 100**0.45)


# ---------------------------------------------------------------- crest kinematics with uplift
def test_divide_rate_is_the_speed_of_the_intersection_of_two_planes():
    # Geometry (Gilbert 1877; the kinematics in METHODS, "Crest kinematics with uplift"): flank a
    # rises east at S_a and changes height at U_a - E_a, flank b rises west at S_b and changes at
    # U_b - E_b; the crest is the highest point of the lower envelope. Found here by brute force on a
    # fine line at two times, not from the formula.
    x = np.linspace(-2000.0, 7000.0, 450_001)  # 2 cm apart
    rng = np.random.default_rng(7)
    for _ in range(20):
        s_a, s_b = rng.uniform(0.05, 0.5, 2)
        e_a, e_b, u_a, u_b = rng.uniform(0.0, 2e-3, 4)

        def crest(t):
            z = np.minimum(s_a * x + (u_a - e_a) * t, s_b * (5000.0 - x) + (u_b - e_b) * t)
            return x[np.argmax(z)]

        t = 2e4  # the crest stays on the line (it moves at most 80 m in this time)
        measured = (crest(t) - crest(0.0)) / t
        expected = float(divide_rate(e_a, e_b, s_a, s_b, uplift_a=u_a, uplift_b=u_b))
        assert measured == pytest.approx(expected, abs=0.04 / t)  # two grid spacings
    # equal uplift cancels: the older form V = (E_a - E_b)/(tan a + tan b) is the same number
    assert float(migration_rate(2e-3, 1e-3, 0.3, 0.2)) == pytest.approx(float(
        divide_rate(2e-3, 1e-3, 0.3, 0.2, uplift_a=5e-3, uplift_b=5e-3)))


def _planes(rows: int = 10, cols: int = 61, s_a: float = 0.2, s_b: float = 0.1) -> divides.Dem:
    c = np.arange(cols, dtype=np.float64)
    z = np.minimum(s_a * DX * c, s_b * DX * (cols - 1 - c))  # crest between columns 20 and 21
    return divides.Dem.from_array(np.repeat(z[None], rows, axis=0), cell_size=DX, valid_range=None)


def test_divide_between_uplifted_planes_in_the_model_moves_at_the_crest_speed():
    # Two planes under E = K A^m S^n with m = 0.01 (every cell of a flank lowered at K S^n, within
    # the factor A^0.01 between the smallest and largest drainage area), uplift following each side
    # (U_a under cells draining west, U_b under cells draining east, updated every 20 kyr). Before the
    # signal of the fixed edges reaches the crest (~1.8 Myr from the west edge at celerity K A^m,
    # Royden & Perron 2013), both flanks stay planes and the crest must move at divide_rate.
    # Slack: one cell (the divide lies on a cell face) plus one update interval of motion.
    k, s_a, s_b, u_a, u_b = 1e-3, 0.2, 0.1, 0.0, 3e-4
    surface = _planes(s_a=s_a, s_b=s_b)
    chunk, years = 2e4, 1e6
    start = divide_positions(divides.route(surface, closed_edges=("north", "south")), "west", "east")[1:-1]
    for _ in range(int(years / chunk)):
        flow = divides.route(surface, closed_edges=("north", "south"))
        uplift = np.where(edge_catchments(flow, ["west", "east"]) == 1, u_a, u_b)
        surface = simulate(surface, duration=chunk, dt=chunk / 4, uplift=uplift, erodibility=k, m=0.01, n=1.0,
                           edges=WALLS).final
    end = divide_positions(divides.route(surface, closed_edges=("north", "south")), "west", "east")[1:-1]
    moved = float(np.mean(end - start))
    a_lo, a_hi = (DX * DX) ** 0.01, (60 * DX * DX) ** 0.01
    lo = float(divide_rate(k * s_a * a_lo, k * s_b * a_hi, s_a, s_b, uplift_a=u_a, uplift_b=u_b)) * years
    hi = float(divide_rate(k * s_a * a_hi, k * s_b * a_lo, s_a, s_b, uplift_a=u_a, uplift_b=u_b)) * years
    slack = DX + hi / years * chunk
    assert lo - slack <= moved <= hi + slack, (lo, moved, hi)
    # the uplift matters: with U_b = U_a the crest would have moved (E_a - E_b)/(S_a + S_b) t, about
    # a quarter of this
    without = float(divide_rate(k * s_a * a_hi, k * s_b * a_lo, s_a, s_b)) * years
    assert moved > without + slack


# ---------------------------------------------------------------- errors of the inputs
def test_errors_of_the_inputs_carry_into_k_and_the_erosion_rates():
    # Propagation of independent errors (common practice): with exact steepness, K = E / ksn^n has
    # the relative spread of E; the rate of the other side E_b = K ksn_b^n has it too. With a
    # steepness spread as well, the relative variances add (first order, Taylor expansion).
    ksn = np.full(4000, 50.0)
    cal = calibrate(ksn_a=ksn, ksn_b=ksn * 2.0, n=1.0, erosion_rate_a_mm_yr=0.2, erosion_rate_a_error_mm_yr=0.05)
    assert np.std(cal.k) / np.mean(cal.k) == pytest.approx(0.25, rel=0.1)
    assert np.mean(cal.erosion_a) == pytest.approx(0.2e-3, rel=0.02)
    assert np.std(cal.erosion_b) / np.mean(cal.erosion_b) == pytest.approx(0.25, rel=0.1)
    noisy = np.random.default_rng(3).normal(50.0, 5.0, 4000)  # 10 % spread of the steepness
    cal = calibrate(ksn_a=noisy, ksn_b=noisy, n=2.0, erosion_rate_a_mm_yr=0.2, erosion_rate_a_error_mm_yr=0.05)
    expected = np.hypot(0.25, 2.0 * 0.1)  # n = 2 doubles the steepness term
    assert np.std(np.log(cal.k)) == pytest.approx(expected, rel=0.1)
    # without an error the input is exact, as before
    exact = calibrate(ksn_a=ksn, ksn_b=ksn, n=1.0, erosion_rate_a_mm_yr=0.2)
    assert np.ptp(exact.k) == 0.0
    # a dated knickpoint: K = χ / (age c) with a 20 % error of the age gives about 20 % in K
    dated = calibrate(ksn_a=ksn, ksn_b=ksn, n=1.0, knickpoint={"chi": 10.0, "ksn_below": 60.0, "ksn_above": 50.0},
                      knickpoint_age_years=1e5, knickpoint_age_error_years=2e4)
    assert np.std(np.log(dated.k)) == pytest.approx(0.2, rel=0.1)
    given = calibrate(ksn_a=ksn, ksn_b=ksn, n=1.0, erodibility=1e-5, erodibility_error=3e-6)
    assert np.mean(given.k) == pytest.approx(1e-5, rel=0.02) and np.std(given.k) == pytest.approx(3e-6, rel=0.1)



def test_a_side_without_steepness_cannot_calibrate_k_from_its_rate():
    # K = E / ksn^n (stream-power law, Howard & Kerby 1983) needs the side's steepness: without
    # any ksn measured there, the calibration is not made and says why, and no rate comes out of it
    # (a NaN rate once reached summary.json as a rate with empty bounds).
    from divides.assess.assessment import _primary_rate

    ksn = np.full(100, 50.0)
    cal = calibrate(ksn_a=ksn, ksn_b=np.full(100, np.nan), n=1.0, erosion_rate_b_mm_yr=0.8)
    assert not cal.available and cal.k is None
    assert "side b" in cal.notes[0] and "side a's rate" in cal.notes[0]
    assert calibrate(ksn_a=ksn, ksn_b=np.full(100, np.nan), n=1.0, erosion_rate_a_mm_yr=0.8).available
    undefined = {"low": np.nan, "best": np.nan, "high": np.nan, "toward": "a"}
    assert _primary_rate(None, undefined) == (None, None)


# ---------------------------------------------------------------- the rate at the divide
def test_rate_from_the_channel_heads_is_the_crest_speed_of_two_lowering_planes_with_uplift():
    # Two flanks lowering as planes under E = K ksn^n (ksn = S A^θ at each flank's channel head), with
    # uplift U_a, U_b: the crest between them moves at [(U_b - E_b) - (U_a - E_a)] / (S_a + S_b)
    # (Gilbert 1877; Forte & Whipple 2018). The crest is found by brute force on a fine line, and the
    # near-divide erosion comes from a network calibration (E_net = K ksn_net^n), not from K directly.
    from divides.assess.rate import near_divide_erosion

    x = np.linspace(-2000.0, 7000.0, 450_001)
    rng = np.random.default_rng(11)
    for n in (1.0, 2.0):
        for _ in range(5):
            k, s_a, s_b = 1e-6, *rng.uniform(0.05, 0.4, 2)
            area_a, area_b = rng.uniform(1e4, 1e5, 2)  # drainage area at each channel head (m²)
            ksn_head_a, ksn_head_b = s_a * area_a**THETA, s_b * area_b**THETA
            ksn_net_a, ksn_net_b = rng.uniform(20.0, 200.0, 2)  # the networks' typical steepness
            u_a, u_b = rng.uniform(0.0, 1e-3, 2)
            e_a = float(near_divide_erosion(k * ksn_net_a**n, ksn_net_a, ksn_head_a, n=n))
            e_b = float(near_divide_erosion(k * ksn_net_b**n, ksn_net_b, ksn_head_b, n=n))
            assert e_a == pytest.approx(k * ksn_head_a**n) and e_b == pytest.approx(k * ksn_head_b**n)

            def crest(t):
                z = np.minimum(s_a * x + (u_a - e_a) * t, s_b * (5000.0 - x) + (u_b - e_b) * t)
                return x[np.argmax(z)]

            t = 2e4
            measured = (crest(t) - crest(0.0)) / t
            assert float(divide_rate(e_a, e_b, s_a, s_b, uplift_a=u_a, uplift_b=u_b)) == pytest.approx(
                measured, abs=0.04 / t)


def test_a_theta_other_than_the_measured_one_scales_the_steepness_ratio_by_the_area_ratio():
    # ksn = S A^θ (Wobus et al. 2006): with θ + δ every ksn is multiplied by A^δ, so the ratio of a
    # head's to the network's ksn by (A_head/A_net)^δ; checked on the definition, not the code.
    from divides.assess.rate import near_divide_erosion

    s_head, a_head, s_net, a_net, delta = 0.2, 5e4, 0.02, 5e6, 0.05
    ratio_new = (s_head * a_head ** (THETA + delta)) / (s_net * a_net ** (THETA + delta))
    ratio_old = (s_head * a_head**THETA) / (s_net * a_net**THETA)
    got = near_divide_erosion(1.0, 1.0, ratio_old, n=1.0, area_ratio=a_head / a_net, theta_shift=delta)
    assert float(got) == pytest.approx(ratio_new)


@pytest.fixture(scope="module")
def ridge_after_fall():
    from divides.model import scenarios as S

    steady = S.symmetric_divide((40, 80), seed=1).run(duration=3e6, dt=2e4).final
    fall = S.base_level_fall((40, 80), side="east", drop=10.0, seed=4)
    moved = simulate(steady, duration=2e4, dt=4e3, **fall.options).final
    options = {"closed_edges": ("north", "south"), "robustness": False, "n_bootstrap": 100, "dem_error_m": 0.1,
               "channel_area_m2": 2e5}
    return divides.assess(moved, "west", "east", erosion_rate_a_mm_yr=0.2, **options)


def _core(r):
    """The analysis pass behind an assessment, to re-run its rate under another verdict."""
    from divides.assess import assessment as A
    from divides.assess.contrasts import divide_samples

    return A._Core(r.flow, r.channels, r.sides, r.base, r.divide, r.profiles, r.points, r.contrasts,
                   r.automatic["divide_spacing_used_m"], r.automatic["reference_area_used_m2"],
                   r.automatic["block_points"], divide_samples(r.points), r.config.dem_error(DX))


def _rate(result, verdict_toward: str, **config_changes):
    import dataclasses

    from divides.assess import assessment as A

    r = result
    core = _core(r)
    config = dataclasses.replace(r.config, **config_changes)
    _, rate, _ = A._rate_and_timing(core, config, dataclasses.replace(r.verdict, moves_toward=verdict_toward))
    return rate


def test_the_rate_is_withheld_when_its_direction_is_not_the_verdicts(ridge_after_fall):
    # The rule: the rate always goes the verdict's way; when the erosion rates next to the divide
    # would move it the other way, or the verdict has no direction, no rate is given, with the reason.
    rates = {toward: _rate(ridge_after_fall, toward) for toward in ("a", "b")}
    given = [t for t, r in rates.items() if "withheld" not in r]
    assert len(given) == 1, rates  # exactly one direction agrees with the erosion rates
    other = "a" if given[0] == "b" else "b"
    assert "against the verdict" in rates[other]["withheld"]
    assert rates[given[0]]["toward"] == given[0] and rates[given[0]]["best"] > 0
    for undecided in ("undetermined", "stable"):
        assert "withheld" in _rate(ridge_after_fall, undecided)
    r = ridge_after_fall
    if r.verdict.moves_toward != given[0]:  # the public result says the same
        assert r.rate is None and r.rate_withheld and r.summary["verdict"]["rate_mm_per_yr"] is None
        assert r.rate_withheld in r.summary["verdict"]["rate_flags"]
        assert "No migration rate" in r.verdict.text


def test_an_error_on_the_given_erosion_rate_widens_the_interval(ridge_after_fall):
    # First-order propagation (common practice): independent errors add in variance, so a 50 % error on
    # the one measured rate (which scales K, hence both sides' erosion and the rate) makes the 95 %
    # interval at least as wide, in log units, as that error alone: ± 1.96 σ_ln, σ_ln² = ln(1 + 0.5²).
    toward = next(t for t in ("a", "b") if "withheld" not in _rate(ridge_after_fall, t))
    exact = _rate(ridge_after_fall, toward)
    loose = _rate(ridge_after_fall, toward, erosion_rate_a_error_mm_yr=0.1)
    assert exact["low"] < exact["best"] < exact["high"]  # θ, n and the DEM error already spread it
    assert loose["high"] - loose["low"] > exact["high"] - exact["low"]
    sigma = np.sqrt(np.log1p(0.5**2))
    if loose["low"] > 0:
        assert np.log(loose["high"] / loose["low"]) >= 0.9 * 2 * 1.96 * sigma


def test_more_uplift_next_to_the_divide_on_side_b_moves_it_faster_into_b(ridge_after_fall):
    # Crest kinematics with uplift (Gilbert 1877; Forte & Whipple 2018): V into b grows with U_b - U_a.
    # A relative uplift raster twice as high under side b as under side a must raise the rate into b
    # (or lower the rate into a) by the scaled uplift difference over the gradients.
    import dataclasses

    from divides.assess import assessment as A

    r = ridge_after_fall
    core = _core(r)
    uplift = np.where(r.sides.b.mask, 2.0, 1.0)
    verdict_b = dataclasses.replace(r.verdict, moves_toward="b")
    _, lifted, _ = A._rate_and_timing(core, r.config, verdict_b, uplift=uplift)
    _, flat, _ = A._rate_and_timing(core, r.config, verdict_b, uplift=np.ones(uplift.shape))
    assert "withheld" not in lifted and "withheld" not in flat
    assert lifted["best"] > flat["best"] + 0.05  # U ~ E ~ 0.2 mm/yr here: ΔU ~ 0.1 mm/yr over S_a + S_b < 1
    assert any("uplift raster" in f for f in lifted["flags"])


def test_the_forward_run_rate_follows_k_and_the_verdict():
    # The forward run's rate is K x its unit-K rate (time scales as 1/K; Royden & Perron 2013), scaled by
    # the run's bias measured on the benchmark's training part, in the verdict's direction only.
    import math

    from divides.assess.assessment import _forward_rate, _primary_rate
    from divides.assess.rate import FORWARD_RATE_LOG_BIAS, FORWARD_RATE_LOG_SPREAD, Calibration
    from divides.assess.verdict import Verdict
    from divides.model.forward_run import ForwardShift

    run = ForwardShift(shift_cells=0.5, cell_m=30.0, years_unit_k=2.0, power_a=4.0, power_b=2.0)
    toward_b = Verdict("b", "a", 0.9, "near-divide", "b")
    k = 2e-5
    cal = Calibration("erodibility K", erosion_a=np.full(8, 1e-4), erosion_b=np.full(8, 1e-4), k=np.full(8, k))
    rate = _forward_rate(run, cal, toward_b, seed=0)
    unit = k * 0.5 * 30.0 / 2.0 * 1e3  # mm/yr
    assert rate["toward"] == "b"
    assert rate["best"] == pytest.approx(unit * math.exp(FORWARD_RATE_LOG_BIAS), rel=0.03)
    # K exact: the interval is the bias's log-normal spread, ±1.96 standard deviations
    assert rate["low"] == pytest.approx(rate["best"] * math.exp(-1.96 * FORWARD_RATE_LOG_SPREAD), rel=0.06)
    assert rate["high"] == pytest.approx(rate["best"] * math.exp(1.96 * FORWARD_RATE_LOG_SPREAD), rel=0.06)
    # a measured erosion rate of side a gives K = E / mean(A^m S^n) of that side (a basin average)
    one = Calibration("erosion rate of side a", erosion_a=np.full(8, 4 * k), erosion_b=np.full(8, 1e-4), k=None)
    assert _forward_rate(run, one, toward_b, seed=0)["best"] == pytest.approx(rate["best"], rel=1e-9)
    # against the verdict, without a direction, or below the run's resolution: withheld
    assert "withheld" in _forward_rate(run, cal, Verdict("a", "b", 0.9, "near-divide", "a"), seed=0)
    assert "withheld" in _forward_rate(run, cal, Verdict("undetermined", None, 0.5, "undetermined", "b"), seed=0)
    tiny = ForwardShift(0.05, 30.0, 2.0, 4.0, 2.0)
    assert "withheld" in _forward_rate(tiny, cal, toward_b, seed=0)
    # the forward run's rate is the one reported when it exists; else the rate at the divide
    at_divide = {"low": 0.1, "best": 0.2, "high": 0.3, "toward": "b", "flags": [], "erosion_a_mm_yr": 1.0,
                 "erosion_b_mm_yr": 0.5}
    assert _primary_rate(at_divide, rate)[0]["method"] == "forward run"
    assert _primary_rate(at_divide, {"withheld": "x"})[0]["best"] == 0.2
    assert _primary_rate({"withheld": "why"}, None) == (None, "why")
    # an uplift raster is read by the rate at the divide, not by the forward run (uniform uplift)
    assert _primary_rate(at_divide, rate, uplift_given=True)[0]["method"] == "crest kinematics at the divide"
    assert _primary_rate({"withheld": "why"}, rate, uplift_given=True)[0]["method"] == "forward run"


def test_the_dem_error_carried_into_the_forward_rate_scales_it_and_only_widens_it():
    # The rate is linear in the run's shift per unit-K year (V = K s dx / t1; Royden & Perron 2013), so runs from
    # perturbed DEMs enter as factors on it: factors all 1 change nothing, all 2 double every quantile exactly
    # (scale equivariance of quantiles, common practice), a spread of factors widens the 95 % interval.
    from divides.assess.assessment import _forward_rate
    from divides.assess.rate import Calibration
    from divides.assess.verdict import Verdict
    from divides.model.forward_run import ForwardShift

    run = ForwardShift(shift_cells=0.5, cell_m=30.0, years_unit_k=2.0, power_a=4.0, power_b=2.0)
    toward_b = Verdict("b", "a", 0.9, "near-divide", "b")
    cal = Calibration("erodibility K", erosion_a=np.full(8, 1e-4), erosion_b=np.full(8, 1e-4), k=np.full(8, 2e-5))
    plain = _forward_rate(run, cal, toward_b, seed=0)
    ones = _forward_rate(run, cal, toward_b, seed=0, dem_error=lambda: np.ones(4))
    twos = _forward_rate(run, cal, toward_b, seed=0, dem_error=lambda: np.full(4, 2.0))
    spread = _forward_rate(run, cal, toward_b, seed=0, dem_error=lambda: np.array([1.0, 0.5, 2.0, 1.0]))
    for q in ("low", "best", "high"):
        assert ones[q] == plain[q]
        assert twos[q] == pytest.approx(2.0 * plain[q], rel=1e-12)
    assert np.log(spread["high"] / spread["low"]) > 1.1 * np.log(plain["high"] / plain["low"])
    assert "DEM error (3 perturbed runs)" in spread["note"] and "the DEM error not carried" in plain["note"]
    # a perturbed run that moves the divide the other way counts as no motion: the low end falls, nothing flips
    against = _forward_rate(run, cal, toward_b, seed=0, dem_error=lambda: np.array([1.0, -1.0, 1.0, 1.0]))
    assert against["toward"] == "b" and against["low"] <= plain["low"] and against["best"] > 0
    # called only once a rate is to be given: not for a verdict without a direction
    def fail():
        raise AssertionError("perturbed runs made for a withheld rate")
    assert "withheld" in _forward_rate(run, cal, Verdict("undetermined", None, 0.5, "undetermined", "b"), seed=0,
                                       dem_error=fail)


def _steady_ground(ks_a: float, ks_b: float, theta: float = 0.45):
    """A forward shift over two steady channel profiles of Flint's law S = ks A^-θ (Flint 1974; Whipple & Tucker
    1999: steady state under uniform U and K at the true θ), A = 1..21 x 1e4 m² on each side, all channels (no
    curvature: the steady balance has no hillslope term, D = 0)."""
    from divides.model.forward_run import ForwardShift, SideGround

    area = np.arange(1, 22.0) * 1e4
    ground = tuple(SideGround(np.log(area), np.log(ks * area**-theta), np.zeros(area.size)) for ks in (ks_a, ks_b))
    power = [float(np.mean((ks * area**-theta) * area**theta)) for ks in (ks_a, ks_b)]  # n = 1: ks
    return ForwardShift(shift_cells=0.5, cell_m=30.0, years_unit_k=2.0, power_a=power[0], power_b=power[1],
                        theta=theta, n=1.0, ground=ground, reference=(1e4, ks_a * 1e4**-theta))


def test_exponents_drawn_for_the_forward_rate_follow_the_slope_area_law_by_hand():
    # On steady profiles S = ks A^-θ (Whipple & Tucker 1999) A^(θ_i n_i) S^(n_i) = ks^(n_i) A^((θ_i - θ) n_i).
    from divides.assess.rate import Calibration, forward_erodibility

    theta = 0.45
    run = _steady_ground(40.0, 20.0, theta)
    th, n = np.array([0.45, 0.45, 0.5, 0.4]), np.array([1.0, 1.2, 1.0, 0.8])
    area = np.arange(1, 22.0) * 1e4
    d = (th - theta) * n
    # the run's uplift: with no curvature the steady balance U = mean of A^m S^n over both sides' 42 cells
    hand_u = 0.5 * (40.0**n + 20.0**n) * np.array([np.mean(area**x) for x in d])
    np.testing.assert_allclose(run.balance_power(th, n), hand_u, rtol=1e-9)
    hand_a = 40.0**n * np.array([np.mean(area**x) for x in d])
    np.testing.assert_allclose(run.side_powers(th, n)[0], hand_a, rtol=1e-9)
    unit = run.rate_m_per_yr(1.0)
    # One side's erosion rate E: K_i = E / mean_a, so the rate is E (U_i / mean_a,i) x the unit rate / U_0.
    # With θ exact only the other side's steepness enters: U_i / mean_a,i = (1 + (20/40)^n_i) / 2.
    e = 1e-4
    one = Calibration("erosion rate of side a", erosion_a=np.full(4, e), erosion_b=np.full(4, e), k=None)
    rate = run.rate_m_per_yr(forward_erodibility(one, run, th, n), th, n)
    hand = e * unit / run.balance_power(theta, 1.0) * hand_u / hand_a
    np.testing.assert_allclose(rate, hand, rtol=1e-9)
    np.testing.assert_allclose(rate[:2] / rate[0], [1.0, (1 + 0.5**1.2) / (1 + 0.5)], rtol=1e-9)
    # Equal steepness on both sides (a uniform steady landscape): n cancels exactly, whatever it is drawn at.
    even = _steady_ground(30.0, 30.0, theta)
    same = Calibration("erosion rate of side a", erosion_a=np.full(3, e), erosion_b=np.full(3, e), k=None)
    n3, th3 = np.array([0.6, 1.0, 1.9]), np.full(3, theta)
    np.testing.assert_allclose(even.rate_m_per_yr(forward_erodibility(same, even, th3, n3), th3, n3),
                               even.rate_m_per_yr(forward_erodibility(same, even)), rtol=1e-9)
    # A given K is read as fixing the erosion of the reference channel (A_r = 1e4 m², its slope on side a's
    # profile): K_i = K A_r^m S_r^n / (A_r^m_i S_r^n_i), which on the profile is K 40 / (40^n_i A_r^d_i).
    k = 2e-5
    given = Calibration("erodibility K", erosion_a=np.full(4, e), erosion_b=np.full(4, e), k=np.full(4, k))
    np.testing.assert_allclose(forward_erodibility(given, run, th, n), k * 40.0 / (40.0**n * 1e4**d), rtol=1e-9)


def test_theta_and_n_widen_the_forward_rate_only_where_they_do_not_cancel():
    # The interval of the forward run's rate carries θ and n (docs/methods.md §9). Given K, the run's time scale
    # (median channel, 11e4 m²) and the reference channel (1e4 m²) differ in area, so a drawn θ changes the rate
    # by (11)^((θ_i - θ) n_i) (test above): the interval widens, still holds the best value, still points with
    # the verdict. From one side's erosion rate on a uniform steady landscape, θ exact: nothing to widen.
    from divides.assess.assessment import _forward_rate
    from divides.assess.rate import Calibration, exponent_samples
    from divides.assess.verdict import Verdict

    toward_b = Verdict("b", "a", 0.9, "near-divide", "b")
    rng = np.random.default_rng(3)
    size = 500
    draws = exponent_samples(0.45, 1.0, size, rng, theta_ci=(0.35, 0.55))
    run = _steady_ground(40.0, 20.0)
    given = Calibration("erodibility K", erosion_a=np.full(size, 1e-4), erosion_b=np.full(size, 1e-4),
                        k=np.full(size, 2e-5))
    fixed, drawn = _forward_rate(run, given, toward_b, 0), _forward_rate(run, given, toward_b, 0, draws)
    assert drawn["toward"] == fixed["toward"] == "b"
    assert drawn["low"] < drawn["best"] < drawn["high"]
    assert np.log(drawn["high"] / drawn["low"]) > 1.02 * np.log(fixed["high"] / fixed["low"])
    assert "θ, n" in drawn["note"] and "θ and n not" in fixed["note"]
    even = _steady_ground(30.0, 30.0)
    one = Calibration("erosion rate of side a", erosion_a=np.full(size, 1e-4), erosion_b=np.full(size, 1e-4), k=None)
    n_only = (np.full(size, 0.45), draws[1])
    same = _forward_rate(even, one, toward_b, 0, n_only)
    assert [same[k] for k in ("low", "best", "high")] == pytest.approx(
        [_forward_rate(even, one, toward_b, 0)[k] for k in ("low", "best", "high")], rel=1e-9)
