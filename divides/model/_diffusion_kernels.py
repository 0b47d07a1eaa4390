"""Numba kernel for implicit linear hillslope diffusion (Douglas alternating-direction scheme).

Cell kinds (uint8): ``ACTIVE`` cells are updated; ``FIXED`` cells hold their
value (Dirichlet: outlets at base level); ``WALL`` and ``INVALID`` cells take
no part (no flux across their faces: Neumann). Active cells are interior:
their four edge neighbours exist, so no bounds checks are needed.
"""

from __future__ import annotations

from numba import njit

ACTIVE = 0
FIXED = 1
WALL = 2
INVALID = 3


@njit(cache=True, inline="always")
def _open(kind_a, kind_b):
    """A face conducts when both sides take part (active or fixed)."""
    return kind_a <= FIXED and kind_b <= FIXED


@njit(cache=True)
def douglas_step(z, kind, rows, cols, gx, gy, inv_area, dt, y1, cp, line_c, line_d):
    """One step of dz/dt = (1/A) div(D grad z) by the Douglas ADI scheme.

    With Lx, Ly the east-west and north-south parts of the finite-volume
    operator, the scheme solves

        (I - dt Lx) y1 = z + dt Ly z
        (I - dt Ly) z' = y1 - dt Ly z

    so that ``z' - z = dt (Lx y1 + Ly z')``: unconditionally stable, its
    steady state is exactly the discrete steady state, and each Fourier
    mode is damped by a factor in (0, 1] (no sign-flipping oscillation).
    Both systems are tridiagonal (Thomas algorithm); the north-south sweep
    runs across all columns at once so memory is read row by row.

    Parameters
    ----------
    z : float64[:]
        Elevations (rows * cols), updated in place.
    kind : uint8[:]
        ACTIVE / FIXED / WALL / INVALID per cell.
    gx : float64[:]
        Per row: conductance D dy / dx of an east-west face (m²/yr).
    gy : float64[:]
        Per row r < rows - 1: conductance D w / d of the face between rows r
        and r + 1 (face width w, centre distance d).
    inv_area : float64[:]
        Per row: 1 / cell area (1/m²).
    dt : float
        Time step (years).
    y1, cp : float64[:]
        Work arrays of rows * cols.
    line_c, line_d : float64[:]
        Work arrays of at least ``cols``.

    Returns
    -------
    outflow : float
        Volume (m³) leaving the active cells through faces with fixed cells.
    """
    outflow = 0.0
    # --- east-west implicit sweep, row by row
    for r in range(rows):
        base = r * cols
        for c in range(cols):
            i = base + c
            if kind[i] != ACTIVE:
                y1[i] = z[i]
                line_c[c] = 0.0
                line_d[c] = z[i]
                continue
            s = dt * inv_area[r]
            aw = s * gx[r] if _open(kind[i], kind[i - 1]) else 0.0
            ae = s * gx[r] if _open(kind[i], kind[i + 1]) else 0.0
            ly = 0.0
            if _open(kind[i], kind[i - cols]):
                ly += gy[r - 1] * (z[i - cols] - z[i])
            if _open(kind[i], kind[i + cols]):
                ly += gy[r] * (z[i + cols] - z[i])
            rhs = z[i] + s * ly
            # Thomas forward sweep: previous row entry (c - 1) is already reduced.
            denom = 1.0 + aw + ae
            if aw != 0.0:  # (products with a zero coefficient are skipped: invalid cells hold NaN)
                denom -= aw * line_c[c - 1]
                rhs += aw * line_d[c - 1]
            line_c[c] = ae / denom
            line_d[c] = rhs / denom
        # back substitution (sub/super diagonals are -aw, -ae)
        y1[base + cols - 1] = line_d[cols - 1]
        for c in range(cols - 2, -1, -1):
            y1[base + c] = line_d[c] + line_c[c] * y1[base + c + 1] if line_c[c] != 0.0 else line_d[c]
        for c in range(1, cols - 1):
            i = base + c
            if kind[i] != ACTIVE:
                continue
            if kind[i - 1] == FIXED:
                outflow += dt * gx[r] * (y1[i] - y1[i - 1])
            if kind[i + 1] == FIXED:
                outflow += dt * gx[r] * (y1[i] - y1[i + 1])
    # --- north-south implicit sweep, all columns at once (forward over rows)
    for r in range(rows):
        base = r * cols
        for c in range(cols):
            i = base + c
            if kind[i] != ACTIVE:
                cp[i] = 0.0
                y1[i] = z[i]  # identity row: z' = z
                continue
            s = dt * inv_area[r]
            rhs = y1[i]
            denom = 1.0
            if _open(kind[i], kind[i - cols]):
                an = s * gy[r - 1]
                rhs += an * (y1[i - cols] - z[i - cols] + z[i])
                denom += an * (1.0 - cp[i - cols])
            a_s = 0.0
            if _open(kind[i], kind[i + cols]):
                a_s = s * gy[r]
                rhs -= a_s * (z[i + cols] - z[i])
                denom += a_s
            cp[i] = a_s / denom
            y1[i] = rhs / denom
    # back substitution over rows, writing z'; y1 now holds the reduced right-hand sides
    for r in range(rows - 1, -1, -1):
        base = r * cols
        for c in range(cols):
            i = base + c
            if kind[i] != ACTIVE:
                continue
            z[i] = y1[i] + cp[i] * z[i + cols] if cp[i] != 0.0 else y1[i]
    for r in range(1, rows - 1):
        base = r * cols
        for c in range(cols):
            i = base + c
            if kind[i] != ACTIVE:
                continue
            if kind[i - cols] == FIXED:
                outflow += dt * gy[r - 1] * (z[i] - z[i - cols])
            if kind[i + cols] == FIXED:
                outflow += dt * gy[r] * (z[i] - z[i + cols])
    return outflow
