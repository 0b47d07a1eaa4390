"""Where the divide between two opposite DEM edges lies, and how it moves.

A side given as a DEM edge is every cell that drains off that edge. Across
each line of cells joining the two edges (rows for west/east, columns for
north/south) the divide position is measured from side a's outer edge as
the length of the line that side a holds, cells draining elsewhere split
evenly between the two. On a clean split this is exactly the face between
the last cell of side a and the first of side b, and it moves by one cell
width each time a cell changes side, so the mean over lines follows the
area the two sides exchange.

Where the two sides are not opposite edges, or where other basins (an open
edge, an inner outlet) take cells from either side, the divide is followed
by :func:`exchange_displacement`: the area that went from one side to the
other, over the length of the starting divide that still separates the two
sides. Cells lost to a third basin are not motion of this divide, so a line
whose ends are eaten by an open edge does not read as moving.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from divides.errors import ParameterError
from divides.terrain.routing import FlowGraph

__all__ = ["OPPOSITE", "DivideTrack", "edge_catchments", "divide_positions", "shared_length", "exchange_displacement"]

#: Each edge and the edge facing it.
OPPOSITE: dict[str, str] = {"west": "east", "east": "west", "north": "south", "south": "north"}


def _check_pair(side_a: str, side_b: str) -> None:
    if side_a not in OPPOSITE:
        raise ParameterError(f"side_a {side_a!r} is not a DEM edge; use one of {', '.join(OPPOSITE)}")
    if side_b not in OPPOSITE:
        raise ParameterError(f"side_b {side_b!r} is not a DEM edge; use one of {', '.join(OPPOSITE)}")
    if OPPOSITE[side_a] != side_b:
        raise ParameterError(
            f"sides {side_a!r} and {side_b!r} are not opposite edges; the divide between them is tracked "
            "along rows (west/east) or columns (north/south)"
        )


def edge_catchments(flow: FlowGraph, edges: tuple[str, ...] | list[str]) -> np.ndarray:
    """Label every cell with the edge its flow leaves the grid by.

    Parameters
    ----------
    flow : FlowGraph
        Routing of the surface.
    edges : sequence of str
        Edge names among ``"north"``, ``"south"``, ``"west"``, ``"east"``.

    Returns
    -------
    ndarray of int8, DEM shape
        ``k + 1`` for cells draining off ``edges[k]``; 0 for cells draining
        elsewhere (an inner outlet, another edge) and invalid cells. An
        outlet on a corner belongs to both its edges; if both are listed, the
        later one wins.

    Examples
    --------
    >>> import numpy as np
    >>> from divides import Dem, route
    >>> z = (3.0 - np.abs(np.arange(6.0) - 2.4))[None, :].repeat(4, axis=0)  # crest at column 2
    >>> labels = edge_catchments(route(Dem.from_array(z, cell_size=10.0)), ["west", "east"])
    >>> labels[1].tolist()
    [1, 1, 1, 2, 2, 2]
    """
    for e in edges:
        if e not in OPPOSITE:
            raise ParameterError(f"edge {e!r} is not a DEM edge; use one of {', '.join(OPPOSITE)}")
    rows, cols = flow.shape
    outlets = flow.outlets
    basins = flow.basins()
    r, c = np.divmod(outlets, cols)
    on_edge = {"north": r == 0, "south": r == rows - 1, "west": c == 0, "east": c == cols - 1}
    code = np.zeros(int(basins.max()) + 1, dtype=np.int8)
    labels_at_outlets = basins.ravel()[outlets]
    for k, e in enumerate(edges):
        code[labels_at_outlets[on_edge[e]]] = k + 1
    code[0] = 0
    return code[basins]


def _oriented(a: np.ndarray, side_a: str) -> np.ndarray:
    """View ``a`` so that lines are rows and side a lies at column 0."""
    if side_a == "west":
        return a
    if side_a == "east":
        return a[:, ::-1]
    if side_a == "north":
        return a.T
    return a[::-1].T


def divide_positions(
    flow: FlowGraph,
    side_a: str = "west",
    side_b: str = "east",
    *,
    where: np.ndarray | None = None,
) -> np.ndarray:
    """Divide position along each line joining two opposite edges.

    Parameters
    ----------
    flow : FlowGraph
        Routing of the surface.
    side_a, side_b : str
        Opposite DEM edges (``"west"``/``"east"`` or ``"north"``/``"south"``,
        either way round).
    where : ndarray of bool, optional
        Cells to count (default: every valid cell); e.g. leave out the wall
        cells of a model's closed edges.

    Returns
    -------
    ndarray of float64
        One value per row (west/east) or column (north/south): the distance
        (m) from side a's outer edge to the divide. NaN on lines where either
        side holds no cell, or where more cells drain elsewhere than to the
        two sides together (the divide does not cross that line).

    Examples
    --------
    >>> import numpy as np
    >>> from divides import Dem, route
    >>> z = (3.0 - np.abs(np.arange(6.0) - 2.4))[None, :].repeat(4, axis=0)
    >>> divide_positions(route(Dem.from_array(z, cell_size=10.0)), "west", "east").tolist()
    [nan, 30.0, 30.0, nan]
    """
    _check_pair(side_a, side_b)
    dem = flow.dem
    labels = edge_catchments(flow, (side_a, side_b))
    counted = dem.valid if where is None else (dem.valid & np.asarray(where, dtype=bool))
    if counted.shape != dem.shape:
        raise ParameterError(f"`where` must have the DEM's shape {dem.shape}; got {counted.shape}")
    lab = _oriented(labels, side_a)
    cnt = _oriented(counted, side_a)
    n_a = np.count_nonzero((lab == 1) & cnt, axis=1)
    n_b = np.count_nonzero((lab == 2) & cnt, axis=1)
    n_other = np.count_nonzero(cnt, axis=1) - n_a - n_b
    first = np.argmax(cnt, axis=1)  # leading cells not counted (nodata, walls) still occupy the line
    cells = first + n_a + 0.5 * n_other
    if side_a in ("west", "east"):
        out = cells * dem.dx
    else:
        dy = dem.dy if side_a == "north" else dem.dy[::-1]
        edges = np.r_[0.0, np.cumsum(dy)]
        out = np.interp(cells, np.arange(edges.size, dtype=np.float64), edges)
    out = out.astype(np.float64)
    # A line this divide does not cross: one side missing, or most of it draining
    # elsewhere (e.g. the first row of a grid whose north edge is open).
    out[(n_a == 0) | (n_b == 0) | (n_other > n_a + n_b)] = np.nan
    return out


def shared_length(lines: list, keep: np.ndarray) -> float:
    """Length (m) of divide lines whose cells on both sides all lie in ``keep``.

    Parameters
    ----------
    lines : list of DivideLine
        Polylines with fractional grid coordinates (cell centres are integers),
        as traced by :func:`divides.terrain.divide_lines.divide_between`.
    keep : ndarray of bool, DEM shape
        Cells that still belong to either side.

    Returns
    -------
    float
        Sum of the segments whose surrounding cells (the up to four cells
        around the segment's midpoint) are all kept, plus one cell for each
        unbroken stretch (the half cells beyond its end vertices, which lie
        at cell centres).

    Examples
    --------
    >>> import numpy as np
    >>> from divides import Dem
    >>> from divides.terrain.divide_lines import divide_between
    >>> a = np.zeros((6, 6), bool); a[:, :3] = True
    >>> dem = Dem.from_array(np.zeros((6, 6)), cell_size=10.0)
    >>> lines = divide_between(dem, a, ~a, smoothing_cells=0.0).lines
    >>> keep = np.ones((6, 6), bool); keep[:2] = False
    >>> round(shared_length(lines, np.ones((6, 6), bool))), round(shared_length(lines, keep))
    (60, 40)
    """
    keep = np.asarray(keep, dtype=bool)
    rows, cols = keep.shape
    total = 0.0
    for line in lines:
        if line.row.size < 2:
            continue
        mr, mc = 0.5 * (line.row[1:] + line.row[:-1]), 0.5 * (line.col[1:] + line.col[:-1])
        ok = np.ones(mr.size, dtype=bool)
        for r in (np.floor(mr), np.ceil(mr)):
            for c in (np.floor(mc), np.ceil(mc)):
                ri = np.clip(r.astype(np.int64), 0, rows - 1)
                ci = np.clip(c.astype(np.int64), 0, cols - 1)
                ok &= keep[ri, ci]
        step = np.diff(line.distance_m)
        total += float(np.sum(step[ok]))
        # A traced line runs from the centre of its first cell to the centre of its last:
        # each unbroken kept stretch gets back the half cell beyond either end, measured
        # along the line (half a cell height for a line along a column, half a diagonal at 45°).
        dr, dc = np.abs(np.diff(line.row)), np.abs(np.diff(line.col))
        per_cell = step / np.maximum(np.maximum(dr, dc), 1e-12)
        first = ok & ~np.r_[False, ok[:-1]]
        last = ok & ~np.r_[ok[1:], False]
        total += 0.5 * float(np.sum(per_cell[first]) + np.sum(per_cell[last]))
    return total


def exchange_displacement(
    cell_area: np.ndarray,
    start: tuple[np.ndarray, np.ndarray],
    now: tuple[np.ndarray, np.ndarray],
    lines: list,
) -> float:
    """Mean displacement (m) of the divide between two sides, from the area they exchanged.

    Parameters
    ----------
    cell_area : ndarray, DEM shape
        Area of each cell (m²).
    start, now : (ndarray of bool, ndarray of bool)
        Masks of side a and side b at the start and now.
    lines : list of DivideLine
        The divide at the start.

    Returns
    -------
    float
        (area side b gave to side a − area side a gave to side b) divided by
        the length of the starting divide whose cells still belong to either
        side (:func:`shared_length`): positive when the divide moves into
        side b. NaN when no stretch of the divide survives. Cells that went
        to, or came from, any other basin are left out.

    Examples
    --------
    A west–east split of six rows moves two cells east in the four rows an
    open edge has not taken:

    >>> import numpy as np
    >>> from divides import Dem
    >>> from divides.terrain.divide_lines import divide_between
    >>> dem = Dem.from_array(np.zeros((6, 10)), cell_size=10.0)
    >>> a0 = np.zeros((6, 10), bool); a0[:, :5] = True
    >>> a1 = np.zeros((6, 10), bool); a1[:, :7] = True
    >>> b1 = ~a1
    >>> a1[:2], b1[:2] = False, False  # two rows now drain to the north edge
    >>> lines = divide_between(dem, a0, ~a0, smoothing_cells=0.0).lines
    >>> float(exchange_displacement(np.full((6, 10), 100.0), (a0, ~a0), (a1, b1), lines))
    20.0
    """
    a0, b0 = (np.asarray(m, dtype=bool) for m in start)
    a1, b1 = (np.asarray(m, dtype=bool) for m in now)
    gained = float(np.sum(cell_area[b0 & a1]) - np.sum(cell_area[a0 & b1]))
    length = shared_length(lines, (a0 | b0) & (a1 | b1))
    return gained / length if length > 0 else float("nan")


def _along(flow: FlowGraph, side_a: str) -> np.ndarray:
    """World coordinate along the divide of each line: row-centre y or column-centre x."""
    rows, cols = flow.shape
    if side_a in ("west", "east"):
        return flow.dem.xy(np.arange(rows), np.zeros(rows))[1]
    return flow.dem.xy(np.zeros(cols), np.arange(cols))[0]


@dataclass(frozen=True, eq=False)
class DivideTrack:
    """Divide position between two opposite edges through time.

    Attributes
    ----------
    side_a, side_b : str
        The two edges; positions are measured from side a's outer edge, so
        an increasing position means the divide moves into side b.
    times : ndarray, shape (k,)
        Years since the start of the run.
    positions : ndarray, shape (k, lines)
        Per-line positions (m), NaN where a line misses either side.
    along : ndarray, shape (lines,)
        World coordinate of each line along the divide (row-centre y for
        west/east, column-centre x for north/south).
    """

    side_a: str
    side_b: str
    times: np.ndarray
    positions: np.ndarray
    along: np.ndarray

    @property
    def mean(self) -> np.ndarray:
        """Mean position over the lines holding both sides, per time (m); NaN if none."""
        ok = np.isfinite(self.positions)
        count = ok.sum(axis=1)
        total = np.where(ok, self.positions, 0.0).sum(axis=1)
        out = np.full(self.times.shape, np.nan)
        np.divide(total, count, out=out, where=count > 0)
        return out

    def rate(self, *, start: float | None = None, end: float | None = None) -> float:
        """Least-squares rate of the mean position (m/yr; positive: toward side b).

        Parameters
        ----------
        start, end : float, optional
            Time window (years) of the fit; default the whole track.
        """
        t, x = self.times, self.mean
        keep = np.isfinite(x)
        if start is not None:
            keep &= t >= start
        if end is not None:
            keep &= t <= end
        if np.count_nonzero(keep) < 2:
            raise ParameterError(
                f"the divide track has {np.count_nonzero(keep)} usable time(s) in the window "
                f"[{start}, {end}]; a rate needs at least two"
            )
        return float(np.polyfit(t[keep], x[keep], 1)[0])


class _Tracker:
    """Collects divide positions during a run (used by :func:`divides.model.simulate`)."""

    def __init__(self, side_a: str, side_b: str, *, where: np.ndarray | None) -> None:
        _check_pair(side_a, side_b)
        self.side_a, self.side_b, self.where = side_a, side_b, where
        self.times: list[float] = []
        self.rows: list[np.ndarray] = []
        self.along: np.ndarray | None = None

    def record(self, t: float, flow: FlowGraph) -> None:
        if self.times and t <= self.times[-1]:
            return
        if self.along is None:
            self.along = _along(flow, self.side_a)
        self.times.append(float(t))
        self.rows.append(divide_positions(flow, self.side_a, self.side_b, where=self.where))

    def result(self) -> DivideTrack:
        return DivideTrack(
            side_a=self.side_a,
            side_b=self.side_b,
            times=np.asarray(self.times, dtype=np.float64),
            positions=np.vstack(self.rows) if self.rows else np.empty((0, 0)),
            along=self.along if self.along is not None else np.empty(0),
        )
