"""Numba kernels for the implicit stream-power step (plain arrays in, plain arrays out).

Conventions: flat indices ``i = row * cols + col``; ``order`` lists cells
receivers-first; ``rec[i] == i`` at outlets. Constant fields are passed as
1-element arrays, rasters as flat grids.
"""

from __future__ import annotations


from numba import njit

#: Newton iterations stop when the step is below this fraction of the current drop.
NEWTON_RTOL = 1e-13
#: Safety cap; the safeguarded iteration converges in a handful of steps.
NEWTON_MAX_ITER = 60


@njit(cache=True, nogil=True, inline="always")
def _solve_drop(x_star, f, n):
    """Root x in (0, x_star] of ``x - x_star + f * x**n = 0`` (f > 0, x_star > 0).

    The left side is increasing in x, negative at 0 and non-negative at x_star,
    so the root is unique and bracketed. Newton steps that leave the bracket
    are replaced by bisection (safeguarded Newton), which covers both the
    convex (n > 1) and concave (n < 1) cases.
    """
    lo = 0.0
    hi = x_star
    # Start on the side from which Newton converges monotonically: from above when the
    # left side is convex (n > 1), from below when it is concave (n < 1). The root lies
    # below both x_star and (x_star / f)^(1/n), and above the smaller of their halves'
    # counterparts, so these starts are within a small factor of it.
    if n > 1.0:
        x = min(x_star, (x_star / f) ** (1.0 / n))
    else:
        x = min(0.5 * x_star, (0.5 * x_star / f) ** (1.0 / n))
    for _ in range(NEWTON_MAX_ITER):
        xn = x**n
        g = x - x_star + f * xn
        if g > 0.0:
            hi = x
        elif g < 0.0:
            lo = x
        else:
            return x
        dg = 1.0 + n * f * xn / x
        step = g / dg
        if abs(step) <= NEWTON_RTOL * x:
            # Converged: a step this small may round onto the bracket, which is not a reason to bisect.
            return min(max(x - step, lo), hi)
        x_new = x - step
        if not (lo < x_new < hi):
            x_new = 0.5 * (lo + hi)
        x = x_new
    return x


@njit(cache=True, nogil=True)
def fluvial_step(z, order, rec, dist, drainage, active, cols, cell_area, erodibility, uplift, m, n, dt):
    """Uplift and erode every active cell by one implicit step of E = K A^m S^n.

    Cells are visited receivers-first, so each receiver already holds its new
    elevation (Braun & Willett 2013). For n = 1 the new elevation is explicit,
    ``h = (h* + F h_r) / (1 + F)`` with ``h* = h + U dt`` and
    ``F = K A^m dt / L``; otherwise ``h - h* + K A^m dt ((h - h_r) / L)^n = 0``
    is solved by safeguarded Newton iteration on ``h - h_r`` (Braun & Deal
    2023), which keeps ``h_r <= h <= h*``. A cell not above its receiver after
    uplift (inside a filled depression or on a flat) does not erode.

    Parameters
    ----------
    z : float64[:]
        Elevations, updated in place (receivers of active cells must already
        hold their new values, e.g. base level at outlets).
    order, rec : int[:]
        Topological order (outlets first) and receivers.
    dist : float64[:]
        Distance (m) from each cell to its receiver.
    drainage : float64[:]
        Drainage area (m², or runoff-weighted area) per cell.
    active : bool[:]
        Cells that are uplifted and eroded.
    cols : int
        Grid width (for the row of a flat index).
    cell_area : float64[:]
        Cell area (m²) per row.
    erodibility, uplift : float64[:]
        Length 1 (constant) or one value per cell.
    m, n, dt : float
        Area and slope exponents, time step (years).

    Returns
    -------
    uplift_volume, eroded_volume : float
        Volumes (m³) added by uplift and removed by erosion over the active cells.
    """
    k_raster = erodibility.size > 1
    u_raster = uplift.size > 1
    k0 = erodibility[0]
    u0 = uplift[0]
    linear = n == 1.0
    up_volume = 0.0
    eroded = 0.0
    for j in range(order.size):
        i = order[j]
        if not active[i]:
            continue
        a_cell = cell_area[i // cols]
        u = uplift[i] if u_raster else u0
        h_star = z[i] + u * dt
        up_volume += u * dt * a_cell
        h_r = z[rec[i]]
        k = erodibility[i] if k_raster else k0
        if h_star <= h_r or k <= 0.0 or rec[i] == i:
            z[i] = h_star
            continue
        length = dist[i]
        if linear:
            f = k * drainage[i] ** m * dt / length
            h = (h_star + f * h_r) / (1.0 + f)
        else:
            f = k * drainage[i] ** m * dt / length**n
            h = h_r + _solve_drop(h_star - h_r, f, n)
        eroded += (h_star - h) * a_cell
        z[i] = h
    return up_volume, eroded
