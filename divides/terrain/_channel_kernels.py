"""Numba kernels for the channel network (compressed to channel cells only)."""

from __future__ import annotations

import numpy as np
from numba import njit


@njit(cache=True, nogil=True)
def compress_network(order, rec, is_channel, n_cells):
    """Channel cells in flow order and each one's downstream channel position.

    Parameters
    ----------
    order : valid cells, receivers first.
    rec : receiver of every cell.
    is_channel : bool per cell.
    n_cells : number of channel cells.

    Returns
    -------
    cells : flat indices of channel cells, receivers first.
    down : position in ``cells`` of each cell's receiver, -1 where the channel
        leaves the network (its receiver is an outlet-self or not a channel).
    """
    n = rec.size
    pos = np.full(n, -1, dtype=np.int64)
    cells = np.empty(n_cells, dtype=np.int64)
    k = 0
    for j in range(order.size):
        i = order[j]
        if is_channel[i]:
            cells[k] = i
            pos[i] = k
            k += 1
    down = np.full(n_cells, -1, dtype=np.int64)
    for k in range(n_cells):
        i = cells[k]
        r = rec[i]
        if r != i:
            down[k] = pos[r]
    return cells, down


@njit(cache=True, nogil=True)
def link_and_order(down):
    """Donor counts, link labels and Strahler order of a compressed network.

    Cells come receivers-first, so iterating backwards visits every donor
    before its receiver. A link starts at a head (no channel donor) or at a
    junction (two or more) and runs down through single-donor cells.
    Strahler (1957): heads are order 1; a cell takes the highest order among
    its donors, plus one where two or more donors share that highest order.

    Returns
    -------
    n_donors : uint8 per cell.
    link : int64 per cell (0-based link id).
    strahler : uint8 per cell.
    n_links : int.
    """
    m = down.size
    n_donors = np.zeros(m, dtype=np.uint8)
    for k in range(m):
        if down[k] >= 0:
            n_donors[down[k]] += 1
    link = np.full(m, -1, dtype=np.int64)
    strahler = np.zeros(m, dtype=np.uint8)
    top = np.zeros(m, dtype=np.uint8)
    ties = np.zeros(m, dtype=np.uint8)
    n_links = 0
    for k in range(m - 1, -1, -1):
        if n_donors[k] != 1:
            link[k] = n_links
            n_links += 1
        if n_donors[k] == 0:
            strahler[k] = 1
        else:
            strahler[k] = top[k] + (1 if ties[k] >= 2 else 0)
        d = down[k]
        if d >= 0:
            if n_donors[d] == 1:
                link[d] = link[k]
            s = strahler[k]
            if s > top[d]:
                top[d] = s
                ties[d] = 1
            elif s == top[d]:
                ties[d] += 1
    return n_donors, link, strahler, n_links
