"""Inputs that broke the assessment before issue 11: voids, θ near its limit, a side below the base level."""

from __future__ import annotations

import numpy as np
import pytest

import divides
from divides.model import scenarios as S

CELL = 100.0


@pytest.fixture(scope="module")
def ridge():
    # 100 x 190 cells: 38 single-cell voids are 0.2 % of it, as in the radar DEM case
    return S.symmetric_divide((100, 190), seed=3).run(duration=1e6, dt=5e4).final


@pytest.mark.parametrize("nodata", [None, -9999.0])
def test_scattered_single_cell_voids_do_not_break_the_assessment(ridge, nodata):
    # 38 scattered one-cell voids (NaN, or a -9999 nodata value) split the divide into short
    # pieces; a piece with one sample used to reach np.gradient ("Shape of array too small") in a
    # robustness re-run (issue 11). Radar DEMs have such voids (Rodriguez et al. 2006 for SRTM).
    # Whether a one-sample piece arises depends on the voids and the noise draws; the piece itself
    # is pinned by tests/assess/test_points.py::test_a_divide_piece_with_room_for_one_sample_is_sampled.
    rng = np.random.default_rng(7)
    z = ridge.elevation.astype(np.float64).copy()
    rows, cols = z.shape
    flat = rng.choice((rows - 2) * (cols - 2), size=38, replace=False)
    r, c = np.divmod(flat, cols - 2)
    z[r + 1, c + 1] = np.nan if nodata is None else nodata
    dem = divides.Dem.from_array(z, cell_size=CELL, nodata=nodata)
    assert np.count_nonzero(~dem.valid) == 38
    result = divides.assess(dem, "west", "east", closed_edges=("north", "south"), n_noise_runs=1,
                            n_bootstrap=100, dem_error_m=0.5)
    assert result.verdict.moves_toward in ("a", "b", "stable", "undetermined")
    assert all(not str(run["moves_toward"]).startswith("failed: internal") for run in result.robustness)


def test_theta_near_its_limit_keeps_robustness_reruns_in_range(ridge):
    # θ = 1.95 is valid (0 < θ <= 2); re-runs at θ ± 0.1 are clipped to the valid range instead of
    # failing with "must be between 0 and 2; got 2.05" (issue 11).
    result = divides.assess(ridge, "west", "east", closed_edges=("north", "south"), theta=1.95, n_noise_runs=0,
                            n_bootstrap=100)
    thetas = [float(r["change"].split("=")[1]) for r in result.robustness if r["change"].startswith("θ")]
    assert all(0.0 < t <= 2.0 for t in thetas)
    if result.verdict.basis in ("near-divide", "conflict"):
        # θ changes χ only, never the near-divide metrics: such re-runs cannot change this verdict
        assert thetas == []
    else:
        assert thetas == [1.85, 2.0]
    for run in result.robustness:
        assert run["can_change"] == ("chi" if run["change"].startswith("θ") else "all")


def test_a_side_entirely_below_the_other_sides_outlets_is_assessed_not_refused():
    # A range draining north and south whose northern channels all lie below the southern outlets
    # (as after a large base-level fall on the north edge): no single elevation is crossed by the
    # channels of both sides. Issue 11: this was refused ("side a has no channel at or above the
    # base level"). Now the northern networks are left out of χ (counted), χ has no samples, and
    # the near-divide metrics, read off the DEM, still speak.
    rows, cols = 60, 80
    rr, cc = np.mgrid[0:rows, 0:cols].astype(float)
    valleys = 4.0 * np.abs((cc % 10) - 4.0)  # eight valleys across the range on each side
    north = 3.0 * rr + valleys  # channels from 0 m at the north edge
    north = np.where(rr > 42, north + 45.0 * (rr - 42), north)  # an escarpment below the divide
    south = 300.0 + 2.0 * (rows - 1 - rr) + valleys  # outlets at 300 m on the south edge
    z = np.minimum(north, south)
    dem = divides.Dem.from_array(z, cell_size=CELL)
    result = divides.assess(dem, "north", "south", closed_edges=("east", "west"), channel_area_m2=40 * CELL**2,
                            robustness=False, n_bootstrap=100)
    channels = result.channels
    on_north = result.sides.a.mask.ravel()[channels.cells]
    assert channels.elevation[on_north].max() < channels.elevation[~on_north].min()  # the set-up holds
    assert result.base.networks["a"]["below_base"] >= 1 and not result.base.kept_a.any()
    chi = {c.metric: c for c in result.contrasts}["chi"]
    assert chi.why_none == "insufficient data"
    assert result.summary["sides"]["a"]["networks"]["below_base"] >= 1


def _cli(argv):
    import contextlib
    import io

    from divides.cli.app import run

    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = run(argv)
    return code, out.getvalue(), err.getvalue()


def test_dem_error_length_reaches_the_assessment_and_bad_values_exit_2(tmp_path):
    # The option is parsed like --dem-error (project rule for bad input: one line, exit 2, no output).
    import json
    from pathlib import Path

    from divides.cli.assess_cmd import assess_request
    from divides.config import AssessConfig

    uplands = str(Path(__file__).resolve().parents[2] / "demo" / "uplands.tif")
    base = ["assess", uplands, "--side-a", "west", "--side-b", "east", "--closed-edges", "north,south",
            "--no-robustness"]
    options = assess_request(side_a="west", side_b="east", dem_error_length="250").options
    assert options["dem_error_length_m"] == 250.0
    assert AssessConfig(**options).dem_error(30.0).length_m == 250.0
    assert AssessConfig().dem_error(30.0).length_m == 90.0  # default: three cells (documented)
    assert json.loads(json.dumps(AssessConfig(**options).to_dict()))["dem_error_length_m"] == 250.0
    for command in (base, ["screen", uplands]):
        code, out, err = _cli([*command, "--dem-error-length", "-5", "--out", str(tmp_path / "bad")])
        assert code == 2 and out == ""
        lines = err.strip().splitlines()
        assert len(lines) == 1 and "--dem-error-length" in lines[0]
        assert not (tmp_path / "bad").exists()
