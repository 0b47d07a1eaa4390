"""Which side of a piece of divide has the more convex hilltops.

At steady state a soil-mantled hilltop lowers at E = −D ∇²z (Roering, Perron & Kirchner 2007),
so across a divide the side whose hillslope cells next to it are more convex (∇²z more
negative) erodes faster, and the divide moves away from it. The contrast is K-free: it reads
the hillslopes, not the channels, so it holds where the two sides' rock or runoff differ.
Screening reads it beside the near-divide contrasts (docs/methods.md §7b).
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from scipy import ndimage

from divides.terrain.dem_error import DemError
from divides.terrain.divide_lines import DivideLine

__all__ = ["hilltop_contrast", "hilltop_spread", "HILLTOP_RADIUS_CELLS", "HILLSLOPE_CELLS", "HILLTOP_STREAM"]

#: Cells within this distance of a piece of divide count for its hilltops (set before any fit).
HILLTOP_RADIUS_CELLS = 3
#: Hillslope cells: drainage area at most this many cells (set before any fit).
HILLSLOPE_CELLS = 3.0
#: Random stream of :func:`hilltop_spread` (its fields differ from the other spreads of the same seed).
HILLTOP_STREAM = 29


def hilltop_contrast(line: DivideLine, labels: np.ndarray, label_a: int, label_b: int, curvature: np.ndarray,
                     area_cells: np.ndarray, *, radius_cells: int = HILLTOP_RADIUS_CELLS,
                     hill_cells: float = HILLSLOPE_CELLS) -> float:
    """Relative contrast of hilltop curvature across a piece of divide.

    Parameters
    ----------
    line : DivideLine
        The piece, in grid coordinates.
    labels : ndarray of int
        Basin label of every cell.
    label_a, label_b : int
        The basins on the piece's sides a and b.
    curvature : ndarray
        ∇²z of the DEM (1/m; NaN where the stencil is incomplete).
    area_cells : ndarray
        Drainage area in cells.
    radius_cells : int
        Cells within this distance of the piece count.
    hill_cells : float
        Cells draining at most this many cells are hillslope cells.

    Returns
    -------
    float
        (c_b − c_a) / (|c_a| + |c_b|), c the median ∇²z of a side's hillslope cells near the
        piece: in [−1, 1], positive when side a is the more convex (erodes faster; the divide
        moves toward b). 0 when a side has fewer than three such cells.
    """
    cells = _hilltop_cells(line, labels, label_a, label_b, area_cells, radius_cells, hill_cells)
    if cells is None:
        return 0.0
    box, on_a, on_b = cells
    return _contrast(curvature[box], on_a, on_b)


def hilltop_spread(pieces: Sequence[tuple[DivideLine, int, int]], labels: np.ndarray, curvature: np.ndarray,
                   area_cells: np.ndarray, dx: np.ndarray, dy: np.ndarray, error: DemError, *, draws: int = 8,
                   seed: int = 0, radius_cells: int = HILLTOP_RADIUS_CELLS,
                   hill_cells: float = HILLSLOPE_CELLS) -> np.ndarray:
    """Standard deviation of each piece's :func:`hilltop_contrast` over ``draws`` fields of DEM error.

    ∇² is linear, so a field e of ``error`` adds ∇²e to the curvature; the hillslope cells stay those of the
    DEM. Each draw is one tile of e as large as the largest piece's window
    (:meth:`divides.terrain.dem_error.DemError.sample_grid`); the error is stationary, so every piece reads
    the same corner of it, at its own rows' cell sizes: the cost grows with the longest piece, not the DEM.

    Parameters
    ----------
    pieces : sequence of (DivideLine, int, int)
        Each piece with the labels of its sides a and b.
    labels, curvature, area_cells
        As :func:`hilltop_contrast`.
    dx, dy : ndarray
        East and north cell sizes (m) of every row.
    error : DemError
    draws, seed : int
    radius_cells, hill_cells
        As :func:`hilltop_contrast`.

    Returns
    -------
    ndarray of float, one per piece
        NaN where a side has fewer than three hillslope cells (the contrast is 0 there); 0 without error.
    """
    windows = [_hilltop_cells(line, labels, a, b, area_cells, radius_cells, hill_cells) for line, a, b in pieces]
    out = np.full(len(pieces), np.nan)
    shapes = [curvature[w[0]].shape for w in windows if w is not None]
    if not shapes:
        return out
    if error.sigma_m == 0:
        out[[w is not None for w in windows]] = 0.0
        return out
    tile = (max(h for h, _ in shapes) + 2, max(w for _, w in shapes) + 2)
    spacing = (float(np.mean(dy)), float(np.mean(dx)))
    rng = np.random.default_rng([int(seed), HILLTOP_STREAM])
    values = np.full((max(int(draws), 0), len(pieces)), np.nan)
    for k in range(values.shape[0]):
        e = error.sample_grid(tile, spacing, rng)
        # the 5-point stencil of divides.model.forward_run.laplacian, split by axis (cell sizes vary by row)
        across = e[1:-1, 2:] + e[1:-1, :-2] - 2.0 * e[1:-1, 1:-1]
        along = e[2:, 1:-1] + e[:-2, 1:-1] - 2.0 * e[1:-1, 1:-1]
        for i, w in enumerate(windows):
            if w is None:
                continue
            box, on_a, on_b = w
            h, wd = on_a.shape
            rows = slice(box[0].start, box[0].stop)
            noise = (across[:h, :wd] / np.asarray(dx, dtype=np.float64)[rows, None] ** 2
                     + along[:h, :wd] / np.asarray(dy, dtype=np.float64)[rows, None] ** 2)
            values[k, i] = _contrast(curvature[box] + noise, on_a, on_b, missing=np.nan)
    enough = np.sum(np.isfinite(values), axis=0) >= 2
    if np.any(enough):
        out[enough] = np.nanstd(values[:, enough], axis=0, ddof=1)
    return out


def _hilltop_cells(line: DivideLine, labels: np.ndarray, label_a: int, label_b: int, area_cells: np.ndarray,
                   radius_cells: int, hill_cells: float):
    """The window around a piece and its hillslope cells near it on either side (None for an empty line)."""
    rows, cols = labels.shape
    r, c = np.asarray(line.row, dtype=np.float64), np.asarray(line.col, dtype=np.float64)
    if r.size == 0:
        return None
    pad = int(radius_cells) + 2
    r0, c0 = max(0, int(np.floor(r.min())) - pad), max(0, int(np.floor(c.min())) - pad)
    r1, c1 = min(rows, int(np.ceil(r.max())) + pad + 1), min(cols, int(np.ceil(c.max())) + pad + 1)
    t = np.linspace(0.0, 1.0, 4)[:, None]  # the line densified: its vertices lie between cells
    rr = (r[:-1] + (r[1:] - r[:-1]) * t).ravel() if r.size > 1 else r
    cc = (c[:-1] + (c[1:] - c[:-1]) * t).ravel() if c.size > 1 else c
    free = np.ones((r1 - r0, c1 - c0), dtype=bool)
    free[np.clip(np.rint(rr).astype(np.int64) - r0, 0, r1 - r0 - 1),
         np.clip(np.rint(cc).astype(np.int64) - c0, 0, c1 - c0 - 1)] = False
    box = (slice(r0, r1), slice(c0, c1))
    near = (ndimage.distance_transform_edt(free) <= radius_cells) & (area_cells[box] <= hill_cells)
    return box, near & (labels[box] == label_a), near & (labels[box] == label_b)


def _contrast(curvature: np.ndarray, on_a: np.ndarray, on_b: np.ndarray, missing: float = 0.0) -> float:
    """(c_b − c_a) / (|c_a| + |c_b|) of the medians of the finite curvatures of each side's cells (``missing``
    when a side has fewer than three)."""
    medians = []
    for on in (on_a, on_b):
        v = curvature[on]
        v = v[np.isfinite(v)]
        if v.size < 3:
            return missing
        medians.append(float(np.median(v)))
    scale = abs(medians[0]) + abs(medians[1])
    return (medians[1] - medians[0]) / scale if scale > 0 else 0.0
