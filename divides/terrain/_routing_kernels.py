"""Numba kernels for D8 routing, flat resolution and graph traversals.

Conventions: flat indices ``i = row * cols + col``; ``rec[i] == i`` at outlets
and invalid cells; direction codes 0-7 follow ``D_ROW``/``D_COL`` of the fill
kernels (E, SE, S, SW, W, NW, N, NE), 8 = drains off the grid (outlet),
255 = invalid cell. Code 9 marks, transiently, a cell with no downslope
neighbour that flat resolution must route.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit, prange

from divides.terrain._fill_kernels import D_COL, D_ROW

OUTLET = 8
PENDING = 9
INVALID = 255


@njit(cache=True, nogil=True)
def row_distances(dx, dy):
    """Distance (m) to each of the 8 neighbours and to itself, per row: shape (rows, 9)."""
    rows = dx.size
    out = np.zeros((rows, 9), dtype=np.float64)
    for r in range(rows):
        diag = math.sqrt(dx[r] * dx[r] + dy[r] * dy[r])
        for k in range(8):
            if D_ROW[k] == 0:
                out[r, k] = dx[r]
            elif D_COL[k] == 0:
                out[r, k] = dy[r]
            else:
                out[r, k] = diag
    return out


@njit(cache=True, nogil=True, inline="always")
def _inside(r, c, k, rows, cols):
    """True when neighbour k of cell (r, c) lies on the grid."""
    rr = r + D_ROW[k]
    cc = c + D_COL[k]
    return 0 <= rr < rows and 0 <= cc < cols


@njit(cache=True, nogil=True, parallel=True)
def d8_steepest(z, valid, outlets, rows, cols, dist, rec, code):
    """Steepest-descent receiver of every cell (O'Callaghan & Mark 1984).

    Non-outlet valid cells have only valid neighbours (cells next to nodata are
    outlets) and are interior unless an edge was declared closed; only cells on
    the grid edge check bounds.
    Cells with no lower neighbour get ``code = PENDING`` for flat resolution.
    Rows are independent and run on all threads; each cell's result depends on
    its own neighbourhood only, so it is the same whatever the number of threads.

    Returns the number of pending cells.
    """
    off = np.empty(8, dtype=np.int64)
    for k in range(8):
        off[k] = D_ROW[k] * cols + D_COL[k]
    per_row = np.zeros(rows, dtype=np.int64)  # pending counts (a scalar reduction confuses parfors)
    for r in prange(rows):
        inv = np.empty(8, dtype=np.float64)
        for k in range(8):
            inv[k] = 1.0 / dist[r, k]
        row_pending = 0
        for c in range(cols):
            i = r * cols + c
            rec[i] = i
            if not valid[i]:
                code[i] = INVALID
                continue
            if outlets[i]:
                code[i] = OUTLET
                continue
            zi = z[i]
            best = 0.0
            best_k = -1
            on_edge = r == 0 or r == rows - 1 or c == 0 or c == cols - 1  # only on closed edges
            for k in range(8):
                if on_edge and not _inside(r, c, k, rows, cols):
                    continue
                s = (zi - z[i + off[k]]) * inv[k]
                if s > best:
                    best = s
                    best_k = k
            if best_k < 0:
                code[i] = PENDING
                row_pending += 1
            else:
                code[i] = best_k
                rec[i] = i + off[best_k]
        per_row[r] = row_pending
    return per_row.sum()


@njit(cache=True, nogil=True, inline="always")
def _on_edge(i, rows, cols):
    r = i // cols
    c = i - r * cols
    return r == 0 or r == rows - 1 or c == 0 or c == cols - 1


@njit(cache=True, nogil=True, inline="always")
def _spread(nbr, off, i, seen, queue, tail, value):
    """Enqueue the unseen flat neighbours of ``i`` (bits of ``nbr[i]``), marking them ``value``."""
    m = nbr[i]
    for k in range(8):
        if m & (1 << k):
            nb = i + off[k]
            if seen[nb] == 0:
                seen[nb] = value
                queue[tail] = nb
                tail += 1
    return tail


@njit(cache=True, nogil=True, inline="always")
def _find(parent, a):
    """Root of ``a`` in a union-find forest (path halving)."""
    while parent[a] != a:
        parent[a] = parent[parent[a]]
        a = parent[a]
    return a


@njit(cache=True, nogil=True)
def _flats_away(off, nbr, higher, pending, region, mask, away_max):
    """Set ``mask`` to the distance from higher ground (0: none), ``away_max`` to each flat's largest.

    Flats are 8-connected pending cells of equal elevation (the bits of ``nbr``); the
    distance is a breadth-first search from the flat's cells next to higher ground,
    to be inverted per flat (largest at the higher rim): ``away_max[region[i]]`` is
    the largest distance on the flat of cell ``i`` (where ``mask[i] > 0``), so that no
    flat labels are needed later. The search carries the seed each cell was reached from (``region``) and
    joins two seeds' regions wherever they meet (union-find, each root holding its
    set's largest distance); regions of one flat always meet (a flat is connected),
    so each joined set is one flat. The distances are those of a plain
    breadth-first search.
    """
    queue = np.empty(pending.size, dtype=pending.dtype)  # each cell is enqueued at most once
    tail = 0
    for j in range(pending.size):
        if higher[j]:
            i = pending[j]
            mask[i] = 1
            region[i] = tail
            queue[tail] = i
            tail += 1
    n_seeds = tail
    parent = np.arange(n_seeds).astype(np.int32)
    away_max[:n_seeds] = 1
    head = 0
    while head < tail:
        i = queue[head]
        head += 1
        d = mask[i]
        ri = _find(parent, region[i])  # cells take the current root: later comparisons mostly agree
        away_max[ri] = max(away_max[ri], d)
        m = nbr[i]
        for k in range(8):
            if m & (1 << k):
                nb = i + off[k]
                if mask[nb] == 0:
                    mask[nb] = d + 1
                    region[nb] = ri
                    queue[tail] = nb
                    tail += 1
                elif region[nb] != ri:
                    rn = _find(parent, region[nb])
                    if rn != ri:  # two regions of one flat meet: join them under the smaller root
                        low, high = min(ri, rn), max(ri, rn)
                        parent[high] = low
                        away_max[low] = max(away_max[low], away_max[high])
                        ri = low
    for r in range(n_seeds):  # every region's entry becomes its flat's largest distance
        away_max[r] = away_max[_find(parent, r)]


@njit(cache=True, nogil=True)
def _flats_toward(off, nbr, exits, pending, toward):
    """Breadth-first distance of each pending cell from the flat's exits (0: no exit).

    Exits are pending cells beside a draining cell of equal elevation. Pending
    8-neighbours of equal elevation always share a flat, so no labels are needed.
    """
    queue = np.empty(pending.size, dtype=pending.dtype)
    tail = 0
    for j in range(pending.size):
        if exits[j]:
            i = pending[j]
            toward[i] = 1
            queue[tail] = i
            tail += 1
    head = 0
    while head < tail:
        i = queue[head]
        head += 1
        tail = _spread(nbr, off, i, toward, queue, tail, toward[i] + 1)


@njit(cache=True, nogil=True, parallel=True)
def _flat_neighbours(z, rows, cols, off, code, pending, nbr, higher, exits):
    """Per pending cell: its neighbours on the flat and beside it, as bits (all threads).

    Bit k of ``nbr[i]`` is set when neighbour k is pending at the same elevation (same
    flat), bit k of ``exits[j]`` (``j``: position in ``pending``) when it drains at the
    same elevation (an exit of the flat); ``higher[j]`` is 1 beside higher ground. Read
    once here, the searches and the descent of :func:`resolve_flats` touch neither
    ``z`` nor ``code``.
    """
    for j in prange(pending.size):
        i = pending[j]
        edge = _on_edge(i, rows, cols)
        ri, ci = i // cols, i % cols
        zi = z[i]
        m = 0
        e = 0
        h = 0
        for k in range(8):
            if edge and not _inside(ri, ci, k, rows, cols):
                continue
            nb = i + off[k]
            if z[nb] > zi:
                h = 1
            elif z[nb] == zi:
                if code[nb] == PENDING:
                    m |= 1 << k
                else:
                    e |= 1 << k
        nbr[i] = m
        exits[j] = e
        higher[j] = h


@njit(cache=True, nogil=True, parallel=True)
def pending_cells(code, rows, cols, like):
    """Flat indices of the cells with ``code == PENDING``, in index order (rows on all threads).

    ``like`` is an empty array of the index dtype to use (int32 below 2³¹ cells: half the memory).
    """
    counts = np.zeros(rows + 1, dtype=np.int64)
    for r in prange(rows):
        m = 0
        for i in range(r * cols, (r + 1) * cols):
            if code[i] == PENDING:
                m += 1
        counts[r + 1] = m
    for r in range(rows):
        counts[r + 1] += counts[r]
    out = np.empty(counts[rows], dtype=like.dtype)
    for r in prange(rows):
        j = counts[r]
        for i in range(r * cols, (r + 1) * cols):
            if code[i] == PENDING:
                out[j] = i
                j += 1
    return out


@njit(cache=True, nogil=True, parallel=True)
def resolve_flats(z, rows, cols, dist, rec, code):
    """Route cells on flats so that flow converges (Barnes, Lehman & Mulla 2014).

    Each flat (connected pending cells of equal elevation) gets two gradients
    by breadth-first search: away from higher terrain (distance from the
    flat's cells next to higher ground) and toward lower terrain (distance
    from cells next to an already-draining cell of the same elevation). The
    combined mask ``2 * toward + (max_away - away)`` strictly decreases along
    some neighbour of every flat cell, so steepest descent on it reaches an
    exit without loops, and flow bends away from the flat's higher rim
    instead of running in parallel lines.

    Each flat cell's neighbours on the flat and beside it are first read into
    bits on all threads (:func:`_flat_neighbours`); the two searches read only
    those, are independent and run at the same time, and the away search finds
    each flat's largest distance itself (no labelling search). The final
    descent is per cell. Every value is the one a single thread computes.

    Pending cells have only valid neighbours; those on a closed grid edge skip
    the neighbours off the grid. Returns the number of pending cells left
    without an exit (0 on a filled surface); those stay pending for the caller.
    """
    n = rows * cols
    off = np.empty(8, dtype=np.int64)
    for k in range(8):
        off[k] = D_ROW[k] * cols + D_COL[k]
    pending = pending_cells(code, rows, cols, rec[:0])
    nbr = np.empty(n, dtype=np.uint8)  # read at pending cells only
    higher = np.empty(pending.size, dtype=np.uint8)
    exits = np.empty(pending.size, dtype=np.uint8)
    _flat_neighbours(z, rows, cols, off, code, pending, nbr, higher, exits)
    region = np.empty(n, dtype=np.int32)  # read where ``mask`` is set only
    mask = np.zeros(n, dtype=np.int32)
    toward = np.zeros(n, dtype=np.int32)
    away_max = np.empty(pending.size, dtype=np.int32)  # per region of the away search (at most one per cell)
    for task in prange(2):
        if task == 0:
            _flats_away(off, nbr, higher, pending, region, mask, away_max)
        else:
            _flats_toward(off, nbr, exits, pending, toward)
    higher = higher[:0]
    for j in prange(pending.size):
        i = pending[j]
        away = away_max[region[i]] - mask[i] if mask[i] > 0 else 0
        mask[i] = 2 * toward[i] + away if toward[i] > 0 else -1
    region = region[:0]  # release: the directions below reuse ``toward``
    away_max = away_max[:0]
    # Steepest descent on the mask; draining neighbours of equal elevation count as 0.
    # Receivers are set first and codes after, so every cell sees its neighbours' pending state.
    stuck = np.zeros(pending.size, dtype=np.uint8)
    for j in prange(pending.size):
        i = pending[j]
        if mask[i] < 0:
            stuck[j] = 1
            continue
        r = i // cols
        flat_nb = nbr[i]
        exit_nb = exits[j]
        best = 0.0
        best_k = -1
        for k in range(8):
            bit = 1 << k
            if flat_nb & bit:
                m_nb = mask[i + off[k]]
                if m_nb < 0:
                    continue
            elif exit_nb & bit:
                m_nb = 0
            else:
                continue
            s = (mask[i] - m_nb) / dist[r, k]
            if s > best:
                best = s
                best_k = k
        if best_k < 0:
            stuck[j] = 1
        else:
            rec[i] = i + off[best_k]
            toward[i] = best_k  # no longer needed as a distance; holds the direction
    for j in prange(pending.size):
        i = pending[j]
        if rec[i] != i:
            code[i] = toward[i]
    return int(stuck.sum())


@njit(cache=True, nogil=True)
def topological_order(rec, valid, n_valid):
    """Valid cells ordered so that every receiver comes before its donors.

    Depth-first from each outlet over donor lists (Braun & Willett 2013): each
    cell's upstream area is then a contiguous run starting at the cell, and
    cells adjacent in the order are mostly adjacent on the ground, which
    keeps later traversals cache-friendly. Returns an array of ``n_valid``
    cells, or fewer if the receiver graph has a cycle (cells on a cycle are
    never reached from an outlet).
    """
    n = rec.size
    start = np.zeros(n + 1, dtype=rec.dtype)
    for i in range(n):
        if valid[i] and rec[i] != i:
            start[rec[i] + 1] += 1
    for i in range(n):
        start[i + 1] += start[i]
    cursor = start[:-1].copy()
    donors = np.empty(start[n], dtype=rec.dtype)
    for i in range(n):
        if valid[i] and rec[i] != i:
            r = rec[i]
            donors[cursor[r]] = i
            cursor[r] += 1
    cursor = cursor[:0]  # release early: the traversal needs only start and donors
    order = np.empty(n_valid, dtype=rec.dtype)
    stack = np.empty(n_valid, dtype=rec.dtype)
    k = 0
    for o in range(n):
        if not valid[o] or rec[o] != o:
            continue
        stack[0] = o
        top = 1
        while top > 0:
            top -= 1
            i = stack[top]
            order[k] = i
            k += 1
            for j in range(start[i], start[i + 1]):
                stack[top] = donors[j]
                top += 1
    return order[:k].copy() if k < n_valid else order


#: Neighbour codes in increasing flat-index order (NW, N, NE, W, E, SW, S, SE): donors are
#: met in the order the receiver lists of :func:`topological_order` hold them.
_ASCENDING = np.array([5, 6, 7, 4, 0, 3, 2, 1], dtype=np.int64)


@njit(cache=True, nogil=True)
def outlet_roots(code, valid):
    """Flat indices of the valid cells with code 8 or more: the roots of :func:`order_from_codes`."""
    m = 0
    for i in range(code.size):
        if valid[i] and code[i] >= 8:
            m += 1
    out = np.empty(m, dtype=np.int64)
    m = 0
    for i in range(code.size):
        if valid[i] and code[i] >= 8:
            out[m] = i
            m += 1
    return out


@njit(cache=True, nogil=True)
def order_from_codes(code, valid, rows, cols, roots, lo, hi, out, at, stack, sizes):
    """:func:`topological_order` of the basins of ``roots[lo:hi]``, read from the D8 codes.

    A cell's donors are the neighbours whose code points back at it, so no receiver
    lists are built (three passes and 8-12 bytes per cell fewer); neighbours are
    scanned in increasing flat index, the order of those lists, so the order is the
    same cell for cell. Roots are the valid cells with code 8 or more
    (:func:`outlet_roots`), those :func:`topological_order` takes as outlets
    (``rec[i] == i``), in increasing index.

    Each basin is written depth-first to ``out`` from position ``at`` on, one after
    the other, and its number of cells to ``sizes[b]``; ``stack`` needs room for the
    largest basin. Returns the position after the last cell written. Basins are
    independent, so groups of roots can run on threads into buffers of their own
    and be joined in root order.
    """
    off = np.empty(8, dtype=np.int64)
    back = np.empty(8, dtype=np.uint8)
    for j in range(8):
        k = _ASCENDING[j]
        off[j] = D_ROW[k] * cols + D_COL[k]
        back[j] = (k + 4) % 8  # a neighbour at direction k drains here when its code is k's opposite
    k = at
    for b in range(lo, hi):
        first = k
        stack[0] = roots[b]
        top = 1
        while top > 0:
            top -= 1
            i = stack[top]
            out[k] = i
            k += 1
            r = i // cols
            c = i - r * cols
            if r == 0 or r == rows - 1 or c == 0 or c == cols - 1:
                for j in range(8):
                    kk = _ASCENDING[j]
                    rr = r + D_ROW[kk]
                    cc = c + D_COL[kk]
                    if 0 <= rr < rows and 0 <= cc < cols:
                        nb = i + off[j]
                        if code[nb] == back[j] and valid[nb]:
                            stack[top] = nb
                            top += 1
            else:
                for j in range(8):
                    nb = i + off[j]
                    if code[nb] == back[j] and valid[nb]:
                        stack[top] = nb
                        top += 1
        sizes[b] = k - first
    return k


@njit(cache=True, nogil=True)
def _spread_basins(starts, threads):
    """Thread of each basin: largest first, each to the least loaded thread (serial, so no parfors)."""
    nb = starts.size - 1
    owner = np.zeros(nb, dtype=np.int64)
    if threads > 1:
        size = np.empty(nb, dtype=np.int64)
        for b in range(nb):
            size[b] = starts[b] - starts[b + 1]  # negated: argsort gives the largest first
        load = np.zeros(threads, dtype=np.int64)
        for b in np.argsort(size, kind="mergesort"):
            t = 0
            for u in range(1, threads):
                if load[u] < load[t]:
                    t = u
            owner[b] = t
            load[t] -= size[b]
    return owner


@njit(cache=True, nogil=True, parallel=True)
def accumulate_area(order, rec, starts, cols, cell_area, threads, out):
    """Drainage area: :func:`accumulate_down` of each cell's row area, one outlet basin per task.

    ``cell_area`` holds one area per row (``order`` holds valid cells only, so no
    grid of areas is needed); ``starts`` holds each basin's first position in the
    depth-first ``order`` and ``order.size`` last. Basins go to threads largest
    first, each to the least loaded thread, so that a few large basins do not leave
    a thread idle. Basins never exchange water and within a basin every cell
    receives its donors' sums in the serial sweep's sequence, so the result is the
    same bit for bit on any number of threads. ``threads`` is ``numba.get_num_threads()`` (an
    argument: calling it in here would keep the kernel out of the cache).
    """
    nb = starts.size - 1
    owner = _spread_basins(starts, threads)
    for t in prange(threads):
        for b in range(nb):
            if owner[b] != t:
                continue
            lo = starts[b]
            hi = starts[b + 1]
            for j in range(lo, hi):
                i = order[j]
                out[i] = cell_area[i // cols]
            for j in range(hi - 1, lo - 1, -1):
                i = order[j]
                r = rec[i]
                if r != i:
                    out[r] += out[i]


@njit(cache=True, nogil=True)
def accumulate_down(order, rec, values, out):
    """out[i] = sum of ``values`` over i and every cell upstream of i."""
    for j in range(order.size):
        i = order[j]
        out[i] = values[i]
    for j in range(order.size - 1, -1, -1):
        i = order[j]
        r = rec[i]
        if r != i:
            out[r] += out[i]


@njit(cache=True, nogil=True)
def integrate_up(order, rec, dist, integrand, start, out):
    """out[i] = out[rec[i]] + integrand[i] * dist[i]; ``start`` at outlets."""
    for j in range(order.size):
        i = order[j]
        r = rec[i]
        if r == i:
            out[i] = start[i]
        else:
            out[i] = out[r] + integrand[i] * dist[i]


@njit(cache=True, nogil=True)
def propagate_up(order, rec, values, out):
    """out[i] = values[outlet of i]: copy each outlet's value to its whole basin."""
    for j in range(order.size):
        i = order[j]
        r = rec[i]
        out[i] = values[i] if r == i else out[r]


@njit(cache=True, nogil=True)
def receiver_distance(rec, code, cols, dist, out):
    """Distance (m) from each cell to its receiver (0 at outlets and invalid cells)."""
    for i in range(rec.size):
        k = code[i]
        out[i] = dist[i // cols, k] if k < 8 else 0.0


@njit(cache=True, nogil=True)
def first_downstream_value(order, rec, is_target, values, out):
    """out[i] = values of the first target cell on the flow path from i (i included); NaN if none."""
    for j in range(order.size):
        i = order[j]
        if is_target[i]:
            out[i] = values[i]
        else:
            r = rec[i]
            out[i] = np.nan if r == i else out[r]


@njit(cache=True, nogil=True)
def label_mouths(labels, area, n_labels):
    """Flat index of each label's cell of largest drainage area (index = label); -1 where a label has no cell."""
    mouth = np.full(n_labels + 1, -1, dtype=np.int64)
    best = np.full(n_labels + 1, -1.0)
    for i in range(labels.size):
        lab = labels[i]
        if lab > 0 and area[i] > best[lab]:
            best[lab] = area[i]
            mouth[lab] = i
    return mouth


@njit(cache=True, nogil=True)
def drain_to_outlets(rec, starts):
    """The outlet (``rec[i] == i``) each start cell drains to, following the receivers down."""
    out = np.empty(starts.size, dtype=np.int64)
    for k in range(starts.size):
        i = starts[k]
        while rec[i] != i:
            i = rec[i]
        out[k] = i
    return out
