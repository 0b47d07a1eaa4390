"""The calibrated decision model, against data drawn from known probabilities.

The reference for the fit is the data-generating model itself: cases are drawn
from a multinomial logistic model with known coefficients, so the true class
probabilities of every case are known exactly. The expected calibration error
is checked against its definition (Naeini, Cooper & Hauskrecht 2015; Guo et al.
2017): zero for a predictor whose outcomes are drawn from its own
probabilities, and |accuracy − confidence| per bin computed by hand for
predictors miscalibrated on purpose.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from scipy.special import softmax

from divides.assess import calibration as C
from divides.errors import ParameterError

# Known coefficients: rows a, b, stable; three features (think: a standardised contrast, its
# consistency, a forward-run displacement). Probabilities span about 0.01-0.99.
W_TRUE = np.array([[-2.0, 0.5, -1.0], [2.0, 0.5, 1.0], [0.0, -1.0, 0.0]])
B_TRUE = np.array([-0.5, -0.5, 1.0])


def _draw(n: int, seed: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    x = rng.normal(size=(n, 3)) * [1.0, 2.0, 0.5] + [0.0, 1.0, 0.0]
    p = softmax(x @ W_TRUE.T + B_TRUE, axis=1)
    y = (rng.random(n)[:, None] > np.cumsum(p, axis=1)).sum(axis=1)  # inverse-CDF draw of each class
    return x, y, p


@pytest.fixture(scope="module")
def fitted() -> C.DecisionModel:
    x, y, _ = _draw(20000, 0)
    return C.fit(x, y, features=("contrast", "consistency", "forward"), l2=1.0)


def test_fitted_probabilities_match_the_generating_model(fitted):
    # Reference: the data-generating model's probabilities on fresh cases (maximum likelihood is
    # consistent; 20 000 cases put the fit well within 0.05).
    x, _, p_true = _draw(2000, 1)
    p_fit = fitted.probabilities(x)
    assert np.max(np.abs(p_fit - p_true)) < 0.05
    assert np.allclose(p_fit.sum(axis=1), 1.0)


def test_the_fit_is_calibrated_on_held_out_cases(fitted):
    # Fresh draws from the generating model: the fitted model's top-label ECE is sampling noise.
    x, y, _ = _draw(20000, 2)
    conf, ok = C.top_label(fitted.probabilities(x), y)
    assert C.expected_calibration_error(conf, ok) < 0.02


def test_coefficients_round_trip_through_json(fitted):
    text = fitted.to_json()
    doc = json.loads(text)
    assert doc["schema"] == C.SCHEMA and doc["classes"] == ["a", "b", "stable"]
    assert set(doc["coefficients"]["a"]) == {"contrast", "consistency", "forward"}
    again = C.DecisionModel.from_json(text)
    x, _, _ = _draw(50, 3)
    np.testing.assert_array_equal(again.probabilities(x), fitted.probabilities(x))
    # Features by name give the same as the matrix.
    named = {"forward": x[:, 2], "contrast": x[:, 0], "consistency": x[:, 1]}
    np.testing.assert_allclose(again.probabilities(named), fitted.probabilities(x))
    with pytest.raises(ParameterError):
        C.DecisionModel.from_json('{"schema": "something else"}')
    with pytest.raises(ParameterError):
        C.DecisionModel.from_json("not json")


def test_decision_rule_returns_an_outcome_only_at_the_threshold():
    p = [[0.80, 0.15, 0.05], [0.79, 0.20, 0.01], [0.05, 0.9, 0.05], [0.1, 0.1, 0.8], [0.4, 0.2, 0.4]]
    got = C.decide(p)  # default threshold 0.8
    assert [d.outcome for d in got] == ["a", "undetermined", "b", "stable", "undetermined"]
    assert got[0].probability == 0.80 and got[1].probability == 0.79
    assert got[2].probabilities == {"a": 0.05, "b": 0.9, "stable": 0.05}
    assert [d.outcome for d in C.decide(p, threshold=0.95)] == ["undetermined"] * 5
    for bad in (0.3, 1.2, float("nan")):
        with pytest.raises(ParameterError):
            C.decide(p, threshold=bad)
    with pytest.raises(ParameterError):
        C.decide([[0.5, 0.2, 0.2]])  # does not sum to 1


def test_ece_of_a_perfectly_calibrated_predictor_is_about_zero():
    # Outcomes drawn from the predictor's own probabilities: calibrated by construction, so the
    # ECE is sampling noise only (about sqrt(p(1-p)/n) per bin, here < 0.01).
    rng = np.random.default_rng(5)
    p = rng.dirichlet([0.7, 0.7, 0.7], size=100000)
    y = (rng.random(p.shape[0])[:, None] > np.cumsum(p, axis=1)).sum(axis=1)
    conf, ok = C.top_label(p, y)
    assert C.expected_calibration_error(conf, ok) < 0.01
    bins = C.reliability(conf, ok)
    filled = [b for b in bins if b.count > 500]
    assert all(abs(b.accuracy - b.mean_confidence) < 0.02 for b in filled)


def test_ece_of_miscalibrated_predictors_equals_the_definition():
    # Every case at confidence 0.9, 70 % right: one bin, ECE = |0.7 - 0.9| = 0.2.
    assert C.expected_calibration_error([0.9] * 100, [True] * 70 + [False] * 30) == pytest.approx(0.2, abs=1e-12)
    # Two bins: 100 cases at 0.55 with 80 right, 300 at 0.95 with 225 right:
    # ECE = 100/400 * |0.80 - 0.55| + 300/400 * |0.75 - 0.95| = 0.0625 + 0.15 = 0.2125.
    conf = [0.55] * 100 + [0.95] * 300
    ok = [True] * 80 + [False] * 20 + [True] * 225 + [False] * 75
    assert C.expected_calibration_error(conf, ok) == pytest.approx(0.2125, abs=1e-12)
    bins = C.reliability(conf, ok)
    assert len(bins) == 10 and bins[5].count == 100 and bins[9].count == 300
    assert bins[5].accuracy == pytest.approx(0.8) and bins[9].mean_confidence == pytest.approx(0.95)
    assert np.isnan(bins[0].accuracy) and bins[0].count == 0
    # A confidence of exactly 1 falls in the last bin (equal widths on [0, 1]).
    assert C.reliability([1.0], [True])[-1].count == 1


def test_bad_inputs_are_refused_with_a_clear_error():
    x, y, _ = _draw(30, 4)
    with pytest.raises(ParameterError, match="NaN"):
        C.fit(np.where(np.eye(30, 3) > 0, np.nan, x), y)
    with pytest.raises(ParameterError, match="outcome"):
        C.fit(x, ["a"] * 29 + ["up"])
    with pytest.raises(ParameterError, match="columns|column"):
        C.fit(x, y).probabilities(x[:, :2])
    with pytest.raises(ParameterError):
        C.fit(x, y, l2=-1.0)
    with pytest.raises(ParameterError):
        C.expected_calibration_error([1.5], [True])


def test_scorecard_counts_by_hand():
    # Ten cases worked by hand: 6 moving (4 right, 1 undetermined, 1 wrong at 0.92), 4 stable
    # (3 called stable, 1 given a direction at 0.81).
    truth = ["a", "a", "b", "b", "b", "a", "stable", "stable", "stable", "stable"]
    said = ["a", "a", "b", "b", "undetermined", "b", "stable", "stable", "stable", "a"]
    conf = [0.9, 0.85, 0.95, 0.8, 0.5, 0.92, 0.9, 0.85, 0.8, 0.81]
    card = C.score(truth, said, conf)
    assert card.n == 10 and card.counts[("a", "b")] == 1 and card.counts[("b", "undetermined")] == 1
    assert card.shares["right_direction_among_moving"] == pytest.approx(4 / 6)
    assert card.shares["wrong_direction_among_all"] == pytest.approx(2 / 10)  # a→b and stable→a
    assert card.shares["stable_called_stable"] == pytest.approx(3 / 4)
    assert card.shares["stable_given_a_direction"] == pytest.approx(1 / 4)
    assert card.shares["wrong_direction_at_high_confidence"] == pytest.approx(1 / 10)  # only the 0.92 one
    assert card.met() == {k: False for k in C.TARGETS}
    perfect = C.score(truth, truth, [0.95] * 10)
    assert all(perfect.met().values())
    # No stable case: the stable figures cannot be judged.
    assert C.score(["a"], ["a"], [0.9]).met()["stable_called_stable"] is None
    with pytest.raises(ParameterError):
        C.score(["a"], ["up"], [0.9])
