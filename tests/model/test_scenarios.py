"""Synthetic starting surfaces and the divide-migration scenarios."""

from __future__ import annotations

import numpy as np
import pytest

from divides.errors import ParameterError
from divides.model import scenarios


def test_ridge_geometry():
    # By definition: planar flanks from 0 m at the west and east edge cells up to `relief`
    # at the crest, the crest at `crest` of the distance between the edge cells.
    dem = scenarios.ridge_surface((6, 21), cell_size=50.0, crest=0.25, relief=40.0, noise=0.0)
    z = dem.elevation
    assert dem.shape == (6, 21) and float(dem.dx[0]) == 50.0
    np.testing.assert_array_equal(z[:, 0], 0.0)
    np.testing.assert_array_equal(z[:, -1], 0.0)
    assert np.all(np.argmax(z, axis=1) == 5)  # 0.25 * 20
    np.testing.assert_allclose(z[0, :6], np.arange(6) * 8.0)
    np.testing.assert_allclose(z[0, 5:], np.arange(15, -1, -1) * 40.0 / 15)
    # noise is seeded, bounded by its amplitude and kept off the edge cells
    a = scenarios.ridge_surface((6, 21), noise=2.0, seed=3).elevation
    b = scenarios.ridge_surface((6, 21), noise=2.0, seed=3).elevation
    c = scenarios.ridge_surface((6, 21), noise=2.0, seed=4).elevation
    plain = scenarios.ridge_surface((6, 21), noise=0.0).elevation
    assert np.array_equal(a, b) and not np.array_equal(a, c)
    assert 0.0 <= np.min(a - plain) and np.max(a - plain) < 2.0
    np.testing.assert_array_equal(a[:, [0, -1]], 0.0)


# Expected directions: the divide moves into the side with the lower erosion potential at
# the divide, i.e. the higher chi from a common base level (Willett et al. 2014, Science 343);
# a base-level fall makes the lowered side the aggressor; at steady state z = (U/K)^(1/n) chi
# (Perron & Royden 2013), so higher uplift or lower erodibility (or runoff, a discharge proxy)
# raises a side's heads and makes it the victim (derived from that relation).
CASES = [
    (scenarios.symmetric_divide, {}),
    (scenarios.off_centre_divide, {"crest": 0.3}),
    (scenarios.off_centre_divide, {"crest": 0.7}),
    (scenarios.base_level_fall, {"side": "east"}),
    (scenarios.base_level_fall, {"side": "west", "drop": None, "lowering_rate": 2e-5}),
    (scenarios.uplift_contrast, {"high_side": "east"}),
    (scenarios.erodibility_contrast, {"weak_side": "west"}),
    (scenarios.runoff_contrast, {"wet_side": "east", "ratio": 3.0}),
]


@pytest.mark.parametrize(("make", "kwargs"), CASES)
def test_scenarios_move_the_divide_the_way_theory_says(make, kwargs):
    scenario = make(**kwargs)
    result = scenario.run(duration=3e6, dt=2e4)
    mean = result.divide.mean
    shift = mean[-1] - mean[0]  # positive: toward the east (side b)
    cell = float(scenario.surface.dx[0])
    # measured over 3 Myr (100 m cells): stable 50 m; the others 420-3100 m the expected way
    if scenario.moves_toward == "stable":
        assert abs(shift) < cell
    elif scenario.moves_toward == "east":
        assert shift > 3 * cell
    else:
        assert shift < -3 * cell
    assert np.all(np.abs(result.budget.residual_m3) < 1e-9 * result.budget.uplift_m3)


def test_scenario_arguments_are_checked():
    with pytest.raises(ParameterError, match="`crest` must be a fraction strictly between 0 and 1; got 1.5"):
        scenarios.ridge_surface(crest=1.5)
    with pytest.raises(ParameterError, match=r"`shape` must be at least \(3, 5\) cells"):
        scenarios.ridge_surface((2, 40))
    with pytest.raises(ParameterError, match="give exactly one of `drop`"):
        scenarios.base_level_fall(drop=None)
    with pytest.raises(ParameterError, match="`side` must be 'west' or 'east'; got 'north'"):
        scenarios.base_level_fall(side="north")
    with pytest.raises(ParameterError, match="other than 0.5"):
        scenarios.off_centre_divide(crest=0.5)
