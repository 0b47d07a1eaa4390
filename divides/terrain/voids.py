"""Holes of nodata inside a DEM's data, and their fill by harmonic interpolation.

A hole that does not reach the grid's edge (8-connected) is either a void in the data (radar shadow, a
failed tile) or water masked out. Left as it is, routing reads it like the sea: the land around it drains
into it, so the basins and divides there end at its rim and a void on a ridge cuts the divide. Filled,
the routing crosses it.

The fill solves Laplace's equation over each hole with the valid cells of its rim as boundary values
(a harmonic surface): a finite-volume five-point stencil on the DEM's per-row cell sizes, so linear
slopes and saddles such as x² − y² are reproduced exactly and, by the discrete maximum principle, no
filled cell is a pit or a peak (no depression the conditioning would then have to fill).
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla
from scipy import ndimage

from divides.errors import ParameterError
from divides.io.dem import Dem
from divides.io.memory import row_blocks

__all__ = ["VOID_HANDLING", "VoidFill", "interior_holes", "fill_voids"]

#: ``"fill"``: interior holes are filled by harmonic interpolation; ``"outlets"``: left as nodata, so the land
#: around them drains into them (water masked out of the DEM is a base level).
VOID_HANDLING = ("fill", "outlets")

#: Holes of at most this many cells are solved directly (sparse LU); larger ones by conjugate gradients.
DIRECT_MAX_CELLS = 200_000


@dataclass(frozen=True)
class VoidFill:
    """What was done with the DEM's interior holes of nodata.

    Attributes
    ----------
    handling : str
        One of :data:`VOID_HANDLING`.
    holes : int
        Number of interior holes (8-connected).
    cells : int
        Nodata cells in them.
    largest_cells : int
        Cells of the largest hole.
    filled_cells : int
        Cells given an elevation (``cells`` when filled, 0 when left as outlets).
    filled : ndarray of bool or None
        The filled cells (None when none was filled).
    """

    handling: str = "fill"
    holes: int = 0
    cells: int = 0
    largest_cells: int = 0
    filled_cells: int = 0
    filled: np.ndarray | None = dataclasses.field(default=None, repr=False, compare=False)

    def to_dict(self) -> dict:
        """JSON-ready fields (without the grid)."""
        return {f.name: getattr(self, f.name) for f in dataclasses.fields(self) if f.name != "filled"}

    def share_along(self, row: np.ndarray, col: np.ndarray) -> float:
        """Share of a line's vertices (fractional grid coordinates) that touch a filled cell.

        Examples
        --------
        >>> mask = np.zeros((4, 4), bool); mask[1, 1] = True
        >>> VoidFill(filled=mask).share_along(np.array([0.5, 2.5, 3.0]), np.array([1.0, 1.0, 3.0]))
        0.3333333333333333
        """
        if self.filled is None or np.size(row) == 0:
            return 0.0
        r, c = np.asarray(row, dtype=float), np.asarray(col, dtype=float)
        rows, cols = self.filled.shape
        touch = np.zeros(r.shape, dtype=bool)
        for rr in (np.floor(r), np.ceil(r)):  # a vertex lies between cells: it touches those around it
            for cc in (np.floor(c), np.ceil(c)):
                touch |= self.filled[np.clip(rr.astype(np.int64), 0, rows - 1),
                                     np.clip(cc.astype(np.int64), 0, cols - 1)]
        return float(np.mean(touch))


def interior_holes(valid: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Label the holes of nodata that do not reach the grid's edge.

    Parameters
    ----------
    valid : ndarray of bool, shape (rows, cols)

    Returns
    -------
    labels : ndarray of int32
        8-connected components of nodata (0 on valid cells), edge-reaching ones included.
    interior : ndarray of bool, shape (n + 1,)
        True for the labels of holes that do not reach the edge (index 0 is False).
    counts : ndarray of int64, shape (n + 1,)
        Cells per label.

    Examples
    --------
    >>> valid = np.ones((5, 6), bool); valid[2, 2:4] = False; valid[0, 5] = False
    >>> labels, interior, counts = interior_holes(valid)
    >>> int(counts[interior].sum()), int(interior.sum())
    (2, 1)
    """
    invalid = ~np.asarray(valid, dtype=bool)
    labels, n = ndimage.label(invalid, structure=np.ones((3, 3), dtype=bool))
    interior = np.ones(n + 1, dtype=bool)
    interior[0] = False
    for line in (labels[0], labels[-1], labels[:, 0], labels[:, -1]):
        interior[line] = False
    counts = np.zeros(n + 1, dtype=np.int64)
    for rows in row_blocks(labels.shape):  # no grid-sized int64 copy (10^9 cells)
        counts += np.bincount(labels[rows].ravel(), minlength=n + 1)
    return labels, interior, counts


def fill_voids(dem: Dem, handling: str = "fill") -> tuple[Dem, VoidFill]:
    """Fill the DEM's interior holes of nodata by harmonic interpolation from their rims.

    Parameters
    ----------
    dem : Dem
        Not modified.
    handling : {"fill", "outlets"}
        ``"outlets"`` counts the holes and returns ``dem`` itself.

    Returns
    -------
    Dem
        A copy with the holes filled and valid (``dem`` itself when there is none or ``handling="outlets"``).
    VoidFill
        The count of holes and cells.

    Raises
    ------
    ParameterError
        ``handling`` is not one of :data:`VOID_HANDLING`.

    Examples
    --------
    >>> z = np.add.outer(np.arange(5.0), 2 * np.arange(6.0)); z[2, 2:4] = np.nan
    >>> filled, report = fill_voids(Dem.from_array(z, cell_size=10.0))
    >>> report.filled_cells, float(filled.elevation[2, 3])
    (2, 8.0)
    """
    if handling not in VOID_HANDLING:
        raise ParameterError(f"voids must be one of {', '.join(VOID_HANDLING)}; got {handling!r}")
    if dem.valid.all():
        return dem, VoidFill(handling=handling)
    labels, interior, counts = interior_holes(dem.valid)
    inner = np.flatnonzero(interior)
    report = VoidFill(handling=handling, holes=int(inner.size), cells=int(counts[inner].sum()),
                      largest_cells=int(counts[inner].max(initial=0)))
    if handling == "outlets" or inner.size == 0:
        return dem, report
    boxes = ndimage.find_objects(labels)
    holes = []
    for lab in inner:
        rs, cs = boxes[lab - 1]
        # an interior hole's box widened by one cell stays on the grid and holds its whole rim
        win = (slice(rs.start - 1, rs.stop + 1), slice(cs.start - 1, cs.stop + 1))
        holes.append((win, labels[win] == lab))
    del labels, boxes  # the label grid (4 B per cell) goes before the grid-sized copies
    z = dem.elevation.copy()
    filled = np.zeros(dem.shape, dtype=bool)
    for win, hole in holes:
        z[win][hole] = _harmonic(z[win], hole, dem.dx[win[0]], dem.dy[win[0]])
        filled[win][hole] = True
    valid = dem.valid | filled
    return (dataclasses.replace(dem, elevation=z, valid=valid),
            dataclasses.replace(report, filled_cells=report.cells, filled=filled))


def _harmonic(z: np.ndarray, hole: np.ndarray, dx: np.ndarray, dy: np.ndarray) -> np.ndarray:
    """Values on ``hole`` solving the five-point finite-volume Laplace equation, with ``z`` off it as the rim.

    A link's conductance is its face length over its length (E–W in row r: dy/dx; N–S between rows r and
    r + 1: the mean dx over the mean dy), so the matrix is symmetric positive definite.
    """
    rows, cols = hole.shape
    index = -np.ones(hole.shape, dtype=np.int64)
    r, c = np.nonzero(hole)
    n = r.size
    index[r, c] = np.arange(n)
    w_ew = (dy / dx)[r]
    w_ns = ((dx[:-1] + dx[1:]) / (dy[:-1] + dy[1:]))  # link between row k and k + 1
    diag = np.zeros(n)
    rhs = np.zeros(n)
    rim_links = np.zeros(n)
    pi, pj, pw = [], [], []
    for dr, dc in ((0, 1), (0, -1), (1, 0), (-1, 0)):
        rr, cc = r + dr, c + dc
        w = w_ew if dr == 0 else w_ns[np.minimum(r, rr)]
        diag += w
        other = index[rr, cc]
        unknown = other >= 0
        pi.append(np.flatnonzero(unknown))
        pj.append(other[unknown])
        pw.append(-w[unknown])
        rhs[~unknown] += w[~unknown] * z[rr[~unknown], cc[~unknown]]
        rim_links[~unknown] += w[~unknown]
    a = sp.csr_matrix((np.concatenate([diag, *pw]), (np.concatenate([np.arange(n), *pi]),
                                                      np.concatenate([np.arange(n), *pj]))), shape=(n, n))
    if n <= DIRECT_MAX_CELLS:
        return spla.spsolve(a.tocsc(), rhs)
    # start from the mean of each cell's rim neighbours (the rim's mean inside); Jacobi-preconditioned
    on_rim = rim_links > 0
    start = np.full(n, (rhs[on_rim] / rim_links[on_rim]).mean())
    start[on_rim] = rhs[on_rim] / rim_links[on_rim]
    sol, info = spla.cg(a, rhs, x0=start, rtol=1e-10, maxiter=50 * (rows + cols),
                        M=sp.diags(1.0 / diag))
    if info != 0:
        raise RuntimeError(f"the harmonic fill of a hole of {n} cells did not converge ({info} iterations)")
    return sol
