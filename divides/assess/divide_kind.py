"""Which kind of divide a segment lies on: between outlet basins that drain apart, or the same way.

A divide between two outlet basins is a *main* divide when the two basins drain away
from each other (the two flanks of a range) and a *lateral* one when they drain the same
way (two valleys side by side on one flank, each reaching the base level on its own).
The two kinds differ in what their near-divide asymmetries mean, so screening calibrates
the probability of motion separately for each (:data:`divides.assess.segment_motion.INSTABILITY_SCALING`).

A basin's drainage direction is the vector from its centroid to its outlet; two basins
drain the same way when those directions are less than 90° apart. This reads the whole
basin, not the divide's neighbourhood, so a lateral divide is lateral along its whole
length, down to where the two valleys reach the base level.
"""

from __future__ import annotations

import numpy as np

__all__ = ["KINDS", "drainage_directions", "kind_of"]

#: Kinds of divide between two outlet basins (segments.geojson ``divide_kind``).
KINDS = ("main", "lateral")


#: Rows of the label grid :func:`drainage_directions` reads at a time.
_ROWS = 256


def drainage_directions(labels: np.ndarray, outlet_basin: np.ndarray, outlets: np.ndarray) -> np.ndarray:
    """(row, col) vector from the centroid of each label's outlet basin to its outlet (index = label).

    Parameters
    ----------
    labels : ndarray of int, grid
        Basin labels (0: none).
    outlet_basin : ndarray of int
        The outlet basin of every label (index = label; tributaries of one trunk share one).
    outlets : ndarray of float, shape (n_labels + 1, 2)
        (row, col) of the outlet each label drains to (NaN for none), as
        :func:`divides.assess.pooling.label_outlets`.

    Examples
    --------
    Two basins side by side draining to the west edge (column 0) of a 4 × 6 grid:

    >>> import numpy as np
    >>> labels = np.array([[1] * 6, [1] * 6, [2] * 6, [2] * 6])
    >>> d = drainage_directions(labels, np.array([0, 1, 2]), np.array([[np.nan] * 2, [0, 0], [3, 0]]))
    >>> d[1].tolist(), d[2].tolist()
    ([-0.5, -2.5], [0.5, -2.5])
    """
    labels, outlet_basin = np.asarray(labels), np.asarray(outlet_basin)
    n = int(outlet_basin.max()) + 1 if outlet_basin.size else 1
    count, row_sum, col_sum = np.zeros(n), np.zeros(n), np.zeros(n)
    cols = np.arange(labels.shape[1], dtype=np.float64)
    # a few rows at a time: the sums of whole row and column numbers are exact in float64 (below 2**53), so the
    # centroids are those of the whole grid at once, without four grid-sized index arrays
    for r0 in range(0, labels.shape[0], _ROWS):
        basin = outlet_basin[labels[r0:r0 + _ROWS]]
        count += np.bincount(basin.ravel(), minlength=n)
        row_sum += np.bincount(basin.ravel(), np.repeat(np.arange(r0, r0 + basin.shape[0], dtype=np.float64),
                                                        basin.shape[1]), n)
        col_sum += np.bincount(basin.ravel(), np.tile(cols, basin.shape[0]), n)
    with np.errstate(invalid="ignore", divide="ignore"):
        centroid = np.column_stack([row_sum / count, col_sum / count])
    return np.asarray(outlets, dtype=float) - centroid[outlet_basin]


def kind_of(directions: np.ndarray, a: int, b: int) -> str:
    """``"lateral"`` when labels ``a`` and ``b`` drain the same way (directions under 90° apart), else ``"main"``.

    >>> import numpy as np
    >>> d = np.array([[0.0, 0.0], [-0.5, -2.5], [0.5, -2.5], [0.0, 3.0]])
    >>> kind_of(d, 1, 2), kind_of(d, 1, 3)
    ('lateral', 'main')
    """
    u, v = directions[a], directions[b]
    return "lateral" if bool(np.all(np.isfinite(u)) and np.all(np.isfinite(v)) and float(u @ v) > 0) else "main"
