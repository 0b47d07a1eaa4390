"""Basins and sub-basins above a minimum area, as labels for regional divide screening."""

from __future__ import annotations

import numpy as np

from divides.errors import ParameterError
from divides.terrain import _routing_kernels as _rk
from divides.terrain.routing import FlowGraph

__all__ = ["basin_labels", "basin_mouths", "outlets_of", "edge_outlets", "LEVELS", "EDGE_LABELS"]

LEVELS = ("tributaries", "outlets", "edges")

#: Label of the region draining off each edge with ``level="edges"``.
EDGE_LABELS = {"north": 1, "east": 2, "south": 3, "west": 4}


def edge_outlets(flow: FlowGraph, edge: str) -> np.ndarray:
    """Outlets that are the outermost valid cell of their row/column on ``edge``.

    On a full rectangle these are the grid-edge outlets; on a DEM clipped to an
    irregular footprint (nodata around), the outlets along that footprint's
    side of the same name. A corner outlet belongs to both of its edges.
    """
    valid = flow.dem.valid
    rows, cols = valid.shape
    outlets = flow.outlets
    r, c = np.divmod(outlets, cols)
    if edge in ("west", "east"):
        any_valid = valid.any(axis=1)
        first = np.argmax(valid, axis=1) if edge == "west" else cols - 1 - np.argmax(valid[:, ::-1], axis=1)
        keep = any_valid[r] & (c == first[r])
    elif edge in ("north", "south"):
        any_valid = valid.any(axis=0)
        first = np.argmax(valid, axis=0) if edge == "north" else rows - 1 - np.argmax(valid[::-1, :], axis=0)
        keep = any_valid[c] & (r == first[c])
    else:
        raise ParameterError(f"edge must be north, south, east or west; got {edge!r}")
    return outlets[keep]


def basin_labels(flow: FlowGraph, *, min_area_m2: float, level: str = "tributaries") -> np.ndarray:
    """Label every cell with the basin it belongs to; 0 for cells of smaller basins.

    Parameters
    ----------
    flow : FlowGraph
    min_area_m2 : float
        Smallest basin kept (m²).
    level : {"tributaries", "outlets", "edges"}
        ``"edges"``: one region per open DEM edge, every cell draining off it
        (labels of :data:`EDGE_LABELS`; ``min_area_m2`` drops smaller regions).
        ``"outlets"``: one basin per outlet draining at least ``min_area_m2``.
        ``"tributaries"``: also split each basin where two branches of at
        least ``min_area_m2`` join, each branch's upstream area becoming a
        basin of its own (the part below the junction keeps the label of the
        basin downstream), so the divides between large tributaries are
        screened too.

    Returns
    -------
    ndarray of int32, DEM shape
        Labels 1, 2, … (in order of decreasing area at the basin's mouth); 0 elsewhere.
    """
    if level not in LEVELS:
        raise ParameterError(f"basin level must be one of {', '.join(LEVELS)}; got {level!r}")
    if not (np.isfinite(min_area_m2) and min_area_m2 > 0):
        raise ParameterError(f"minimum basin area must be positive (m²); got {min_area_m2!r}")
    area = flow.area.ravel()
    rec = flow.receivers
    n = rec.size
    is_outlet = rec == np.arange(n, dtype=rec.dtype)
    seeds = (area >= min_area_m2) & is_outlet
    if level == "tributaries":  # donors of cells that receive two or more big donors (junctions)
        donor = np.flatnonzero((area >= min_area_m2) & ~is_outlet)
        into, count = np.unique(rec[donor], return_counts=True)
        seeds[donor[np.isin(rec[donor], into[count >= 2])]] = True
    del is_outlet
    if level == "edges":
        seeds = np.zeros(n, dtype=bool)
        values = np.zeros(n, dtype=np.float32)  # labels 1-4, exact in float32
        # a corner goes to the later edge in this list; a closed edge drains nothing, so its corners go to the
        # open edges beside it (else a corner's few cells became a region named after an edge no water leaves by)
        closed = flow.conditioned.closed_edges
        for edge in (e for e in ("west", "south", "east", "north") if e not in closed):
            idx = edge_outlets(flow, edge)
            seeds[idx] = True
            values[idx] = EDGE_LABELS[edge]
    else:
        seed_idx = np.flatnonzero(seeds)
        ranking = seed_idx[np.argsort(-area[seed_idx], kind="stable")]
        # whole labels below 2**24 are exact in float32 (half the memory of float64)
        values = np.zeros(n, dtype=np.float32 if ranking.size < 2**24 else np.float64)
        values[ranking] = np.arange(1, ranking.size + 1)
    out = np.full(n, np.nan, dtype=values.dtype)
    _rk.first_downstream_value(flow.order, rec, seeds, values, out)
    del values, seeds
    labels = np.nan_to_num(out, nan=0.0, copy=False).astype(np.int32)
    del out
    if level == "edges":  # drop edge regions smaller than the minimum
        sizes = np.bincount(labels, weights=np.repeat(flow.dem.cell_area, flow.shape[1]), minlength=5)
        labels[sizes[labels] < min_area_m2] = 0
    return labels.reshape(flow.shape)


def basin_mouths(flow: FlowGraph, labels: np.ndarray) -> np.ndarray:
    """The mouth of every basin of :func:`basin_labels` at level ``"outlets"`` or ``"tributaries"``.

    Every cell of such a basin drains through one cell of it, its mouth (the outlet, or the
    cell where the branch joins its trunk), which has the basin's largest drainage area.
    That cell is the point to give ``divides assess`` for the basin as a side.

    Parameters
    ----------
    flow : FlowGraph
    labels : ndarray of int, DEM shape
        Basin labels (0 = no basin).

    Returns
    -------
    ndarray of int64
        Flat index (``row * cols + col``) of each label's mouth; index = label, -1 for 0
        and for labels without cells.

    Examples
    --------
    >>> import numpy as np
    >>> from divides.io.dem import Dem
    >>> from divides.terrain.routing import route
    >>> z = np.add.outer(np.arange(6.0, 0, -1), np.abs(np.arange(7) - 3.0))  # a valley draining south
    >>> flow = route(Dem.from_array(z, cell_size=10.0))
    >>> labels = basin_labels(flow, min_area_m2=1000.0, level="outlets")
    >>> divmod(int(basin_mouths(flow, labels)[1]), 7)  # row, column: the valley's outlet on the south edge
    (5, 3)
    >>> [divmod(int(i), 7) for i in outlets_of(flow, np.array([1 * 7 + 2, 3 * 7 + 3]))]  # two cells draining there
    [(5, 3), (5, 3)]
    """
    lab = np.ascontiguousarray(labels, dtype=np.int32).ravel()
    top = int(lab.max()) if lab.size else 0
    return _rk.label_mouths(lab, flow.area.ravel(), top)

def outlets_of(flow: FlowGraph, cells: np.ndarray) -> np.ndarray:
    """The outlet each cell drains to (flat indices), down the receivers: no grid-sized array.

    Parameters
    ----------
    flow : FlowGraph
    cells : ndarray of int
        Flat indices (``row * cols + col``).

    Returns
    -------
    ndarray of int64
        The flat index of the outlet (a cell that is its own receiver) of each cell
        (an example is in :func:`basin_mouths`).
    """
    return _rk.drain_to_outlets(flow.receivers, np.asarray(cells, dtype=np.int64).ravel())
