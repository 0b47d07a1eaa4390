"""Numba kernels of tiled depression filling (Barnes 2016) and the tile-edge graph.

A tile is flooded on its own from every cell of its perimeter and from its
outlets; each perimeter seed starts a watershed label (outlets share
``OCEAN``). Where two labels touch, the lower of the two ways over is an edge
of a graph whose nodes are labels; solving the graph once gives every label
the level at which its water leaves the DEM, and each cell's final elevation
is the larger of its tile-local fill and its label's spill level. Kernels are
``nogil`` so tiles can run on threads.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from divides.terrain._fill_kernels import (
    D_COL,
    D_ROW,
    _heap_pop,
    _heap_push,
    _heap_replace_top,
    _packed_key,
    grow,
    padded_copy,
)

_LOW32 = np.uint64(0xFFFFFFFF)

#: Label of every cell whose water reaches an outlet inside its own tile.
OCEAN = 1
#: First label of the watersheds started at a tile's perimeter.
FIRST_LABEL = 2


@njit(cache=True, nogil=True)
def flood_tile(z, valid, outlets, rows, cols, labels):
    """Priority-Flood one tile from its perimeter and outlets, labelling watersheds.

    Parameters
    ----------
    z : 1-D float32/float64 (rows*cols)
        The tile's elevations; overwritten with the tile-local fill.
    valid, outlets : 1-D bool
        Usable cells and cells draining off the DEM.
    rows, cols : int
        Tile shape.
    labels : 1-D int32 (rows*cols)
        Output: ``OCEAN`` for cells filled from an outlet, ``FIRST_LABEL``... for
        the watershed of each perimeter seed, 0 on invalid cells.

    Returns
    -------
    n_labels : int
        Labels used (the largest label is ``n_labels + 1``).
    edge_a, edge_b, edge_z : arrays
        Touching labels (a < b) and the level of each touch (see :func:`label_touches`).
    """
    zp, closed, offsets, pc = padded_copy(z, rows, cols)
    is32 = zp.itemsize == 4
    bits32 = zp.view(np.uint32) if is32 else np.empty(0, dtype=np.uint32)
    bits64 = zp.view(np.uint64) if not is32 else np.empty(0, dtype=np.uint64)
    lab = np.zeros(zp.size, dtype=np.int32)
    heap = np.empty(max(1024, 4 * (rows + cols)), dtype=np.uint64)
    size = 0
    for r in range(rows):
        for c in range(cols):
            i = r * cols + c
            if not valid[i]:
                continue
            p = (r + 1) * pc + c + 1
            perimeter = r == 0 or r == rows - 1 or c == 0 or c == cols - 1
            if outlets[i] or perimeter:
                if outlets[i]:
                    lab[p] = OCEAN
                if size >= heap.size:
                    heap = grow(heap, size + 1)
                size = _heap_push(heap, size, _packed_key(is32, bits32, bits64, p))
            else:
                closed[p] = 0
    next_label = FIRST_LABEL
    pit = np.empty(1024, dtype=np.int64)
    npit = 0
    while size > 0 or npit > 0:
        on_top = False  # the cell spread from still holds the heap's root (see _heap_replace_top)
        if npit > 0:
            npit -= 1
            c = pit[npit]
        else:
            c = np.int64(heap[0] & _LOW32)
            on_top = True
        if lab[c] == 0:  # a perimeter seed not reached from a lower one: a new watershed
            lab[c] = next_label
            next_label += 1
        lc = lab[c]
        zc = zp[c]
        for k in range(8):
            nb = c + offsets[k]
            if closed[nb]:
                continue
            closed[nb] = 1
            lab[nb] = lc
            if zp[nb] <= zc:
                if zp[nb] < zc:
                    zp[nb] = zc
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
            labels[r * cols + c] = lab[base + c]
    ea, eb, ez = label_touches(z, labels, rows, cols)
    return next_label - FIRST_LABEL, ea, eb, ez


@njit(cache=True, nogil=True)
def label_touches(z, labels, rows, cols):
    """Every pair of 8-neighbour cells with different labels (0 = invalid, skipped).

    Each pair is seen once (east, south-east, south and south-west of each
    cell); its level is the larger of the two elevations.
    """
    dr = (0, 1, 1, 1)
    dc = (1, 1, 0, -1)
    n = 0
    for sweep in range(2):  # count, then fill
        if sweep == 1:
            ea = np.empty(n, dtype=np.int32)
            eb = np.empty(n, dtype=np.int32)
            ez = np.empty(n, dtype=z.dtype)
            n = 0
        for r in range(rows):
            for c in range(cols):
                i = r * cols + c
                la = labels[i]
                if la == 0:
                    continue
                for k in range(4):
                    rr = r + dr[k]
                    cc = c + dc[k]
                    if rr >= rows or cc < 0 or cc >= cols:
                        continue
                    j = rr * cols + cc
                    lb = labels[j]
                    if lb == 0 or lb == la:
                        continue
                    if sweep == 1:
                        ea[n] = min(la, lb)
                        eb[n] = max(la, lb)
                        ez[n] = max(z[i], z[j])
                    n += 1
    return ea, eb, ez


@njit(cache=True, nogil=True)
def seam_edges(label_a, z_a, label_b, z_b):
    """Touches across a seam between two aligned strips of cells.

    Cell ``j`` of strip a is an 8-neighbour of cells ``j - 1, j, j + 1`` of
    strip b (a row above a row, or a column left of a column). Labels must be
    global; 0 marks invalid cells. Returns ``(a, b, level)`` arrays as
    :func:`flood_tile` does.
    """
    m = label_a.size
    ea = np.empty(3 * m, dtype=np.int32)
    eb = np.empty(3 * m, dtype=np.int32)
    ez = np.empty(3 * m, dtype=z_a.dtype)
    ne = 0
    for j in range(m):
        la = label_a[j]
        if la == 0:
            continue
        for d in range(-1, 2):
            jb = j + d
            if jb < 0 or jb >= m:
                continue
            lb = label_b[jb]
            if lb == 0 or lb == la:
                continue
            ea[ne] = min(la, lb)
            eb[ne] = max(la, lb)
            ez[ne] = max(z_a[j], z_b[jb])
            ne += 1
    return ea[:ne].copy(), eb[:ne].copy(), ez[:ne].copy()


@njit(cache=True, nogil=True)
def solve_spill(n_nodes, ea, eb, ez):
    """Level at which each label's water leaves the DEM: minimax paths to ``OCEAN``.

    A priority flood over the label graph (Barnes 2016, the tile-edge graph):
    labels leave a binary heap in order of their spill level; a neighbour's
    level is the larger of the current label's and the edge's. Unreached
    labels get +inf.
    """
    start = np.zeros(n_nodes + 1, dtype=np.int64)
    for e in range(ea.size):
        start[ea[e] + 1] += 1
        start[eb[e] + 1] += 1
    for v in range(n_nodes):
        start[v + 1] += start[v]
    cursor = start[:-1].copy()
    nbr = np.empty(start[n_nodes], dtype=np.int64)
    wgt = np.empty(start[n_nodes], dtype=np.float64)
    for e in range(ea.size):
        a, b = ea[e], eb[e]
        nbr[cursor[a]] = b
        wgt[cursor[a]] = ez[e]
        cursor[a] += 1
        nbr[cursor[b]] = a
        wgt[cursor[b]] = ez[e]
        cursor[b] += 1
    spill = np.full(n_nodes, np.inf)
    done = np.zeros(n_nodes, dtype=np.uint8)
    hv = np.empty(1024, dtype=np.float64)
    hn = np.empty(1024, dtype=np.int64)
    size = 0
    spill[OCEAN] = -np.inf
    hv[0] = -np.inf
    hn[0] = OCEAN
    size = 1
    while size > 0:
        v = hn[0]
        level = hv[0]
        # pop the binary-heap root
        size -= 1
        lastv, lastn = hv[size], hn[size]
        pos = 0
        while True:
            child = 2 * pos + 1
            if child >= size:
                break
            if child + 1 < size and hv[child + 1] < hv[child]:
                child += 1
            if hv[child] >= lastv:
                break
            hv[pos] = hv[child]
            hn[pos] = hn[child]
            pos = child
        if size > 0:
            hv[pos] = lastv
            hn[pos] = lastn
        if done[v]:
            continue
        done[v] = 1
        for j in range(start[v], start[v + 1]):
            u = nbr[j]
            if done[u]:
                continue
            cand = max(level, wgt[j])
            if cand < spill[u]:
                spill[u] = cand
                if size >= hv.size:
                    hv = grow(hv, size + 1)
                    hn = grow(hn, size + 1)
                pos = size
                size += 1
                while pos > 0:
                    parent = (pos - 1) >> 1
                    if hv[parent] <= cand:
                        break
                    hv[pos] = hv[parent]
                    hn[pos] = hn[parent]
                    pos = parent
                hv[pos] = cand
                hn[pos] = u
    return spill


@njit(cache=True, nogil=True)
def raise_cells(filled, labels, spill, z):
    """filled = max(filled, spill[label]) in place; count cells above ``z`` (if given)."""
    n = 0
    check = z.size == filled.size
    for i in range(filled.size):
        s = spill[labels[i]]
        if filled[i] < s:
            filled[i] = s
        if check and filled[i] > z[i]:
            n += 1
    return n


@njit(cache=True, nogil=True)
def spread_flat(z, pending, rows, cols, seeds):
    """Cells reached from ``seeds`` over 8-connected pending cells of equal elevation (a flat)."""
    reached = np.zeros(rows * cols, dtype=np.uint8)
    queue = np.empty(max(1, seeds.size), dtype=np.int64)
    tail = 0
    for s in seeds:
        if pending[s] and not reached[s]:
            reached[s] = 1
            if tail >= queue.size:
                queue = grow(queue, tail + 1)
            queue[tail] = s
            tail += 1
    head = 0
    while head < tail:
        i = queue[head]
        head += 1
        r = i // cols
        c = i - r * cols
        for k in range(8):
            rr = r + D_ROW[k]
            cc = c + D_COL[k]
            if rr < 0 or rr >= rows or cc < 0 or cc >= cols:
                continue
            nb = rr * cols + cc
            if pending[nb] and not reached[nb] and z[nb] == z[i]:
                reached[nb] = 1
                if tail >= queue.size:
                    queue = grow(queue, tail + 1)
                queue[tail] = nb
                tail += 1
    return reached


@njit(cache=True, nogil=True)
def tile_graph(code, rows, cols):
    """Receivers inside a tile from D8 codes; cells whose receiver lies outside keep themselves.

    Returns ``rec`` (int64) and ``exit_k`` (the code of cells draining out of
    the tile across its perimeter, -1 elsewhere).
    """
    n = rows * cols
    rec = np.empty(n, dtype=np.int64)
    exit_k = np.full(n, -1, dtype=np.int8)
    for r in range(rows):
        for c in range(cols):
            i = r * cols + c
            rec[i] = i
            k = code[i]
            if k < 8:
                rr = r + D_ROW[k]
                cc = c + D_COL[k]
                if 0 <= rr < rows and 0 <= cc < cols:
                    rec[i] = rr * cols + cc
                else:
                    exit_k[i] = k
    return rec, exit_k


@njit(cache=True, nogil=True)
def next_perimeter(order, rec, perimeter):
    """For each cell, the first perimeter cell strictly downstream inside the tile (-1: none)."""
    out = np.full(rec.size, -1, dtype=np.int64)
    for j in range(order.size):
        i = order[j]
        r = rec[i]
        if r != i:
            out[i] = r if perimeter[r] else out[r]
    return out


@njit(cache=True, nogil=True)
def perimeter_flows(node, local_acc, down_same, down_cross):
    """External water of every perimeter node (Barnes 2017, the tile-level graph of edge flows).

    ``node`` are sorted global cell ids; ``down_same[u]`` is the node index of
    the next perimeter cell downstream in the same tile, ``down_cross[u]`` that
    of the cell in another tile that u drains into (-1: none). Returns
    ``inflow`` (water entering the tile at each node from other tiles) and
    ``ext`` (all water from other tiles passing through each node).
    """
    m = node.size
    indeg = np.zeros(m, dtype=np.int64)
    for u in range(m):
        if down_same[u] >= 0:
            indeg[down_same[u]] += 1
        if down_cross[u] >= 0:
            indeg[down_cross[u]] += 1
    queue = np.empty(m, dtype=np.int64)
    tail = 0
    for u in range(m):
        if indeg[u] == 0:
            queue[tail] = u
            tail += 1
    ext = np.zeros(m, dtype=np.float64)
    inflow = np.zeros(m, dtype=np.float64)
    head = 0
    while head < tail:
        u = queue[head]
        head += 1
        v = down_same[u]
        if v >= 0:
            ext[v] += ext[u]
            indeg[v] -= 1
            if indeg[v] == 0:
                queue[tail] = v
                tail += 1
        v = down_cross[u]
        if v >= 0:
            w = local_acc[u] + ext[u]
            ext[v] += w
            inflow[v] += w
            indeg[v] -= 1
            if indeg[v] == 0:
                queue[tail] = v
                tail += 1
    return inflow, ext, tail
