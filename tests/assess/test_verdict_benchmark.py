"""The calibrated verdict on the frozen benchmark subset: the held-out rules of issue 12.

The truth of every landscape is measured by continuing its model run
(`divides.model.benchmark.measure_motion`), never assumed from the set-up. The
frozen subset (tests/data/benchmark_frozen: landscapes 0-27 of master seed 0 on
grids of 120-160 cells) was not used to fit the decision model, which was fitted
on the training part of the 120-260-cell benchmark (docs/validation.md).

Rules (issue 12, "Targets on the held-out part"): among moving landscapes at least
90 % get the right direction; no wrong direction at confidence >= 0.9; wrong
directions at most 2 % of all; stable controls at least 90 % "stable" and at most
2 % given a direction. A rule the model does not meet on this subset is asserted
as stated and marked xfail(strict=True) with the measured shortfall: the rule is
never relaxed to pass.
"""

from __future__ import annotations

from pathlib import Path

import pytest

import divides
from divides.assess.calibration import score
from divides.errors import DividesError
from divides.model.benchmark import load_folder

FROZEN = Path(__file__).resolve().parents[1] / "data" / "benchmark_frozen"


@pytest.fixture(scope="module")
def verdicts():
    out = []
    for s in load_folder(FROZEN):
        truth = s.truth["moves_toward"]
        if truth is None:  # no line crossed the divide throughout: no truth, left out (docs/validation.md)
            continue
        try:
            v = divides.assess(s.dem(), s.sides["a"], s.sides["b"], closed_edges=s.closed_edges, robustness=False,
                               n_bootstrap=200).verdict
            said, conf = v.moves_toward, v.confidence
        except DividesError:  # a refusal (e.g. a side without channels) is an abstention
            said, conf = "undetermined", 0.0
        out.append({"index": s.index, "family": s.family, "truth": truth, "said": said, "confidence": conf})
    for r in out:  # readable with pytest -s
        print(f"#{r['index']:<3d} {r['family']:28s} truth {r['truth']:6s} said {r['said']:12s} {r['confidence']:.2f}")
    return out


def _card(verdicts):
    return score([r["truth"] for r in verdicts], [r["said"] for r in verdicts], [r["confidence"] for r in verdicts])


#: Measured with the shipped metric-only model (fitted on 95 training landscapes with enough data):
#: landscape 12, a steady runoff contrast (lopsided stable control, truth: stable), is called
#: "toward a" at 0.97 -- the confusion of steady lopsided divides with moving ones that the
#: near-divide measures cannot resolve on their own (Whipple et al. 2017); see docs/validation.md.
LOPSIDED = "landscape 12 (steady runoff contrast, measured stable) called toward a at 0.97"


@pytest.mark.xfail(strict=True, reason=f"measured: {LOPSIDED}")
def test_no_wrong_direction_at_high_confidence(verdicts):
    wrong = [r for r in verdicts if r["said"] in ("a", "b") and r["said"] != r["truth"] and r["confidence"] >= 0.9]
    assert wrong == []


@pytest.mark.xfail(strict=True, reason=f"measured: 1 wrong direction of 28 (3.6 %): {LOPSIDED}")
def test_wrong_directions_are_rare(verdicts):
    assert _card(verdicts).shares["wrong_direction_among_all"] <= 0.02


@pytest.mark.xfail(strict=True, reason="measured: 7 of 18 moving landscapes (39 %) get the right direction; the "
                   "other 11 are undetermined (6 with insufficient near-divide data, 5 below 0.8), none wrong")
def test_right_direction_among_moving(verdicts):
    assert _card(verdicts).shares["right_direction_among_moving"] >= 0.90


@pytest.mark.xfail(strict=True, reason="measured: 0 of 10 stable controls called stable (9 undetermined; "
                   "P(stable) never reaches 0.8), 1 given a direction (landscape 12)")
def test_stable_controls_are_called_stable(verdicts):
    card = _card(verdicts)
    assert card.shares["stable_called_stable"] >= 0.90
    assert card.shares["stable_given_a_direction"] <= 0.02
