"""Numba kernel for implicit linear hillslope diffusion (backward Euler, conjugate gradients).

Cell kinds (uint8): ``ACTIVE`` cells are updated; ``FIXED`` cells hold their
value (Dirichlet: outlets at base level); ``WALL`` and ``INVALID`` cells take
no part (no flux across their faces: Neumann). Active cells are interior:
their four edge neighbours exist, so no bounds checks are needed.
"""

from __future__ import annotations

import numpy as np
from numba import njit

ACTIVE = 0
FIXED = 1
WALL = 2
INVALID = 3


@njit(cache=True, nogil=True, inline="always")
def _conducts(kind_nb):
    """A face of an active cell conducts when the neighbour takes part (active or fixed)."""
    return kind_nb <= FIXED


@njit(cache=True, nogil=True)
def active_cells(kind):
    """Flat indices of the active cells."""
    count = 0
    for i in range(kind.size):
        if kind[i] == ACTIVE:
            count += 1
    out = np.empty(count, dtype=np.int64)
    k = 0
    for i in range(kind.size):
        if kind[i] == ACTIVE:
            out[k] = i
            k += 1
    return out


@njit(cache=True, nogil=True)
def backward_euler_step(z, kind, active, cols, gx, gy, area, dt, rtol, max_iter, r, p, q, diag):
    """One backward-Euler step of A dz/dt = div(D grad z), solved by conjugate gradients.

    For each active cell i (area A_i) the new surface z' satisfies

        A_i (z'_i - z_i) = dt * sum over conducting faces f of g_f (z'_nb - z'_i)

    with g_f the face conductance (m²/yr) and fixed neighbours at their
    value. Multiplied through by the areas the system is symmetric positive
    definite, so it is solved matrix-free by conjugate gradients with a
    Jacobi (diagonal) preconditioner, starting from z. Backward Euler damps
    every mode monotonically and its fixed point with any operator-split
    source is the exact discrete steady state, whatever the step.

    Parameters
    ----------
    z : float64[:]
        Elevations (rows * cols), updated in place.
    kind : uint8[:]
        ACTIVE / FIXED / WALL / INVALID per cell.
    active : int64[:]
        Flat indices of the active cells.
    cols : int
        Grid width.
    gx : float64[:]
        Per row: conductance of an east-west face, D dy / dx.
    gy : float64[:]
        Per row r < rows - 1: conductance of the face between rows r and r + 1.
    area : float64[:]
        Per row: cell area (m²).
    dt : float
        Time step (years).
    rtol : float
        Stop when every cell's preconditioned residual (an elevation
        correction, m) is below ``rtol * max(1, max |z|)``.
    max_iter : int
        Iteration cap.
    r, p, q, diag : float64[:]
        Work arrays of rows * cols.

    Returns
    -------
    outflow : float
        Volume (m³) leaving the active cells through faces with fixed cells.
    iterations : int
        Conjugate-gradient iterations taken.
    """
    n_act = active.size
    zmax = 1.0
    for k in range(n_act):
        v = abs(z[active[k]])
        if v > zmax:
            zmax = v
    tol = rtol * zmax
    # Residual of the start z: rhs - M z = -dt * sum g (z_i - z_nb); diagonal; p = 0 off the active set.
    rs = 0.0
    worst = 0.0
    for k in range(n_act):
        i = active[k]
        row = i // cols
        d = area[row]
        flux = 0.0
        g = dt * gx[row]
        if _conducts(kind[i - 1]):
            d += g
            flux += g * (z[i - 1] - z[i])
        if _conducts(kind[i + 1]):
            d += g
            flux += g * (z[i + 1] - z[i])
        g = dt * gy[row - 1]
        if _conducts(kind[i - cols]):
            d += g
            flux += g * (z[i - cols] - z[i])
        g = dt * gy[row]
        if _conducts(kind[i + cols]):
            d += g
            flux += g * (z[i + cols] - z[i])
        diag[i] = d
        r[i] = flux
        s = flux / d
        p[i] = s
        rs += flux * s
        if abs(s) > worst:
            worst = abs(s)
    for k in range(kind.size):
        if kind[k] != ACTIVE:
            p[k] = 0.0
            q[k] = 0.0
    iterations = 0
    while worst > tol and iterations < max_iter:
        iterations += 1
        # q = M p (fixed and wall neighbours hold p = 0, so they only add to the diagonal)
        pq = 0.0
        for k in range(n_act):
            i = active[k]
            row = i // cols
            v = diag[i] * p[i]
            g = dt * gx[row]
            if kind[i - 1] == ACTIVE:
                v -= g * p[i - 1]
            if kind[i + 1] == ACTIVE:
                v -= g * p[i + 1]
            if kind[i - cols] == ACTIVE:
                v -= dt * gy[row - 1] * p[i - cols]
            if kind[i + cols] == ACTIVE:
                v -= dt * gy[row] * p[i + cols]
            q[i] = v
            pq += p[i] * v
        if pq <= 0.0:
            break  # converged to round-off (p vanished)
        alpha = rs / pq
        rs_new = 0.0
        worst = 0.0
        for k in range(n_act):
            i = active[k]
            z[i] += alpha * p[i]
            r[i] -= alpha * q[i]
            s = r[i] / diag[i]
            rs_new += r[i] * s
            if abs(s) > worst:
                worst = abs(s)
        beta = rs_new / rs if rs > 0.0 else 0.0
        rs = rs_new
        for k in range(n_act):
            i = active[k]
            p[i] = r[i] / diag[i] + beta * p[i]
    outflow = 0.0
    for k in range(n_act):
        i = active[k]
        row = i // cols
        if kind[i - 1] == FIXED:
            outflow += dt * gx[row] * (z[i] - z[i - 1])
        if kind[i + 1] == FIXED:
            outflow += dt * gx[row] * (z[i] - z[i + 1])
        if kind[i - cols] == FIXED:
            outflow += dt * gy[row - 1] * (z[i] - z[i - cols])
        if kind[i + cols] == FIXED:
            outflow += dt * gy[row] * (z[i] - z[i + cols])
    return outflow, iterations
