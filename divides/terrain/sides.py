"""The two sides of a divide: parsing SPECs, resolving them to basins, the common base level.

This lives in the terrain room because river profiles (one room down from the assessment)
are measured per side and from the common base level.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field

import numpy as np

from divides.errors import ParameterError, SideError
from divides.terrain import _routing_kernels as _rk
from divides.terrain.basins import edge_outlets
from divides.terrain.channels import Channels
from divides.terrain.routing import FlowGraph

__all__ = [
    "EDGES",
    "SideSpec",
    "Side",
    "Sides",
    "BaseLevel",
    "parse_side",
    "resolve_side",
    "resolve_sides",
    "common_base_level",
    "default_snap_radius_m",
    "network_outlets",
]

EDGES = ("north", "south", "east", "west")

_NUMBER = r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?"
_POINT = re.compile(rf"^\s*({_NUMBER})\s*,\s*({_NUMBER})\s*$")


@dataclass(frozen=True)
class SideSpec:
    """A parsed side specification: a DEM edge, or points (in the DEM CRS or lon/lat)."""

    text: str
    edge: str | None = None
    points: tuple[tuple[float, float], ...] = ()
    lonlat: bool = False


def parse_side(text: str, *, lonlat: bool = False) -> SideSpec:
    """Parse a side SPEC.

    Parameters
    ----------
    text : str
        ``north``, ``south``, ``east`` or ``west`` (all cells draining off that
        edge), or one or more points ``x,y;x,y`` (basins upstream of each point).
    lonlat : bool
        Points are longitude,latitude (WGS 84) instead of DEM CRS coordinates.

    Returns
    -------
    SideSpec

    Examples
    --------
    >>> parse_side("West").edge
    'west'
    >>> parse_side("500100.5,4200300; 501000,4199000").points
    ((500100.5, 4200300.0), (501000.0, 4199000.0))
    """
    if not isinstance(text, str) or not text.strip():
        raise SideError("a side must be an edge (north, south, east, west) or points 'x,y;x,y'; got an empty value")
    word = text.strip().lower()
    if word in EDGES:
        return SideSpec(text=word, edge=word)
    points = []
    for part in filter(None, (p.strip() for p in text.split(";"))):
        m = _POINT.match(part)
        if m is None:
            raise SideError(
                f"side {text!r}: {part!r} is not a point 'x,y'; a side is an edge "
                "(north, south, east, west) or points 'x,y;x,y'"
            )
        x, y = float(m.group(1)), float(m.group(2))
        if lonlat and not (-180 <= x <= 360 and -90 <= y <= 90):
            raise SideError(f"side {text!r}: {part!r} is not a longitude,latitude pair (lon in -180…360, lat in -90…90)")
        points.append((x, y))
    if not points:
        raise SideError(f"side {text!r} names no edge and no point")
    return SideSpec(text=text.strip(), points=tuple(points), lonlat=lonlat)


@dataclass(frozen=True, eq=False)
class Side:
    """One side of a divide: the union of the basins its SPEC selects.

    Attributes
    ----------
    spec : SideSpec
    mask : ndarray of bool
        Cells of the side.
    seeds : ndarray of int64
        Flat indices of the cells whose upstream areas make the side (edge
        outlets, or snapped points).
    snapped : list of dict
        For point SPECs: ``x``, ``y`` (given, DEM CRS), ``x_snapped``, ``y_snapped``,
        ``distance_m`` and ``area_m2`` of the snapped cell.
    area_m2 : float
    """

    spec: SideSpec
    mask: np.ndarray
    seeds: np.ndarray
    snapped: list[dict] = field(default_factory=list)
    area_m2: float = 0.0


def default_snap_radius_m(flow: FlowGraph) -> float:
    """Default snapping radius: five cells (common practice for 10–90 m DEMs)."""
    return 5.0 * float(np.max(flow.dem.cell_size_m))


def _upstream_mask(flow: FlowGraph, seeds: np.ndarray) -> np.ndarray:
    """Cells draining through any seed: each seed's upstream area is a contiguous run of the order."""
    count = flow.upstream_count
    position = flow.order_position
    mask = np.zeros(flow.receivers.size, dtype=bool)
    for s in np.unique(seeds):
        p = position[s]
        mask[flow.order[p: p + int(count[s])]] = True
    return mask.reshape(flow.shape)


def resolve_side(flow: FlowGraph, spec: SideSpec, *, snap_radius_m: float | None = None) -> Side:
    """Turn a SPEC into the cells of a side.

    Each point is snapped to the cell of largest drainage area within
    ``snap_radius_m`` (default :func:`default_snap_radius_m`); the side is the
    union of the basins upstream of the snapped cells. An edge side is every
    cell draining off that edge.

    Raises
    ------
    SideError
        A point outside the DEM or on nodata, or a side with no cells.
    """
    dem = flow.dem
    rows, cols = dem.shape
    if spec.edge is not None:
        if spec.edge in flow.conditioned.closed_edges:
            raise SideError(f"side {spec.text!r} is a closed edge: nothing drains off it; give an open edge "
                            "or points for this side")
        seeds = edge_outlets(flow, spec.edge)
        mask = _upstream_mask(flow, seeds)
        snapped = []
    else:
        radius = default_snap_radius_m(flow) if snap_radius_m is None else float(snap_radius_m)
        if not (np.isfinite(radius) and radius >= 0):
            raise ParameterError(f"snap radius must be a distance >= 0 in metres; got {snap_radius_m!r}")
        xs = np.array([p[0] for p in spec.points])
        ys = np.array([p[1] for p in spec.points])
        if spec.lonlat:
            xs, ys = dem.from_lonlat(xs, ys)
        seeds, snapped = [], []
        area = flow.area
        for x, y, given in zip(xs, ys, spec.points):
            r, c = (int(v) for v in dem.rowcol(x, y))
            label = f"{given[0]:g},{given[1]:g}" + (" (lon,lat)" if spec.lonlat else "")
            if not (0 <= r < rows and 0 <= c < cols):
                left, bottom, right, top = dem.bounds
                raise SideError(
                    f"side {spec.text!r}: point {label} is outside the DEM "
                    f"(x {left:g}…{right:g}, y {bottom:g}…{top:g} in the DEM's CRS"
                    + ("" if spec.lonlat else "; use --lonlat for longitude,latitude") + ")"
                )
            if not dem.valid[r, c]:
                raise SideError(f"side {spec.text!r}: point {label} falls on a nodata cell of the DEM")
            rr = max(1, int(np.ceil(radius / min(dem.dy[r], dem.dx[r]))))
            r0, r1, c0, c1 = max(r - rr, 0), min(r + rr + 1, rows), max(c - rr, 0), min(c + rr + 1, cols)
            wr, wc = np.mgrid[r0:r1, c0:c1]
            dist = np.hypot((wr - r) * dem.dy[r], (wc - c) * dem.dx[r])
            window = np.where((dist <= radius) & dem.valid[r0:r1, c0:c1], area[r0:r1, c0:c1], -1.0)
            k = int(np.argmax(window))
            sr, sc = int(wr.ravel()[k]), int(wc.ravel()[k])
            seeds.append(sr * cols + sc)
            xs_, ys_ = dem.xy(sr, sc)
            snapped.append({
                "x": float(x), "y": float(y), "x_snapped": float(xs_), "y_snapped": float(ys_),
                "distance_m": float(dist.ravel()[k]), "area_m2": float(area[sr, sc]),
            })
        seeds = np.asarray(seeds, dtype=np.int64)
        mask = _upstream_mask(flow, seeds)
    if not mask.any():
        raise SideError(f"side {spec.text!r} selects no cells (no outlet drains off that edge)")
    side_area = float(np.dot(np.count_nonzero(mask, axis=1), dem.cell_area))
    return Side(spec=spec, mask=mask, seeds=np.asarray(seeds, dtype=np.int64), snapped=snapped, area_m2=side_area)


@dataclass(frozen=True, eq=False)
class Sides:
    """Sides a and b of a divide."""

    a: Side
    b: Side


def resolve_sides(
    flow: FlowGraph, spec_a: SideSpec, spec_b: SideSpec, *, snap_radius_m: float | None = None
) -> Sides:
    """Resolve both SPECs and check that they make two distinct, disjoint sides.

    Cells claimed by both sides only through corner outlets (a corner cell
    drains off two edges) are dropped from both; any other overlap is an error.
    """
    if spec_a.text.lower() == spec_b.text.lower() and spec_a.lonlat == spec_b.lonlat:
        raise SideError(f"side a and side b are the same ({spec_a.text!r}); give two different sides")
    a = resolve_side(flow, spec_a, snap_radius_m=snap_radius_m)
    b = resolve_side(flow, spec_b, snap_radius_m=snap_radius_m)
    both = a.mask & b.mask
    if both.any():
        cols = flow.shape[1]
        shared = set(a.seeds.tolist()) & set(b.seeds.tolist())
        corner = {0, cols - 1, (flow.shape[0] - 1) * cols, flow.shape[0] * cols - 1}
        if spec_a.edge and spec_b.edge and shared and shared <= corner:
            drop = _upstream_mask(flow, np.fromiter(shared, dtype=np.int64))
            if not np.any(both & ~drop):
                a = Side(a.spec, a.mask & ~drop, a.seeds[~np.isin(a.seeds, list(shared))], a.snapped,
                         a.area_m2 - _area(flow, a.mask & drop))
                b = Side(b.spec, b.mask & ~drop, b.seeds[~np.isin(b.seeds, list(shared))], b.snapped,
                         b.area_m2 - _area(flow, b.mask & drop))
                both = a.mask & b.mask
        if both.any():
            raise SideError(
                f"sides {spec_a.text!r} and {spec_b.text!r} overlap in {int(np.count_nonzero(both))} cell(s) "
                "(one point lies upstream of the other?); choose points on different basins"
            )
    for side in (a, b):
        if not side.mask.any():
            raise SideError(f"side {side.spec.text!r} has no cells left once shared corner cells are removed")
    return Sides(a=a, b=b)


def _area(flow: FlowGraph, mask: np.ndarray) -> float:
    return float(np.dot(np.count_nonzero(mask, axis=1), flow.dem.cell_area))


@dataclass(frozen=True)
class BaseLevel:
    """The common base level from which every χ of an assessment is integrated.

    χ compares channels only when it is measured from one elevation on every
    network (Willett et al. 2014; Forte & Whipple 2018). Each channel network of
    a side (all channel cells draining through one outlet cell of the side) is
    kept when its outlet stands at or below the base level, and cut where it
    crosses it; networks whose outlet stands above it are left out of χ.

    Attributes
    ----------
    elevation_m : float
    source : str
        ``"user"`` or ``"highest outlet of the networks reaching the divide"``.
    lowest_a_m, lowest_b_m : float
        Lowest channel elevation of each side.
    nodes_a, nodes_b : ndarray of int
        Channel positions (in the Channels arrays) where each side's network
        crosses the base level: the lowest kept node of each kept network.
    kept_a, kept_b : ndarray of bool
        Per channel cell: on that side, on a kept network and at or above the base level.
    start_m : ndarray of float
        Per channel cell: distance (m) along the channel from the crossing of the base
        level (interpolated between a crossing node and the cell below it) up to the
        crossing node; 0 elsewhere. χ at a crossing node is the integral over it.
    networks : dict
        Counts per side: ``"a"``/``"b"`` -> ``{"total", "reaching_divide", "used",
        "outlet_above_base", "below_base"}`` (networks left out because their outlet
        stands above the base level, or because none of their channels rises above it).
    """

    elevation_m: float
    source: str
    lowest_a_m: float
    lowest_b_m: float
    nodes_a: np.ndarray
    nodes_b: np.ndarray
    kept_a: np.ndarray
    kept_b: np.ndarray
    start_m: np.ndarray = field(default_factory=lambda: np.zeros(0))
    networks: dict = field(default_factory=dict)

    def summary(self) -> dict:
        """JSON-ready figures."""
        return {
            "elevation_m": self.elevation_m,
            "source": self.source,
            "lowest_channel_a_m": self.lowest_a_m,
            "lowest_channel_b_m": self.lowest_b_m,
            "channel_cells_above_a": int(self.kept_a.sum()),
            "channel_cells_above_b": int(self.kept_b.sum()),
            "networks": self.networks,
        }


def network_outlets(down: np.ndarray, member: np.ndarray) -> np.ndarray:
    """For each member node of a receivers-first network, its lowest member node downstream (-1 elsewhere).

    A member whose downstream node is missing or not a member is the outlet of
    its network. Pointer doubling keeps it vectorised: O(n log depth).
    """
    m = down.size
    idx = np.arange(m, dtype=np.int64)
    up = np.where((down >= 0) & member[np.maximum(down, 0)] & member, down, idx)
    while True:
        nxt = up[up]
        if np.array_equal(nxt, up):
            break
        up = nxt
    return np.where(member, up, -1)


def _boundary_cells(mask: np.ndarray, other: np.ndarray) -> np.ndarray:
    """Flat indices of cells of ``mask`` with an 8-neighbour in ``other`` (the cells along the divide)."""
    near = np.zeros_like(other)
    rows, cols = other.shape
    for dr in (-1, 0, 1):
        for dc in (-1, 0, 1):
            if dr or dc:
                near[max(dr, 0):rows + min(dr, 0), max(dc, 0):cols + min(dc, 0)] |= \
                    other[max(-dr, 0):rows + min(-dr, 0), max(-dc, 0):cols + min(-dc, 0)]
    return np.flatnonzero(mask & near)


def _networks_reaching(channels: Channels, outlet: np.ndarray, cells: np.ndarray) -> np.ndarray:
    """Outlet positions of the networks that the flow paths from ``cells`` join first."""
    flow = channels.flow
    n = flow.receivers.size
    is_target = np.zeros(n, dtype=bool)
    is_target[channels.cells] = outlet >= 0
    values = np.full(n, np.nan)
    values[channels.cells] = outlet
    out = np.full(n, np.nan)
    _rk.first_downstream_value(flow.order, flow.receivers, is_target, values, out)
    hit = out[cells]
    return np.unique(hit[np.isfinite(hit)].astype(np.int64))


def common_base_level(channels: Channels, sides: Sides, *, elevation_m: float | None = None) -> BaseLevel:
    """The one elevation every χ of the assessment is measured from (Willett et al. 2014; Forte & Whipple 2018).

    By default the highest outlet among the channel networks that reach the
    divide (those that the flow paths from the cells along the divide join), so
    that every one of them reaches it. A user elevation keeps only the networks
    whose outlet stands at or below it; the others are left out of χ and
    counted (:attr:`BaseLevel.networks`). Each kept network is cut where its
    channel crosses the base level: χ = 0 at the crossing, interpolated
    linearly between the last node above and the node below it. Elevations are
    those of the conditioned surface, which never rise downstream.

    Raises
    ------
    SideError
        If a side has no channel cells, or (with a user elevation) no network at
        or below it that rises above it.
    """
    on_a = sides.a.mask.ravel()[channels.cells]
    on_b = sides.b.mask.ravel()[channels.cells]
    for name, on, side in (("a", on_a, sides.a), ("b", on_b, sides.b)):
        if not on.any():
            raise SideError(
                f"side {name} ({side.spec.text!r}) has no channels at the channel threshold of "
                f"{channels.threshold.value_m2:.3g} m²; lower --channel-area or choose a larger basin"
            )
    z = channels.elevation
    down = channels.down
    low_a, low_b = float(z[on_a].min()), float(z[on_b].min())
    outlet = network_outlets(down, on_a | on_b)
    reaching = {}
    for name, own, other in (("a", sides.a.mask, sides.b.mask), ("b", sides.b.mask, sides.a.mask)):
        hits = _networks_reaching(channels, outlet, _boundary_cells(own, other))
        on = on_a if name == "a" else on_b
        hits = hits[on[hits]]
        reaching[name] = hits if hits.size else np.unique(outlet[on])  # no path joins: every network counts
    if elevation_m is None:
        base = float(max(z[reaching["a"]].max(), z[reaching["b"]].max()))
        source = "highest outlet of the networks reaching the divide"
    else:
        if not np.isfinite(elevation_m):
            raise ParameterError(f"base level must be a finite elevation in metres; got {elevation_m!r}")
        base, source = float(elevation_m), "user"
    root_ok = np.zeros(down.size, dtype=bool)
    roots = np.unique(outlet[outlet >= 0])
    root_ok[roots[z[roots] <= base]] = True
    on_kept_network = (outlet >= 0) & root_ok[np.maximum(outlet, 0)]
    above = z >= base
    kept_a, kept_b = on_a & on_kept_network & above, on_b & on_kept_network & above
    networks = {}
    for name, on, kept in (("a", on_a, kept_a), ("b", on_b, kept_b)):
        mine = np.unique(outlet[on])
        used = np.unique(outlet[kept])
        high = mine[z[mine] > base]
        networks[name] = {"total": int(mine.size), "reaching_divide": int(reaching[name].size),
                          "used": int(used.size), "outlet_above_base": int(high.size),
                          "below_base": int(mine.size - used.size - high.size)}
    if elevation_m is not None:
        for name, kept in (("a", kept_a), ("b", kept_b)):
            if not kept.any():
                raise SideError(
                    f"side {name} has no channel network whose outlet stands at or below the base level "
                    f"{base:.1f} m and that rises above it; give a lower --base-level (its lowest channel "
                    f"is at {low_a if name == 'a' else low_b:.1f} m) or leave it to the default"
                )
    kept = kept_a | kept_b
    crossing = kept & ((down < 0) | ~kept[np.maximum(down, 0)])
    start = np.zeros(down.size)
    below = crossing & (down >= 0)
    k = np.flatnonzero(below)
    d = down[k]
    zk, zd = z[k], z[d]
    with np.errstate(invalid="ignore", divide="ignore"):
        share = np.where(zk > zd, (zk - base) / (zk - zd), 0.0)
    start[k] = channels.step[k] * np.clip(share, 0.0, 1.0)
    return BaseLevel(base, source, low_a, low_b, np.flatnonzero(crossing & on_a), np.flatnonzero(crossing & on_b),
                     kept_a, kept_b, start, networks)
