"""Values with their errors on the command line: ``--erosion-rate-a 0.2±0.05`` and friends.

The form VALUE±ERROR (one standard deviation) is how measured rates are quoted in the
literature (common practice); bad values end in one line and exit 2, before any work,
as the project brief asks of every user mistake.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from divides.cli.app import run
from divides.cli.assess_cmd import assess_request

UPLANDS = Path(__file__).resolve().parents[2] / "demo" / "uplands.tif"


@pytest.mark.parametrize("typed", ["0.2±0.05", "0.2+-0.05", "0.2 ± 0.05", "0.2+/-0.05"])
def test_a_rate_and_its_error_in_one_value(typed):
    options = assess_request(side_a="west", side_b="east", erosion_rate_a=typed).options
    assert options["erosion_rate_a_mm_yr"] == 0.2
    assert options["erosion_rate_a_error_mm_yr"] == 0.05


def test_the_error_as_its_own_option_and_for_k_and_the_knickpoint_age():
    options = assess_request(side_a="west", side_b="east", erosion_rate_a="0.2", erosion_rate_b="0.1±0.02",
                             errors={"--erosion-rate-a": "0.03"}).options
    assert (options["erosion_rate_a_mm_yr"], options["erosion_rate_a_error_mm_yr"]) == (0.2, 0.03)
    assert (options["erosion_rate_b_mm_yr"], options["erosion_rate_b_error_mm_yr"]) == (0.1, 0.02)
    k = assess_request(side_a="west", side_b="east", erodibility_k="2e-5±5e-6").options
    assert (k["erodibility"], k["erodibility_error"]) == (2e-5, 5e-6)
    age = assess_request(side_a="west", side_b="east", knickpoint_age="20000",
                         errors={"--knickpoint-age": "4000"}).options
    assert (age["knickpoint_age_years"], age["knickpoint_age_error_years"]) == (20000.0, 4000.0)
    plain = assess_request(side_a="west", side_b="east", erosion_rate_a="0.2").options
    assert plain.get("erosion_rate_a_error_mm_yr") is None  # no error given: taken as exact


@pytest.mark.parametrize("extra, words", [
    (["--erosion-rate-a", "0.2±-1"], ["--erosion-rate-a", "-1", ">= 0"]),
    (["--erosion-rate-a", "0.2±x"], ["--erosion-rate-a", "'x'"]),
    (["--erosion-rate-a", "0.2±nan"], ["--erosion-rate-a", "nan"]),
    (["--erosion-rate-b", "-0.2±0.05"], ["--erosion-rate-b", "-0.2"]),
    (["--erosion-rate-a", "0.2±0.05", "--erosion-rate-a-error", "0.05"], ["once"]),
    (["--erosion-rate-a-error", "0.05"], ["--erosion-rate-a-error", "without"]),
    (["--erodibility-k", "2e-5", "--erodibility-k-error", "-1e-6"], ["--erodibility-k", ">= 0"]),
    (["--knickpoint-age", "1e4±inf"], ["--knickpoint-age", "inf"]),
], ids=["negative-error", "not-a-number", "nan", "negative-value", "twice", "error-alone", "k", "age-inf"])
def test_a_bad_value_or_error_is_one_line_and_exit_2(capsys, tmp_path, extra, words):
    out = tmp_path / "out"
    code = run(["assess", str(UPLANDS), "--side-a", "west", "--side-b", "east", "--no-robustness", "--quiet",
                "--out", str(out), *extra])
    captured = capsys.readouterr()
    lines = [line for line in captured.err.splitlines() if line.strip()]
    assert code == 2, captured.err
    assert len(lines) == 1 and lines[0].startswith("divides: error: "), captured.err
    for word in words:
        assert word in lines[0], f"{word!r} not in {lines[0]!r}"
    assert "Traceback" not in captured.err and captured.out == ""
    assert not out.exists()


@pytest.mark.parametrize("name", ["erosion_rate_a_error_mm_yr", "erosion_rate_b_error_mm_yr", "erodibility_error",
                                  "knickpoint_age_error_years"])
@pytest.mark.parametrize("bad", [-0.1, float("nan"), float("inf"), "0.1"])
def test_the_config_refuses_an_error_that_is_not_a_finite_number_at_least_zero(name, bad):
    # A standard deviation is finite and not negative (its definition); 0 means exact.
    from divides.config import AssessConfig
    from divides.errors import ParameterError

    with pytest.raises(ParameterError, match=name):
        AssessConfig(**{name: bad})
    assert getattr(AssessConfig(**{name: 0.0}), name) == 0.0
