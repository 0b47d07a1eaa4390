"""Regional screening against model landscapes whose divide motion is measured per stretch.

The cases come from :mod:`divides.model.regional_benchmark`: a ridge between the west and
east edges grown with the project's forward model, long along the divide, several outlet
basins per side; the truth is measured by continuing the run (docs/validation.md,
*Regional screening*). The fast tests grow one steady case small (120 x 96 cells) from its
seed; the slow ones run the held-out cases of the validation (master seeds 1-16).
"""

from __future__ import annotations

import functools

import numpy as np
import pytest

from divides.assess.screen import INSTABILITY_SCALING, MIN_JUDGED_CELLS, screen
from divides.model.benchmark import MOVING_CELLS_PER_TAU, split_of
from divides.model.regional_benchmark import (
    LATERAL_MIN_LENGTH_CELLS,
    TARGETS,
    build,
    case_seed,
    lateral_truth,
    load_or_build,
    score,
)
from divides.terrain.divide_lines import divide_network

#: Channel threshold of the validation (cells), as in tests/benchmarks/bench_regional.py.
CHANNEL_CELLS = 50


def _screen(case):
    return screen(case.dem(), theta=case.parameters["theta"], closed_edges=case.closed_edges, workers=1, seed=0,
                  channel_area_m2=CHANNEL_CELLS * case.cell_size ** 2)


@pytest.fixture(scope="module")
def steady():
    case = build(0, 12, shape=(120, 96))  # steady_symmetric, training case 12 of master seed 0, grown small
    result = _screen(case)
    lateral = lateral_truth(case, cache_dir="")  # the truth run replayed from the observed DEM
    return case, result, score(case, result, lateral=lateral), lateral


def test_the_small_case_is_measured_steady(steady):
    # Uniform forcing at steady state: the divide does not move (Willett et al. 2014); checked by
    # continuing the run, the single-divide benchmark's rule on the whole divide (< 1 cell per τ).
    # The spin-up is settled at the truth run's time step, so every stretch is still as well, not only
    # their mean (the model's steady state depends on its step: docs/validation.md, Regional screening).
    case, _, _, _ = steady
    rates = [s["rate_m_per_yr"] for s in case.stretches]
    assert len(rates) == 10 and all(r is not None for r in rates)
    assert abs(np.mean(rates)) < MOVING_CELLS_PER_TAU * case.threshold_m_per_yr
    assert case.parameters["settled"]
    assert max(abs(r) for r in rates) < MOVING_CELLS_PER_TAU * case.threshold_m_per_yr


def test_coverage_and_every_stretch_accounted_for(steady):
    # Issue 14 item 1: >= 90 % of the divides between outlet basins in judged segments, and every
    # traced stretch of divide is a segment or a gap (lengths add up to the traced network's,
    # traced here once more, the land of basins below the minimum area as one more region).
    _, result, scored, _ = steady
    assert scored["coverage"] >= TARGETS["coverage"]
    labels = np.where((result.labels == 0) & result.dem.valid, result.labels.max() + 1, result.labels)
    traced = sum(seg.line.length_m for seg in divide_network(result.dem, labels, min_vertices=2))
    listed = sum(s["length_m"] for s in result.segments) + sum(g["length_m"] for g in result.gaps)
    assert listed == pytest.approx(traced, rel=1e-9)


def test_ranks_follow_the_documented_order(steady):
    # docs/methods.md §7b, re-derived here: segments scored >= 0.01 rank by score; those below (20 of 31 here,
    # 19 with a measured run) after them, by the larger |shift| of the two landscape runs in either direction
    # (neither measured first; under half a cell read as 0 since round 63), then by score; unknown last, unless the
    # one-U run moves the divide half a cell or more and the per-basin run does not move it as far the other way
    # (then among those below 0.01, by the larger |shift|); ties by length. Since round 34, a main segment below 0.01
    # whose line comes within 5 cells of another main segment's scored >= 0.01 comes first in that tier, and since
    # round 36 one reached from such a segment through main segments each within 5 cells of the next, below 0.01 and
    # moved >= 1 cell by either run (neighbours found here by brute force with scipy's cdist). Here the order differs
    # from the score's alone. The score is the segments' ranking_score (their instability is it bounded by the
    # probability of motion, round 57). The interleaving of round 62 is below.
    from scipy.spatial.distance import cdist

    _, result, _, _ = steady
    main = [s for s in result.segments if s["divide_kind"] == "main"]
    xy = [np.column_stack([s["line"].row, s["line"].col]) for s in main]
    near = [[j for j in range(len(main)) if j != i and cdist(xy[i], xy[j]).min() <= 5.0] for i in range(len(main))]

    def low_and_moved(s):
        moved = max((abs(v) for v in (s["forward_shift_cells"], s["forward_shift_basin_cells"]) if v is not None),
                    default=0.0)
        return (s["ranking_score"] is None or s["ranking_score"] < 0.01) and moved >= 1.0

    reached = set()
    for i, s in enumerate(main):
        if s["ranking_score"] is not None and s["ranking_score"] >= 0.01:
            todo, seen = [i], {i}
            while todo:  # the strong segment's neighbours, and those of the chains it starts
                for j in near[todo.pop()]:
                    if j != i:
                        reached.add(id(main[j]))
                    if j not in seen and low_and_moved(main[j]):
                        seen.add(j)
                        todo.append(j)

    def beside_scored(s):
        return id(s) in reached

    def key(s):
        i, one_u, per_basin = s["ranking_score"], s["forward_shift_cells"], s["forward_shift_basin_cells"]
        if i is not None and i >= 0.01:
            return (0, -i, 0.0, 0.0, -s["length_m"])
        if i is None and not (one_u is not None and per_basin is not None and abs(one_u) >= 0.5
                              and np.sign(one_u) * per_basin > -0.5):
            return (2, 0.0, 0.0, 0.0, -s["length_m"])
        size = max((abs(v) for v in (one_u, per_basin) if v is not None), default=np.inf)
        size = 0.0 if size < 0.5 else size  # since round 63 a shift under half a cell is a tie
        return (1, -float(beside_scored(s)), -size, 0.0 if i is None else -i, -s["length_m"])

    # Since round 62 (told less than 3 m of DEM error, as here) main and lateral segments each keep that order and the
    # kinds are interleaved by the largest probability of motion from each segment to the end of its kind's list
    # (computed here with numpy's running maximum), larger first, ties in that order.
    ordered = sorted(result.segments, key=key)
    reach = {}
    for kind in ("main", "lateral"):
        mine = [s for s in ordered if s["divide_kind"] == kind]
        p = np.array([s["motion_probability"] or 0.0 for s in mine])[::-1]
        reach.update(zip(map(id, mine), np.maximum.accumulate(p)[::-1] if p.size else []))
    position = {id(s): k for k, s in enumerate(ordered)}
    ranks = [s["rank"] for s in result.segments]
    assert ranks == list(range(1, len(ranks) + 1))
    assert [s["rank"] for s in sorted(ordered, key=lambda s: (-reach[id(s)], position[id(s)]))] == ranks
    assert sum(s["ranking_score"] is not None and s["ranking_score"] < 0.01 for s in result.segments) >= 10


def test_every_main_divide_segment_is_judged_on_pooled_samples(steady):
    # Before pooling, most main-divide pieces between two small basins had fewer than six
    # independent samples and were "insufficient data" (docs/validation.md: 24 of 423 judged on the
    # training cases); pooled with the pieces that continue them, every one is judged.
    case, result, scored, _ = steady
    assert scored["main_segments"] >= 5
    assert scored["main_insufficient"] == 0
    cell = case.cell_size
    for s in result.segments:
        assert s["judged_length_m"] >= s["length_m"]
        if s["judged_length_m"] > s["length_m"]:  # pooled only while short
            assert s["length_m"] < MIN_JUDGED_CELLS * cell


def test_the_replayed_truth_run_is_the_truth_run(steady):
    # The lateral truth replays the case's truth run from its seed and observed DEM; the model is
    # deterministic, so the replay tracks the main divide exactly as the build did (rates per stretch
    # equal up to the float32 rounding of the cached DEM; here the DEM is the one built).
    case, _, _, lateral = steady
    for built, replayed in zip(case.stretches, lateral["stretches"], strict=True):
        assert replayed["rate_m_per_yr"] == pytest.approx(built["rate_m_per_yr"], rel=1e-6,
                                                          abs=1e-6 * case.threshold_m_per_yr)


def test_lateral_outlet_divides_carry_their_own_truth_and_kind(steady):
    # Every segment between two outlet basins draining off the same edge is scored against the area
    # its pair of basins exchanged (docs/validation.md, Regional screening), and screening calls it
    # "lateral" (basins draining the same way); main-divide segments are "main".
    case, _, scored, lateral = steady
    assert scored["lateral_segments"] >= 3
    assert all(m["kind"] == "lateral" for m in scored["lateral"])
    assert all(m["kind"] == "main" for m in scored["main"])
    measured = [p for p in lateral["pairs"] if p["rate_m_per_yr"] is not None
                and p["length_m"] >= LATERAL_MIN_LENGTH_CELLS * case.cell_size]
    assert measured
    # a shared divide is at most the perimeter of the smaller basin (geometry)
    for p in measured:
        small = min(np.count_nonzero(lateral["labels"] == k) for k in p["basins"])
        assert p["length_m"] <= 4 * small * case.cell_size


def test_no_false_alarm_on_a_steady_landscape(steady):
    # Issue 14 item 4: no segment with instability >= 0.5 and confidence >= 0.5 in a steady landscape
    # (uniform forcing at a steady state checked by continuing the run; Willett et al. 2014). With one
    # landscape run alone, one segment here reached 0.52 (that run moved it 0.18 model cell toward the
    # favoured side; a strict expected failure until both runs had to agree by 0.5 cell).
    _, _, scored, _ = steady
    assert scored["alarms"] == 0


def test_lateral_divides_of_a_steady_landscape_get_no_direction(steady):
    # Issue 14 item 3: a lateral divide never gets a confident direction at a verified steady state (uniform forcing
    # at a steady state checked by continuing the run; Willett et al. 2014). Before round 80 the near-divide decision
    # named a side on three lateral segments here, one of them measured still at confidence 0.85 (probabilities of
    # motion 0.04-0.15); a lateral segment now keeps a direction only where its probability of motion is >= 0.5.
    _, result, scored, _ = steady
    lateral = [s for s in result.segments if s["divide_kind"] == "lateral"]
    assert len(lateral) >= 3
    for s in lateral:
        if s["motion_probability"] is None or s["motion_probability"] < 0.5:
            assert s["moves_toward_basin"] is None and s["motion_azimuth_deg"] is None
            assert s["verdict"] not in ("a", "b")
    assert not any(m["verdict"] in ("a", "b") for m in scored["lateral"] if m["in_stable"])


def test_the_default_channel_area_keeps_the_targets_of_the_steady_case(steady):
    # Round 64: without --channel-area a screening raises the DEM's slope-area value to 50 cells and caps it at 0.2 %
    # of the valid area, the cap winning (here 23 cells; unbounded, the fallback's 1 % of this small DEM). Issue 14's
    # targets that a steady landscape has (coverage >= 90 %, no alarm; the steadiness measured by continuing the run)
    # hold with that default too.
    from divides.assess.screen import CHANNEL_AREA_SHARE

    case, _, _, _ = steady
    result = screen(case.dem(), theta=case.parameters["theta"], closed_edges=case.closed_edges, workers=1, seed=0)
    used = result.parameters["channel_area_used_m2"]
    assert used <= CHANNEL_AREA_SHARE * case.elevation.size * case.cell_size ** 2 * (1 + 1e-9)
    scored = score(case, result)
    assert scored["coverage"] >= TARGETS["coverage"] and scored["alarms"] == 0


def test_voids_filled_on_the_divide_keep_the_intact_screening(steady):
    # Three holes punched into the steady case's DEM, one across its main divide: filled (the default), the screening
    # traces the divides of the intact DEM (the same lengths between outlet basins and in gaps, within 1 %) and keeps
    # the targets a steady landscape has (coverage >= 90 %, no alarm; steadiness measured by continuing the run from
    # the intact DEM). Left as outlets the holes' rims drain into them and the divides beside them change.
    import dataclasses

    case, intact, _, _ = steady
    z = case.dem().elevation.copy()
    crest = int(np.median(np.argmax(z, axis=1)))
    for rows, cols in ((slice(40, 46), slice(crest - 4, crest + 4)), (slice(80, 84), slice(20, 25)),
                       (slice(90, 93), slice(70, 76))):
        z[rows, cols] = np.nan
    holed = dataclasses.replace(case.dem(), elevation=z, valid=np.isfinite(z))
    runs = {voids: screen(holed, theta=case.parameters["theta"], closed_edges=case.closed_edges, workers=1, seed=0,
                          channel_area_m2=CHANNEL_CELLS * case.cell_size ** 2, voids=voids)
            for voids in ("fill", "outlets")}
    gaps = {name: sum(g["length_m"] for g in r.gaps) for name, r in {"intact": intact, **runs}.items()}
    assert runs["fill"].voids.filled_cells == 48 + 20 + 18
    assert runs["fill"].coverage["outlet_divides_length_m"] == pytest.approx(
        intact.coverage["outlet_divides_length_m"], rel=0.01)
    assert gaps["fill"] == pytest.approx(gaps["intact"], rel=0.01)
    scored = score(case, runs["fill"])
    assert scored["coverage"] >= TARGETS["coverage"] and scored["alarms"] == 0
    assert gaps["outlets"] > 1.1 * gaps["intact"]
    # the segments over a filled hole say so (the share of their vertices touching it), those that keep a cell away
    # from every filled cell do not (distances by scipy's Euclidean distance transform)
    from scipy.ndimage import distance_transform_edt

    away = distance_transform_edt(~runs["fill"].voids.filled)
    for s in runs["fill"].segments:
        r, c = np.rint(s["line"].row).astype(int), np.rint(s["line"].col).astype(int)
        nearest = away[np.clip(r, 0, away.shape[0] - 1), np.clip(c, 0, away.shape[1] - 1)].min()
        assert (nearest <= 1.5) if s["filled_share"] > 0 else (nearest >= 1), (nearest, s["filled_share"])
    assert max(s["filled_share"] for s in runs["fill"].segments) > 0
    assert all(s["filled_share"] == 0 for s in runs["outlets"].segments)



def test_the_benchmark_keeps_every_line_of_evidence():
    # The benchmark's results carry each segment's landscape evidence under the names screening writes, so that
    # candidates are rescored on what screening reads (tests/benchmarks/rescore_regional.py).
    from divides.assess.screen import EVIDENCE_KEYS
    from divides.model import regional_benchmark

    assert regional_benchmark.EVIDENCE_KEYS == EVIDENCE_KEYS


def _forward_shifts(result, key: str = "forward_shift_cells") -> np.ndarray:
    return np.abs([np.nan if s[key] is None else s[key] for s in result.segments])


@pytest.mark.parametrize("key", ["forward_shift_cells", "forward_shift_basin_cells"])
def test_the_forward_run_barely_moves_a_steady_landscape(steady, key):
    # At steady state under uniform forcing the divide does not move (Willett et al. 2014): either run of the
    # whole DEM under its steady balance (one uplift rate; one per outlet basin) measures nearly every segment
    # (not one whose basins the run merges: NaN) and moves half of those it measures less than the 0.1 model
    # cell a shift is read at (FORWARD_NOISE_CELLS) and none by a model cell (the grid's resolution).
    _, result, _, _ = steady
    shifts = _forward_shifts(result, key)
    measured = shifts[np.isfinite(shifts)]
    assert measured.size >= 10 and measured.size >= 0.9 * shifts.size
    assert np.median(measured) < 0.1 and measured.max() < 1.0


@pytest.mark.xfail(strict=True, reason="known miss: on the settled small case (regional version 3) one 293-m main "
                   "segment (rank 11; 10 in rounds 20-32, 22 before round 14) is not measured by the run, under "
                   "either balance: the cells next to it go to a third basin, so none of its length is still shared "
                   "by its two basins at the end (divides.model.tracking.exchange_displacement)")
def test_the_forward_run_measures_every_segment_of_a_steady_landscape(steady):
    # As above: on a steady landscape every segment's shift is measured (finite).
    _, result, _, _ = steady
    shifts = _forward_shifts(result)
    assert shifts.size >= 10 and np.isfinite(shifts).all()


def test_no_false_alarm_on_a_steady_landscape_from_the_near_divide_contrasts_alone(steady):
    # As above, without the landscape evidence (forward_run=False: the P-only scaling).
    case = steady[0]
    result = screen(case.dem(), theta=case.parameters["theta"], closed_edges=case.closed_edges, workers=1, seed=0,
                    channel_area_m2=CHANNEL_CELLS * case.cell_size ** 2, forward_run=False)
    assert score(case, result)["alarms"] == 0


# ---------------------------------------------------------------------------- slow: held-out cases
#: Held-out draws of the regional benchmark (docs/validation.md, *Regional screening*): master seeds 23-48, kept
#: unseen until round 42's default was fixed (seeds 24-34 until rounds 43 and 45-49 were scored, seed 31 until round
#: 50, seeds 32-34 until round 51, seeds 35-39 until rounds 51 and 52 and the fixes of the edges level, seeds 40-48
#: drawn after them; seed 26
#: then joined round 47's training cases, seed 30 round 50's, seed 31 round 51's); seeds 1-21, fresh for earlier
#: defaults
#: (seed 1's held-out cases were among the training cases of rounds 4-33, seeds 5-9's among those of the later
#: rounds, and since round 42 those of seeds 2-4 and 10-21 among the training cases of the probability of motion).
#: Master seed 0's held-out cases informed the second round of choices and are not used here; those of seeds 37-42
#: were among the training cases of rounds 53-60. Seeds 69-72 were drawn after round 59's default was fixed, and
#: the held-out cases of seeds 61 and 64-66 (whose training cases rounds 56-60 read) first generated then; those of
#: seeds 73-76 after round 62 was decided on their training cases; seed 79's after round 64, seeds 80-140's after it,
#: seeds 141-144's after round 80.
HELD_OUT_SEEDS = (1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15, 16, 17, 18, 19, 20, 21, 23, 24, 25, 26, 27, 28,
                  29, 30, 31, 32, 33, 34, 35, 36, 37, 38, 39, 40, 41, 42, 43, 44, 45, 46, 47, 48, 49, 50, 51, 52, 53,
                  54, 55, 56, 57, 58, 59, 60, 61, 62, 63, 64, 65, 66, 67, 68, 69, 70, 71, 72, 73, 74, 75, 76, 77,
                  78, 79, 80, 81, 82, 83, 84, 85, 86, 87, 88, 89, 90, 91, 92, 93, 94, 95, 96, 97, 98, 99, 100,
                  101, 102, 103, 104, 105, 106, 107, 108, 109,
                  110, 111, 112, 113, 114, 115, 116, 117, 118, 119, 120, 121, 122, 123, 124,
                  125, 126, 127, 128, 129, 130, 131, 132, 133, 134, 135, 136, 137, 138, 139, 140,
                  141, 142, 143, 144)

#: The held-out draws fresh to the probability of motion: round 59 fitted it on the 120-cell records of 316
#: training cases, which take in the held-out cases of master seeds 37-42 (so those are left out here), and none of
#: seeds 23-36 and 43-144 (round 42's and 46's fits took in every draw before seed 23).
PROBABILITY_SEEDS = (23, 24, 25, 26, 27, 28, 29, 30, 31, 32, 33, 34, 35, 36, 43, 44, 45, 46, 47, 48, 49, 50, 51, 52,
                     53, 54, 55, 56, 57, 58, 59, 60, 61, 62, 63, 64, 65, 66, 67, 68, 69, 70, 71, 72, 73, 74, 75, 76, 77,
                     78, 79, 80, 81, 82, 83, 84, 85, 86, 87, 88, 89, 90, 91, 92, 93, 94, 95, 96, 97, 98, 99,
                     100, 101, 102, 103, 104, 105, 106, 107, 108, 109, 110, 111, 112,
                     113, 114, 115, 116, 117, 118, 119, 120, 121, 122, 123, 124,
                     125, 126, 127, 128, 129, 130, 131, 132, 133, 134, 135, 136, 137, 138, 139, 140,
                     141, 142, 143, 144)


#: Known misses per slow held-out test (strict expected failures, each with its measured reason). Since round 59
#: (120-cell judged stretches, the probability of motion refitted; docs/validation.md, *Regional screening*) every
#: status and reason is the one measured with its default on all held-out draws, the lateral ones with round 60's
#: near-divide scaling; the figures in the tests' comments are from when each draw was written. The tables are
#: printed, measured again, by tests/benchmarks/held_out_statuses.py.
TOP_MISSES: dict[int, str] = {
    1: "top target in 3 of 4 cases (partial_base_level_fall case 0: main segments ranked second outside moving "
       "stretches, no direction; third outside moving stretches)",
    5: "top target in 7 of 8 cases (partial_base_level_fall case 8: main segments ranked third in a moving stretch, "
       "no direction)",
    8: "top target in 7 of 8 cases (partial_base_level_fall case 16: main segments ranked first in a moving stretch, "
       "no direction; second in a moving stretch, no direction; third in a moving stretch, no direction)",
    9: "top target in 2 of 3 cases (partial_base_level_fall case 16: main segments ranked first in a moving stretch, "
       "no direction; second outside moving stretches, no direction; third outside moving stretches, no direction)",
    12: "top target in 3 of 4 cases (partial_base_level_fall case 16: main segments ranked first in a moving stretch, "
        "no direction; second in a moving stretch, no direction; third in a moving stretch, no direction)",
    16: "top target in 6 of 7 cases (partial_base_level_fall case 8: main segments ranked third 19 % in moving "
        "stretches, no direction)",
    17: "top target in 4 of 5 cases (partial_base_level_fall case 8: main segments ranked second in a moving stretch, "
        "no direction; third 37 % in moving stretches, no direction)",
    25: "top target in 6 of 8 cases (partial_base_level_fall case 8: main segments ranked third 37 % in moving "
        "stretches; partial_base_level_fall case 16: main segments ranked second in a moving stretch, no direction; "
        "third outside moving stretches, no direction)",
    27: "top target in 5 of 6 cases (partial_base_level_fall case 8: main segments ranked first 5 % in moving "
        "stretches; second outside moving stretches)",
    30: "top target in 4 of 6 cases (partial_base_level_fall case 0: main segments ranked third 33 % in moving "
        "stretches; partial_base_level_fall case 8: main segments ranked first in a moving stretch, no direction; "
        "second in a moving stretch, no direction; third in a moving stretch, no direction)",
    31: "top target in 5 of 6 cases (partial_base_level_fall case 16: main segments ranked first 40 % in moving "
        "stretches; second in a moving stretch, no direction; third in a moving stretch, no direction)",
    33: "top target in 4 of 6 cases (partial_base_level_fall case 0: main segments ranked first outside moving "
        "stretches, no direction; partial_base_level_fall case 16: main segments ranked first in a moving stretch, no "
        "direction; second in a moving stretch, no direction; third in a moving stretch, no direction)",
    34: "top target in 5 of 6 cases (partial_base_level_fall case 0: main segments ranked second outside moving "
        "stretches, no direction)",
    38: "top target in 2 of 4 cases (partial_base_level_fall case 0: main segments ranked second outside moving "
        "stretches; third 54 % in moving stretches, no direction; partial_base_level_fall case 16: main segments "
        "ranked first outside moving stretches, no direction; second outside moving stretches, no direction)",
    39: "top target in 5 of 6 cases (erodibility_patch case 1: main segments ranked first in a moving stretch, no "
        "direction)",
    43: "top target in 6 of 7 cases (partial_base_level_fall case 8: main segments ranked third in a moving stretch, "
        "no direction)",
    44: "top target in 4 of 5 cases (partial_base_level_fall case 16: main segments ranked first in a moving stretch, "
        "no direction; second 51 % in moving stretches, no direction; third outside moving stretches, no direction)",
    52: "top target in 3 of 4 cases (partial_base_level_fall case 0: main segments ranked first in a moving stretch, "
        "no direction; second in a moving stretch, no direction; third in a moving stretch, no direction)",
    54: "top target in 4 of 5 cases (partial_base_level_fall case 16: main segments ranked first in a moving stretch, "
        "no direction; second in a moving stretch, no direction; third in a moving stretch, no direction)",
    55: "top target in 6 of 7 cases (partial_base_level_fall case 16: main segments ranked first 57 % in moving "
        "stretches, no direction; second in a moving stretch, no direction)",
    56: "top target in 5 of 7 cases (partial_base_level_fall case 0: main segments ranked first 55 % in moving "
        "stretches, no direction; second in a moving stretch, no direction; partial_base_level_fall case 8: main "
        "segments ranked first in a moving stretch, no direction; second 8 % in moving stretches, no direction)",
    57: "top target in 6 of 7 cases (partial_base_level_fall case 16: main segments ranked first in a moving stretch, "
        "no direction; second in a moving stretch, no direction; third in a moving stretch, no direction)",
    60: "top target in 6 of 8 cases (partial_base_level_fall case 8: main segments ranked second 20 % in moving "
        "stretches, no direction; partial_base_level_fall case 16: main segments ranked first in a moving stretch, no "
        "direction; second in a moving stretch, no direction; third in a moving stretch, no direction)",
    62: "top target in 5 of 6 cases (partial_base_level_fall case 8: main segments ranked first 19 % in moving "
        "stretches, no direction; second outside moving stretches, no direction)",
    66: "top target in 3 of 5 cases (runoff_gradient case 2: main segments ranked first in a moving stretch, no "
        "direction; second in a moving stretch, no direction; third in a moving stretch, no direction; "
        "partial_base_level_fall case 8: main segments ranked third in a moving stretch, no direction)",
    68: "top target in 8 of 9 cases (partial_base_level_fall case 0: main segments ranked third 68 % in moving "
        "stretches)",
    69: "top target in 7 of 8 cases (erodibility_patch case 9: main segments ranked third 45.1 degrees off the "
        "measured motion)",
    78: "top target in 5 of 6 cases (partial_base_level_fall case 8: main segments ranked first in a moving stretch, "
        "no direction; second outside moving stretches, no direction; third outside moving stretches, no direction)",
    79: "top target in 6 of 8 cases (partial_base_level_fall case 16: main segments ranked first outside moving "
        "stretches, no direction; second 36 % in moving stretches; erodibility_patch case 17: main segments ranked "
        "first in a moving stretch, no direction; second in a moving stretch, no direction; third in a moving "
        "stretch, no direction)",
    82: "top target in 7 of 8 cases (partial_base_level_fall case 0: main segments ranked third outside moving "
        "stretches, no direction)",
    83: "top target in 6 of 7 cases (partial_base_level_fall case 0: main segments ranked second outside moving "
        "stretches)",
    85: "top target in 3 of 4 cases (partial_base_level_fall case 16: main segments ranked third in a moving stretch, "
        "no direction)",
    89: "top target in 7 of 8 cases (partial_base_level_fall case 0: main segments ranked first in a moving stretch, "
        "no direction; second in a moving stretch, no direction; third outside moving stretches, no direction)",
    91: "top target in 5 of 6 cases (partial_base_level_fall case 16: main segments ranked first 37 % in moving "
        "stretches, no direction; second in a moving stretch, no direction)",
    96: "top target in 3 of 4 cases (erodibility_patch case 9: main segments ranked first in a moving stretch, no "
        "direction; second in a moving stretch, no direction; third in a moving stretch, no direction)",
    97: "top target in 4 of 5 cases (partial_base_level_fall case 16: main segments ranked first in a moving stretch, "
        "no direction; third in a moving stretch, no direction)",
    101: "top target in 7 of 8 cases (partial_base_level_fall case 8: main segments ranked first outside moving "
         "stretches; second outside moving stretches; third in a moving stretch, no direction)",
    106: "top target in 6 of 7 cases (tilt case 11: main segments ranked first in a moving stretch, no direction)",
    107: "top target in 3 of 5 cases (partial_base_level_fall case 8: main segments ranked second in a moving stretch, "
         "no direction; third 36 % in moving stretches, no direction; partial_base_level_fall case 16: main segments "
         "ranked first in a moving stretch, no direction; third in a moving stretch, no direction)",
    108: "top target in 6 of 7 cases (partial_base_level_fall case 8: main segments ranked first in a moving stretch, "
         "no direction; second in a moving stretch, no direction; third outside moving stretches, no direction)",
    114: "top target in 5 of 6 cases (partial_base_level_fall case 0: main segments ranked third in a moving stretch, "
         "no direction)",
    115: "top target in 5 of 6 cases (partial_base_level_fall case 8: main segments ranked third 29 % in moving "
         "stretches)",
    117: "top target in 4 of 5 cases (erodibility_patch case 9: main segments ranked first in a moving stretch, no "
         "direction)",
    119: "top target in 4 of 5 cases (partial_base_level_fall case 16: no main segment in a moving stretch)",
    120: "top target in 2 of 3 cases (partial_base_level_fall case 8: main segments ranked first 68 % in moving "
         "stretches, no direction; second in a moving stretch, no direction; third in a moving stretch, no direction)",
    124: "top target in 2 of 3 cases (partial_base_level_fall case 16: main segments ranked third in a moving stretch, "
         "no direction)",
    126: "top target in 7 of 8 cases (partial_base_level_fall case 8: main segments ranked first outside moving "
         "stretches, no direction; second 21 % in moving stretches, no direction)",
    128: "top target in 3 of 4 cases (partial_base_level_fall case 0: main segments ranked first in a moving stretch, "
         "no direction; second in a moving stretch, no direction; third in a moving stretch, no direction)",
    129: "top target in 8 of 10 cases (partial_base_level_fall case 0: main segments ranked first in a moving stretch, "
         "no direction; second in a moving stretch, no direction; third in a moving stretch, no direction; "
         "partial_base_level_fall case 8: main segments ranked first outside moving stretches, no direction; second "
         "outside moving stretches, no direction; third in a moving stretch, no direction)",
    132: "top target in 5 of 6 cases (partial_base_level_fall case 16: main segments ranked first in a moving stretch, "
         "no direction; second in a moving stretch, no direction; third in a moving stretch, no direction)",
    133: "top target in 4 of 5 cases (partial_base_level_fall case 0: main segments ranked first outside moving "
         "stretches, no direction; second outside moving stretches, no direction)",
    138: "top target in 7 of 8 cases (partial_base_level_fall case 8: main segments ranked second 18 % in moving "
         "stretches)",
    140: "top target in 9 of 10 cases (partial_base_level_fall case 16: main segments ranked first 63 % in moving "
         "stretches)",
    143: "top target in 7 of 8 cases (partial_base_level_fall case 8: main segments ranked first 26 % in moving "
         "stretches; second outside moving stretches)",
}

ORDER_MISSES: dict[int, str] = {
    4: "order in 1 of 2 cases (partial_base_level_fall case 8: 6 pairs)",
    8: "order in 4 of 5 cases (partial_base_level_fall case 16: 2 pairs)",
    10: "order in 5 of 6 cases (erodibility_patch case 1: 1 pair)",
    13: "order in 2 of 3 cases (partial_base_level_fall case 8: 1 pair)",
    14: "order in 1 of 2 cases (erodibility_patch case 1: 1 pair)",
    18: "order in 7 of 8 cases (erodibility_patch case 9: 12 pairs)",
    21: "order in 5 of 6 cases (runoff_gradient case 18: 2 pairs)",
    25: "order in 3 of 4 cases (partial_base_level_fall case 16: 9 pairs)",
    28: "order in 3 of 4 cases (runoff_gradient case 2: 1 pair)",
    31: "order in 3 of 4 cases (runoff_gradient case 2: 2 pairs)",
    33: "order in 4 of 5 cases (partial_base_level_fall case 0: 2 pairs)",
    34: "order in 2 of 3 cases (partial_base_level_fall case 0: 1 pair)",
    38: "order in 1 of 3 cases (partial_base_level_fall case 0: 4 pairs; partial_base_level_fall case 16: 4 pairs)",
    39: "order in 4 of 5 cases (erodibility_patch case 9: 1 pair)",
    43: "order in 2 of 3 cases (erodibility_patch case 1: 5 pairs)",
    44: "order in 2 of 3 cases (partial_base_level_fall case 16: 6 pairs)",
    47: "order in 5 of 6 cases (runoff_gradient case 18: 2 pairs)",
    49: "order in 2 of 3 cases (partial_base_level_fall case 8: 1 pair)",
    51: "order in 2 of 3 cases (partial_base_level_fall case 0: 9 pairs)",
    59: "order in 4 of 5 cases (erodibility_patch case 1: 13 pairs)",
    61: "order in 3 of 4 cases (runoff_gradient case 10: 1 pair)",
    65: "order in 1 of 2 cases (erodibility_patch case 17: 1 pair)",
    66: "order in 3 of 4 cases (erodibility_patch case 17: 3 pairs)",
    67: "order in 2 of 3 cases (runoff_gradient case 18: 2 pairs)",
    69: "order in 3 of 5 cases (partial_base_level_fall case 0: 1 pair; runoff_gradient case 18: 1 pair)",
    70: "order in 3 of 4 cases (runoff_gradient case 18: 2 pairs)",
    72: "order in 3 of 4 cases (partial_base_level_fall case 8: 2 pairs)",
    74: "order in 0 of 1 cases (erodibility_patch case 9: 4 pairs)",
    75: "order in 4 of 5 cases (runoff_gradient case 18: 1 pair)",
    76: "order in 3 of 4 cases (partial_base_level_fall case 8: 7 pairs)",
    78: "order in 2 of 3 cases (partial_base_level_fall case 8: 2 pairs)",
    80: "order in 3 of 4 cases (runoff_gradient case 2: 2 pairs)",
    82: "order in 4 of 5 cases (erodibility_patch case 9: 1 pair)",
    87: "order in 1 of 2 cases (partial_base_level_fall case 0: 1 pair)",
    88: "order in 1 of 2 cases (partial_base_level_fall case 8: 3 pairs)",
    90: "order in 4 of 5 cases (partial_base_level_fall case 0: 1 pair)",
    92: "order in 4 of 5 cases (tilt case 19: 7 pairs)",
    94: "order in 4 of 5 cases (partial_base_level_fall case 8: 2 pairs)",
    95: "order in 5 of 7 cases (erodibility_patch case 1: 3 pairs; erodibility_patch case 9: 1 pair)",
    97: "order in 3 of 4 cases (runoff_gradient case 18: 1 pair)",
    101: "order in 4 of 6 cases (partial_base_level_fall case 0: 1 pair; partial_base_level_fall case 8: 4 pairs)",
    105: "order in 3 of 4 cases (runoff_gradient case 18: 1 pair)",
    106: "order in 2 of 3 cases (partial_base_level_fall case 0: 1 pair)",
    107: "order in 2 of 3 cases (partial_base_level_fall case 8: 3 pairs)",
    108: "order in 3 of 4 cases (erodibility_patch case 17: 5 pairs)",
    110: "order in 3 of 4 cases (runoff_gradient case 10: 1 pair)",
    111: "order in 1 of 3 cases (erodibility_patch case 1: 1 pair; runoff_gradient case 18: 3 pairs)",
    114: "order in 2 of 3 cases (partial_base_level_fall case 0: 4 pairs)",
    115: "order in 3 of 4 cases (partial_base_level_fall case 0: 8 pairs)",
    120: "order in 1 of 3 cases (partial_base_level_fall case 8: 2 pairs; runoff_gradient case 18: 1 pair)",
    121: "order in 1 of 2 cases (erodibility_patch case 1: 1 pair)",
    126: "order in 3 of 4 cases (partial_base_level_fall case 16: 5 pairs)",
    129: "order in 4 of 5 cases (partial_base_level_fall case 8: 12 pairs)",
    130: "order in 1 of 2 cases (runoff_gradient case 2: 2 pairs)",
    132: "order in 2 of 3 cases (partial_base_level_fall case 16: 3 pairs)",
    133: "order in 2 of 3 cases (partial_base_level_fall case 0: 10 pairs)",
    135: "order in 3 of 4 cases (erodibility_patch case 9: 1 pair)",
    136: "order in 4 of 5 cases (partial_base_level_fall case 0: 1 pair)",
    137: "order in 2 of 3 cases (erodibility_patch case 1: 4 pairs)",
    139: "order in 2 of 3 cases (partial_base_level_fall case 16: 7 pairs)",
    140: "order in 6 of 7 cases (partial_base_level_fall case 0: 8 pairs)",
    142: "order in 2 of 4 cases (runoff_gradient case 2: 2 pairs; runoff_gradient case 18: 2 pairs)",
}

ALARM_MISSES: dict[int, str] = {
    18: "4 of 6 steady cases without an alarm (a main segment in steady_symmetric case 12 at 0.56, probability of "
        "motion 0.82, confidence 0.55; a main segment in steady_uplift_contrast case 21 at 0.50, probability of "
        "motion 0.50, confidence 0.93)",
    41: "2 of 3 steady cases without an alarm (a lateral segment in steady_uplift_contrast case 13 at 0.51, "
        "probability of motion 0.51, confidence 0.98)",
    62: "7 of 8 steady cases without an alarm (a lateral segment in steady_uplift_contrast case 13 at 0.60, "
        "probability of motion 0.75, confidence 0.98; a lateral segment in steady_uplift_contrast case 13 at 0.57, "
        "probability of motion 0.61, confidence 0.98)",
    72: "2 of 3 steady cases without an alarm (a main segment in steady_erodibility_contrast case 6 at 0.85, "
        "probability of motion 0.85, confidence 0.81)",
    93: "4 of 5 steady cases without an alarm (a lateral segment in steady_symmetric case 20 at 0.55, probability of "
        "motion 0.97, confidence 0.97)",
    123: "4 of 5 steady cases without an alarm (a main segment in steady_symmetric case 12 at 0.88, probability of "
         "motion 0.93, confidence 0.91)",
    141: "4 of 5 steady cases without an alarm (a main segment in steady_symmetric case 12 at 0.66, probability of "
         "motion 0.75, confidence 0.77)",
}

LATERAL_SCALING_MISSES: dict[int, str] = {
    3: "the main divide's scaling scores 0.197 against the lateral segments' own 0.234",
    26: "the main divide's scaling scores 0.184 against the lateral segments' own 0.190",
    30: "the main divide's scaling scores 0.101 against the lateral segments' own 0.103",
    32: "the main divide's scaling scores 0.222 against the lateral segments' own 0.260",
    34: "the main divide's scaling scores 0.196 against the lateral segments' own 0.227",
    39: "the main divide's scaling scores 0.347 against the lateral segments' own 0.349",
    45: "the main divide's scaling scores 0.205 against the lateral segments' own 0.221",
    54: "the main divide's scaling scores 0.147 against the lateral segments' own 0.162",
    56: "the main divide's scaling scores 0.114 against the lateral segments' own 0.148",
    64: "the main divide's scaling scores 0.307 against the lateral segments' own 0.321",
    65: "the main divide's scaling scores 0.220 against the lateral segments' own 0.227",
    70: "the main divide's scaling scores 0.154 against the lateral segments' own 0.156",
    72: "the main divide's scaling scores 0.181 against the lateral segments' own 0.182",
    73: "the main divide's scaling scores 0.138 against the lateral segments' own 0.146",
    76: "the main divide's scaling scores 0.084 against the lateral segments' own 0.095",
    78: "the main divide's scaling scores 0.230 against the lateral segments' own 0.248",
    93: "the main divide's scaling scores 0.214 against the lateral segments' own 0.214",
    94: "the main divide's scaling scores 0.246 against the lateral segments' own 0.251",
    97: "the main divide's scaling scores 0.111 against the lateral segments' own 0.113",
    102: "the main divide's scaling scores 0.128 against the lateral segments' own 0.134",
    106: "the main divide's scaling scores 0.262 against the lateral segments' own 0.277",
    108: "the main divide's scaling scores 0.305 against the lateral segments' own 0.315",
    111: "the main divide's scaling scores 0.212 against the lateral segments' own 0.234",
    116: "the main divide's scaling scores 0.263 against the lateral segments' own 0.265",
    117: "the main divide's scaling scores 0.164 against the lateral segments' own 0.173",
    129: "the main divide's scaling scores 0.218 against the lateral segments' own 0.223",
    130: "the main divide's scaling scores 0.120 against the lateral segments' own 0.123",
    131: "the main divide's scaling scores 0.173 against the lateral segments' own 0.174",
    132: "the main divide's scaling scores 0.091 against the lateral segments' own 0.092",
}

LATERAL_MEAN_MISSES: dict[int, str] = {
    32: "the lateral segments' mean instability 0.060 against a moved share of 0.115",
    39: "the lateral segments' mean instability 0.064 against a moved share of 0.130",
    64: "the lateral segments' mean instability 0.061 against a moved share of 0.118",
    108: "the lateral segments' mean instability 0.049 against a moved share of 0.105",
    121: "the lateral segments' mean instability 0.066 against a moved share of 0.119",
}

PROBABILITY_MISSES: dict[int, str] = {
    25: "calibration error 0.053 (log loss 0.195 against the score's 1.186; 271 segments, 128 moving)",
    72: "calibration error 0.065 (log loss 0.175 against the score's 0.620; 177 segments, 74 moving)",
    83: "calibration error 0.050 (log loss 0.134 against the score's 0.516; 326 segments, 93 moving)",
    85: "calibration error 0.063 (log loss 0.192 against the score's 0.974; 209 segments, 64 moving)",
    93: "calibration error 0.027 (log loss 0.029 against the score's 0.002; 146 segments, 21 moving)",
    107: "calibration error 0.071 (log loss 0.123 against the score's 0.976; 195 segments, 80 moving)",
    110: "calibration error 0.066 (log loss 0.182 against the score's 1.546; 279 segments, 123 moving)",
    121: "calibration error 0.061 (log loss 0.144 against the score's 0.235; 139 segments, 34 moving)",
    129: "calibration error 0.065 (log loss 0.217 against the score's 0.983; 350 segments, 181 moving)",
    133: "calibration error 0.057 (log loss 0.149 against the score's 1.442; 123 segments, 69 moving)",
}


@functools.lru_cache(maxsize=None)
def _held_out(seed: int) -> tuple[dict, ...]:
    out = []
    for i in range(24):
        if split_of(case_seed(seed, i)) != "held-out":
            continue
        case = load_or_build(seed, i)  # cached under ~/.cache/divides/regional (built if missing)
        out.append(score(case, _screen(case), lateral=lateral_truth(case)))  # the truth cached beside the case
    return tuple(out)


def _known_miss(seed: int, why: str):
    return pytest.param(seed, marks=pytest.mark.xfail(strict=True, reason=f"known miss on master seed {seed} "
                                                      f"(docs/validation.md, Regional screening): {why}"))


def _with_misses(seeds: tuple[int, ...], misses: dict[int, str]) -> list:
    """The seeds to test, each known miss as a strict expected failure with its measured reason."""
    return [_known_miss(s, misses[s]) if s in misses else s for s in seeds]


@pytest.mark.slow
@pytest.mark.parametrize("seed", HELD_OUT_SEEDS)
def test_held_out_coverage(seed):
    held_out = _held_out(seed)
    assert len(held_out) >= 6
    assert all(r["coverage"] >= TARGETS["coverage"] for r in held_out)


#: Held-out draws screened once more with the screening's own default channel area (every eighth draw).
DEFAULT_AREA_SEEDS = HELD_OUT_SEEDS[::8]


#: Known misses of the default channel area's coverage (measured by hand: held_out_statuses.py does not run it).
DEFAULT_AREA_MISSES: dict[int, str] = {
    106: "tilt case 11: no divide between outlet basins (the basins of at least the minimum basin area drain 4 % of "
         "the DEM; the hundred-and-sixth to hundred-and-ninth judgements)",
}


@pytest.mark.slow
@pytest.mark.parametrize("seed", _with_misses(DEFAULT_AREA_SEEDS, DEFAULT_AREA_MISSES))
def test_held_out_default_channel_area_screens_every_case(seed):
    # Round 64: without a channel area the screening's default (the slope-area value, 50 cells to 0.2 % of the DEM)
    # screens every held-out case and covers >= 90 % of the divides between outlet basins (measured on all 77 draws:
    # 935 of 935; unbounded, the default refused cases for want of two basins above the minimum area).
    for i in range(24):
        if split_of(case_seed(seed, i)) != "held-out":
            continue
        case = load_or_build(seed, i)
        result = screen(case.dem(), theta=case.parameters["theta"], closed_edges=case.closed_edges, workers=1, seed=0)
        coverage = score(case, result)["coverage"]  # None: no divide between outlet basins
        assert coverage is not None and coverage >= TARGETS["coverage"], f"case {i}"


def _lateral_log_loss(held_out, scaling) -> tuple[float, float, float]:
    """Log loss and mean of a Platt scaling of P(a) + P(b) on the held-out lateral outlet-basin segments with
    a truth, and the share of them that moved (area exchanged; docs/validation.md)."""
    x, y = [], []
    for r in held_out:
        for m in r["lateral"]:
            if m["probabilities"] is not None and (m["in_moving"] or m["in_stable"]):
                x.append(m["probabilities"]["a"] + m["probabilities"]["b"])
                y.append(float(m["in_moving"]))
    p, y = np.clip(np.asarray(x), 1e-4, 1 - 1e-4), np.asarray(y)
    assert y.size >= 100 and 0 < y.sum() < y.size
    alpha, beta = scaling
    q = np.clip(1.0 / (1.0 + np.exp(-(alpha + beta * np.log(p / (1 - p))))), 1e-4, 1 - 1e-4)
    return float(np.mean(-(y * np.log(q) + (1 - y) * np.log(1 - q)))), float(q.mean()), float(y.mean())


@pytest.mark.slow
@pytest.mark.parametrize("seed", _with_misses(HELD_OUT_SEEDS, LATERAL_MEAN_MISSES))
def test_held_out_lateral_instability_is_calibrated_in_the_large(seed):
    # Lateral outlet-basin segments against the area their pair of basins exchanged: with their own Platt
    # scaling, fitted on training cases, the mean instability is within 0.05 of the share that moved
    # (calibration in the large; common practice): 0.083 against 0.061 (seed 1), 0.086 against 0.054
    # (seed 2), 0.098 against 0.131 (seed 3), 0.071 against 0.039 (seed 4), 0.063 against 0.041 (seed 5),
    # 0.073 against 0.052 (seed 6), 0.064 against 0.042 (seed 7), 0.066 against 0.074 (seed 8), 0.066 against
    # 0.026 (seed 9), 0.063 against 0.053 (seed 10), 0.068 against 0.054 (seed 11), 0.069 against 0.060
    # (seed 12), 0.058 against 0.056 (seed 13), 0.069 against 0.068 (seed 14), 0.076 against 0.044 (seed 15),
    # 0.077 against 0.057 (seed 16), 0.064 against 0.032 (seed 17), 0.068 against 0.045 (seed 18), 0.072 against
    # 0.059 (seed 19), 0.053 against 0.050 (seed 20), 0.074 against 0.088 (seed 21), 0.072 against 0.056
    # (seed 23), 0.072 against 0.075 (seed 24), 0.059 against 0.053 (seed 25), 0.080 against 0.071 (seed 26) and
    # 0.082 against 0.072 (seed 27), 0.063 against 0.057 (seed 28), 0.075 against 0.031 (seed 29), 0.072 against
    # 0.047 (seed 30), 0.060 against 0.020 (seed 31), 0.073 against 0.117 (seed 32), 0.060 against 0.042 (seed 33),
    # 0.054 against 0.085 (seed 34), 0.068 against 0.042 (seed 35), 0.082 against 0.051 (seed 36), 0.073 against
    # 0.063 (seed 37), 0.054 against 0.048 (seed 38), 0.082 against 0.130 (seed 39), 0.074 against 0.046 (seed 40),
    # 0.067 against 0.060 (seed 41), 0.073 against 0.062 (seed 42), 0.058 against 0.043 (seed 43), 0.065 against
    # 0.056 (seed 44), 0.073 against 0.096 (seed 45), 0.081 against 0.057 (seed 46), 0.077 against 0.067 (seed 47),
    # 0.072 against 0.029 (seed 49), 0.083 against 0.091 (seed 50), 0.060 against 0.047 (seed 51), 0.085 against
    # 0.035 (seed 52: a difference of 0.04997), 0.052 against 0.044 (seed 53), 0.056 against 0.062 (seed 54), 0.061
    # against 0.065 (seed 55), 0.060 against 0.067 (seed 56), 0.077 against 0.039 (seed 57), 0.076 against 0.060
    # (seed 58), 0.063 against 0.049 (seed 59), 0.064 against 0.040 (seed 60), 0.063 against 0.048 (seed 62),
    # 0.084 against 0.101 (seed 63), 0.060 against 0.052 (seed 67) and 0.078 against 0.073 (seed 68) when written;
    # not on seed 48 (0.069 against 0.017: 4 of 238 lateral segments with a truth moved).
    _, mean_own, moved = _lateral_log_loss(_held_out(seed), INSTABILITY_SCALING["lateral"])
    assert abs(mean_own - moved) < 0.05


@pytest.mark.slow
@pytest.mark.parametrize("seed", _with_misses(HELD_OUT_SEEDS, LATERAL_SCALING_MISSES))
def test_held_out_lateral_own_scaling_beats_the_main_divides(seed):
    # By log loss (a proper scoring rule; common practice) the lateral segments' own scaling beats the main divide's on
    # the held-out cases: 0.179 against 0.239 (seed 1), 0.126 against 0.141 (seed 2), 0.131 against 0.150 (seed 4),
    # 0.152 against 0.174 (seed 5), 0.140 against 0.151 (seed 6), 0.128 against 0.131 (seed 7), 0.202 against 0.229
    # (seed 8), 0.119 against 0.161 (seed 9), 0.165 against 0.192 (seed 10), 0.205 against 0.258 (seed 12), 0.195
    # against 0.222 (seed 13), 0.181 against 0.196 (seed 14), 0.099 against 0.119 (seed 15), 0.213 against 0.304
    # (seed 16), 0.125 against 0.131 (seed 17), 0.158 against 0.201 (seed 18), 0.199 against 0.265 (seed 19),
    # 0.202 against 0.257 (seed 20), 0.231 against 0.266 (seed 21), 0.147 against 0.160 (seed 23) and 0.202 against
    # 0.234 (seed 24), 0.165 against 0.186 (seed 25), 0.201 against 0.269 (seed 26), 0.193 against 0.222 (seed 27)
    # 0.198 against 0.262 (seed 28), 0.108 against 0.138 (seed 29), 0.085 against 0.095 (seed 31), 0.151 against
    # 0.168 (seed 33), 0.151 against 0.193 (seed 36), 0.172 against 0.184 (seed 37), 0.189 against 0.236 (seed
    # 38), 0.314 against 0.362 (seed 39), 0.173 against 0.232 (seed 40), 0.211 against 0.269 (seed 41), 0.168
    # against 0.174 (seed 42), 0.145 against 0.170 (seed 43), 0.177 against 0.200 (seed 44), 0.209 against 0.225
    # (seed 45), 0.186 against 0.265 (seed 46), 0.153 against 0.159 (seed 47), 0.093 against 0.109 (seed 48), 0.113
    # against 0.133 (seed 49), 0.246 against 0.311 (seed 50), 0.181 against 0.222 (seed 51), 0.097 against 0.134
    # (seed 52), 0.181 against 0.237 (seed 53), 0.202 against 0.244 (seed 55), 0.103 against 0.122 (seed 57), 0.166
    # against 0.204 (seed 58), 0.165 against 0.208 (seed 59), 0.122 against 0.129 (seed 60), 0.189 against 0.263
    # (seed 62), 0.280 against 0.371 (seed 63), 0.161 against 0.178 (seed 67) and 0.191 against 0.225 (seed 68) when
    # written
    # (on master
    # seeds 0's, 3's and 11's held-out cases it did not: 0.181 against 0.163, 0.232 against 0.209 and 0.117 against
    # 0.110, and on seeds 30's, 32's, 34's and 35's 0.103 against 0.087, 0.219 against 0.189, 0.211 against 0.205
    # and 0.094 against 0.085, and on seeds 54's and 56's 0.159 against 0.149 and 0.144 against 0.111;
    # docs/validation.md).
    own, _, _ = _lateral_log_loss(_held_out(seed), INSTABILITY_SCALING["lateral"])
    main, _, _ = _lateral_log_loss(_held_out(seed), INSTABILITY_SCALING["main"])
    assert own < main


@pytest.mark.slow
@pytest.mark.parametrize("seed", _with_misses(HELD_OUT_SEEDS, TOP_MISSES))
def test_held_out_top_ranked_segments_move_where_the_truth_moves(seed):
    # Issue 14's target: the highest-ranked main-divide segments lie in moving stretches and point within
    # 45 degrees of the measured motion; 8 of 8, 3 of 3, 8 of 8, 5 of 5, 8 of 8, 11 of 11, 3 of 3, 6 of 6, 4 of 4,
    # 7 of 7, 9 of 9, 6 of 6, 7 of 7, 8 of 8, 2 of 2, 2 of 2 and 9 of 9 transient cases of seeds 2, 3, 5, 6, 8, 10,
    # 11, 13, 14, 15, 18, 20, 21, 23, 24, 26 and 29, and 7 of 7, 5 of 5, 7 of 7 and 8 of 8 of seeds 32, 35, 36 and
    # 37, and 5 of 5, 6 of 6 and 7 of 7 of seeds 40-42, 4 of 4, 7 of 7 and 3 of 3 of seeds 46-48 and 4 of 4, 5 of 5
    # and 7 of 7 of seeds 49-51, 5 of 5 of seed 53 and 6 of 6, 9 of 9 and 5 of 5 of seeds 58, 59 and 67 when written
    # (seed 1: 4 of
    # 4 from round 22 until round 25 asked the transience to stand out of the DEM error; seed 4: 4 of 4 and seed 5: 7
    # of 8 before round 30 read the hilltops' curvature over a window). Round 55's ranking, from its adoption until
    # round 57 withdrew it, moved the statuses of seeds 2, 19, 20, 23, 26, 28, 37, 44, 53, 55 and 60 (both ways;
    # docs/validation.md).
    assert all(r["top_ok"] is not False for r in _held_out(seed))


@pytest.mark.slow
@pytest.mark.parametrize("seed", _with_misses(HELD_OUT_SEEDS, ALARM_MISSES))
def test_held_out_steady_landscapes_raise_no_alarm(seed):
    # Issue 14's target: no segment with instability and confidence both >= 0.5 in a steady landscape; 6 of 6, 7 of 7, 3
    # of 3, 8 of 8, 4 of 4, 8 of 8, 10 of 10, 9 of 9, 6 of 6, 6 of 6, 6 of 6, 4 of 4, 5 of 5, 7 of 7, 6 of 6 and 6 of 6
    # steady cases of seeds 1-7 and 9-17, 6 of 6 of seeds 21, 23, 28, 29, 30 and 34, 7 of 7 of seeds 24, 31 and 32, 8 of
    # 8 of seed 33, 4 of 4 of seed 25, 3 of 3 of seed 27, 5, 9, 6, 5, 6, 6, 5, 7, 4, 5, 6, 4 and 5 of as many of seeds
    # 35-40 and 42-48, 5 of 5, 6 of 6 and 8 of 8 of seeds 49-51, 5 of 5 and 4 of 4 of seeds 53 and 54 and 6 of 6,
    # 3 of 3 and 3 of 3 of seeds 55-57, 7 of 7, 7 of 7 and 4 of 4 of seeds 58-60 and 8 of 8, 6 of 6 and 9 of 9 of
    # seeds 63, 67 and 68 when
    # written, 3 of 3 of seed 41 since round 57 bounded the instability by the probability of motion (2 of 3 before:
    # a lateral segment in steady_uplift_contrast case 13 scored 0.51, probability of motion 0.48), 5 of
    # 5 of seed 26 since round 47 capped lateral segments whose hilltops contradict their direction (4 of 5 before, two
    # such lateral segments in
    # steady_erodibility_contrast case 6 at 0.72 and 0.70; seed 26 then joined the training cases), 7 of 7 of seed 8
    # since round 38 asked the one-U run for 0.75 cell on main divides (6 of 7 before, a main segment in
    # steady_uplift_contrast case 13 at 0.90; 0.53 before round 30) (seeds 1 and 4: 4 of 6 and 6 of 8 before the runs
    # had to move a segment half a cell, round 11; seeds 5, 6, 7 and 10: 2 of 4, 6 of 8, 9 of 10 and 5 of 6 before the
    # lateral divides left the hilltops out, round 23).
    assert all(r["alarm_ok"] for r in _held_out(seed))


@pytest.mark.slow
@pytest.mark.parametrize("seed", _with_misses(HELD_OUT_SEEDS, ORDER_MISSES))
def test_held_out_still_segments_rank_below_moving_ones(seed):
    # Issue 14's target: every main-divide segment in a stretch that does not move ranks below every one in a
    # moving stretch; 3 of 3, 4 of 4, 2 of 2, 5 of 5, 4 of 4, 4 of 4, 3 of 3, 6 of 6, 2 of 2, 1 of 1, 3 of 3, 4 of 4 and
    # 4 of 4 transient cases of seeds 1, 2, 3, 5, 6, 7, 9, 10, 11, 12, 16, 17 and 19 when written, 1 of 1 of seed 20
    # and 4 of 4, 2 of 2, 1 of 1, 5 of 5, 4 of 4, 3 of 3, 4 of 4, 5 of 5, 3 of 3, 6 of 6 and 6 of 6 of seeds 23, 24,
    # 26, 27, 29, 30, 31, 32, 35, 36 and 37, and 5 of 5 of seed 39, 3 of 3 of seeds 40 and 42, 4 of 4 of seed 41,
    # 3 of 3 of seed 44, 5 of 5 of seed 45, 1 of 1 of seed 48, 3 of 3 of seed 50, 3 of 3, 1 of 1 and 3 of 3 of
    # seeds 52-54, 3 of 3, 5 of 5 and 6 of 6 of seeds 55-57 and 4 of 4, 5 of 5, 3 of 3 and 4 of 4 of seeds 58, 60,
    # 62 and 63 when written
    # (seed 2: 2 of 4 before rounds
    # 14-20's ranking; seed 5: 4 of 5 before round 30; seed 9: 1 of 3 before round 33 ranked the weakly scored
    # segments by the larger shift of both runs; seeds 3, 6, 11 and 16: 1 of 2, 3 of 4, 1 of 2 and 2 of 3 before
    # round 34 put the weak main segments beside strongly scored ones first; seeds 1, 7, 10 and 12: 2 of 3, 2 of 4,
    # 5 of 6 and 0 of 1 before round 36 passed the neighbours' scores along segments the runs move). Round 63's ties
    # of the runs' shifts under half a cell moved seeds 10, 31, 39, 61, 65, 69 and 75 to ORDER_MISSES and seeds 15 and
    # 68 out of it (docs/validation.md, *Round 63*).
    assert all(r["order_ok"] is not False for r in _held_out(seed))


def _log_loss_and_calibration(p, y) -> tuple[float, float]:
    """Log loss and expected calibration error (ten equal bins, weighted by count; Naeini et al. 2015) of
    probabilities ``p`` (clipped to [1e-4, 1 - 1e-4]) against outcomes ``y``."""
    p, y = np.clip(np.asarray(p, dtype=float), 1e-4, 1 - 1e-4), np.asarray(y, dtype=float)
    bins = np.minimum((p * 10).astype(int), 9)
    ece = sum(abs(p[bins == b].mean() - y[bins == b].mean()) * np.sum(bins == b) for b in np.unique(bins)) / y.size
    return float(np.mean(-(y * np.log(p) + (1 - y) * np.log(1 - p)))), float(ece)


def _probability_figures(held_out) -> tuple[float, float, float, int, int]:
    """Log loss and calibration error of the probability of motion, and the ranking score's log loss, on the held-out
    main segments in moving or still stretches; their number and how many moved."""
    main = [m for r in held_out for m in r["main"]
            if m["probabilities"] is not None and (m["in_moving"] or m["in_stable"])]
    y = [float(m["in_moving"]) for m in main]
    loss, ece = _log_loss_and_calibration([m["motion_probability"] for m in main], y)
    loss_score, _ = _log_loss_and_calibration([m["ranking_score"] for m in main], y)
    return loss, ece, loss_score, len(main), int(sum(y))


@pytest.mark.slow
@pytest.mark.parametrize("seed", _with_misses(PROBABILITY_SEEDS, PROBABILITY_MISSES))
def test_held_out_probability_of_motion_is_calibrated(seed):
    # Round 42 (docs/validation.md; target written before the draw's figures were read): on the held-out main
    # segments in moving or still stretches, the probability of motion's calibration error is at most 0.05 and its
    # log loss (a proper scoring rule; common practice) below the instability's. With round 46's told error: 0.020
    # and 0.031 against the instability's 0.058 and 0.433 on seed 23 (320 segments, 120 moving), 0.014 and 0.037
    # against 0.040 and 0.356 on seed 24 (208, 23 moving), 0.047 and 0.229 against 0.167 and 1.246 on seed 25 (262,
    # 120 moving), 0.018 and 0.020 against 0.036 and 0.098 on seed 26 (146, 46 moving), 0.025 and 0.056 against
    # 0.062 and 0.403 on seed 27 (198, 78 moving), 0.024 and 0.082 against 0.162 and 0.773 on seed 28 (320, 154
    # moving), 0.019 and 0.039 against 0.073 and 0.512 on seed 29 (323, 143 moving), 0.021 and 0.119 against 0.063 and
    # 0.505 on seed 30 (248, 89 moving), 0.036 and 0.077 against 0.077 and 0.649 on seed 31 (275, 109 moving) and
    # 0.020 and 0.024 against 0.071 and 0.350 on seed 32 (300, 110 moving), 0.020 and 0.084 against 0.070 and 0.590
    # on seed 33 (302, 71 moving), 0.014 and 0.090 against 0.045 and 0.300 on seed 34 (254, 102 moving), 0.037 and
    # 0.131 against 0.063 and 0.393 on seed 35 (228, 86 moving), 0.030 and 0.058 against 0.084 and 0.510 on seed 36
    # (313, 117 moving), 0.019 and 0.039 against 0.074 and 0.526 on seed 37 (307, 111 moving) and 0.024 and 0.124
    # against 0.034 and 0.262 on seed 38 (186, 34 moving), 0.022 and 0.042 against 0.048 and 0.210 on seed 39
    # (232, 73 moving), 0.019 and 0.070 against 0.034 and 0.249 on seed 40 (242, 81 moving), 0.043 and 0.194 against
    # 0.078 and 0.546 on seed 41 (189, 101 moving), 0.014 and 0.031 against 0.068 and 0.397 on seed 42 (257, 122
    # moving), 0.025 and 0.067 against 0.090 and 0.557 on seed 43 (323, 120 moving), 0.029 and 0.037 against 0.104 and
    # 0.779 on seed 44 (202, 77 moving), 0.028 and 0.070 against 0.115 and 0.946 on seed 45 (294, 103 moving), 0.024
    # and 0.060 against 0.046 and 0.332 on seed 46 (236, 52 moving), 0.024 and 0.087 against 0.078 and 0.656 on seed
    # 47 (226, 93 moving), 0.028 and 0.065 against 0.035 and 0.313 on seed 48 (148, 51 moving), 0.015 and 0.044
    # against 0.062 and 0.483 on seed 49 (196, 50 moving), 0.018 and 0.077 against 0.109 and 0.606 on seed 50 (250, 96
    # moving), 0.024 and 0.138 against 0.097 and 0.678 on seed 51 (342, 106 moving), 0.027 and 0.050 against 0.065
    # and 0.365 on seed 52 (234, 56 moving), 0.007 and 0.008 against 0.042 and 0.340 on seed 53 (224, 90 moving) and
    # 0.031 and 0.127 against 0.115 and 0.944 on seed 54 (181, 88 moving), 0.027 and 0.087 against 0.113 and 0.856 on
    # seed 55 (281, 124 moving), 0.026 and 0.106 against 0.095 and 0.690 on seed 56 (198, 96 moving) and 0.047 and
    # 0.210 against 0.094 and 0.754 on seed 57 (213, 95 moving), 0.032 and 0.114 against 0.067 and 0.536 on seed 58
    # (282, 100 moving), 0.019 and 0.050 against 0.067 and 0.394 on seed 59 (341, 131 moving) and 0.037 and 0.070
    # against 0.074 and 0.568 on seed 60 (277, 118 moving) and 0.008 and 0.039 against 0.048 and 0.289 on seed 62
    # (287, 83 moving), 0.021 and 0.123 against 0.066 and 0.524 on seed 67 (241, 68 moving) and 0.028 and 0.100
    # against 0.099 and 0.797 on seed 68 (391, 145 moving) when written (round
    # 42's fit: 0.022, 0.019 and 0.042 on seeds 23-25). A draw's figure varies: on 12-case draws of the training
    # cases it exceeded 0.05 in 11 % (docs/validation.md).
    loss, ece, loss_score, n, moving = _probability_figures(_held_out(seed))
    assert n >= 100 and 0 < moving < n
    assert ece <= 0.05 and loss < loss_score
