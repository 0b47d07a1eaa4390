"""Which divide lines lie near one another: the gap between every pair that comes within a distance."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from scipy.spatial import cKDTree

from divides.terrain.divide_lines import DivideLine

__all__ = ["line_gaps"]

#: Vertices compared with the whole set at a time (bounds the memory of the pairs found: a vertex meets about
#: 2 x radius vertices of its own line).
_CHUNK_VERTICES = 200_000


def line_gaps(lines: Sequence[DivideLine], radius_cells: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Pairs of lines whose vertices come within ``radius_cells`` of each other, and how close.

    Distances are in grid cells (on the lines' fractional ``row`` and ``col``), so that the gap means the same on
    any cell size or CRS. Vertices lie about a cell apart along a line, so the gap is the distance between the
    lines to within about half a cell.

    Parameters
    ----------
    lines : sequence of DivideLine
    radius_cells : float
        Largest gap reported (cells, >= 0).

    Returns
    -------
    i, j : ndarray of int64
        Indices into ``lines`` of each pair, ``i < j``, each pair once, sorted.
    gap : ndarray of float64
        The smallest distance between a vertex of one and a vertex of the other (cells).

    Examples
    --------
    >>> from types import SimpleNamespace as Line
    >>> a = Line(row=np.array([0.0, 1.0, 2.0]), col=np.zeros(3))
    >>> b = Line(row=np.array([2.0, 3.0]), col=np.zeros(2))       # shares a's last vertex
    >>> c = Line(row=np.array([0.0, 2.0]), col=np.full(2, 4.0))   # 4 cells east of a
    >>> i, j, gap = line_gaps([a, b, c], 5.0)
    >>> [(int(p), int(q), float(g)) for p, q, g in zip(i, j, gap)]
    [(0, 1, 0.0), (0, 2, 4.0), (1, 2, 4.0)]
    """
    empty = (np.zeros(0, np.int64), np.zeros(0, np.int64), np.zeros(0))
    counts = np.array([np.asarray(line.row).size for line in lines], dtype=np.int64)
    if counts.size < 2 or not counts.sum():
        return empty
    owner = np.repeat(np.arange(counts.size, dtype=np.int64), counts)
    pts = np.column_stack([np.concatenate([np.asarray(line.row, float) for line in lines]),
                           np.concatenate([np.asarray(line.col, float) for line in lines])])
    tree = cKDTree(pts)
    keys, gaps = [], []
    for start in range(0, pts.shape[0], _CHUNK_VERTICES):
        chunk = cKDTree(pts[start: start + _CHUNK_VERTICES])
        near = chunk.sparse_distance_matrix(tree, float(radius_cells), output_type="ndarray")
        p, q = owner[near["i"] + start], owner[near["j"]]
        other = p < q  # each pair once (the reverse is met from the other line's vertices)
        keys.append(p[other] * counts.size + q[other])
        gaps.append(near["v"][other])
    key, gap = np.concatenate(keys), np.concatenate(gaps)
    if not key.size:
        return empty
    order = np.lexsort((gap, key))
    key, gap = key[order], gap[order]
    first = np.r_[True, key[1:] != key[:-1]]  # the smallest gap of each pair
    key, gap = key[first], gap[first]
    return key // counts.size, key % counts.size, gap
