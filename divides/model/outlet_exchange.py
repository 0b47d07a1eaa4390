"""How fast the divide between two neighbouring outlet basins moves, from the area they exchange.

The divide between two outlet basins that drain the same way (two valleys side by side
on one flank of a range) is not crossed by rows of cells the way the main divide of a
ridge is, so it cannot be followed per row (:mod:`divides.model.tracking`). It is
measured instead by the area the two basins exchange between two states of the same
landscape: the basins of the later state are matched to those of the earlier one by
their largest overlap, and :func:`divides.model.tracking.exchange_displacement` turns
the area that changed hands into a mean displacement along the divide the two basins
shared at the start. A straight divide shifted by k cells gives exactly k cells.
"""

from __future__ import annotations

import numpy as np

from divides.errors import ParameterError
from divides.io.dem import Dem
from divides.model.tracking import exchange_displacement, shared_length
from divides.terrain.divide_lines import divide_between
from divides.terrain.routing import FlowGraph

__all__ = ["basin_exchange", "match_labels", "neighbour_pairs", "outlet_basins"]


def outlet_basins(flow: FlowGraph, *, min_cells: int) -> tuple[np.ndarray, np.ndarray]:
    """Outlet basins of at least ``min_cells`` cells, and the DEM edge each drains off.

    Returns
    -------
    labels : ndarray of int32, DEM shape
        1, 2, … by decreasing area; 0 for smaller basins and invalid cells.
    edge : ndarray of str, one per label (index 0 unused)
        ``"north"``, ``"south"``, ``"west"``, ``"east"`` or ``"inner"`` (a sink inside the grid).
    """
    rows, cols = flow.shape
    basins = flow.basins()
    counts = np.bincount(basins.ravel())
    keep = np.flatnonzero(counts >= int(min_cells))
    keep = keep[keep > 0]
    new = np.zeros(counts.size, dtype=np.int32)
    new[keep] = np.arange(1, keep.size + 1)  # flow.basins() numbers by decreasing area already
    labels = new[basins]
    edge = np.full(keep.size + 1, "", dtype=object)
    outlets = flow.outlets
    for cell in outlets:
        k = new[basins.ravel()[cell]]
        if k == 0:
            continue
        r, c = divmod(int(cell), cols)
        edge[k] = ("west" if c == 0 else "east" if c == cols - 1 else "north" if r == 0
                   else "south" if r == rows - 1 else "inner")
    return labels, edge


def neighbour_pairs(labels: np.ndarray) -> list[tuple[int, int]]:
    """Pairs (i < j) of labels > 0 that share a cell face."""
    lab = np.asarray(labels)
    a = np.r_[lab[:, :-1].ravel(), lab[:-1, :].ravel()]
    b = np.r_[lab[:, 1:].ravel(), lab[1:, :].ravel()]
    ok = (a > 0) & (b > 0) & (a != b)
    pairs = np.unique(np.sort(np.column_stack([a[ok], b[ok]]), axis=1), axis=0)
    return [(int(i), int(j)) for i, j in pairs]


def match_labels(before: np.ndarray, after: np.ndarray, n: int) -> np.ndarray:
    """For every label of ``before`` (index), the label of ``after`` that covers most of it (0: none)."""
    b, a = before.ravel(), after.ravel()
    ok = (b > 0) & (a > 0)
    out = np.zeros(n + 1, dtype=np.int64)
    if not ok.any():
        return out
    pair = np.unique(np.column_stack([b[ok], a[ok]]), axis=0, return_counts=True)
    (bb, aa), cnt = pair[0].T, pair[1]
    order = np.lexsort((-cnt, bb))  # per label of before, the largest overlap first
    first = np.r_[True, bb[order][1:] != bb[order][:-1]]
    out[bb[order][first]] = aa[order][first]
    return out


def basin_exchange(dem: Dem, before: np.ndarray, after: np.ndarray, *, years: float,
                   pairs: list[tuple[int, int]] | None = None) -> list[dict]:
    """Rate at which the divide of each pair of neighbouring basins moves, from the area exchanged.

    Parameters
    ----------
    dem : Dem
        The earlier state (for cell sizes and to trace the divides).
    before, after : ndarray of int, DEM shape
        Basin labels of the earlier and the later state (0: no basin). A label of ``after``
        stands for the basin of ``before`` it covers most of.
    years : float
        Time between the two states.
    pairs : list of (int, int), optional
        Pairs of labels of ``before`` (default: every pair sharing a cell face).

    Returns
    -------
    list of dict
        Per pair ``basins`` [i, j], ``length_m`` (their divide at the start),
        ``moved_m`` (mean displacement, positive into j: the area j lost minus the area
        it won, over the length of the starting divide still shared,
        :func:`divides.model.tracking.exchange_displacement`) and ``rate_m_per_yr``;
        both None when the two were merged into one basin or no stretch of their divide
        is left.

    Examples
    --------
    Two basins split along a column, the divide moved two cells into the second:

    >>> import numpy as np
    >>> dem = Dem.from_array(np.zeros((8, 10)), cell_size=30.0)
    >>> before = np.where(np.arange(10) < 5, 1, 2)[None, :].repeat(8, axis=0)
    >>> after = np.where(np.arange(10) < 7, 1, 2)[None, :].repeat(8, axis=0)
    >>> r = basin_exchange(dem, before, after, years=100.0)[0]
    >>> r["basins"], r["moved_m"], r["rate_m_per_yr"]
    ([1, 2], 60.0, 0.6)
    """
    before, after = np.asarray(before), np.asarray(after)
    if before.shape != dem.shape or after.shape != dem.shape:
        raise ParameterError(f"basin labels must have the DEM's shape {dem.shape}; got {before.shape} and {after.shape}")
    if not (np.isfinite(years) and years > 0):
        raise ParameterError(f"years between the two states must be > 0; got {years!r}")
    n = int(max(before.max(), 0))
    match = match_labels(before, after, n)
    area = dem.cell_area_grid()
    out = []
    for i, j in (neighbour_pairs(before) if pairs is None else pairs):
        a0, b0 = before == i, before == j
        lines = divide_between(dem, a0, b0, smoothing_cells=0.0, min_vertices=2).lines
        row = {"basins": [int(i), int(j)], "length_m": shared_length(lines, a0 | b0), "moved_m": None,
               "rate_m_per_yr": None}
        if match[i] and match[j] and match[i] != match[j]:
            moved = exchange_displacement(area, (a0, b0), (after == match[i], after == match[j]), lines)
            if np.isfinite(moved):
                row["moved_m"], row["rate_m_per_yr"] = float(moved), float(moved) / float(years)
        out.append(row)
    return out
