"""Detachment-limited stream-power erosion, E = K A^m S^n, solved implicitly in O(n)."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from divides.errors import ParameterError
from divides.model import _stream_power_kernels as _k
from divides.model.forcing import as_field, check_positive
from divides.terrain.routing import FlowGraph

__all__ = ["FluvialStep", "stream_power_step", "check_exponents", "check_time_step"]


def check_exponents(m: float, n: float) -> tuple[float, float]:
    """Validate the stream-power exponents; return them as floats.

    Raises
    ------
    ParameterError
        Unless ``0 <= m`` and ``0 < n``, both finite.
    """
    try:
        m_f, n_f = float(m), float(n)
    except (TypeError, ValueError) as exc:
        raise ParameterError(f"`m` and `n` must be numbers; got m={m!r}, n={n!r}") from exc
    if not (math.isfinite(m_f) and m_f >= 0):
        raise ParameterError(f"`m` (area exponent) must be a finite number >= 0; got {m!r}")
    if not (math.isfinite(n_f) and n_f > 0):
        raise ParameterError(f"`n` (slope exponent) must be a finite number > 0; got {n!r}")
    return m_f, n_f


def check_time_step(dt: Any, name: str = "dt") -> float:
    """Validate a positive, finite time in years."""
    return check_positive(dt, name, "years")


@dataclass(frozen=True, eq=False)
class FluvialStep:
    """Result of one stream-power step.

    Attributes
    ----------
    elevation : ndarray
        The new surface (m), DEM shape.
    uplift_m3 : float
        Volume added by uplift over the updated cells.
    eroded_m3 : float
        Volume removed by erosion.
    """

    elevation: np.ndarray
    uplift_m3: float
    eroded_m3: float


def stream_power_step(
    z: np.ndarray,
    flow: FlowGraph,
    *,
    dt: float,
    erodibility: float | np.ndarray,
    m: float = 0.5,
    n: float = 1.0,
    uplift: float | np.ndarray = 0.0,
    drainage_area: np.ndarray | None = None,
    fixed: np.ndarray | None = None,
) -> FluvialStep:
    """Uplift a surface and erode it by one implicit step of E = K A^m S^n.

    Parameters
    ----------
    z : ndarray (rows, cols)
        Elevations (m) at the start of the step; not modified.
    flow : FlowGraph
        Routing of ``z`` (receivers, order, distances, drainage area).
    dt : float
        Time step (years). Any positive value is stable.
    erodibility : float or ndarray
        K, in m^(1 - 2m) / yr (S is dimensionless, so E is in m/yr for any
        n); 0 switches erosion off.
    m, n : float
        Exponents of drainage area and slope.
    uplift : float or ndarray
        Rock uplift rate U (m/yr) relative to base level.
    drainage_area : ndarray, optional
        Area to use in place of ``flow.area`` (m²), e.g. a runoff-weighted
        area ``flow.weighted_area(runoff)`` as a discharge proxy.
    fixed : ndarray of bool, optional
        Cells held where they are (no uplift, no erosion); outlets always are.

    Returns
    -------
    FluvialStep

    Notes
    -----
    Cells are updated receivers-first (Braun & Willett 2013), so the new
    elevation of each cell depends only on its receiver's new elevation:
    for n = 1, ``h = (h + U dt + F h_r) / (1 + F)`` with
    ``F = K A^m dt / L`` (L the distance to the receiver); for n != 1 the
    same implicit equation is solved by Newton iteration, safeguarded to stay
    between the receiver and the uplifted elevation (Braun & Deal 2023). A
    cell not above its receiver after uplift (in a depression the routing
    filled, or on a flat) is uplifted but not eroded.

    Examples
    --------
    >>> import numpy as np
    >>> from divides import Dem, route
    >>> z = np.zeros((3, 4)); z[1, 1:3] = [1.0, 2.0]
    >>> flow = route(Dem.from_array(z, cell_size=100.0))
    >>> step = stream_power_step(z, flow, dt=1000.0, erodibility=1e-4, m=0.5, uplift=0.0)
    >>> bool(step.elevation[1, 1] < 1.0), float(step.uplift_m3)
    (True, 0.0)
    """
    arr = np.asarray(z)
    if arr.shape != flow.shape:
        raise ParameterError(f"`z` must have the routing's shape {flow.shape}; got {arr.shape}")
    dt_f = check_time_step(dt)
    m_f, n_f = check_exponents(m, n)
    valid = flow.dem.valid
    shape = flow.shape
    k = as_field(erodibility, shape, name="erodibility", unit="m^(1-2m)/yr", minimum=0.0, valid=valid)
    u = as_field(uplift, shape, name="uplift", unit="m/yr", valid=valid)
    if drainage_area is None:
        area = flow.area.ravel()
    else:
        area = as_field(drainage_area, shape, name="drainage_area", unit="m²", minimum=0.0, valid=valid)
        if area.size == 1:
            raise ParameterError("`drainage_area` must be a raster of the DEM's shape, not a single number")
    active = valid.copy()
    if fixed is not None:
        fixed_arr = np.asarray(fixed, dtype=bool)
        if fixed_arr.shape != shape:
            raise ParameterError(f"`fixed` must have the DEM's shape {shape}; got {fixed_arr.shape}")
        active &= ~fixed_arr
    flat_active = np.ascontiguousarray(active).ravel()
    flat_active[flow.outlets] = False
    out = np.array(arr, dtype=np.float64, order="C", copy=True).ravel()
    uplifted, eroded = _k.fluvial_step(
        out, flow.order, flow.receivers, flow.distance, area, flat_active,
        shape[1], np.ascontiguousarray(flow.dem.cell_area, dtype=np.float64), k, u, m_f, n_f, dt_f,
    )
    return FluvialStep(out.reshape(shape), float(uplifted), float(eroded))
