"""How far each outlet basin of a landscape is from steady state: its lower and upper channels eroding unlike.

At steady state every channel cell erodes at the uplift rate, E = K A^m S^n − D ∇²z = U (Perron, Kirchner &
Dietrich 2009), so a basin lopsided against its neighbour by a steady contrast of uplift, erodibility or runoff is
steep throughout. While a fall of its base level climbs it, the reach the knickpoint has passed and the reach it
has not yet reached erode at different rates (Whipple & Tucker 1999). Screening reads the contrast between a
basin's lower and upper channels to tell the two apart, since a run of the landscape with one uplift rate per
basin (:func:`divides.model.landscape_shift.steady_uplift`) absorbs both alike.
"""

from __future__ import annotations

import math

import numpy as np

from divides.model.landscape_shift import MIN_BALANCE_CELLS, ModelStart, balance_terms, steady_uplift

__all__ = ["basin_transience"]


def basin_transience(start: ModelStart, n: float) -> np.ndarray:
    """Transience of every outlet basin of a landscape run's start: ln(E_lower / E_upper).

    E = A^m S^n − D ∇²z at K = 1 (D of the one-uplift steady balance, :func:`steady_uplift`) over the
    basin's channel cells (``start.cells`` whose balance can be read, :func:`balance_terms`), split into a
    lower and an upper half by elevation (the middle cell of an odd count goes up); E_lower and E_upper are
    the medians of the halves. About 0 at steady state whatever U and K are, as long as they are uniform within
    the basin (the ratio cancels them); away from 0 while a fall of base level climbs the basin (negative once a
    step has passed the lower half and restored the old slope below it), and where the basin straddles a
    contrast of uplift, erodibility or runoff.

    Parameters
    ----------
    start : ModelStart
        :func:`divides.model.landscape_shift.model_start` of the landscape.
    n : float
        Slope exponent.

    Returns
    -------
    ndarray of float, one per label of ``start.before`` (index 0: no basin)
        NaN for basins of fewer than :data:`MIN_BALANCE_CELLS` channel cells, or where a half's median E
        is not positive.
    """
    fluvial, lap, readable = balance_terms(start, n)
    _, diffusivity = steady_uplift(start, n)
    labels = start.before.ravel()
    cells = start.cells[readable[start.cells]]
    out = np.full(int(labels.max()) + 1, math.nan)
    if cells.size == 0:
        return out
    erosion = fluvial[cells] - diffusivity * lap[cells]
    lab = labels[cells]
    order = np.lexsort((np.asarray(start.grid.elevation, dtype=np.float64).ravel()[cells], lab))
    lab, erosion = lab[order], erosion[order]
    bounds = np.flatnonzero(np.diff(lab)) + 1
    for first, last in zip(np.r_[0, bounds], np.r_[bounds, lab.size]):
        if last - first < MIN_BALANCE_CELLS:
            continue
        mid = first + (last - first) // 2  # cells sorted by elevation within the basin
        lower, upper = float(np.median(erosion[first:mid])), float(np.median(erosion[mid:last]))
        if lower > 0 and upper > 0:
            out[lab[first]] = math.log(lower / upper)
    return out
