"""The channel network: cells above a drainage-area threshold, heads, junctions, links, order."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from functools import cached_property

import numpy as np

from divides.errors import ParameterError
from divides.terrain import _channel_kernels as _k
from divides.terrain.routing import FlowGraph

__all__ = [
    "Channels",
    "ThresholdChoice",
    "FALLBACK_THRESHOLD_M2",
    "bounded_channel_threshold",
    "extract_channels",
    "slope_area_break",
    "suggest_channel_threshold",
]

#: Channel threshold used when slope–area data show no hillslope–channel break:
#: 1 km², a usual critical area for 10–90 m DEMs (common practice).
FALLBACK_THRESHOLD_M2 = 1.0e6


@dataclass(frozen=True)
class ThresholdChoice:
    """A channel-initiation threshold and why it was chosen.

    Attributes
    ----------
    value_m2 : float
        Drainage area (m²) at and above which a cell is a channel.
    source : str
        ``"user"``, ``"slope-area break"`` or ``"fallback"``.
    reason : str
        One sentence for reports.
    """

    value_m2: float
    source: str
    reason: str


def slope_area_break(
    area: np.ndarray,
    slope: np.ndarray,
    *,
    bins_per_decade: int = 10,
    min_per_bin: int = 20,
    min_bins_each_side: int = 4,
) -> float | None:
    """Drainage area of the break between hillslope and channel slope–area scaling.

    Slopes are binned by log area and the bin medians fitted by a continuous
    two-segment line in log–log space, the hinge placed where the squared
    misfit is least. On hillslopes gradient rises or stays level with area;
    on channels it falls as a power of area (Montgomery & Dietrich 1988;
    Tarboton et al. 1991). A break is accepted only if the downstream
    segment falls (exponent < 0), the upstream one is steeper by at least
    0.25 in exponent, and the hinge explains at least half of the misfit of a
    single straight line.

    Parameters
    ----------
    area, slope : ndarray
        Drainage area (m²) and gradient (m/m) of cells; non-positive slopes are ignored.
    bins_per_decade, min_per_bin, min_bins_each_side : int
        Binning and the least support required.

    Returns
    -------
    float or None
        The break area in m², or None when the data show no such break.
    """
    a = np.asarray(area, dtype=np.float64).ravel()
    s = np.asarray(slope, dtype=np.float64).ravel()
    keep = (a > 0) & (s > 0) & np.isfinite(a) & np.isfinite(s)
    if np.count_nonzero(keep) < min_per_bin * 2 * min_bins_each_side:
        return None
    la, ls = np.log10(a[keep]), np.log10(s[keep])
    edges = np.arange(np.floor(la.min() * bins_per_decade), np.ceil(la.max() * bins_per_decade) + 1) / bins_per_decade
    which = np.digitize(la, edges)
    # cells grouped by bin in one stable sort (a radix sort for these small integers), not one
    # full-grid comparison per bin; each bin's median is of the same values either way
    small = which.astype(np.int16) if edges.size < 2**15 - 1 else which
    by_bin = np.argsort(small, kind="stable")
    _, first, count = np.unique(small[by_bin], return_index=True, return_counts=True)
    la, ls = la[by_bin], ls[by_bin]
    x, y = [], []
    for lo, k in zip(first, count):
        if k >= min_per_bin:
            x.append(np.median(la[lo: lo + k]))
            y.append(np.median(ls[lo: lo + k]))
    x, y = np.asarray(x), np.asarray(y)
    if x.size < 2 * min_bins_each_side:
        return None
    line = np.polyfit(x, y, 1)
    sse_line = float(np.sum((np.polyval(line, x) - y) ** 2))
    best = None
    for j in range(min_bins_each_side, x.size - min_bins_each_side + 1):
        hinge = x[j]
        design = np.column_stack([np.ones_like(x), np.minimum(x - hinge, 0.0), np.maximum(x - hinge, 0.0)])
        coef, *_ = np.linalg.lstsq(design, y, rcond=None)
        sse = float(np.sum((design @ coef - y) ** 2))
        if best is None or sse < best[0]:
            best = (sse, hinge, coef[1], coef[2])
    sse, hinge, up, down = best
    if down < 0 and up - down >= 0.25 and sse <= 0.5 * sse_line:
        return float(10.0**hinge)
    return None


def _receiver_slope(flow: FlowGraph) -> np.ndarray:
    """Gradient from each cell to its receiver on the conditioned surface (flat array; NaN at outlets)."""
    z = flow.conditioned.surface.ravel()
    d = flow.distance
    with np.errstate(invalid="ignore", divide="ignore"):
        s = (z - z[flow.receivers]) / d
    s[d == 0] = np.nan
    return s


def suggest_channel_threshold(flow: FlowGraph) -> ThresholdChoice:
    """Channel threshold from the DEM's own slope–area data, with a documented fallback.

    Uses :func:`slope_area_break`. Without a break, the threshold is
    :data:`FALLBACK_THRESHOLD_M2`, kept between 50 cells and 1 % of the valid
    area so that small or coarse DEMs still have channels.

    Returns
    -------
    ThresholdChoice
    """
    area = flow.area.ravel()
    slope = _receiver_slope(flow)
    found = slope_area_break(area, slope)
    cell = float(np.median(flow.dem.cell_area))
    if found is not None and found >= 10 * cell:
        return ThresholdChoice(found, "slope-area break", f"break in slope–area scaling at {found:.3g} m²")
    total = flow.dem.valid_area_m2
    value = float(np.clip(FALLBACK_THRESHOLD_M2, 50 * cell, max(50 * cell, 0.01 * total)))
    value = min(value, max(cell, 0.05 * total))  # a tiny DEM still gets channels
    return ThresholdChoice(
        value,
        "fallback",
        f"no clear hillslope–channel break in slope–area data; using {value:.3g} m² "
        f"(1 km² bounded to 50 cells … 1 % of the DEM, and to at most 5 % of a small DEM)",
    )


def bounded_channel_threshold(flow: FlowGraph, *, max_share: float, min_cells: float | None = None,
                              choice: ThresholdChoice | None = None) -> ThresholdChoice:
    """:func:`suggest_channel_threshold`'s area, raised to ``min_cells`` cells and then capped at ``max_share`` of the
    DEM's valid area.

    A slope–area hinge can lie far down the channel scaling (a bend left by a knickpoint or a contrast) and the
    fallback can take 1 % of a small DEM; a caller that needs many basins (screening, whose minimum basin area is
    a multiple of the channel area) bounds it. The cap wins over the floor; the reason says which bound held.

    Parameters
    ----------
    flow : FlowGraph
    max_share : float
        Largest share of the valid area, in (0, 1].
    min_cells : float, optional
        Smallest channel area in cells (the median cell area).
    choice : ThresholdChoice, optional
        :func:`suggest_channel_threshold`'s result when the caller has it (it reads the whole grid).

    Returns
    -------
    ThresholdChoice
        ``source`` as :func:`suggest_channel_threshold`'s; ``reason`` names the bound when one held.

    Examples
    --------
    >>> import numpy as np
    >>> from divides import Dem, route
    >>> plane = route(Dem.from_array(np.add.outer(np.arange(40.0), np.zeros(40)), cell_size=30.0))
    >>> round(bounded_channel_threshold(plane, max_share=0.002).value_m2)  # 0.2 % of 40 x 40 cells of 900 m²
    2880
    """
    choice = suggest_channel_threshold(flow) if choice is None else choice
    value, reason = choice.value_m2, choice.reason
    cell = float(np.median(flow.dem.cell_area))
    if min_cells is not None and value < min_cells * cell:
        value, reason = min_cells * cell, f"{reason}; raised to {min_cells:g} cells ({min_cells * cell:.3g} m²)"
    cap = max_share * flow.dem.valid_area_m2
    if value > cap:
        value, reason = cap, f"{reason}; capped at {100 * max_share:g} % of the DEM's valid area ({cap:.3g} m²)"
    return ThresholdChoice(value, choice.source, reason)


@dataclass(frozen=True, eq=False)
class Channels:
    """A channel network: every cell whose drainage area reaches the threshold.

    Per-cell arrays are compressed to channel cells, receivers first
    (positions ``0 … n-1``); ``cells`` maps them to flat DEM indices.

    Attributes
    ----------
    flow : FlowGraph
    threshold : ThresholdChoice
    cells : ndarray of int64
        Flat indices of the channel cells, each after its downstream cell.
    down : ndarray of int64
        Position of each cell's downstream channel cell; -1 at channel outlets.
    n_donors : ndarray of uint8
        Channel cells draining into each cell (0 = head, ≥ 2 = junction).
    link : ndarray of int64
        Link id of each cell (a link runs from a head or junction down to the
        cell above the next junction or to an outlet).
    strahler : ndarray of uint8
        Strahler order of each cell.
    """

    flow: FlowGraph
    threshold: ThresholdChoice
    cells: np.ndarray
    down: np.ndarray
    n_donors: np.ndarray
    link: np.ndarray
    strahler: np.ndarray

    @property
    def size(self) -> int:
        """Number of channel cells."""
        return int(self.cells.size)

    @property
    def heads(self) -> np.ndarray:
        """Positions of channel heads."""
        return np.flatnonzero(self.n_donors == 0)

    @property
    def junctions(self) -> np.ndarray:
        """Positions of confluences (two or more channel donors)."""
        return np.flatnonzero(self.n_donors >= 2)

    @property
    def outlets(self) -> np.ndarray:
        """Positions where channels leave the grid."""
        return np.flatnonzero(self.down < 0)

    @cached_property
    def area(self) -> np.ndarray:
        """Drainage area (m²) per channel cell."""
        return self.flow.area.ravel()[self.cells]

    @cached_property
    def elevation(self) -> np.ndarray:
        """Conditioned elevation (m) per channel cell (never rises downstream)."""
        return self.flow.conditioned.surface.ravel()[self.cells].astype(np.float64)

    @cached_property
    def step(self) -> np.ndarray:
        """Distance (m) from each channel cell to its downstream cell (0 at outlets)."""
        return self.flow.distance_at(self.cells)

    @cached_property
    def distance_upstream(self) -> np.ndarray:
        """Distance (m) along the channel from its outlet to each cell."""
        out = np.zeros(self.size)
        down, step = self.down, self.step
        for k in range(self.size):  # receivers first, so out[down[k]] is ready
            if down[k] >= 0:
                out[k] = out[down[k]] + step[k]
        return out

    def mask(self) -> np.ndarray:
        """Channel cells as a 2-D boolean grid."""
        m = np.zeros(self.flow.receivers.size, dtype=bool)
        m[self.cells] = True
        return m.reshape(self.flow.shape)

    def rowcol(self, positions: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
        """Row and column of channel cells (all, or the given positions)."""
        idx = self.cells if positions is None else self.cells[positions]
        return np.divmod(idx, self.flow.shape[1])

    @cached_property
    def links(self) -> dict[str, np.ndarray]:
        """One row per link: ``start``, ``end`` (positions), ``order``, ``length_m``, ``drop_m``, ``n_cells``.

        ``start`` is the upstream cell (head or junction); ``end`` the last cell
        before the next junction, or the outlet. Length and drop run from the
        start to the cell below the end (so links chain without gaps).
        """
        n_links = int(self.link.max()) + 1 if self.size else 0
        start = np.flatnonzero(self.n_donors != 1)
        start = start[np.argsort(self.link[start])]
        below = self.down
        is_end = (below < 0) | ((below >= 0) & (self.n_donors[np.maximum(below, 0)] >= 2))
        end = np.flatnonzero(is_end)
        end = end[np.argsort(self.link[end])]
        after = np.where(below[end] >= 0, below[end], end)
        dist = self.distance_upstream
        z = self.elevation
        return {
            "start": start,
            "end": end,
            "order": self.strahler[start],
            "length_m": dist[start] - dist[after],
            "drop_m": z[start] - z[after],
            "n_cells": np.bincount(self.link, minlength=n_links),
        }

    def summary(self) -> dict:
        """JSON-ready figures for reports."""
        return {
            "threshold_m2": self.threshold.value_m2,
            "threshold_source": self.threshold.source,
            "threshold_reason": self.threshold.reason,
            "n_cells": self.size,
            "n_heads": int(self.heads.size),
            "n_junctions": int(self.junctions.size),
            "n_links": int(self.link.max()) + 1 if self.size else 0,
            "max_strahler_order": int(self.strahler.max()) if self.size else 0,
        }


def extract_channels(flow: FlowGraph, *, threshold_m2: float | None = None,
                     default: Callable[[FlowGraph], ThresholdChoice] = suggest_channel_threshold) -> Channels:
    """Channel network of every cell draining at least ``threshold_m2``.

    Parameters
    ----------
    flow : FlowGraph
    threshold_m2 : float, optional
        Channel-initiation drainage area (m²). By default it is read from the
        data by ``default``.
    default : callable
        The threshold's choice where none is given (:func:`suggest_channel_threshold`, or e.g. a bounded one).

    Returns
    -------
    Channels

    Examples
    --------
    >>> import numpy as np
    >>> from divides import Dem, route
    >>> z = np.add.outer(np.arange(6.0), np.abs(np.arange(7.0) - 3))  # a valley draining north
    >>> net = extract_channels(route(Dem.from_array(z, cell_size=10.0)), threshold_m2=500.0)
    >>> int(net.size), int(net.heads.size)  # the three valley cells draining 900 m² or more
    (3, 1)
    """
    if threshold_m2 is None:
        choice = default(flow)
    else:
        if not (np.isfinite(threshold_m2) and threshold_m2 > 0):
            raise ParameterError(f"channel threshold must be a positive area in m²; got {threshold_m2!r}")
        choice = ThresholdChoice(float(threshold_m2), "user", f"given: {float(threshold_m2):.3g} m²")
    is_channel = flow.area.ravel() >= choice.value_m2
    n = int(np.count_nonzero(is_channel))
    cells, down = _k.compress_network(flow.order, flow.receivers, is_channel, n)
    n_donors, link, strahler, _ = _k.link_and_order(down)
    return Channels(flow, choice, cells, down, n_donors, link, strahler)
