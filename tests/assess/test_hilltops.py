"""Hilltop-curvature contrast across a divide (`divides.assess.hilltops`)."""

from __future__ import annotations

import numpy as np
import pytest

from divides.assess.hilltops import hilltop_contrast, hilltop_spread
from divides.io.dem import Dem
from divides.model.forward_run import laplacian
from divides.terrain.dem_error import DemError
from divides.terrain.divide_lines import divide_between


def _ridge(curv_a: float, curv_b: float, rows: int = 30, cols: int = 41, cell: float = 10.0):
    # A north-south ridge of two parabolic flanks meeting at the middle column: z = -c x² / 2 on each side,
    # so ∇²z = -c exactly on the 5-point stencil away from the crest (side a west, label 1; b east, 2).
    x = (np.arange(cols) - cols // 2) * cell
    z = np.where(x < 0, -0.5 * curv_a * x ** 2, -0.5 * curv_b * x ** 2)
    dem = Dem.from_array(np.tile(z, (rows, 1)) + 1000.0, cell_size=cell)
    labels = np.where(np.arange(cols) <= cols // 2, 1, 2)[None, :].repeat(rows, axis=0).astype(np.int32)
    return dem, labels


@pytest.mark.parametrize(("curv_a", "curv_b"), [(0.02, 0.01), (0.01, 0.02), (0.01, 0.01)])
def test_the_contrast_is_the_relative_difference_of_the_sides_curvatures(curv_a, curv_b):
    # At steady state a hilltop lowers at E = -D ∇²z (Roering, Perron & Kirchner 2007): the more convex side
    # erodes faster. Analytic flanks: (c_b - c_a) / (|c_a| + |c_b|) of ∇²z = -c per side, that is
    # (curv_a - curv_b) / (curv_a + curv_b): +1/3 when a is twice as convex, -1/3 mirrored, 0 when equal.
    dem, labels = _ridge(curv_a, curv_b)
    line = divide_between(dem, labels == 1, labels == 2).lines[0]  # side a (west) on the left
    area_cells = np.ones(dem.shape)  # every cell a hillslope cell
    got = hilltop_contrast(line, labels, 1, 2, laplacian(dem), area_cells)
    assert got == pytest.approx((curv_a - curv_b) / (curv_a + curv_b), abs=0.02)


def test_without_hillslope_cells_on_a_side_the_contrast_is_zero():
    # Fewer than three hillslope cells on a side: nothing measured, no contrast (documented).
    dem, labels = _ridge(0.02, 0.01)
    line = divide_between(dem, labels == 1, labels == 2).lines[0]
    area_cells = np.where(labels == 1, 100.0, 1.0)  # side a all channel cells
    assert hilltop_contrast(line, labels, 1, 2, laplacian(dem), area_cells) == 0.0


def _monte_carlo_spread(dem, labels, line, area_cells, error, draws: int) -> float:
    """The contrast's sd over whole-grid fields of error added to the DEM, curvature recomputed (the direct way)."""
    rng = np.random.default_rng(123)
    z = dem.elevation.astype(np.float64)
    values = [hilltop_contrast(line, labels, 1, 2,
                               laplacian(Dem.from_array(z + error.sample_grid(z.shape, 10.0, rng), cell_size=10.0)),
                               area_cells) for _ in range(draws)]
    return float(np.std(values, ddof=1))


def test_the_spread_under_dem_error_is_that_of_the_contrast_recomputed_on_noisy_dems():
    # hilltop_spread draws one small tile of error and reads every piece at its corner (the error is stationary;
    # ∇² is linear). Against the direct way, whole DEMs plus error with curvature recomputed, 64 draws each: the
    # two sds agree within the sampling error of 64-draw sds (about 9 % each; 30 % allowed, common practice).
    dem, labels = _ridge(0.02, 0.01)
    line = divide_between(dem, labels == 1, labels == 2).lines[0]
    area_cells = np.ones(dem.shape)
    error = DemError(0.5, 30.0)
    got = hilltop_spread([(line, 1, 2)], labels, laplacian(dem), area_cells, dem.dx, dem.dy, error, draws=64)[0]
    assert got == pytest.approx(_monte_carlo_spread(dem, labels, line, area_cells, error, 64), rel=0.3)
    # no error, no spread; more error, more spread; a side without hillslope cells: not measured (NaN)
    quiet = hilltop_spread([(line, 1, 2)], labels, laplacian(dem), area_cells, dem.dx, dem.dy, DemError(0.0, 30.0))
    assert quiet[0] == 0.0
    louder = hilltop_spread([(line, 1, 2)], labels, laplacian(dem), area_cells, dem.dx, dem.dy, DemError(1.0, 30.0),
                            draws=64)[0]
    assert louder > 1.3 * got
    channels = np.where(labels == 1, 100.0, 1.0)
    assert np.isnan(hilltop_spread([(line, 1, 2)], labels, laplacian(dem), channels, dem.dx, dem.dy, error)[0])
