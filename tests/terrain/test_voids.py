"""Holes of nodata filled by harmonic interpolation, checked against analytic solutions of Laplace's equation.

References (analytic, by substitution): the five-point stencil with weights dy/dx and dx/dy is exactly zero on every
surface of degree ≤ 1 and on xy and x² − y² in metres (the fluxes on opposite faces cancel), so those surfaces are
filled exactly; a solution of the discrete equation is at each cell a positive-weighted mean of its four neighbours
(the discrete maximum principle), so no filled cell is a pit or a peak. A plain Jacobi iteration written here solves
the same equation independently.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from divides.errors import ParameterError
from divides.io.dem import Dem
from divides.terrain import voids
from divides.terrain.voids import fill_voids, interior_holes


def _surface(shape, dx, dy, kind):
    y, x = np.mgrid[0: shape[0], 0: shape[1]].astype(np.float64)
    x, y = x * dx, -y * dy  # metres east and north
    return {"plane": 800 + 0.04 * x - 0.03 * y,
            "saddle": 800 + (x ** 2 - y ** 2) / 4e4 + 0.01 * x,
            "twist": 800 + x * y / 4e4}[kind]


def _holed(z, holes, **kw):
    zz = z.copy()
    for r, c in holes:
        zz[r, c] = np.nan
    return Dem.from_array(zz, **kw)


HOLES = [(slice(10, 30), slice(12, 40)), (slice(40, 43), slice(5, 9)), (slice(33, 36), slice(44, 47))]


@pytest.mark.parametrize("kind", ["plane", "saddle", "twist"])
@pytest.mark.parametrize("direct_max", [voids.DIRECT_MAX_CELLS, 0])  # sparse LU, then conjugate gradients
def test_harmonic_surfaces_are_filled_exactly(monkeypatch, kind, direct_max):
    monkeypatch.setattr(voids, "DIRECT_MAX_CELLS", direct_max)
    dx, dy = 30.0, 20.0  # anisotropic cells: the stencil's weights carry the cell sizes
    z = _surface((50, 60), dx, dy, kind)
    dem = _holed(z, HOLES, cell_size=(dx, dy))
    filled, report = fill_voids(dem)
    assert report == voids.VoidFill("fill", holes=3, cells=560 + 12 + 9, largest_cells=560, filled_cells=581)
    assert filled.valid.all() and not dem.valid.all()  # the DEM given is not modified
    np.testing.assert_allclose(filled.elevation, z, atol=1e-6 if direct_max == 0 else 1e-9)


def test_a_geographic_grid_fills_an_east_west_slope_exactly():
    # On a geographic grid the cells narrow poleward (per-row dx); a surface linear in the column is still harmonic
    # under the finite-volume stencil (equal east and west fluxes in each row, none north-south).
    rows, cols = 60, 80
    z = np.tile(500 + 2.0 * np.arange(cols), (rows, 1))
    transform = (1 / 1200, 0.0, 10.0, 0.0, -1 / 1200, 62.0)  # 3 arc-seconds at 62° N
    dem = _holed(z, HOLES, transform=transform, crs="EPSG:4326")
    assert dem.dx[0] != dem.dx[-1]
    filled, _ = fill_voids(dem)
    np.testing.assert_allclose(filled.elevation, z, atol=1e-3)  # float32 storage of ~600 m


def _jacobi(z: np.ndarray, hole: np.ndarray, wx: float, wy: float) -> np.ndarray:
    """Laplace's equation on ``hole`` by Jacobi sweeps (uniform cells, weights wx = dy/dx, wy = dx/dy)."""
    u = np.where(hole, np.nanmean(z[~hole]), z)
    for _ in range(20000):
        new = (wx * (np.roll(u, 1, 1) + np.roll(u, -1, 1)) + wy * (np.roll(u, 1, 0) + np.roll(u, -1, 0))) / (
            2 * wx + 2 * wy)
        change = np.max(np.abs(new[hole] - u[hole]))
        u[hole] = new[hole]
        if change < 1e-11:
            break
    return u


@settings(max_examples=25, deadline=None)
@given(seed=st.integers(0, 2**31 - 1), rows=st.integers(5, 14), cols=st.integers(5, 14),
       aspect=st.floats(0.5, 2.0))
def test_random_holes_match_an_independent_solver_and_make_no_pit(seed, rows, cols, aspect):
    rng = np.random.default_rng(seed)
    z = 1000 + 50 * rng.standard_normal((rows, cols))
    hole = np.zeros((rows, cols), dtype=bool)
    hole[1:-1, 1:-1] = rng.random((rows - 2, cols - 2)) < 0.5  # holes never reach the edge
    dx, dy = 30.0, 30.0 * aspect
    zz = np.where(hole, np.nan, z)
    filled, report = fill_voids(Dem.from_array(zz, cell_size=(dx, dy), valid_range=None))
    assert report.filled_cells == hole.sum() and filled.valid.all()
    u = filled.elevation
    np.testing.assert_allclose(u[hole], _jacobi(zz, hole, dy / dx, dx / dy)[hole], atol=1e-6)
    # discrete maximum principle: each filled cell lies between its lowest and highest four-neighbour
    pad = np.pad(u, 1, constant_values=np.nan)
    four = np.stack([pad[:-2, 1:-1], pad[2:, 1:-1], pad[1:-1, :-2], pad[1:-1, 2:]])
    assert np.all(np.nanmin(four, axis=0)[hole] <= u[hole] + 1e-9)
    assert np.all(np.nanmax(four, axis=0)[hole] >= u[hole] - 1e-9)


def test_a_collar_stays_nodata_and_outlets_leave_the_dem_as_it_is():
    z = _surface((30, 40), 30.0, 30.0, "plane")
    z[:, :3] = np.nan  # a collar on the west edge: the DEM ends there
    dem = _holed(z, [(slice(10, 14), slice(20, 25))], cell_size=30.0)
    filled, report = fill_voids(dem)
    assert report.filled_cells == 20 and np.isnan(filled.elevation[:, :3]).all()
    same, told = fill_voids(dem, "outlets")
    assert same is dem and told == dataclasses.replace(report, handling="outlets", filled_cells=0)
    with pytest.raises(ParameterError, match="voids must be one of fill, outlets"):
        fill_voids(dem, "lakes")


def test_interior_holes_label_eight_connected_components():
    valid = np.ones((6, 7), dtype=bool)
    valid[2, 2] = valid[3, 3] = False  # touch diagonally: one hole
    valid[0, 6] = False  # on the edge
    labels, interior, counts = interior_holes(valid)
    assert interior.sum() == 1 and counts[interior].sum() == 2 and labels[2, 2] == labels[3, 3]
