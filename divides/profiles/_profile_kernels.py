"""Numba kernels for river profiles: χ, disorder, optimal segmentation."""

from __future__ import annotations

import numpy as np
from numba import njit


@njit(cache=True, nogil=True)
def chi_trapezoid(down, step, integrand, keep):
    """χ along a network, receivers first: χ = χ(down) + ½ (f + f_down) · step.

    Cells not kept are NaN; a kept cell whose downstream cell is not kept (or
    which is an outlet) is a base-level node with χ = 0.
    """
    m = down.size
    chi = np.full(m, np.nan)
    for k in range(m):
        if not keep[k]:
            continue
        d = down[k]
        if d < 0 or not keep[d]:
            chi[k] = 0.0
        else:
            chi[k] = chi[d] + 0.5 * (integrand[k] + integrand[d]) * step[k]
    return chi


@njit(cache=True, nogil=True)
def disorder_sorted(z_sorted):
    """Disorder of elevations sorted by χ: Σ|Δz| / (max z − min z) − 1 (Hergarten et al. 2016)."""
    n = z_sorted.size
    if n < 2:
        return 0.0
    total = 0.0
    lo = z_sorted[0]
    hi = z_sorted[0]
    for i in range(1, n):
        total += abs(z_sorted[i] - z_sorted[i - 1])
        if z_sorted[i] < lo:
            lo = z_sorted[i]
        if z_sorted[i] > hi:
            hi = z_sorted[i]
    if hi <= lo:
        return 0.0
    return total / (hi - lo) - 1.0


@njit(cache=True, nogil=True)
def optimal_partition(x, y, phi, min_len, max_segments):
    """Generalised least-squares piecewise-linear fits with 1 … max_segments segments.

    Segments are independent straight lines over consecutive points, each at
    least ``min_len`` points long. Residuals are AR(1) with ``phi[i]`` the
    correlation between points i − 1 and i (zeros: ordinary least squares).
    Each segment is prewhitened on its own (Prais & Winsten 1954: first row
    kept, row i becomes (r_i − φ_i r_(i−1)) / √(1 − φ_i²)), so its misfit is
    a quadratic form of prefix sums, O(1) per segment, and the dynamic
    programme costs O(K N²). Pass x and y centred (and y detrended) to keep
    the sums well conditioned; a common line does not change any misfit.

    Returns
    -------
    sse : (K,) best total whitened squared misfit for k + 1 segments (inf where impossible)
    starts : (K, K) start index of each segment of the best k + 1 partition
    """
    n = x.size
    # whitened rows: intercept column u, slope column v, response w (row 0 unused)
    puu = np.zeros(n + 1)
    puv = np.zeros(n + 1)
    pvv = np.zeros(n + 1)
    puw = np.zeros(n + 1)
    pvw = np.zeros(n + 1)
    pww = np.zeros(n + 1)
    for i in range(n):
        u = 0.0
        v = 0.0
        w = 0.0
        if i > 0:
            f = phi[i]
            s = np.sqrt(1.0 - f * f)
            u = (1.0 - f) / s
            v = (x[i] - f * x[i - 1]) / s
            w = (y[i] - f * y[i - 1]) / s
        puu[i + 1] = puu[i] + u * u
        puv[i + 1] = puv[i] + u * v
        pvv[i + 1] = pvv[i] + v * v
        puw[i + 1] = puw[i] + u * w
        pvw[i + 1] = pvw[i] + v * w
        pww[i + 1] = pww[i] + w * w

    def seg_sse(a, b):  # points a .. b-1; the first row is (1, x_a, y_a)
        suu = 1.0 + puu[b] - puu[a + 1]
        suv = x[a] + puv[b] - puv[a + 1]
        svv = x[a] * x[a] + pvv[b] - pvv[a + 1]
        suw = y[a] + puw[b] - puw[a + 1]
        svw = x[a] * y[a] + pvw[b] - pvw[a + 1]
        sww = y[a] * y[a] + pww[b] - pww[a + 1]
        det = suu * svv - suv * suv
        if det <= 1e-12 * suu * svv or det <= 1e-300:
            return max(sww - suw * suw / suu, 0.0)
        q = (svv * suw * suw - 2.0 * suv * suw * svw + suu * svw * svw) / det
        return max(sww - q, 0.0)

    K = max_segments
    inf = np.inf
    cost = np.full((K, n + 1), inf)
    back = np.full((K, n + 1), -1, dtype=np.int64)
    for b in range(min_len, n + 1):
        cost[0, b] = seg_sse(0, b)
    for k in range(1, K):
        for b in range((k + 1) * min_len, n + 1):
            best = inf
            arg = -1
            for a in range(k * min_len, b - min_len + 1):
                prev = cost[k - 1, a]
                if prev == inf:
                    continue
                c = prev + seg_sse(a, b)
                if c < best:
                    best = c
                    arg = a
            cost[k, b] = best
            back[k, b] = arg
    sse = np.full(K, inf)
    starts = np.full((K, K), -1, dtype=np.int64)
    for k in range(K):
        sse[k] = cost[k, n]
        if sse[k] == inf:
            continue
        b = n
        for j in range(k, -1, -1):
            a = back[j, b] if j > 0 else 0
            starts[k, j] = a
            b = a
    return sse, starts


@njit(cache=True, nogil=True)
def longest_upstream_path(order, rec, dist):
    """Length (m) of the longest flow path from each cell up to a divide (0 on heads)."""
    out = np.zeros(rec.size)
    for j in range(order.size - 1, -1, -1):
        i = order[j]
        r = rec[i]
        if r != i:
            length = out[i] + dist[i]
            if length > out[r]:
                out[r] = length
    return out


@njit(cache=True, nogil=True)
def network_root(down, keep):
    """For each kept node (receivers first), the base node of its network (-1 if not kept)."""
    m = down.size
    root = np.full(m, -1, dtype=np.int64)
    for k in range(m):
        if not keep[k]:
            continue
        d = down[k]
        root[k] = k if (d < 0 or not keep[d]) else root[d]
    return root


@njit(cache=True, nogil=True)
def basin_disorder(chi, z, cols, starts):
    """Summed disorder over basins for every row (θ) of ``chi`` (Hergarten et al. 2016).

    Nodes are grouped by basin: basin b holds the nodes ``starts[b] : starts[b + 1]``,
    node k being column ``cols[k]`` of ``chi`` with elevation ``z[k]``; basins of fewer
    than 3 nodes are skipped. Each row is ordered as a stable sort by χ would order
    it (NaN last, ties by node); rows are close θ, so each is sorted by insertion from
    the previous row's order, falling back to a merge sort when that order is far off.
    """
    n_theta = chi.shape[0]
    total = np.zeros(n_theta)
    widest = 0
    for b in range(starts.size - 1):
        widest = max(widest, starts[b + 1] - starts[b])
    key = np.empty(widest)
    for b in range(starts.size - 1):
        lo = starts[b]
        hi = starts[b + 1]
        m = hi - lo
        if m < 3:
            continue
        zz = z[lo:hi]
        row = key[:m]
        for k in range(m):
            row[k] = chi[0, cols[lo + k]]
        order = np.argsort(row, kind="mergesort")
        total[0] += _disorder_in_order(zz, order)
        budget = 16 * m + 64  # shifts beyond about m log m: a merge sort is cheaper
        for t in range(1, n_theta):
            for k in range(m):
                row[k] = chi[t, cols[lo + k]]
            if not _insertion_sort(order, row, budget):
                order = np.argsort(row, kind="mergesort")
            total[t] += _disorder_in_order(zz, order)
    return total


@njit(cache=True, nogil=True)
def _disorder_in_order(z, order):
    """:func:`disorder_sorted` of ``z[order]``, the same sums in the same order, without the copy."""
    n = order.size
    if n < 2:
        return 0.0
    total = 0.0
    prev = z[order[0]]
    lo = prev
    hi = prev
    for i in range(1, n):
        v = z[order[i]]
        total += abs(v - prev)
        prev = v
        if v < lo:
            lo = v
        if v > hi:
            hi = v
    if hi <= lo:
        return 0.0
    return total / (hi - lo) - 1.0


@njit(cache=True, nogil=True)
def _after(a, ia, b, ib):
    """Whether (a, ia) comes after (b, ib) in a stable ascending sort with NaN last."""
    if np.isnan(a):
        return not np.isnan(b) or ia > ib
    if np.isnan(b):
        return False
    return a > b or (a == b and ia > ib)


@njit(cache=True, nogil=True)
def _insertion_sort(order, key, budget):
    """Sort ``order`` in place by (key, index); False (order unfinished) after ``budget`` shifts."""
    shifts = 0
    for k in range(1, order.size):
        cur = order[k]
        v = key[cur]
        j = k - 1
        while j >= 0 and _after(key[order[j]], order[j], v, cur):
            order[j + 1] = order[j]
            j -= 1
            shifts += 1
        order[j + 1] = cur
        if shifts > budget:
            return False
    return True


@njit(cache=True, nogil=True)
def best_hinge(x, y, phi, lo, hi):
    """Index j in [lo, hi) whose hinge at ½(x[j−1] + x[j]) fits y(x) with least GLS misfit.

    The hinge is a continuous two-line fit, columns 1, min(x − h, 0), max(x − h, 0);
    rows are prewhitened with the AR(1) coefficients ``phi`` (Prais & Winsten 1954).
    """
    n = x.size
    best = np.inf
    arg = lo
    a = np.empty((n, 3))
    w = np.empty(n)
    for j in range(lo, hi):
        h = 0.5 * (x[j - 1] + x[j])
        for i in range(n):
            d = x[i] - h
            c1 = d if d < 0.0 else 0.0
            c2 = d if d > 0.0 else 0.0
            if i == 0:
                a[i, 0] = 1.0
                a[i, 1] = c1
                a[i, 2] = c2
                w[i] = y[i]
            else:
                f = phi[i]
                s = np.sqrt(1.0 - f * f)
                dp = x[i - 1] - h
                p1 = dp if dp < 0.0 else 0.0
                p2 = dp if dp > 0.0 else 0.0
                a[i, 0] = (1.0 - f) / s
                a[i, 1] = (c1 - f * p1) / s
                a[i, 2] = (c2 - f * p2) / s
                w[i] = (y[i] - f * y[i - 1]) / s
        m = a.T @ a
        r = a.T @ w
        coef = np.linalg.lstsq(m, r)[0]
        res = w - a @ coef
        sse = np.sum(res * res)
        if sse < best:
            best = sse
            arg = j
    return arg
