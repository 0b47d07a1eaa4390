"""How far each outlet basin of a landscape is from steady state: its lower and upper channels eroding unlike.

At steady state every channel cell erodes at the uplift rate, E = K A^m S^n − D ∇²z = U (Perron, Kirchner &
Dietrich 2009), so a basin lopsided against its neighbour by a steady contrast of uplift, erodibility or runoff is
steep throughout. While a fall of its base level climbs it, the reach the knickpoint has passed and the reach it
has not yet reached erode at different rates (Whipple & Tucker 1999). Screening reads the contrast between a
basin's lower and upper channels to tell the two apart, since a run of the landscape with one uplift rate per
basin (:func:`divides.model.landscape_shift.steady_uplift`) absorbs both alike.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from divides.model.forward_run import laplacian
from divides.model.landscape_shift import MIN_BALANCE_CELLS, ModelStart, balance_terms, steady_uplift
from divides.terrain.dem_error import DemError

__all__ = ["basin_transience", "transience_spread"]


def basin_transience(start: ModelStart, n: float) -> np.ndarray:
    """Transience of every outlet basin of a landscape run's start: ln(E_lower / E_upper).

    E = A^m S^n − D ∇²z at K = 1 (D of the one-uplift steady balance, :func:`steady_uplift`) over the
    basin's channel cells (``start.cells`` whose balance can be read, :func:`balance_terms`), split into a
    lower and an upper half by elevation (the middle cell of an odd count goes up); E_lower and E_upper are
    the medians of the halves. About 0 at steady state whatever U and K are, as long as they are uniform within
    the basin (the ratio cancels them); away from 0 while a fall of base level climbs the basin (negative once a
    step has passed the lower half and restored the old slope below it), and where the basin straddles a
    contrast of uplift, erodibility or runoff.

    Parameters
    ----------
    start : ModelStart
        :func:`divides.model.landscape_shift.model_start` of the landscape.
    n : float
        Slope exponent.

    Returns
    -------
    ndarray of float, one per label of ``start.before`` (index 0: no basin)
        NaN for basins of fewer than :data:`MIN_BALANCE_CELLS` channel cells, or where a half's median E
        is not positive.
    """
    fluvial, lap, diffusivity, cells, groups = _prepare(start, n)
    return _ratios(fluvial[cells] - diffusivity * lap[cells], groups, int(start.before.max()) + 1)


def transience_spread(start: ModelStart, n: float, error: DemError, *, draws: int = 8, seed: int = 0) -> np.ndarray:
    """Standard deviation of :func:`basin_transience` over ``draws`` fields of DEM error added to the model grid.

    Each field of ``error`` (:meth:`divides.terrain.dem_error.DemError.sample_grid`, on the model grid as given:
    an overestimate where the grid is block-averaged) is added to the grid's routed surface, and E is recomputed
    along the same flow graph, over the same channel cells and halves, with the same D; slopes that the error turns
    uphill count as 0; ∇²z is taken of the grid's own elevations plus the field, as :func:`basin_transience`
    takes it (round 32; before, of the routed surface). NaN where :func:`basin_transience` is NaN or fewer than
    two draws give a value.
    """
    fluvial, lap, diffusivity, cells, groups = _prepare(start, n)
    size = int(start.before.max()) + 1
    flow, grid = start.flow, start.grid
    surface = np.asarray(flow.conditioned.surface, dtype=np.float64)
    ground = np.asarray(grid.elevation, dtype=np.float64)
    receivers, dist = flow.receivers.ravel(), np.asarray(flow.distance, dtype=np.float64).ravel()
    area_m = np.asarray(flow.area, dtype=np.float64).ravel()[cells] ** start.m
    spacing = (float(np.mean(grid.dy)), float(np.mean(grid.dx)))
    rng = np.random.default_rng(seed)
    values = np.full((max(int(draws), 0), size), math.nan)
    for k in range(values.shape[0]):
        e = error.sample_grid(surface.shape, spacing, rng)
        flat = (surface + e).ravel()
        slope = np.maximum((flat[cells] - flat[receivers[cells]]) / np.maximum(dist[cells], 1e-300), 0.0)
        curvature = laplacian(replace(grid, elevation=ground + e)).ravel()[cells]
        values[k] = _ratios(area_m * slope ** n - diffusivity * curvature, groups, size)
    counts = np.sum(np.isfinite(values), axis=0)
    out = np.full(size, math.nan)
    enough = counts >= 2
    if np.any(enough):
        out[enough] = np.nanstd(values[:, enough], axis=0, ddof=1)
    return out


def _prepare(start: ModelStart, n: float):
    """The balance's terms, D, the readable channel cells sorted by basin then elevation, and each basin's
    (label, first, middle, end) in that order (basins of at least :data:`MIN_BALANCE_CELLS` cells)."""
    fluvial, lap, readable = balance_terms(start, n)
    _, diffusivity = steady_uplift(start, n)
    labels = start.before.ravel()
    cells = start.cells[readable[start.cells]]
    lab = labels[cells]
    order = np.lexsort((np.asarray(start.grid.elevation, dtype=np.float64).ravel()[cells], lab))
    cells, lab = cells[order], lab[order]
    bounds = np.flatnonzero(np.diff(lab)) + 1
    groups = [(int(lab[a]), a, a + (b - a) // 2, b) for a, b in zip(np.r_[0, bounds], np.r_[bounds, lab.size])
              if b - a >= MIN_BALANCE_CELLS]
    return fluvial, lap, diffusivity, cells, groups


def _ratios(erosion: np.ndarray, groups: list, size: int) -> np.ndarray:
    """ln of the median of each basin's lower half over its upper half (NaN where a median is not positive)."""
    out = np.full(size, math.nan)
    for label, first, mid, last in groups:
        lower, upper = float(np.median(erosion[first:mid])), float(np.median(erosion[mid:last]))
        if lower > 0 and upper > 0:
            out[label] = math.log(lower / upper)
    return out
