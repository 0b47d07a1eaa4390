"""Divides as lines: the boundary between two drainage regions, and the divide network of a DEM."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy import ndimage, signal
from scipy.spatial import cKDTree
from skimage import measure

from divides.errors import SideError
from divides.io.dem import Dem

__all__ = ["DivideLine", "Divide", "DivideSegment", "divide_between", "divide_network", "DEFAULT_SADDLE_DEPTH_M"]

#: A dip along a divide at least this deep (m) below the crest on both sides is
#: reported as a saddle (wind-gap candidate) unless the caller says otherwise.
DEFAULT_SADDLE_DEPTH_M = 10.0

_EIGHT = np.ones((3, 3), dtype=bool)


@dataclass(frozen=True, eq=False)
class DivideLine:
    """One connected stretch of divide, as a polyline.

    Vertices lie between the last cells of one side and the first of the other.
    Side a is on the left walking along the line (so the right-hand normal
    points into side b).

    Attributes
    ----------
    row, col : ndarray
        Fractional grid coordinates of the vertices (cell centres are integers).
    x, y : ndarray
        The vertices in the DEM's CRS.
    distance_m : ndarray
        Distance along the line from its first vertex (m).
    elevation_m : ndarray
        Divide elevation at each vertex (bilinear on the DEM).
    """

    row: np.ndarray
    col: np.ndarray
    x: np.ndarray
    y: np.ndarray
    distance_m: np.ndarray
    elevation_m: np.ndarray

    @property
    def length_m(self) -> float:
        """Length of the line in metres."""
        return float(self.distance_m[-1]) if self.distance_m.size else 0.0


@dataclass(frozen=True, eq=False)
class Divide:
    """The divide between two regions a and b of a DEM.

    Attributes
    ----------
    lines : list of DivideLine
        Polylines, longest first.
    cells_a, cells_b : ndarray of int64
        Flat indices of the cells of a that touch b (8-neighbours), and of b that touch a.
    saddles : list of dict
        Dips along the divide deeper than the saddle depth: ``line``, ``vertex``,
        ``x``, ``y``, ``elevation_m``, ``depth_m``, ``distance_m``.
    """

    lines: list[DivideLine]
    cells_a: np.ndarray
    cells_b: np.ndarray
    saddles: list[dict] = field(default_factory=list)

    @property
    def length_m(self) -> float:
        """Total length of all lines (m)."""
        return float(sum(line.length_m for line in self.lines))

    @property
    def n_points(self) -> int:
        """Total number of vertices."""
        return int(sum(line.row.size for line in self.lines))

    def nearest_cells(self, row: np.ndarray, col: np.ndarray, dem: Dem) -> tuple[np.ndarray, np.ndarray]:
        """Flat index of the nearest a-cell and b-cell on the divide to points at grid coordinates (row, col)."""
        cols = dem.shape[1]
        out = []
        for cells in (self.cells_a, self.cells_b):
            r, c = np.divmod(cells, cols)
            _, j = cKDTree(np.column_stack([r, c])).query(np.column_stack([row, col]))
            out.append(cells[j])
        return out[0], out[1]

    def summary(self) -> dict:
        """JSON-ready figures for reports."""
        return {"length_m": self.length_m, "n_points": self.n_points, "n_lines": len(self.lines),
                "n_saddles": len(self.saddles)}


@dataclass(frozen=True, eq=False)
class DivideSegment:
    """One divide segment of a divide network, between two labelled regions.

    Attributes
    ----------
    label_a, label_b : int
        The regions on the left (a) and right (b) of the line, ``label_a < label_b``.
    line : DivideLine
    cells_a, cells_b : ndarray of int64
        Flat indices of the cells of each region touching the other, near this pair.
    """

    label_a: int
    label_b: int
    line: DivideLine
    cells_a: np.ndarray
    cells_b: np.ndarray

    def as_divide(self) -> Divide:
        """This segment as a :class:`Divide` of its own (no saddle search)."""
        return Divide([self.line], self.cells_a, self.cells_b)


def _metric_lengths(dem: Dem, row: np.ndarray, col: np.ndarray) -> np.ndarray:
    """Cumulative length (m) of a polyline in grid coordinates, using per-row cell sizes."""
    if row.size < 2:
        return np.zeros(row.size)
    mid = 0.5 * (row[1:] + row[:-1])
    rows = np.arange(dem.shape[0])
    dx = np.interp(mid, rows, dem.dx)
    dy = np.interp(mid, rows, dem.dy)
    step = np.hypot(np.diff(col) * dx, np.diff(row) * dy)
    return np.concatenate([[0.0], np.cumsum(step)])


def _sample(grid: np.ndarray, row: np.ndarray, col: np.ndarray) -> np.ndarray:
    return ndimage.map_coordinates(grid, [row, col], order=1, mode="nearest")


def _lines(
    dem: Dem, a: np.ndarray, b: np.ndarray, *, smoothing_cells: float, min_vertices: int, offset=(0, 0)
) -> list[DivideLine]:
    """Polylines separating a from b inside a window of the DEM (``offset`` = its top-left cell)."""
    band = ndimage.binary_dilation(a, _EIGHT, iterations=2) & ndimage.binary_dilation(b, _EIGHT, iterations=2)
    if not band.any():
        return []
    # The contour of a smoothed ±1 indicator at 0 runs midway between the last cells
    # of each side; smoothing by about a cell removes the staircase of the grid, whose
    # length would otherwise be overestimated by up to ~8 % on oblique divides.
    indicator = a.astype(np.float64) - b.astype(np.float64)
    smooth = ndimage.gaussian_filter(indicator, smoothing_cells, mode="nearest") if smoothing_cells > 0 else indicator
    contours = measure.find_contours(smooth, 0.0, mask=band)
    r0, c0 = offset
    z = dem.elevation[r0: r0 + a.shape[0], c0: c0 + a.shape[1]]
    z_fill = np.where(np.isfinite(z), z, np.nanmin(z) if np.isfinite(z).any() else 0.0)
    out = []
    for cont in contours:
        if cont.shape[0] < min_vertices:
            continue
        row, col = cont[:, 0], cont[:, 1]
        # Orient so that a is on the left: probe the smoothed field left of the middle segment.
        m = min(row.size - 2, row.size // 2)
        dr, dc = row[m + 1] - row[m], col[m + 1] - col[m]
        norm = np.hypot(dr, dc) or 1.0
        # Left of the walking direction (rows grow southward, cols eastward) is (-dc, dr) rotated: (r - dc, c + dr)
        pr = 0.5 * (row[m] + row[m + 1]) - dc / norm
        pc = 0.5 * (col[m] + col[m + 1]) + dr / norm
        if _sample(smooth, np.array([pr]), np.array([pc]))[0] < 0:
            row, col = row[::-1], col[::-1]
        grow, gcol = row + offset[0], col + offset[1]
        x, y = dem.xy(grow, gcol)
        out.append(
            DivideLine(
                row=grow,
                col=gcol,
                x=np.asarray(x),
                y=np.asarray(y),
                distance_m=_metric_lengths(dem, grow, gcol),
                elevation_m=_sample(z_fill, row, col),
            )
        )
    out.sort(key=lambda line: -line.length_m)
    return out


def _saddles(lines: list[DivideLine], depth_m: float) -> list[dict]:
    found = []
    for li, line in enumerate(lines):
        if line.elevation_m.size < 3:
            continue
        idx, props = signal.find_peaks(-line.elevation_m, prominence=depth_m)
        for j, depth in zip(idx, props["prominences"]):
            found.append({
                "line": li,
                "vertex": int(j),
                "x": float(line.x[j]),
                "y": float(line.y[j]),
                "elevation_m": float(line.elevation_m[j]),
                "depth_m": float(depth),
                "distance_m": float(line.distance_m[j]),
            })
    return found


def divide_between(
    dem: Dem,
    a: np.ndarray,
    b: np.ndarray,
    *,
    smoothing_cells: float = 1.0,
    saddle_depth_m: float = DEFAULT_SADDLE_DEPTH_M,
    min_vertices: int = 3,
) -> Divide:
    """The divide between two disjoint regions of a DEM.

    Parameters
    ----------
    dem : Dem
    a, b : ndarray of bool, DEM shape
        The two regions (e.g. the basins of side a and side b).
    smoothing_cells : float
        Gaussian smoothing (cells) of the side indicator before tracing; 0 traces
        the raw cell boundary.
    saddle_depth_m : float
        Least depth of a dip along the divide, below the crest on both sides,
        to be reported as a saddle (wind-gap candidate).
    min_vertices : int
        Shorter traced pieces are dropped as noise.

    Returns
    -------
    Divide

    Raises
    ------
    SideError
        If the regions overlap or do not touch.
    """
    if a.shape != dem.shape or b.shape != dem.shape:
        raise SideError(f"side masks must have the DEM's shape {dem.shape}; got {a.shape} and {b.shape}")
    if np.any(a & b):
        raise SideError(f"the two sides overlap in {int(np.count_nonzero(a & b))} cell(s); they must be disjoint")
    touch_a = a & ndimage.binary_dilation(b, _EIGHT)
    touch_b = b & ndimage.binary_dilation(a, _EIGHT)
    if not touch_a.any():
        raise SideError("the two sides do not touch: there is no divide between them (choose adjacent basins)")
    # Trace inside the bounding box of the contact zone only: cheap on big DEMs.
    rr, cc = np.nonzero(touch_a | touch_b)
    r0, r1 = max(rr.min() - 4, 0), min(rr.max() + 5, dem.shape[0])
    c0, c1 = max(cc.min() - 4, 0), min(cc.max() + 5, dem.shape[1])
    lines = _lines(dem, a[r0:r1, c0:c1], b[r0:r1, c0:c1], smoothing_cells=smoothing_cells,
                   min_vertices=min_vertices, offset=(r0, c0))
    return Divide(
        lines=lines,
        cells_a=np.flatnonzero(touch_a),
        cells_b=np.flatnonzero(touch_b),
        saddles=_saddles(lines, saddle_depth_m),
    )


def divide_network(
    dem: Dem,
    labels: np.ndarray,
    *,
    smoothing_cells: float = 1.0,
    min_vertices: int = 3,
) -> list[DivideSegment]:
    """Every divide segment between labelled regions (e.g. basins above a minimum area).

    Each traced piece of boundary between two labels ends where a third label
    (or unlabelled ground, or the DEM edge) comes in, so the pieces are the
    divide segments between junctions.

    Parameters
    ----------
    dem : Dem
    labels : ndarray of int, DEM shape
        Region labels; 0 means "no region" (ignored).

    Returns
    -------
    list of DivideSegment
        With ``label_a < label_b``; the line has ``label_a`` on its left.
    """
    lab = np.asarray(labels)
    if lab.shape != dem.shape:
        raise SideError(f"labels must have the DEM's shape {dem.shape}; got {lab.shape}")
    keys, rows, cols = [], [], []
    top = int(lab.max()) + 1
    n_rows, n_cols = lab.shape
    for dr, dc in ((0, 1), (1, 0), (1, 1), (1, -1)):
        first = lab[: n_rows - dr, max(0, -dc): n_cols - max(0, dc)]
        second = lab[dr:, max(0, dc): n_cols - max(0, -dc)]
        r, c = np.nonzero((first != second) & (first > 0) & (second > 0))
        lo = np.minimum(first[r, c], second[r, c]).astype(np.int64)
        hi = np.maximum(first[r, c], second[r, c]).astype(np.int64)
        keys.append(lo * top + hi)
        rows.append(r + dr / 2.0)
        cols.append(c + max(0, -dc) + dc / 2.0)
    key = np.concatenate(keys)
    if key.size == 0:
        return []
    row, col = np.concatenate(rows), np.concatenate(cols)
    order = np.argsort(key, kind="stable")
    key, row, col = key[order], row[order], col[order]
    starts = np.flatnonzero(np.r_[True, key[1:] != key[:-1]])
    out = []
    for s, r_lo, r_hi, c_lo, c_hi in zip(
        starts,
        np.minimum.reduceat(row, starts), np.maximum.reduceat(row, starts),
        np.minimum.reduceat(col, starts), np.maximum.reduceat(col, starts),
    ):
        i, j = divmod(int(key[s]), top)
        # A window around the contact zone only: cheap even between two huge basins.
        r0, r1 = max(int(r_lo) - 4, 0), min(int(r_hi) + 6, n_rows)
        c0, c1 = max(int(c_lo) - 4, 0), min(int(c_hi) + 6, n_cols)
        win = lab[r0:r1, c0:c1]
        a, b = win == i, win == j
        wr, wc = np.nonzero(a & ndimage.binary_dilation(b, _EIGHT))
        cells_a = (wr + r0) * n_cols + (wc + c0)
        wr, wc = np.nonzero(b & ndimage.binary_dilation(a, _EIGHT))
        cells_b = (wr + r0) * n_cols + (wc + c0)
        for line in _lines(dem, a, b, smoothing_cells=smoothing_cells, min_vertices=min_vertices,
                           offset=(r0, c0)):
            out.append(DivideSegment(i, j, line, cells_a.astype(np.int64), cells_b.astype(np.int64)))
    return out
