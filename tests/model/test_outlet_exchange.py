"""The divide between neighbouring outlet basins, measured by the area they exchange."""

from __future__ import annotations

import numpy as np
import pytest

from divides.errors import ParameterError
from divides.io.dem import Dem
from divides.model.outlet_exchange import (
    basin_exchange,
    match_labels,
    neighbour_pairs,
    outlet_basins,
)
from divides.terrain.routing import route


def _three_basins(rows: int, cols: int, split_row: int, split_col: int) -> np.ndarray:
    """Basins 1 (north-west), 2 (south-west) and 3 (east of ``split_col``)."""
    lab = np.full((rows, cols), 3, dtype=np.int32)
    lab[:split_row, :split_col] = 1
    lab[split_row:, :split_col] = 2
    return lab


@pytest.mark.parametrize("shift", [-3, -1, 0, 2, 4])
@pytest.mark.parametrize("dx, dy", [(30.0, 30.0), (20.0, 45.0)])
def test_a_straight_lateral_divide_shifted_by_k_cells_moves_k_cells(shift, dx, dy):
    # Geometry (common practice): two basins side by side on one flank share a straight divide
    # along a row, 15 cells long; moving it `shift` rows south hands shift x 15 cells from basin 2
    # to basin 1, and that area over the divide's length is the shift, exactly. The main divide
    # (with basin 3) stays put, and the later labels are renumbered (matched by overlap).
    before = _three_basins(20, 24, 10, 15)
    moved = _three_basins(20, 24, 10 + shift, 15)
    after = np.choose(moved, [0, 7, 5, 9]).astype(np.int32)  # 1 -> 7, 2 -> 5, 3 -> 9
    dem = Dem.from_array(np.zeros(before.shape), cell_size=(dx, dy))
    out = {tuple(r["basins"]): r for r in basin_exchange(dem, before, after, years=50.0)}
    assert set(out) == {(1, 2), (1, 3), (2, 3)}
    assert out[(1, 2)]["length_m"] == pytest.approx(15 * dx, rel=1e-9)
    assert out[(1, 2)]["moved_m"] == pytest.approx(shift * dy, abs=1e-9)  # positive: into basin 2
    assert out[(1, 2)]["rate_m_per_yr"] == pytest.approx(shift * dy / 50.0, abs=1e-12)
    for pair in ((1, 3), (2, 3)):
        assert out[pair]["moved_m"] == pytest.approx(0.0, abs=1e-9)


def test_exchange_away_from_the_pair_is_not_motion_of_its_divide():
    # Cells basin 1 loses to basin 3 (its east end eaten by the main divide's motion) are not motion
    # of the 1-2 divide: by construction the 1-2 divide stays, so its displacement is 0.
    before = _three_basins(20, 24, 10, 15)
    after = before.copy()
    after[:10, 12:15] = 3
    dem = Dem.from_array(np.zeros(before.shape), cell_size=30.0)
    out = {tuple(r["basins"]): r for r in basin_exchange(dem, before, after, years=1.0)}
    assert out[(1, 2)]["moved_m"] == pytest.approx(0.0, abs=1e-9)
    assert out[(1, 3)]["moved_m"] == pytest.approx(-3 * 30.0, abs=1e-9)  # 30 cells over 10 rows: 3 cells into 1


def test_merged_basins_have_no_rate():
    before = _three_basins(20, 24, 10, 15)
    after = np.where(before == 2, 1, before)  # basin 1 captured all of basin 2
    dem = Dem.from_array(np.zeros(before.shape), cell_size=30.0)
    out = {tuple(r["basins"]): r for r in basin_exchange(dem, before, after, years=1.0)}
    assert out[(1, 2)]["moved_m"] is None and out[(1, 2)]["rate_m_per_yr"] is None


def test_pairs_and_matching():
    lab = _three_basins(6, 8, 3, 4)
    assert neighbour_pairs(lab) == [(1, 2), (1, 3), (2, 3)]
    later = np.where(lab == 1, 4, lab)
    assert match_labels(lab, later, 3).tolist() == [0, 4, 2, 3]


def test_outlet_basins_know_their_edge():
    # A ridge along the middle column (analytic: water runs downhill to the nearer open edge); north and
    # south closed, so every basin drains off the west or the east edge.
    x = np.arange(21.0)
    z = np.tile(10.0 - np.abs(x - 10.2), (12, 1)) + np.linspace(0, 0.5, 12)[:, None]
    flow = route(Dem.from_array(z, cell_size=10.0), closed_edges=("north", "south"))
    labels, edge = outlet_basins(flow, min_cells=5)
    assert labels.max() >= 2
    assert set(edge[1:]) <= {"west", "east"}
    west = labels[:, 0][labels[:, 0] > 0]
    assert all(edge[k] == "west" for k in np.unique(west))
    assert all(edge[k] == "east" for k in np.unique(labels[:, -1][labels[:, -1] > 0]))


def test_bad_years_are_named():
    dem = Dem.from_array(np.zeros((4, 4)), cell_size=10.0)
    lab = np.ones((4, 4), dtype=np.int32)
    with pytest.raises(ParameterError, match="years"):
        basin_exchange(dem, lab, lab, years=0.0)
