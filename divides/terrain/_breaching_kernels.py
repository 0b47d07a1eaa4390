"""Numba kernels for least-cost depression breaching (Lindsay 2016, Hydrological Processes 30).

Plain arrays and scalars in, plain arrays and scalars out; validation, dtype and
layout are the business of :mod:`divides.terrain.breaching`. Grids are flat
row-major arrays, ``i = row * cols + col``.

Search state lives in small growable per-search arrays addressed through one
int32 ``slot`` array over the grid (``-1`` = untouched), so the working set of a
search costs memory in proportion to the cells it touches, and resetting it
between pits walks only those cells.
"""

from __future__ import annotations

import numpy as np
from numba import njit

__all__ = ["all_finite", "pit_candidates", "depression_seeds", "breach_kernel"]

# 8-neighbour offsets (row, col).
_DR = np.array([-1, -1, -1, 0, 0, 1, 1, 1], dtype=np.int64)
_DC = np.array([-1, 0, 1, -1, 1, -1, 0, 1], dtype=np.int64)

_UNTOUCHED = -1
_MARKED = -2


@njit(cache=True, nogil=True)
def _grow(a, n):
    out = np.empty(n, a.dtype)
    out[: a.size] = a
    return out


@njit(cache=True, nogil=True)
def all_finite(z, valid):
    """True if every valid cell is finite (no temporary the size of the grid)."""
    for i in range(z.size):
        if valid[i] and not np.isfinite(z[i]):
            return False
    return True


@njit(cache=True, nogil=True)
def _is_candidate(z, valid, outlets, rows, cols, i):
    """A valid non-outlet cell with no strictly lower valid neighbour."""
    if not valid[i] or outlets[i]:
        return False
    r = i // cols
    c = i - r * cols
    zi = z[i]
    for d in range(8):
        rr = r + _DR[d]
        cc = c + _DC[d]
        if rr < 0 or rr >= rows or cc < 0 or cc >= cols:
            continue
        j = rr * cols + cc
        if valid[j] and z[j] < zi:
            return False
    return True


@njit(cache=True, nogil=True)
def pit_candidates(z, valid, outlets, rows, cols):
    """Flat indices of cells with no strictly lower neighbour (unsorted).

    Two passes (count, then fill) so the only allocation is the result.
    """
    n = rows * cols
    count = 0
    for i in range(n):
        if _is_candidate(z, valid, outlets, rows, cols, i):
            count += 1
    out = np.empty(count, np.int64)
    k = 0
    for i in range(n):
        if _is_candidate(z, valid, outlets, rows, cols, i):
            out[k] = i
            k += 1
    return out


@njit(cache=True, nogil=True)
def depression_seeds(z, valid, outlets, rows, cols, cands, mark):
    """One representative cell per depression bottom, in the order of ``cands``.

    A depression bottom is a connected set of equal-elevation cells none of
    which is an outlet or has a strictly lower neighbour; a flat that touches
    lower ground or an outlet already drains and is left to flat resolution.
    Each equal-elevation component is explored once (``mark`` records it), so
    the pass is linear in the cells of those components.

    ``mark`` is an int32 grid of ``-1``; it is returned to ``-1`` on exit.
    """
    queue = np.empty(64, np.int64)
    reps = np.empty(64, np.int64)
    nreps = 0
    for k in range(cands.size):
        c0 = cands[k]
        if mark[c0] != _UNTOUCHED:
            continue
        z0 = z[c0]
        mark[c0] = _MARKED
        queue[0] = c0
        qn = 1
        head = 0
        drains = False
        while head < qn:
            i = queue[head]
            head += 1
            if outlets[i]:
                drains = True
            r = i // cols
            c = i - r * cols
            for d in range(8):
                rr = r + _DR[d]
                cc = c + _DC[d]
                if rr < 0 or rr >= rows or cc < 0 or cc >= cols:
                    continue
                j = rr * cols + cc
                if not valid[j]:
                    continue
                zj = z[j]
                if zj < z0:
                    drains = True
                elif zj == z0 and mark[j] == _UNTOUCHED:
                    mark[j] = _MARKED
                    if qn == queue.size:
                        queue = _grow(queue, 2 * queue.size)
                    queue[qn] = j
                    qn += 1
        if not drains:
            if nreps == reps.size:
                reps = _grow(reps, 2 * reps.size)
            reps[nreps] = c0
            nreps += 1
    # Only cells of candidate flats were marked, but a full sweep is cheap next
    # to the neighbour scans above and needs no record of them.
    for i in range(mark.size):
        mark[i] = _UNTOUCHED
    return reps[:nreps].copy()


@njit(cache=True, nogil=True)
def _before(c1, l1, c2, l2):
    # Heap order: least total lowering first, then the shorter path.
    return c1 < c2 or (c1 == c2 and l1 < l2)


@njit(cache=True, nogil=True)
def _heap_push(hc, hl, hs, hn, cost, length, s):
    k = hn
    while k > 0:
        p = (k - 1) >> 1
        if _before(cost, length, hc[p], hl[p]):
            hc[k] = hc[p]
            hl[k] = hl[p]
            hs[k] = hs[p]
            k = p
        else:
            break
    hc[k] = cost
    hl[k] = length
    hs[k] = s
    return hn + 1


@njit(cache=True, nogil=True)
def _heap_pop(hc, hl, hs, hn):
    """Remove the root; return (cost, length, slot, new size)."""
    cost = hc[0]
    length = hl[0]
    s = hs[0]
    hn -= 1
    if hn > 0:
        lc = hc[hn]
        ll = hl[hn]
        ls = hs[hn]
        k = 0
        while True:
            a = 2 * k + 1
            if a >= hn:
                break
            b = a + 1
            if b < hn and _before(hc[b], hl[b], hc[a], hl[a]):
                a = b
            if _before(hc[a], hl[a], lc, ll):
                hc[k] = hc[a]
                hl[k] = hl[a]
                hs[k] = hs[a]
                k = a
            else:
                break
        hc[k] = lc
        hl[k] = ll
        hs[k] = ls
    return cost, length, s, hn


@njit(cache=True, nogil=True)
def _step_length(r, rr, cc_diff, dx, dy):
    # Centre-to-centre distance: across rows it is half of each row's height;
    # along a diagonal the two rows' widths are averaged.
    if rr == r:
        return dx[r]
    h = 0.5 * (dy[r] + dy[rr])
    if cc_diff == 0:
        return h
    w = 0.5 * (dx[r] + dx[rr])
    return np.sqrt(w * w + h * h)


@njit(cache=True, nogil=True)
def breach_kernel(surf, orig, valid, outlets, rows, cols, reps, dx, dy, area, max_len, max_depth, neg_inf, slot):
    """Breach each depression in ``reps`` (lowest first) by a least-lowering path.

    For every depression bottom (the equal-elevation component of the
    representative, re-read from the current surface) a multi-source Dijkstra
    search runs over 8-neighbours. Every cell on a path gets a *bed*: the seed
    keeps its elevation and each following cell sits one representable step
    (``nextafter`` toward ``neg_inf``) below its predecessor's bed, so the carved
    path descends strictly in the surface's own precision. The cost of entering
    a cell is how far it must be lowered to its bed; ties go to the shorter path.
    The search ends at the first settled exit: an outlet (lowered to its bed if
    needed) or a cell already below its predecessor's bed (left untouched).
    Entries longer than ``max_len`` metres or lowering a cell by more than
    ``max_depth`` are pruned; a search that runs dry leaves the depression for
    filling. Cells are only ever lowered.

    ``surf`` is modified in place; ``orig`` is the untouched input, used to count
    distinct carved cells. ``slot`` is an int32 grid of ``-1`` and is left so.

    Returns
    -------
    n_breached, n_unresolved, carved_cells, carved_volume
    """
    cap = 256
    s_cell = np.empty(cap, np.int64)
    s_parent = np.empty(cap, np.int32)
    s_cost = np.empty(cap, np.float64)
    s_len = np.empty(cap, np.float64)
    s_bed = np.empty(cap, surf.dtype)
    s_closed = np.empty(cap, np.bool_)
    s_exit = np.empty(cap, np.bool_)
    hcap = 256
    h_cost = np.empty(hcap, np.float64)
    h_len = np.empty(hcap, np.float64)
    h_slot = np.empty(hcap, np.int32)

    n_breached = 0
    n_unresolved = 0
    carved_cells = 0
    carved_volume = 0.0

    for k in range(reps.size):
        p = reps[k]
        z0 = surf[p]

        # Seeds: the depression bottom's equal-elevation component. If it now
        # touches lower ground or an outlet, an earlier carve already drained it.
        slot[p] = 0
        s_cell[0] = p
        ns = 1
        head = 0
        drains = False
        while head < ns:
            i = s_cell[head]
            s_parent[head] = -1
            s_cost[head] = 0.0
            s_len[head] = 0.0
            s_bed[head] = z0
            s_closed[head] = False
            s_exit[head] = False
            head += 1
            if outlets[i]:
                drains = True
            r = i // cols
            c = i - r * cols
            for d in range(8):
                rr = r + _DR[d]
                cc = c + _DC[d]
                if rr < 0 or rr >= rows or cc < 0 or cc >= cols:
                    continue
                j = rr * cols + cc
                if not valid[j]:
                    continue
                zj = surf[j]
                if zj < z0:
                    drains = True
                elif zj == z0 and slot[j] == _UNTOUCHED:
                    if ns == cap:
                        cap *= 2
                        s_cell = _grow(s_cell, cap)
                        s_parent = _grow(s_parent, cap)
                        s_cost = _grow(s_cost, cap)
                        s_len = _grow(s_len, cap)
                        s_bed = _grow(s_bed, cap)
                        s_closed = _grow(s_closed, cap)
                        s_exit = _grow(s_exit, cap)
                    slot[j] = ns
                    s_cell[ns] = j
                    ns += 1

        found = -1
        if not drains:
            if ns > hcap:
                while hcap < ns:
                    hcap *= 2
                h_cost = _grow(h_cost, hcap)
                h_len = _grow(h_len, hcap)
                h_slot = _grow(h_slot, hcap)
            hn = 0
            for s in range(ns):
                hn = _heap_push(h_cost, h_len, h_slot, hn, 0.0, 0.0, s)

            while hn > 0:
                cst, ln, s, hn = _heap_pop(h_cost, h_len, h_slot, hn)
                if s_closed[s]:
                    continue
                if cst > s_cost[s] or (cst == s_cost[s] and ln > s_len[s]):
                    continue  # stale entry; a better one was pushed later
                s_closed[s] = True
                if s_exit[s]:
                    found = s
                    break
                # Room for up to eight new slots and heap entries.
                if ns + 8 > cap:
                    cap *= 2
                    s_cell = _grow(s_cell, cap)
                    s_parent = _grow(s_parent, cap)
                    s_cost = _grow(s_cost, cap)
                    s_len = _grow(s_len, cap)
                    s_bed = _grow(s_bed, cap)
                    s_closed = _grow(s_closed, cap)
                    s_exit = _grow(s_exit, cap)
                if hn + 8 > hcap:
                    hcap *= 2
                    h_cost = _grow(h_cost, hcap)
                    h_len = _grow(h_len, hcap)
                    h_slot = _grow(h_slot, hcap)

                i = s_cell[s]
                r = i // cols
                c = i - r * cols
                bed = s_bed[s]
                bed_next = np.nextafter(bed, neg_inf)
                for d in range(8):
                    rr = r + _DR[d]
                    cc = c + _DC[d]
                    if rr < 0 or rr >= rows or cc < 0 or cc >= cols:
                        continue
                    j = rr * cols + cc
                    if not valid[j]:
                        continue
                    t = slot[j]
                    if t >= 0 and s_closed[t]:
                        continue
                    nl = ln + _step_length(r, rr, _DC[d], dx, dy)
                    if nl > max_len:
                        continue
                    zj = surf[j]
                    if outlets[j]:
                        is_exit = True
                        if zj > bed_next:
                            lower = np.float64(zj) - np.float64(bed_next)
                            new_bed = bed_next
                        else:
                            lower = 0.0
                            new_bed = zj
                    elif zj < bed:
                        is_exit = True
                        lower = 0.0
                        new_bed = zj
                    else:
                        is_exit = False
                        lower = np.float64(zj) - np.float64(bed_next)
                        new_bed = bed_next
                    if lower > max_depth:
                        continue
                    nc = cst + lower
                    if t < 0:
                        t = ns
                        ns += 1
                        slot[j] = t
                        s_cell[t] = j
                        s_closed[t] = False
                    elif not _before(nc, nl, s_cost[t], s_len[t]):
                        continue
                    s_parent[t] = s
                    s_cost[t] = nc
                    s_len[t] = nl
                    s_bed[t] = new_bed
                    s_exit[t] = is_exit
                    hn = _heap_push(h_cost, h_len, h_slot, hn, nc, nl, t)

        if drains:
            n_breached += 1
        elif found >= 0:
            n_breached += 1
            s = found
            while s_parent[s] >= 0:
                i = s_cell[s]
                b = s_bed[s]
                if b < surf[i]:
                    if surf[i] == orig[i]:
                        carved_cells += 1
                    carved_volume += (np.float64(surf[i]) - np.float64(b)) * area[i // cols]
                    surf[i] = b
                s = s_parent[s]
        else:
            n_unresolved += 1

        for s in range(ns):
            slot[s_cell[s]] = _UNTOUCHED

    return n_breached, n_unresolved, carved_cells, carved_volume
