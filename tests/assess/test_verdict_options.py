"""`min_confidence` / `--min-confidence`: the probability an outcome needs (issue 12)."""

from __future__ import annotations

import pytest

from divides.cli.assess_cmd import assess_request
from divides.errors import ParameterError


def test_min_confidence_from_the_command_line():
    # Issue 12: default 0.8, option --min-confidence. Above 1/3 so that an outcome reaching it is the
    # most probable of three (pigeonhole), at most 1 (a probability).
    assert "min_confidence" not in assess_request(side_a="west", side_b="east").options
    assert assess_request(side_a="west", side_b="east", min_confidence="0.9").options["min_confidence"] == 0.9
    for bad in ("0.3", "1.5", "high"):
        with pytest.raises(ParameterError, match="--min-confidence"):
            assess_request(side_a="west", side_b="east", min_confidence=bad)


def test_forward_run_options_from_the_command_line():
    # Issue 12 item 4: the forward run is on by default, can be switched off, and can be read by the decision.
    assert assess_request(side_a="west", side_b="east").options["forward_run"] is True
    assert assess_request(side_a="west", side_b="east", forward_run=False).options["forward_run"] is False
    assert assess_request(side_a="west", side_b="east", forward_in_decision=True).options["forward_in_decision"]
    with pytest.raises(ParameterError, match="--forward-in-decision needs the forward run"):
        assess_request(side_a="west", side_b="east", forward_run=False, forward_in_decision=True)


def test_the_forward_run_in_the_summary():
    # The assessment reports the same shift as a forward run made by hand from the same inputs, and its
    # rate under a given K is K x the unit rate (time scales as 1/K; Royden & Perron 2013).
    import numpy as np

    import math

    import divides
    from divides.assess.rate import FORWARD_RATE_LOG_BIAS
    from divides.model.forward_run import forward_shift

    c = np.arange(41.0)
    dem = divides.Dem.from_array(np.repeat(np.minimum(20.0 * c, 10.0 * (40.0 - c))[None], 6, axis=0), cell_size=100.0)
    options = dict(theta=0.1, channel_area_m2=3e4, closed_edges=("north", "south"), robustness=False, n_bootstrap=50)
    result = divides.assess(dem, "west", "east", erodibility=2e-5, **options)
    fwd = result.summary["verdict"]["forward_run"]
    by_hand = forward_shift(dem, result.sides, theta=0.1, n=1.0, closed_edges=("north", "south"),
                            channel_area_m2=float(result.channels.threshold.value_m2))
    assert fwd["shift_cells"] == pytest.approx(by_hand.shift_cells, abs=1e-3) and by_hand.shift_cells > 0
    assert fwd["horizon_response_times"] == 0.3 and fwd["note"] == ""
    # by default the near-divide measures decide; these two planes have too few channel heads for them
    assert result.verdict.moves_toward == "undetermined" and "withheld" in fwd["rate_mm_per_yr"]
    # with the forward run in the decision it speaks alone (toward b), and its rate is K x the unit rate x the
    # bias measured on the benchmark; "best" is the median of 200 draws carrying the bias's log-normal spread
    # (0.6), so it lies within about 3 standard errors (~15 %) of the central value
    read = divides.assess(dem, "west", "east", erodibility=2e-5, forward_in_decision=True, **options)
    rate = read.summary["verdict"]["forward_run"]["rate_mm_per_yr"]
    assert read.verdict.moves_toward == "b" and rate["toward"] == "b"
    central = float(by_hand.rate_m_per_yr(2e-5)) * 1e3 * math.exp(FORWARD_RATE_LOG_BIAS)
    assert rate["best"] == pytest.approx(central, rel=0.15)
    assert rate["low"] < rate["best"] < rate["high"]  # never a zero-width interval
    off = divides.assess(dem, "west", "east", forward_run=False, **options).summary["verdict"]["forward_run"]
    assert off["shift_cells"] is None and "switched off" in off["note"]
