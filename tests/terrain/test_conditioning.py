"""Conditioning: outlets, Priority-Flood filling, breaching through `condition`."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from skimage.morphology import reconstruction

from divides import Dem, condition
from divides.errors import ParameterError
from divides.terrain import fill_depressions, outlet_mask


def _reference_fill(z: np.ndarray, valid: np.ndarray, outlets: np.ndarray) -> np.ndarray:
    """Depression filling as morphological reconstruction by erosion (scikit-image).

    The seed equals the DEM on outlets and the maximum elsewhere; reconstruction
    by erosion then yields the lowest surface >= z that drains to an outlet
    (Soille 2003, Morphological Image Analysis, 'fillhole'). Invalid cells are
    set very low and are seeds themselves: every cell beside them is an outlet.
    """
    zz = np.where(valid, z, -1e6).astype(np.float64)
    seed = np.where(outlets | ~valid, zz, zz.max())
    return reconstruction(seed, zz, method="erosion")


def _random_dem(rng: np.random.Generator, rows: int, cols: int, *, integer: bool, holes: float) -> np.ndarray:
    z = rng.integers(0, 6, (rows, cols)).astype(np.float64) if integer else rng.random((rows, cols)) * 50.0
    z[rng.random((rows, cols)) < holes] = np.nan
    return z


@settings(max_examples=60, deadline=None)
@given(
    rows=st.integers(3, 40),
    cols=st.integers(3, 40),
    seed=st.integers(0, 2**32 - 1),
    integer=st.booleans(),
    holes=st.sampled_from([0.0, 0.05, 0.2]),
    dtype=st.sampled_from([np.float32, np.float64]),
)
def test_fill_equals_morphological_reconstruction(rows, cols, seed, integer, holes, dtype):
    # Reference: scikit-image reconstruction by erosion (independent implementation).
    rng = np.random.default_rng(seed)
    z = _random_dem(rng, rows, cols, integer=integer, holes=holes).astype(dtype)
    valid = np.isfinite(z)
    if valid.sum() < 9:
        return
    dem = Dem.from_array(z, cell_size=10.0)
    outlets = outlet_mask(dem)
    filled, n_raised = fill_depressions(dem.elevation, dem.valid, outlets)
    ref = _reference_fill(dem.elevation, dem.valid, outlets).astype(dtype)
    np.testing.assert_array_equal(filled[valid], ref[valid])
    assert n_raised == int(np.count_nonzero(ref[valid] > dem.elevation[valid]))
    assert np.all(np.isnan(filled[~valid]))


def test_outlets_are_edges_nodata_neighbours_and_sea():
    # Definition from the design: DEM edge, 8-neighbours of nodata, and cells at or below sea level.
    z = np.full((7, 8), 100.0)
    z[3, 4] = np.nan
    z[5, 2] = -1.0
    dem = Dem.from_array(z, cell_size=5.0)
    expected = np.zeros(z.shape, bool)
    expected[0, :] = expected[-1, :] = expected[:, 0] = expected[:, -1] = True
    expected[2:5, 3:6] = True
    expected[3, 4] = False  # the invalid cell itself is not an outlet
    np.testing.assert_array_equal(outlet_mask(dem), expected)
    expected[5, 2] = True
    np.testing.assert_array_equal(outlet_mask(dem, sea_level=0.0), expected)
    with pytest.raises(ParameterError, match="sea_level"):
        outlet_mask(dem, sea_level=float("nan"))


def test_fill_reports_area_and_volume_of_a_known_pit():
    # A square pit 3 m deep under a 2 m lip in a 10 m grid: by hand, 9 cells x 100 m² x depth.
    z = np.full((9, 9), 10.0)
    z[1:-1, 1:-1] = 12.0  # a rim higher than the edge
    z[3:6, 3:6] = 9.0  # pit floor; spills over the 12 m rim
    result = condition(Dem.from_array(z, cell_size=10.0))
    assert result.filled_cells == 9
    assert result.filled_area_m2 == pytest.approx(9 * 100.0)
    assert result.filled_volume_m3 == pytest.approx(9 * 100.0 * 3.0)
    assert np.all(result.surface[3:6, 3:6] == 12.0)


def test_sea_level_drains_low_ground_directly():
    # A basin floored below sea level is an outlet, not a depression to fill (common practice).
    z = np.full((9, 9), 10.0)
    z[3:6, 3:6] = -2.0
    filled = condition(Dem.from_array(z, cell_size=10.0), sea_level=0.0)
    assert filled.filled_cells == 0
    assert filled.outlets[3:6, 3:6].all()


def test_unknown_method_is_refused():
    dem = Dem.from_array(np.zeros((4, 4)), cell_size=1.0)
    with pytest.raises(ParameterError, match="fill, breach"):
        condition(dem, method="smooth")


def test_breach_mode_cuts_a_dam_instead_of_flooding_the_valley():
    # A valley sloping to the south edge with a one-cell embankment across it:
    # filling ponds the whole valley above the dam; breaching cuts the dam only.
    rows, cols = 30, 11
    z = np.add.outer(np.arange(rows, 0, -1.0), np.abs(np.arange(cols) - 5) * 3.0)
    z[15, :] = z[15, :] + 8.0  # the embankment
    dem = Dem.from_array(z, cell_size=10.0)
    filled = condition(dem, method="fill")
    breached = condition(dem, method="breach")
    assert filled.filled_cells > 5
    assert breached.carved_cells >= 1
    assert breached.filled_cells < filled.filled_cells
    # Above the dam the valley keeps its elevations with breaching, but is ponded by filling.
    np.testing.assert_array_equal(breached.surface[:15], z[:15])
    assert np.any(filled.surface[:15] > z[:15])
