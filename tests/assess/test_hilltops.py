"""Hilltop-curvature contrast across a divide (`divides.assess.hilltops`)."""

from __future__ import annotations

import numpy as np
import pytest

from divides.assess.hilltops import hilltop_contrast, hilltop_curvature
from divides.io.dem import Dem
from divides.model.forward_run import laplacian
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


def test_the_windowed_curvature_is_exact_on_a_quadratic_surface_and_averages_error_out():
    # Exact on any quadratic surface (a least-squares fit of a quadratic reproduces it): ∇²z = 2 (-0.01) + 2 (-0.02)
    # whatever the xy, x and y terms, with dx 10 m and dy 12 m.
    x, y = np.arange(41) * 10.0, np.arange(30) * 12.0
    z = -0.01 * (x[None, :] - 200) ** 2 - 0.02 * (y[:, None] - 150) ** 2 + 0.003 * x[None, :] * y[:, None] + 0.5 * x
    got = hilltop_curvature(z, np.ones(z.shape, bool), np.full(30, 10.0), np.full(30, 12.0), 3)
    assert np.all(np.isnan(got[:3])) and np.all(np.isnan(got[:, -3:]))  # windows leaving the grid
    assert np.nanmax(np.abs(got + 0.06)) < 1e-9
    # White error of σ = 1 m on 1 m cells: the variance of a least-squares coefficient with orthogonal columns is
    # σ² / Σ (u - ū)² (from memory: any regression text), so Var(∇²z) = 8 / ((2R + 1) Σ (k² - m)²): 4 at R = 1
    # (Σ = 2/3), 8 / 70 at R = 2, 8 / 588 at R = 3; the 5-point stencil's is 20.
    e = np.random.default_rng(0).standard_normal((400, 400))
    for radius, expected in ((1, 4.0), (2, 8 / 70), (3, 8 / 588)):
        got = hilltop_curvature(e, np.ones(e.shape, bool), np.ones(400), np.ones(400), radius)
        assert np.nanvar(got) == pytest.approx(expected, rel=0.1)  # over 3000 independent windows even at R = 3


def test_the_contrast_read_on_the_window_around_a_segment_equals_the_whole_grid():
    # Screening reads each segment's hilltops on the part of the grid around it, its curvature computed there with
    # the window's radius of cells beyond it (divides.assess.screen._hilltop_contrast), so a DEM of 10^8 cells
    # needs no grid-sized curvature: every cell it reads sees the window the whole grid gives (common practice for
    # a local filter), so the contrast is the same, near holes and the grid's edges too.
    from types import SimpleNamespace

    from divides.assess.screen import _hilltop_contrast
    from divides.terrain.divide_lines import DivideSegment

    rng = np.random.default_rng(3)
    rows, cols = 60, 50
    z = np.cumsum(rng.normal(size=(rows, cols)), axis=0) + 5.0 * rng.normal(size=(rows, cols))
    valid = rng.random(z.shape) > 0.02
    dem = Dem.from_array(np.where(valid, z, np.nan), cell_size=30.0)
    area = rng.choice([1.0, 2.0, 3.0, 50.0], size=(rows, cols)) * 900.0
    labels = np.where(np.arange(cols)[None, :] < 25, 1, 2) * np.ones((rows, 1), dtype=int)
    curvature = hilltop_curvature(dem.elevation, dem.valid, dem.dx, dem.dy, 3)
    area_cells = area / np.maximum(dem.cell_area_grid(), 1e-300)
    for row in (8.0, 20.0, 52.0):  # the widened window reaching the top edge; inside; cut by the bottom edge
        line = SimpleNamespace(row=np.array([row, row + 1.0, row + 1.0]), col=np.array([24.5, 24.5, 25.0]))
        seg = DivideSegment(1, 2, line, None, None)
        whole = hilltop_contrast(line, labels, 1, 2, curvature, area_cells)
        assert whole != 0.0 and _hilltop_contrast(dem, area, labels, seg, 3) == whole
