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
    _, main = _main_donor(down, np.asarray(step, dtype=np.float64), keep)
    nodes, bounds, tributary = _stream_paths(down, keep, main)
    streams = [(nodes[bounds[i]: bounds[i + 1]], bool(tributary[i])) for i in range(tributary.size)]
    streams.sort(key=lambda s: -s[0].size)
    return streams


@njit(cache=True, nogil=True)
def _stream_paths(down, keep, main):
    """Every stream's nodes, concatenated in the order of its first node (``bounds`` delimit them).

    A stream starts at each base node, and at the junction of each kept node that is not its
    receiver's main donor (a tributary, flagged); it follows the main donors up to a head.
    """
    m = down.size
    n_streams = 0
    length = 0  # every kept node lies on one stream (a chain of main donors), plus each tributary's junction
    for k in range(m):
        if not keep[k]:
            continue
        length += 1
        d = down[k]
        if d < 0 or not keep[d]:
            n_streams += 1
        elif main[d] != k:
            n_streams += 1
            length += 1
    nodes = np.empty(length, dtype=np.int64)
    bounds = np.empty(n_streams + 1, dtype=np.int64)
    tributary = np.zeros(n_streams, dtype=np.bool_)
    i = 0
    pos = 0
    for k in range(m):
        if not keep[k]:
            continue
        d = down[k]
        is_base = d < 0 or not keep[d]
        if not is_base and main[d] == k:
            continue
        bounds[i] = pos
        if not is_base:
            tributary[i] = True
            nodes[pos] = d
            pos += 1
        node = k
        while node >= 0:
            nodes[pos] = node
            pos += 1
            node = main[node]
        i += 1
    bounds[n_streams] = pos
    return nodes, bounds, tributary
