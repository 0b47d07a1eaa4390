"""Sample points along a divide and the metrics read on each side of each point."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy import ndimage

from divides.assess import _assess_kernels as _k
from divides.errors import InternalError
from divides.io.dem import Dem
from divides.terrain.divide_lines import Divide
from divides.terrain.routing import FlowGraph

__all__ = ["MIN_FACING", "DividePoints", "UpstreamMean", "NearDivideFields", "near_divide_fields", "sample_divide",
           "upstream_mean", "gradient_magnitude", "local_relief", "local_metres", "METRICS"]

#: Points whose two sides do not both drain away from the divide (cosine between the normal
#: and the way to each side's reference channel below this) are left out of the contrasts:
#: near-divide metrics compare channels heading at the divide from opposite sides (Forte &
#: Whipple 2018), not channels running alongside it, as on the lower reaches of a divide
#: between two neighbouring basins that drain the same way.
MIN_FACING = 0.5

#: Metric name -> (unit, which side the divide moves toward).
#: Willett et al. (2014) for χ; Forte & Whipple (2018) for the near-divide metrics;
#: Scherler & Schwanghart (2020) for hillslope relief.
METRICS = {
    "chi": ("m", "higher"),
    "channel_elevation": ("m", "higher"),
    "hillslope_gradient": ("m/m", "lower"),
    "local_relief": ("m", "lower"),
    "hillslope_relief": ("m", "lower"),
}


#: Rows per block of the grid-wide fields: their float64 temporaries stay a few MB per block
#: instead of several grids (the result is the same as on the whole grid: each block carries
#: the halo rows its stencil needs).
_BLOCK_ROWS = 512


def _row_blocks(rows: int, halo: int):
    """(start, stop) of each block of rows and the slice of it that is kept after a ``halo``-row read."""
    for r0 in range(0, rows, _BLOCK_ROWS):
        r1 = min(rows, r0 + _BLOCK_ROWS)
        lo, hi = max(0, r0 - halo), min(rows, r1 + halo)
        yield lo, hi, slice(r0, r1), slice(r0 - lo, r0 - lo + (r1 - r0))


def gradient_magnitude(flow: FlowGraph) -> np.ndarray:
    """Topographic gradient (m/m) of the raw DEM by central differences (NaN at nodata)."""
    dem = flow.dem
    out = np.empty(dem.shape, dtype=np.float64)
    for lo, hi, keep, inner in _row_blocks(dem.shape[0], 1):  # a block of a grid of >= 2 rows has >= 2
        z = np.where(dem.valid[lo:hi], dem.elevation[lo:hi], np.nan).astype(np.float64)
        gy, gx = np.gradient(z)
        out[keep] = np.hypot(gx / dem.dx[lo:hi, None], gy / dem.dy[lo:hi, None])[inner]
    return out


def local_relief(flow: FlowGraph, radius_m: float) -> np.ndarray:
    """Maximum minus minimum elevation in a square window of half-width ``radius_m`` (m)."""
    dem = flow.dem
    k = max(1, int(round(radius_m / float(np.median(dem.dy)))))
    kx = max(1, int(round(radius_m / float(np.median(dem.dx)))))
    out = np.empty(dem.shape, dtype=np.float64)
    for lo, hi, keep, inner in _row_blocks(dem.shape[0], k):
        z = dem.elevation[lo:hi].astype(np.float64)
        valid = dem.valid[lo:hi]
        hi_z = ndimage.maximum_filter(np.where(valid, z, -np.inf), size=(2 * k + 1, 2 * kx + 1), mode="nearest")
        lo_z = ndimage.minimum_filter(np.where(valid, z, np.inf), size=(2 * k + 1, 2 * kx + 1), mode="nearest")
        relief = hi_z - lo_z
        relief[~valid | ~np.isfinite(relief)] = np.nan
        out[keep] = relief[inner]
    return out


class UpstreamMean:
    """Mean of a field over the cells draining through any cell, answered in O(1) per query.

    Each cell's upstream area is a contiguous run of the depth-first order, so
    one prefix sum over the order (built once, O(n)) serves every query.

    With ``min_area_m2`` only the queries at cells draining at least that area
    are served, and only the prefix sums at the two ends of their runs are
    kept: a few per cent of the grid instead of a float64 grid per field. The
    sums are taken in the same sequence either way, so the means are the same
    to the bit.
    """

    #: Positions of the order summed per block when only some prefix sums are kept.
    _BLOCK = 1 << 20

    def __init__(self, flow: FlowGraph, field_: np.ndarray, *, min_area_m2: float | None = None,
                 keep: np.ndarray | None = None) -> None:
        flat = np.asarray(field_, dtype=np.float64).ravel()
        order = flow.order
        n = order.size
        self._flow = flow
        self._min_area = min_area_m2
        if min_area_m2 is not None and keep is None:
            keep = run_ends(flow, min_area_m2)
        self._keep = keep
        if keep is None:
            values = flat[order]
            good = np.isfinite(values)
            values[~good] = 0.0
            self._sum = np.empty(n + 1, dtype=np.float64)  # prefix sums written in place
            self._sum[0] = 0.0
            np.cumsum(values, out=self._sum[1:])
            count = None if good.all() else np.concatenate([[0], np.cumsum(good)])
        else:
            self._sum, count = self._kept_sums(flat, order, keep)
        # the counts of finite values are kept only when some value is not finite
        # (otherwise the count of a run is its length)
        self._count = None if count is None else count.astype(np.int32 if n < 2**31 else np.int64)

    @classmethod
    def _kept_sums(cls, flat: np.ndarray, order: np.ndarray, keep: np.ndarray):
        """Prefix sums (and counts of finite values, or None) at the order positions ``keep``, block by block."""
        sums_kept = np.empty(keep.size, dtype=np.float64)
        count = np.empty(keep.size, dtype=np.int64)
        carry, carry_n, all_finite = 0.0, 0, True
        for j0 in range(0, max(order.size, 1), cls._BLOCK):
            values = flat[order[j0: j0 + cls._BLOCK]]
            good = np.isfinite(values)
            if not good.all():
                all_finite = False
                values[~good] = 0.0
            # sequential sums from the carried total: the same additions as one cumsum over the order
            sums = np.cumsum(np.concatenate([[carry], values]))
            counts = carry_n + np.concatenate([[0], np.cumsum(good)])
            lo, hi = np.searchsorted(keep, [j0, j0 + values.size + 1])
            sums_kept[lo:hi] = sums[keep[lo:hi] - j0]
            count[lo:hi] = counts[keep[lo:hi] - j0]
            carry, carry_n = sums[-1], counts[-1]
        return sums_kept, None if all_finite else count

    def _at(self, positions: np.ndarray) -> np.ndarray:
        """Index into the kept prefix sums of order positions."""
        return positions if self._keep is None else np.searchsorted(self._keep, positions)

    def __call__(self, cells: np.ndarray) -> np.ndarray:
        """Means upstream of ``cells`` (flat indices; -1 gives NaN)."""
        cells = np.asarray(cells, dtype=np.int64)
        out = np.full(cells.size, np.nan)
        ok = cells >= 0
        if self._min_area is not None and np.any(self._flow.area.ravel()[cells[ok]] < self._min_area):
            # a caller's mistake, never a user's: not a ValueError, which sampling reads as "too short"
            raise InternalError("upstream means were kept only for cells draining at least the minimum area")
        p = self._flow.order_position[cells[ok]].astype(np.int64)
        c = self._flow.upstream_count[cells[ok]].astype(np.int64)
        lo, hi = self._at(p), self._at(p + c)
        n = c if self._count is None else self._count[hi] - self._count[lo]
        with np.errstate(invalid="ignore", divide="ignore"):
            out[ok] = np.where(n > 0, (self._sum[hi] - self._sum[lo]) / n, np.nan)
        return out


def run_ends(flow: FlowGraph, min_area_m2: float) -> np.ndarray:
    """Sorted order positions where the upstream runs of the cells draining at least ``min_area_m2`` start and end.

    The positions and counts come from :meth:`FlowGraph.runs_of`, which does not
    keep them, so a caller computing grid-sized fields next does not hold both at once.
    """
    p, c = flow.runs_of(np.flatnonzero(flow.area.ravel() >= min_area_m2))
    p = p.astype(np.int64)
    return np.unique(np.concatenate([p, p + c]))


def upstream_mean(flow: FlowGraph, field_: np.ndarray, cells: np.ndarray) -> np.ndarray:
    """Mean of a field over the cells draining through each of ``cells`` (NaN values skipped)."""
    return UpstreamMean(flow, field_)(cells)


@dataclass(frozen=True, eq=False)
class NearDivideFields:
    """Grid-wide inputs of the near-divide metrics, built once per DEM and reused."""

    elevation: np.ndarray
    gradient: UpstreamMean
    relief: UpstreamMean


def near_divide_fields(flow: FlowGraph, relief_radius_m: float, *,
                       reference_area_m2: float | None = None) -> NearDivideFields:
    """Elevation, and upstream means of gradient and local relief, for :func:`sample_divide`.

    With ``reference_area_m2`` the means serve only cells draining at least that
    area (the reference cells :func:`sample_divide` reads them at), in a few
    per cent of the memory (see :class:`UpstreamMean`).
    """
    # the elevations are the DEM's own (read into float64 per point, exactly); each field is
    # freed once its prefix sums are built, so only one grid-sized temporary exists at a time
    keep = None if reference_area_m2 is None else run_ends(flow, reference_area_m2)
    gradient = UpstreamMean(flow, gradient_magnitude(flow), min_area_m2=reference_area_m2, keep=keep)
    relief = UpstreamMean(flow, local_relief(flow, relief_radius_m), min_area_m2=reference_area_m2, keep=keep)
    return NearDivideFields(elevation=flow.dem.elevation.ravel(), gradient=gradient, relief=relief)


@dataclass(frozen=True, eq=False)
class DividePoints:
    """Points along a divide with the metrics of both sides.

    Attributes
    ----------
    x, y : ndarray
        Point coordinates (DEM CRS).
    east_m, north_m : ndarray
        The points' local positions in metres (east, and north from the grid's first row), from the DEM's cell
        sizes: distances between points are measured in them (the DEM error's correlation), whatever the CRS's
        unit (degrees on a geographic DEM, feet on some projected ones).
    line, distance_m : ndarray
        Divide line of each point and distance along it (m).
    elevation_m : ndarray
        Divide elevation at the point.
    cell_a, cell_b : ndarray of int
        Nearest divide cell on each side.
    head_a, head_b : ndarray of int
        First channel cell on each side's flow path (-1 if none).
    ref_a, ref_b : ndarray of int
        First cell reaching the reference area on each side's flow path (-1 if none).
    values : dict
        Metric name -> (values on side a, values on side b), one per point (NaN when unavailable).
    normal : ndarray, shape (N, 2)
        Unit normal (dx, dy in metres, east and north) pointing from side a into side b.
    facing : ndarray
        How squarely both sides drain away from the divide at the point: the smaller of
        the cosines between the normal and the directions from the point to each side's
        reference cell (1 = straight away on both sides; 0 or less = along or across the
        divide). See :data:`MIN_FACING`.
    """

    x: np.ndarray
    y: np.ndarray
    line: np.ndarray
    distance_m: np.ndarray
    elevation_m: np.ndarray
    cell_a: np.ndarray
    cell_b: np.ndarray
    head_a: np.ndarray
    head_b: np.ndarray
    ref_a: np.ndarray
    ref_b: np.ndarray
    normal: np.ndarray
    facing: np.ndarray
    east_m: np.ndarray
    north_m: np.ndarray
    values: dict = field(default_factory=dict)

    @property
    def size(self) -> int:
        """Number of points."""
        return int(self.x.size)


def sample_divide(
    flow: FlowGraph,
    divide: Divide,
    *,
    spacing_m: float,
    channel_area_m2: float,
    reference_area_m2: float,
    chi_grid: np.ndarray,
    relief_radius_m: float,
    fields: NearDivideFields | None = None,
) -> DividePoints:
    """Sample a divide every ``spacing_m`` and read each metric on both sides.

    On each side the flow path from the nearest divide cell is followed down
    to the first channel cell (χ, and the hillslope relief: divide elevation
    minus that cell's elevation; Scherler & Schwanghart 2020) and to the first
    cell reaching the reference area (its elevation, and the mean gradient and
    local relief of everything upstream of it; Forte & Whipple 2018).

    Parameters
    ----------
    flow : FlowGraph
    divide : Divide
    spacing_m : float
        Distance between points along each line (m).
    channel_area_m2, reference_area_m2 : float
        Channel threshold and the area at which near-divide metrics are read.
    chi_grid : ndarray
        χ on the DEM grid (NaN off the counted channels).
    relief_radius_m : float
        Half-width of the local-relief window.
    fields : NearDivideFields, optional
        Precomputed grid inputs (see :func:`near_divide_fields`), when many
        divides of one DEM are sampled.
    """
    dem = flow.dem
    parts = {k: [] for k in ("row", "col", "line", "dist", "z", "ca", "cb", "nx", "ny")}
    for li, line in enumerate(divide.lines):
        if line.distance_m.size < 2 or line.length_m <= 0:
            continue
        d = np.arange(0.5 * min(spacing_m, line.length_m), line.length_m, spacing_m)
        if d.size == 0:
            continue
        row = np.interp(d, line.distance_m, line.row)
        col = np.interp(d, line.distance_m, line.col)
        # direction of the line, in metres east/north; b lies to the right of the walking direction
        if d.size >= 2:
            drow, dcol = np.gradient(row), np.gradient(col)
        else:  # one sample on a short line (e.g. between voids): the line's own direction
            drow = np.full(1, float(line.row[-1] - line.row[0]))
            dcol = np.full(1, float(line.col[-1] - line.col[0]))
        rows_i = np.clip(np.round(row).astype(int), 0, dem.shape[0] - 1)
        east = dcol * dem.dx[rows_i]
        north = -drow * dem.dy[rows_i]
        norm = np.hypot(east, north)
        norm[norm == 0] = 1.0
        ca, cb = divide.nearest_cells(row, col, dem)
        parts["row"].append(row)
        parts["col"].append(col)
        parts["line"].append(np.full(d.size, li))
        parts["dist"].append(d)
        parts["z"].append(np.interp(d, line.distance_m, line.elevation_m))
        parts["ca"].append(ca)
        parts["cb"].append(cb)
        parts["nx"].append(north / norm)  # right-hand normal of (east, north) is (north, -east)
        parts["ny"].append(-east / norm)
    if not parts["row"]:
        raise ValueError("the divide has no line long enough to sample")
    cat = {k: np.concatenate(v) for k, v in parts.items()}
    x, y = dem.xy(cat["row"], cat["col"])
    area = flow.area.ravel()
    rec = flow.receivers
    heads, refs = {}, {}
    for s, cells in (("a", cat["ca"]), ("b", cat["cb"])):
        cells = cells.astype(np.int64)
        heads[s] = _k.walk_to_area(cells, rec, area, float(channel_area_m2))
        refs[s] = _k.walk_to_area(cells, rec, area, float(reference_area_m2))
    if fields is None:
        fields = near_divide_fields(flow, relief_radius_m)
    z = fields.elevation
    chi_flat = chi_grid.ravel()
    values = {}

    def at(arr, cells):
        out = np.full(cells.size, np.nan)
        ok = cells >= 0
        out[ok] = arr[cells[ok]]
        return out

    values["chi"] = (at(chi_flat, heads["a"]), at(chi_flat, heads["b"]))
    values["channel_elevation"] = (at(z, refs["a"]), at(z, refs["b"]))
    values["hillslope_gradient"] = (fields.gradient(refs["a"]), fields.gradient(refs["b"]))
    values["local_relief"] = (fields.relief(refs["a"]), fields.relief(refs["b"]))
    values["hillslope_relief"] = (cat["z"] - at(z, heads["a"]), cat["z"] - at(z, heads["b"]))
    normal = np.column_stack([cat["nx"], cat["ny"]])
    facing = np.full(cat["row"].size, -1.0)
    cosines = []
    for sign, refs_s in ((-1.0, refs["a"]), (1.0, refs["b"])):
        ok = refs_s >= 0
        rr, cc = np.divmod(np.where(ok, refs_s, 0), dem.shape[1])
        rows_i = np.clip(np.round(cat["row"]).astype(int), 0, dem.shape[0] - 1)
        east = (cc - cat["col"]) * dem.dx[rows_i]
        north = -(rr - cat["row"]) * dem.dy[rows_i]
        length = np.hypot(east, north)
        with np.errstate(invalid="ignore", divide="ignore"):
            cos = sign * (east * normal[:, 0] + north * normal[:, 1]) / length
        cosines.append(np.where(ok & (length > 0), cos, -1.0))
    facing = np.minimum(cosines[0], cosines[1])
    east_m, north_m = local_metres(dem, cat["row"], cat["col"])
    return DividePoints(
        x=np.asarray(x), y=np.asarray(y), line=cat["line"], distance_m=cat["dist"], elevation_m=cat["z"],
        cell_a=cat["ca"], cell_b=cat["cb"], head_a=heads["a"], head_b=heads["b"], ref_a=refs["a"],
        ref_b=refs["b"], normal=normal, facing=facing, east_m=east_m, north_m=north_m, values=values,
    )


def local_metres(dem: Dem, row: np.ndarray, col: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Positions (grid rows and columns, fractional) as metres east and north of the first row's first cell.

    East is the column times the cell width of the point's row; north sums the cell heights of the rows above
    (centre to centre), so on a geographic DEM, whose cells narrow toward the poles, distances between nearby points
    are those on the ground to well under 1 % over a few degrees of latitude.

    Examples
    --------
    >>> import numpy as np
    >>> from divides.io.dem import Dem
    >>> dem = Dem.from_array(np.zeros((4, 5)), cell_size=(30.0, 20.0))
    >>> [v.tolist() for v in local_metres(dem, np.array([0.0, 2.5]), np.array([1.0, 4.0]))]
    [[30.0, 120.0], [-0.0, -50.0]]
    """
    row, col = np.asarray(row, dtype=np.float64), np.asarray(col, dtype=np.float64)
    dy = np.asarray(dem.dy, dtype=np.float64)
    centres = np.concatenate([[0.0], np.cumsum(0.5 * (dy[:-1] + dy[1:]))])  # row centres, m south of row 0's
    rows_i = np.clip(np.round(row).astype(np.int64), 0, dem.shape[0] - 1)
    return col * np.asarray(dem.dx, dtype=np.float64)[rows_i], -np.interp(row, np.arange(dy.size), centres)
