"""Screening's landscape evidence: two forward runs of the whole DEM under its steady balance (one uplift rate,
one per outlet basin) and the hilltop curvature (`screen(..., forward_run=True)`, the default)."""

from __future__ import annotations

import math

import numpy as np
import pytest

import divides
from divides.assess.screen import INSTABILITY_EVIDENCE, INSTABILITY_SCALING, screen
from divides.assess.verdict import forward_agrees

OPTIONS = dict(theta=0.1, closed_edges=("north", "south"), channel_area_m2=3e4, workers=1, level="outlets")


def _book(west_gradient: float, east_gradient: float, rows: int = 21, cols: int = 41) -> divides.Dem:
    # Gilbert's two planes meeting at a crest, folded along the middle row: one valley per flank.
    c, r = np.arange(cols, dtype=float), np.arange(rows, dtype=float)
    z = np.minimum(west_gradient * 100.0 * c, east_gradient * 100.0 * (cols - 1 - c))[None, :] \
        + 10.0 * np.abs(r - (rows - 1) / 2)[:, None]
    return divides.Dem.from_array(z, cell_size=100.0)


def _instability(p: dict, kind: str, shifts: tuple | None, hill: float | None = None,
                 transience: tuple = (None, None), spread: tuple = (None, None)) -> float:
    # The documented models (docs/methods.md §7b): Platt scaling without the landscape evidence, and with it
    # the logistic model adding the hilltop contrast toward the favoured side and the runs' agreement (both
    # runs move the divide at least half a model cell toward the favoured side, the first three quarters of one on
    # a main divide, or, on a main divide whose
    # aggressor's basin has |transience| >= 0.1 and >= twice its spread under the DEM error model, the first does
    # and the second not half a cell the other way).
    q = p["a"] + p["b"]
    z = math.log(q / (1.0 - q))
    if shifts is None and hill is None:
        alpha, beta = INSTABILITY_SCALING[kind]
        return 1.0 / (1.0 + math.exp(-(alpha + beta * z)))
    alpha, beta, g_hill, g_run = INSTABILITY_EVIDENCE[kind]
    agrees = _runs_agree(p, kind, shifts, transience, spread)
    return 1.0 / (1.0 + math.exp(-(alpha + beta * z + g_hill * _favoured(p) * (hill or 0.0) + g_run * agrees)))


def _favoured(p: dict) -> float:
    return 1.0 if p["b"] > p["a"] else (-1.0 if p["a"] > p["b"] else 0.0)


def _runs_agree(p: dict, kind: str, shifts: tuple, transience: tuple = (None, None),
                spread: tuple = (None, None)) -> bool:
    favoured = _favoured(p)
    one_u, per_basin = (None if s is None else favoured * s for s in shifts)
    aggressor, sd = (transience[0], spread[0]) if favoured > 0 else (transience[1], spread[1])
    transient = kind == "main" and aggressor is not None and sd is not None and abs(aggressor) >= max(0.1, 2 * sd)
    first = 0.75 if kind == "main" else 0.5  # round 38: the one-uplift-rate run asked for more on main divides
    return favoured != 0 and one_u is not None and per_basin is not None and one_u >= first and (
        per_basin >= 0.5 or (transient and per_basin > -0.5))


def _motion_probability(s: dict, kind: str, told_m: float = 1.0) -> float:
    # The documented model of the probability of motion (docs/methods.md §7b, rounds 42 and 46), written out by hand:
    # the logistic function of logit(P(a) + P(b)), the hilltop contrast toward the favoured side, the runs' agreement
    # (as in _instability), the larger |shift| of the two runs capped at 5 model cells (0 and u = 1 when neither
    # measured it), on main divides whether a main segment within reach scores 0.01 or more, and the DEM error the
    # screening is told, read up to 5 m.
    from divides.assess.segment_motion import MOTION_PROBABILITY

    p = s["probabilities"]
    q = p["a"] + p["b"]
    hill = _favoured(p) * (s["hilltop_contrast"] or 0.0)
    shifts = (s["forward_shift_cells"], s["forward_shift_basin_cells"])
    agrees = float(_runs_agree(p, kind, shifts, (s["transience_a"], s["transience_b"]),
                               (s["transience_sd_a"], s["transience_sd_b"])))
    sizes = [abs(v) for v in shifts if v is not None]
    size, unmeasured = (min(max(sizes), 5.0), 0.0) if sizes else (0.0, 1.0)
    features = [math.log(q / (1.0 - q)), hill, agrees, size, unmeasured]
    if kind == "main":
        features.append(float((s["neighbour_instability"] or 0.0) >= 0.01))
    features.append(min(told_m, 5.0))
    c = MOTION_PROBABILITY[kind]
    return 1.0 / (1.0 + math.exp(-(c[0] + sum(w * x for w, x in zip(c[1:], features)))))


@pytest.mark.parametrize(("west", "east"), [(0.2, 0.1), (0.1, 0.2)])
def test_the_forward_run_moves_the_divide_into_the_gentler_flank(west, east):
    # Gilbert (1877): at uniform uplift and erodibility the steeper flank erodes faster, so the crest
    # moves into the gentler side; the segment's shift (positive into its basin b) points there.
    dem = _book(west, east)
    result = screen(dem, **OPTIONS)
    main = [s for s in result.segments if s["divide_kind"] == "main"]
    assert len(main) == 1
    s = main[0]
    gentle = result.labels[10, -2] if west > east else result.labels[10, 1]
    victim = s["basins"][1] if s["forward_shift_cells"] > 0 else s["basins"][0]
    assert abs(s["forward_shift_cells"]) > 0.5 and victim == gentle
    shifts = (s["forward_shift_cells"], s["forward_shift_basin_cells"])
    expected = _instability(s["probabilities"], "main", shifts, s["hilltop_contrast"],
                            (s["transience_a"], s["transience_b"]), (s["transience_sd_a"], s["transience_sd_b"]))
    assert s["ranking_score"] == pytest.approx(expected, abs=1e-9)
    assert result.parameters["forward_run"] is True and result.parameters["forward_run_grid"]["steps"] >= 20
    assert s["motion_probability"] == pytest.approx(_motion_probability(s, "main"), abs=1e-9)
    # round 57: the instability reported is the score never above the probability of motion
    assert s["instability"] == pytest.approx(min(expected, s["motion_probability"]), abs=1e-9)


def test_equal_flanks_give_no_shift_and_the_run_can_be_left_out():
    # Symmetric flanks stay (Gilbert 1877), under either run: less than the 0.1 model cell a shift is read at.
    # Without the runs (forward_run=False) no line of landscape evidence is measured and the P-only scaling
    # applies.
    on = screen(_book(0.15, 0.15), **OPTIONS)
    off = screen(_book(0.15, 0.15), forward_run=False, **OPTIONS)
    (s_on,) = [s for s in on.segments if s["divide_kind"] == "main"]
    (s_off,) = [s for s in off.segments if s["divide_kind"] == "main"]
    assert abs(s_on["forward_shift_cells"]) < 0.1 and abs(s_on["forward_shift_basin_cells"]) < 0.1
    assert not forward_agrees(s_on["probabilities"], s_on["forward_shift_cells"])
    assert on.parameters["forward_run"] is True
    assert s_off["forward_shift_cells"] is None and s_off["forward_shift_basin_cells"] is None
    assert s_off["hilltop_contrast"] is None
    assert off.parameters["forward_run"] is False and "forward_run_grid" not in off.parameters
    assert s_off["instability"] == pytest.approx(_instability(s_off["probabilities"], "main", None), abs=1e-9)
    # without the runs the instability is the calibrated probability itself, and the probability of motion is it
    assert s_off["motion_probability"] == s_off["instability"] == s_off["ranking_score"]
    assert s_on["motion_probability"] == pytest.approx(_motion_probability(s_on, "main"), abs=1e-9)
    # the DEM error the screening is told reaches the probability (round 46; read up to 5 m, segment_motion's doctest)
    (s_err,) = [s for s in screen(_book(0.15, 0.15), dem_error_m=3.0, **OPTIONS).segments if s["divide_kind"] == "main"]
    assert s_err["motion_probability"] == pytest.approx(_motion_probability(s_err, "main", 3.0), abs=1e-9)


@pytest.mark.parametrize(("cols", "min_area", "block", "cells"),
                         [(41, 6e5, 1, 60.0), (301, 6e5, 1, 60.0), (301, 1e7, 2, 250.0), (2401, 6e5, 3, 6e5 / 9e4)])
def test_the_run_grid_resolves_the_smallest_basin_within_a_cost_bound(cols, min_area, block, cells):
    # Round 41 (docs/validation.md; run_block): the runs' block is the largest whole number b with the smallest
    # basin, min_area, spanning >= 250 model cells of (b x 100 m)², but no more than a 300-cell side asks
    # (ceil(cols / 300)) and no fewer than a 1200-cell side does (ceil(cols / 1200)). By hand: 41 and 301 columns
    # with 6e5 m² run at block 1 (60 model cells; a 300-cell cap alone gave 301 columns block 2); with 1e7 m², 301
    # columns run at 2 (250 cells); 2401 columns are bound to 3 (6e5 / 300² = 6.7 cells). Below RUN_BASIN_CELLS
    # (50, round 40) the screening says its landscape evidence is coarse, in its parameters and report's caution.
    from divides.assess.screen import RUN_BASIN_CELLS
    from divides.report.screening import coarse_runs_note

    result = screen(_book(0.2, 0.1, cols=cols), min_basin_area_m2=min_area, **OPTIONS)
    grid = result.parameters["forward_run_grid"]
    assert grid["block"] == block and grid["model_cell_m"] == pytest.approx(100.0 * block)
    assert grid["smallest_basin_model_cells"] == pytest.approx(cells)
    assert grid["coarse_for_basins"] is (cells < RUN_BASIN_CELLS)
    note = coarse_runs_note(result.parameters)
    assert (note is None) is (cells >= RUN_BASIN_CELLS)
    if note is not None:
        assert "spans 7 model cells of 3 × 3 DEM cells" in note and "--bounds" in note
