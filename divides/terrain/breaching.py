"""Depression breaching: carve bounded least-cost channels out of pits.

Breaching after Lindsay (2016, Hydrological Processes 30): every depression is
drained, where the limits allow, by lowering a short path of cells from its
bottom to lower ground instead of raising the depression to its spill level.
Depressions that cannot be breached within the limits are left as they are for
the depression filling that the caller runs afterwards.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from divides.errors import ParameterError
from divides.terrain._breaching_kernels import all_finite, breach_kernel, depression_seeds, pit_candidates

__all__ = ["BreachResult", "breach_depressions", "DEFAULT_MAX_LENGTH_CELLS", "DEFAULT_MAX_DEPTH_M"]

#: Default longest breach path, in cells of the grid's median size. Long enough to
#: cut an embankment and reach the valley floor beyond it on 1-30 m grids, short
#: enough that a search over a closed basin stays a few thousand cells (judgement).
DEFAULT_MAX_LENGTH_CELLS: float = 50.0

#: Default largest lowering of any one cell (m): about the height of road and rail
#: embankments and of the deeper noise pits in global DEMs; deeper closed basins
#: are more likely real and are filled instead (judgement).
DEFAULT_MAX_DEPTH_M: float = 10.0


@dataclass(frozen=True, eq=False)
class BreachResult:
    """Outcome of :func:`breach_depressions`.

    Attributes
    ----------
    surface : ndarray
        The breached elevations (new array, same dtype as the input; invalid
        cells copied unchanged). Unresolved depressions are still present.
    n_pits : int
        Depressions found in the input: cells, or connected flats of equal
        elevation, with no lower neighbour and no outlet.
    n_breached : int
        Depressions that drain after breaching (carved, or drained by a channel
        carved for a lower one).
    n_unresolved : int
        Depressions left for filling (no path within the limits).
    carved_cells : int
        Distinct cells that were lowered.
    carved_volume_m3 : float
        Volume removed, sum of lowering times cell area (m³).
    max_length_m, max_depth_m : float
        The limits that were applied.
    """

    surface: np.ndarray
    n_pits: int
    n_breached: int
    n_unresolved: int
    carved_cells: int
    carved_volume_m3: float
    max_length_m: float
    max_depth_m: float


def _limit(value: Any, name: str, default: float) -> float:
    if value is None:
        return float(default)
    try:
        out = float(value)
    except (TypeError, ValueError) as exc:
        raise ParameterError(f"`{name}` must be a number of metres >= 0 (or None); got {value!r}") from exc
    if math.isnan(out) or out < 0:
        raise ParameterError(f"`{name}` must be >= 0 metres (inf for no limit, None for the default); got {value!r}")
    return out


def _row_sizes(value: Any, name: str, rows: int) -> np.ndarray:
    arr = np.asarray(value, dtype=np.float64)
    if arr.ndim == 0:
        raise ParameterError(f"`{name}` must be per-row metres of shape ({rows},); got a scalar {value!r}")
    if arr.shape != (rows,):
        raise ParameterError(f"`{name}` must have shape ({rows},) (one value per row); got {arr.shape}")
    bad = ~(np.isfinite(arr) & (arr > 0))
    if bad.any():
        row = int(np.argmax(bad))
        raise ParameterError(f"`{name}` must be finite and > 0 metres in every row; row {row} has {arr[row]!r}")
    return np.ascontiguousarray(arr)


def _mask(value: Any, name: str, shape: tuple[int, ...]) -> np.ndarray:
    arr = np.asarray(value)
    if arr.shape != shape:
        raise ParameterError(f"`{name}` must have the shape of `z` {shape}; got {arr.shape}")
    if arr.dtype != np.bool_:
        raise ParameterError(f"`{name}` must be a boolean array; got dtype {arr.dtype}")
    return np.ascontiguousarray(arr).ravel()


def breach_depressions(
    z: np.ndarray,
    valid: np.ndarray,
    outlets: np.ndarray,
    *,
    dx: np.ndarray,
    dy: np.ndarray,
    max_length_m: float | None = None,
    max_depth_m: float | None = None,
    cell_area: np.ndarray | None = None,
) -> BreachResult:
    """Drain depressions by carving bounded least-cost channels (Lindsay 2016).

    Depression bottoms are processed from the lowest to the highest, so any lower
    ground a search reaches has already been dealt with: it drains, or it belongs
    to a depression left for filling. From each bottom a least-cost search over
    the 8 neighbours looks for the cheapest path to an outlet or to a cell below
    the path, where the cost of a cell is how much it must be lowered. The path
    is then carved so that it descends strictly, one representable step per
    cell, from the bottom to its exit. Cells are never raised.

    Parameters
    ----------
    z : ndarray, shape (rows, cols)
        Elevations (m), float32 or float64 (integers are converted to float64).
        Values on invalid cells are ignored.
    valid : ndarray of bool, shape (rows, cols)
        True on usable cells. Invalid cells are never entered.
    outlets : ndarray of bool, shape (rows, cols)
        Cells that drain off the grid (DEM edge, cells next to nodata). A path
        ends at the first outlet it reaches, which is lowered if needed so the
        channel keeps descending; outlets are never pits.
    dx, dy : ndarray, shape (rows,)
        Cell width and height (m) of each row. Diagonal steps are
        ``sqrt(dx**2 + dy**2)`` with both averaged over the two rows.
    max_length_m : float, optional
        Longest breach path (m), from the depression bottom to the exit cell.
        Default: :data:`DEFAULT_MAX_LENGTH_CELLS` times the median cell size
        (mean of the median ``dx`` and ``dy``). ``inf`` disables the limit.
    max_depth_m : float, optional
        Largest lowering of any cell (m). Default :data:`DEFAULT_MAX_DEPTH_M`.
        ``inf`` disables the limit.
    cell_area : ndarray, shape (rows,), optional
        Cell area (m²) of each row, for the carved volume. Default ``dx * dy``.

    Returns
    -------
    BreachResult

    Raises
    ------
    ParameterError
        If shapes disagree, a mask is not boolean, cell sizes are not positive,
        a limit is negative or NaN, or a valid cell is not finite.

    Notes
    -----
    The search is a Dijkstra search keyed on the total lowering, ties broken by
    path length; the length and depth limits prune it as it goes, so a cheaper
    route found too long is not replaced by a costlier shorter one (the usual
    compromise; it can only leave a depression unresolved, never break one).
    A depression with a flat bottom is searched from all its bottom cells at
    once; the flat it leaves behind drains through the channel and is left to
    flat resolution in routing. Cost is O(cells searched · log) per depression.

    Examples
    --------
    A one-cell-wide dam across a valley sloping south is cut through one cell:

    >>> import numpy as np
    >>> rows, cols = 9, 7
    >>> r, c = np.mgrid[:rows, :cols]
    >>> z = 100.0 - r + 2.0 * np.abs(c - 3)
    >>> z[6, 1:6] += 8.0                       # the embankment
    >>> edge = np.zeros_like(z, dtype=bool)
    >>> edge[[0, -1], :] = edge[:, [0, -1]] = True
    >>> res = breach_depressions(z, np.ones_like(edge), edge,
    ...                          dx=np.full(rows, 10.0), dy=np.full(rows, 10.0))
    >>> res.n_pits, res.n_breached, res.carved_cells
    (1, 1, 1)
    >>> bool(z[7, 3] < res.surface[6, 3] < z[5, 3])
    True
    """
    arr = np.asarray(z)
    if arr.ndim != 2:
        raise ParameterError(f"`z` must be a 2-D array (rows, cols); got {arr.ndim} dimension(s)")
    if arr.dtype not in (np.float32, np.float64):
        if not (np.issubdtype(arr.dtype, np.integer) or arr.dtype == np.bool_):
            raise ParameterError(f"`z` must be float32 or float64 elevations; got dtype {arr.dtype}")
        arr = arr.astype(np.float64)
    shape = arr.shape
    rows, cols = shape
    valid_f = _mask(valid, "valid", shape)
    outlets_f = _mask(outlets, "outlets", shape) & valid_f
    dx_r = _row_sizes(dx, "dx", rows)
    dy_r = _row_sizes(dy, "dy", rows)
    area_r = dx_r * dy_r if cell_area is None else _row_sizes(cell_area, "cell_area", rows)
    if max_length_m is None:
        cell = 0.5 * (float(np.median(dx_r)) + float(np.median(dy_r)))
        max_len = DEFAULT_MAX_LENGTH_CELLS * cell
    else:
        max_len = _limit(max_length_m, "max_length_m", 0.0)
    max_depth = _limit(max_depth_m, "max_depth_m", DEFAULT_MAX_DEPTH_M)

    orig = np.ascontiguousarray(arr).ravel()
    if not all_finite(orig, valid_f):
        raise ParameterError("`z` has non-finite values on cells marked valid; mark them invalid in `valid`")
    surf = orig.copy()  # input stays untouched

    cands = pit_candidates(surf, valid_f, outlets_f, rows, cols)
    # Lowest first; the stable sort keeps raster order among equal elevations.
    cands = cands[np.argsort(surf[cands], kind="stable")]
    slot = np.full(surf.size, -1, dtype=np.int32)
    reps = depression_seeds(surf, valid_f, outlets_f, rows, cols, cands, slot)
    del cands
    neg_inf = surf.dtype.type(-np.inf)
    n_breached, n_unresolved, carved_cells, volume = breach_kernel(
        surf, orig, valid_f, outlets_f, rows, cols, reps, dx_r, dy_r, area_r, max_len, max_depth, neg_inf, slot
    )
    return BreachResult(
        surface=surf.reshape(shape),
        n_pits=int(reps.size),
        n_breached=int(n_breached),
        n_unresolved=int(n_unresolved),
        carved_cells=int(carved_cells),
        carved_volume_m3=float(volume),
        max_length_m=float(max_len),
        max_depth_m=float(max_depth),
    )
