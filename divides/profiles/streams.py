"""Splitting a channel network into streams, longest first (trunk, then tributaries)."""

from __future__ import annotations

import numpy as np
from numba import njit

__all__ = ["longest_path_streams"]


@njit(cache=True, nogil=True)
def _main_donor(down, step, keep):
    """Longest path above each node and the donor that carries it (receivers-first input)."""
    m = down.size
    longest = np.zeros(m)
    main = np.full(m, -1, dtype=np.int64)
    for k in range(m - 1, -1, -1):
        if not keep[k]:
            continue
        d = down[k]
        if d >= 0 and keep[d]:
            length = longest[k] + step[k]
            if main[d] < 0 or length > longest[d]:
                longest[d] = length
                main[d] = k
    return longest, main


def longest_path_streams(
    down: np.ndarray, step: np.ndarray, keep: np.ndarray
) -> list[tuple[np.ndarray, bool]]:
    """Streams of a network: from each base node along the longest path, then every tributary.

    Each stream lists node positions from downstream to upstream. A tributary
    starts at the node it joins (so its profile is continuous with the stream
    it feeds) and follows its own longest path to a head.

    Parameters
    ----------
    down, step : ndarray
        Receivers-first network (see :func:`divides.profiles.chi.integrate_chi`).
    keep : ndarray of bool
        Nodes that belong to the network being split.

    Returns
    -------
    list of (ndarray, bool)
        Streams, longest first, each with True when it is a tributary (its
        first node is the junction, which belongs to the stream it joins).
    """
    down = np.asarray(down, dtype=np.int64)
    keep = np.asarray(keep, dtype=bool)
    longest, main = _main_donor(down, np.asarray(step, dtype=np.float64), keep)
    starts = []
    for k in np.flatnonzero(keep):
        d = down[k]
        if d < 0 or not keep[d]:
            starts.append((k, -1))  # a base node starts a stream
        elif main[d] != k:
            starts.append((k, d))  # a tributary starts at its junction
    streams = []
    for k, junction in starts:
        path = [junction] if junction >= 0 else []
        node = k
        while node >= 0:
            path.append(node)
            node = main[node]
        streams.append((np.asarray(path, dtype=np.int64), junction >= 0))
    streams.sort(key=lambda s: -s[0].size)
    return streams
