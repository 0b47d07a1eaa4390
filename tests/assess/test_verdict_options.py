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
