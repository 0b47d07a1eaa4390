"""The validation of test_validation.py repeated over more random landscapes.

Same kinds of scenario (with the sides swapped and a stronger runoff contrast) and the
same measured truth (continue the run, track the divide); three more noise seeds. Seeds
42 and 63 were looked at while setting the spread criterion of the contrasts
(divides.assess.contrasts.SPREAD_RATIO); seed 21 was not. Required: no wrong direction where the divide
moves, no direction where it does not, and nothing wrong at confidence >= 0.8.
"""

from __future__ import annotations

import dataclasses
import sys
from pathlib import Path

import pytest

from divides.model import scenarios as S

sys.path.insert(0, str(Path(__file__).parent))  # importlib mode: reach the sibling module
from test_validation import SHAPE, _case, _spin_up  # noqa: E402


@pytest.mark.parametrize("seed", [21, 42, 63])
def test_validation_over_more_seeds(seed):
    symmetric = S.symmetric_divide(SHAPE, seed=seed)
    steady = _spin_up(symmetric)
    runs = [
        _case("base-level fall east", S.base_level_fall(SHAPE, side="east", drop=20.0, seed=seed + 1), steady, 2e5),
        _case("base-level fall west", S.base_level_fall(SHAPE, side="west", drop=20.0, seed=seed + 2), steady, 2e5),
        _case("uplift contrast west", S.uplift_contrast(SHAPE, high_side="west", seed=seed + 3), steady, 5e5),
        _case("erodibility contrast west weak", S.erodibility_contrast(SHAPE, weak_side="west", seed=seed + 4),
              steady, 5e5),
        _case("runoff contrast east wet", S.runoff_contrast(SHAPE, wet_side="east", ratio=3.0, seed=seed + 5),
              steady, 5e5),
        _case("off-centre crest 0.35", S.off_centre_divide(SHAPE, crest=0.35, seed=seed + 6),
              dataclasses.replace(S.off_centre_divide(SHAPE, crest=0.35, seed=seed + 6)).surface, 1e6),
        _case("stable control", symmetric, steady, 1e5),
    ]
    for r in runs:
        print(f"seed {seed} {r['name']:32s} truth {r['truth']:6s} ({r['shift_m']:+7.0f} m) verdict "
              f"{r['verdict']:12s} {r['confidence']:.2f} ({r['basis']})")
    for r in runs:
        if r["truth"] in ("west", "east"):
            assert r["verdict"] in (r["truth"], "undetermined", "stable"), r["name"]  # never the wrong way
        else:
            assert r["verdict"] not in ("west", "east"), r["name"]
        if r["confidence"] >= 0.8:
            assert r["verdict"] == r["truth"], r["name"]
    moving = [r for r in runs if r["truth"] in ("west", "east")]
    # At most one abstention for lack of precision; abstentions for lack of independent samples
    # ("insufficient data", issue 11: fewer than 6 distinct channel heads per side on these 6 km
    # divides) are honest and counted apart. Measured at the change: seed 21 erodibility, seed 42
    # uplift and runoff abstain with "insufficient data"; every other moving case is right.
    short = [r for r in moving if r["verdict"] == "undetermined" and r["reason"] == "insufficient data"]
    assert sum(r["verdict"] == r["truth"] for r in moving) >= len(moving) - len(short) - 1
    assert len(short) <= len(moving) // 2  # the rule must not silence most of the validation
