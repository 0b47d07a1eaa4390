"""Numba kernels of the assessment."""

from __future__ import annotations

import numpy as np
from numba import njit


@njit(cache=True, nogil=True)
def walk_to_area(starts, rec, area, threshold):
    """First cell on each start's flow path whose drainage area reaches ``threshold``.

    Returns -1 where the path leaves the grid first.
    """
    out = np.empty(starts.size, dtype=np.int64)
    for j in range(starts.size):
        i = starts[j]
        while area[i] < threshold:
            r = rec[i]
            if r == i:
                i = -1
                break
            i = r
        out[j] = i
    return out
