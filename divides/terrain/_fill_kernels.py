"""Numba kernels for depression filling (plain arrays in, plain arrays out)."""

from __future__ import annotations

import numpy as np
from numba import njit

# Neighbour offsets (row, col): E, SE, S, SW, W, NW, N, NE. Shared by the terrain kernels.
D_ROW = np.array([0, 1, 1, 1, 0, -1, -1, -1], dtype=np.int64)
D_COL = np.array([1, 1, 0, -1, -1, -1, 0, 1], dtype=np.int64)

_LOW32 = np.uint64(0xFFFFFFFF)


@njit(cache=True, nogil=True)
def grow(arr, n):
    """Return a copy of ``arr`` with room for at least ``n`` items (doubling)."""
    out = np.empty(max(2 * arr.size, n), dtype=arr.dtype)
    out[: arr.size] = arr
    return out


@njit(cache=True, nogil=True)
def padded_copy(z, rows, cols):
    """``z`` (flat, rows × cols) copied into a grid padded by one cell, with neighbour offsets.

    Returns ``(zp, closed, offsets, pc)``: the padded elevations, a closed flag per padded
    cell (all 1: the fill opens cells as it reaches them), the flat offsets of the eight
    neighbours in the padded grid, and its row length. Shared by the whole-grid and the
    per-tile Priority-Flood.
    """
    pc = cols + 2
    npad = (rows + 2) * pc
    zp = np.empty(npad, dtype=z.dtype)
    closed = np.ones(npad, dtype=np.uint8)
    offsets = np.empty(8, dtype=np.int64)
    for k in range(8):
        offsets[k] = D_ROW[k] * pc + D_COL[k]
    for r in range(rows):
        base = (r + 1) * pc + 1
        for c in range(cols):
            zp[base + c] = z[r * cols + c]
    return zp, closed, offsets, pc


@njit(cache=True, nogil=True, inline="always")
def _heap_push(h, size, key):
    """Push ``key`` onto the 4-ary min-heap ``h[:size]``; return the new size."""
    pos = size
    while pos > 0:
        parent = (pos - 1) >> 2
        if h[parent] <= key:
            break
        h[pos] = h[parent]
        pos = parent
    h[pos] = key
    return size + 1


@njit(cache=True, nogil=True, inline="always")
def _heap_pop(h, size):
    """Drop the root of the 4-ary min-heap ``h[:size]`` (read it first); return the new size."""
    size -= 1
    _heap_replace_top(h, size, h[size])
    return size


@njit(cache=True, nogil=True, inline="always")
def _heap_replace_top(h, size, key):
    """Put ``key`` in place of the root of the 4-ary min-heap ``h[:size]`` (sift down).

    A pop followed by a push costs one sift-down this way instead of a sift-down and a
    sift-up: the flood replaces the cell it spreads from by its first higher neighbour.
    """
    pos = 0
    while True:
        child = 4 * pos + 1
        if child >= size:
            break
        best = child
        best_key = h[child]
        for j in range(child + 1, min(child + 4, size)):
            if h[j] < best_key:
                best_key = h[j]
                best = j
        if best_key >= key:
            break
        h[pos] = best_key
        pos = best
    if size > 0:
        h[pos] = key


@njit(cache=True, nogil=True, inline="always")
def _packed_key(is32, bits32, bits64, p):
    """Heap key: an order-preserving 32-bit image of the elevation, then the cell index.

    Exact for float32 elevations. For float64 the image keeps the top 32 bits
    (about 6 significant digits), so cells within that band may leave the heap
    slightly out of order; filled values are still taken from the true
    elevations, so every cell keeps a non-ascending path to an outlet.
    """
    if is32:
        b = np.uint64(bits32[p])
        s = (b ^ _LOW32) if (b >> np.uint64(31)) else (b | np.uint64(0x80000000))
    else:
        b = bits64[p]
        s = (~b) if (b >> np.uint64(63)) else (b | np.uint64(0x8000000000000000))
        s = s >> np.uint64(32)
    return (s << np.uint64(32)) | np.uint64(p)


@njit(cache=True, nogil=True)
def priority_flood_fill(z, valid, outlets, rows, cols):
    """Fill every depression to its spill level (Priority-Flood, Barnes et al. 2014).

    Cells level with or below the cell being spread from go to a plain stack
    instead of the heap: inside a depression they all take the same spill
    level, so their order does not matter. The heap packs elevation and index
    into one 64-bit integer (one memory stream, integer compares) and is 4-ary
    (shallower, cache-friendlier than binary). The work is done on a copy
    padded with a ring of closed cells so the neighbour loop needs no bounds
    checks.

    Parameters
    ----------
    z : 1-D float32 or float64 array (rows*cols)
        Elevations; overwritten with the filled surface.
    valid, outlets : 1-D bool arrays
        Outlets seed the flood; invalid cells are walls never entered.
    rows, cols : int
        Grid shape; (rows + 2) * (cols + 2) must be below 2**32.

    Returns
    -------
    n_raised : int
        Number of cells whose elevation was raised.
    """
    zp, closed, offsets, pc = padded_copy(z, rows, cols)
    is32 = zp.itemsize == 4
    bits32 = zp.view(np.uint32) if is32 else np.empty(0, dtype=np.uint32)
    bits64 = zp.view(np.uint64) if not is32 else np.empty(0, dtype=np.uint64)
    heap = np.empty(max(1024, 4 * (rows + cols)), dtype=np.uint64)
    size = 0
    for r in range(rows):
        for c in range(cols):
            i = r * cols + c
            if valid[i]:
                p = (r + 1) * pc + c + 1
                if outlets[i]:
                    if size >= heap.size:
                        heap = grow(heap, size + 1)
                    size = _heap_push(heap, size, _packed_key(is32, bits32, bits64, p))
                else:
                    closed[p] = 0
    pit = np.empty(1024, dtype=np.int64)
    npit = 0
    n_raised = 0
    while size > 0 or npit > 0:
        on_top = False  # the cell spread from still holds the heap's root
        if npit > 0:
            npit -= 1
            c = pit[npit]
        else:
            c = np.int64(heap[0] & _LOW32)
            on_top = True
        zc = zp[c]
        for k in range(8):
            nb = c + offsets[k]
            if closed[nb]:
                continue
            closed[nb] = 1
            if zp[nb] <= zc:
                if zp[nb] < zc:
                    zp[nb] = zc
                    n_raised += 1
                if npit >= pit.size:
                    pit = grow(pit, npit + 1)
                pit[npit] = nb
                npit += 1
            elif on_top:
                _heap_replace_top(heap, size, _packed_key(is32, bits32, bits64, nb))
                on_top = False
            else:
                if size >= heap.size:
                    heap = grow(heap, size + 1)
                size = _heap_push(heap, size, _packed_key(is32, bits32, bits64, nb))
        if on_top:
            size = _heap_pop(heap, size)
    for r in range(rows):
        base = (r + 1) * pc + 1
        for c in range(cols):
            z[r * cols + c] = zp[base + c]
    return n_raised


@njit(cache=True, nogil=True)
def raised_totals(filled, z, rows, cols, cell_area):
    """Plan area (m²) and volume (m³) by which ``filled`` stands above ``z``."""
    area = 0.0
    volume = 0.0
    for r in range(rows):
        depth = 0.0
        count = 0
        for c in range(cols):
            d = filled[r * cols + c] - z[r * cols + c]
            if d > 0:
                depth += d
                count += 1
        area += count * cell_area[r]
        volume += depth * cell_area[r]
    return area, volume
