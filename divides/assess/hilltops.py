"""Which side of a piece of divide has the more convex hilltops.

At steady state a soil-mantled hilltop lowers at E = −D ∇²z (Roering, Perron & Kirchner 2007),
so across a divide the side whose hillslope cells next to it are more convex (∇²z more
negative) erodes faster, and the divide moves away from it. The contrast is K-free: it reads
the hillslopes, not the channels, so it holds where the two sides' rock or runoff differ.
Screening reads it beside the near-divide contrasts (docs/methods.md §7b).
"""

from __future__ import annotations

import numpy as np
from scipy import ndimage

from divides.terrain.divide_lines import DivideLine

__all__ = ["hilltop_contrast", "hilltop_curvature", "hilltop_window", "HILLTOP_RADIUS_CELLS", "HILLSLOPE_CELLS"]

#: Cells within this distance of a piece of divide count for its hilltops (set before any fit).
HILLTOP_RADIUS_CELLS = 3
#: Hillslope cells: drainage area at most this many cells (set before any fit).
HILLSLOPE_CELLS = 3.0


def hilltop_window(line: DivideLine, shape: tuple[int, int],
                   radius_cells: int = HILLTOP_RADIUS_CELLS) -> tuple[int, int, int, int]:
    """Rows ``r0:r1`` and columns ``c0:c1`` of the grid :func:`hilltop_contrast` reads around a piece of divide."""
    r, c = np.asarray(line.row, dtype=np.float64), np.asarray(line.col, dtype=np.float64)
    pad = int(radius_cells) + 2
    r0, c0 = max(0, int(np.floor(r.min())) - pad), max(0, int(np.floor(c.min())) - pad)
    r1, c1 = min(shape[0], int(np.ceil(r.max())) + pad + 1), min(shape[1], int(np.ceil(c.max())) + pad + 1)
    return r0, r1, c0, c1


def hilltop_contrast(line: DivideLine, labels: np.ndarray, label_a: int, label_b: int, curvature: np.ndarray,
                     area_cells: np.ndarray, *, radius_cells: int = HILLTOP_RADIUS_CELLS,
                     hill_cells: float = HILLSLOPE_CELLS, origin: tuple[int, int] = (0, 0)) -> float:
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
        ∇²z of the DEM (1/m; NaN where the stencil is incomplete): the grid, or a part of it from ``origin``
        holding :func:`hilltop_window`.
    area_cells : ndarray
        Drainage area in cells (the same part of the grid).
    radius_cells : int
        Cells within this distance of the piece count.
    hill_cells : float
        Cells draining at most this many cells are hillslope cells.
    origin : (int, int)
        Grid row and column of ``curvature[0, 0]`` and ``area_cells[0, 0]``.

    Returns
    -------
    float
        (c_b − c_a) / (|c_a| + |c_b|), c the median ∇²z of a side's hillslope cells near the
        piece: in [−1, 1], positive when side a is the more convex (erodes faster; the divide
        moves toward b). 0 when a side has fewer than three such cells.
    """
    r, c = np.asarray(line.row, dtype=np.float64), np.asarray(line.col, dtype=np.float64)
    if r.size == 0:
        return 0.0
    r0, r1, c0, c1 = hilltop_window(line, labels.shape, radius_cells)
    o_r, o_c = origin
    t = np.linspace(0.0, 1.0, 4)[:, None]  # the line densified: its vertices lie between cells
    rr = (r[:-1] + (r[1:] - r[:-1]) * t).ravel() if r.size > 1 else r
    cc = (c[:-1] + (c[1:] - c[:-1]) * t).ravel() if c.size > 1 else c
    free = np.ones((r1 - r0, c1 - c0), dtype=bool)
    free[np.clip(np.rint(rr).astype(np.int64) - r0, 0, r1 - r0 - 1),
         np.clip(np.rint(cc).astype(np.int64) - c0, 0, c1 - c0 - 1)] = False
    near = (ndimage.distance_transform_edt(free) <= radius_cells) & (
        area_cells[r0 - o_r:r1 - o_r, c0 - o_c:c1 - o_c] <= hill_cells)
    box_labels, box_curv = labels[r0:r1, c0:c1], curvature[r0 - o_r:r1 - o_r, c0 - o_c:c1 - o_c]
    medians = []
    for label in (label_a, label_b):
        v = box_curv[near & (box_labels == label)]
        v = v[np.isfinite(v)]
        if v.size < 3:
            return 0.0
        medians.append(float(np.median(v)))
    scale = abs(medians[0]) + abs(medians[1])
    return (medians[1] - medians[0]) / scale if scale > 0 else 0.0


def hilltop_curvature(elevation: np.ndarray, valid: np.ndarray, dx: np.ndarray, dy: np.ndarray,
                      radius_cells: int) -> np.ndarray:
    """∇²z (1/m) of a least-squares quadratic surface fitted over the (2R + 1)² cells around each cell.

    Curvature read over a window at least as wide as the DEM error's correlation length, so that the error,
    which the 5-point stencil amplifies, averages out (Hurst et al. 2012 fit a quadratic surface over a window
    for the same reason). On a symmetric window the centred x², y², xy, x and y columns are orthogonal, so the
    x² coefficient is a 1-D quadratic fit along each row averaged over the window's rows:
    a = Σ (k² − m) z_k / Σ (k² − m)², m the mean of k² over k = −R..R, and ∂²z/∂x² = 2a / dx².

    Parameters
    ----------
    elevation : ndarray
    valid : ndarray of bool
    dx, dy : ndarray
        East and north cell sizes (m) of every row.
    radius_cells : int
        R, at least 1.

    Returns
    -------
    ndarray of float
        NaN where the window leaves the grid or holds an invalid cell.
    """
    r = max(int(radius_cells), 1)
    k = np.arange(-r, r + 1, dtype=np.float64)
    w = k ** 2 - np.mean(k ** 2)
    w /= np.sum(w ** 2)
    z = np.where(valid, elevation, np.nan).astype(np.float64)
    box = np.full(2 * r + 1, 1.0 / (2 * r + 1))
    along_x = ndimage.correlate1d(ndimage.correlate1d(z, w, axis=1, mode="constant", cval=np.nan),
                                  box, axis=0, mode="constant", cval=np.nan)
    along_y = ndimage.correlate1d(ndimage.correlate1d(z, w, axis=0, mode="constant", cval=np.nan),
                                  box, axis=1, mode="constant", cval=np.nan)
    dx, dy = np.asarray(dx, dtype=np.float64), np.asarray(dy, dtype=np.float64)
    return 2.0 * (along_x / dx[:, None] ** 2 + along_y / dy[:, None] ** 2)
