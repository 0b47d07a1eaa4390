"""Forcing of the forward model: uplift, erodibility and runoff fields, and edge conditions.

Fields are constants or rasters on the model grid. Each DEM edge is either
*open* (its cells are outlets held at a base level that may change with time)
or *closed* (a wall: nothing flows across it).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

from divides.errors import ParameterError

__all__ = [
    "EDGES",
    "check_positive",
    "EdgeCondition",
    "open_edge",
    "closed_edge",
    "resolve_edges",
    "as_field",
]

#: The four DEM edges, in the order they are resolved.
EDGES: tuple[str, ...] = ("north", "south", "west", "east")

History = Callable[[float], float]


def check_positive(value: Any, name: str, unit: str) -> float:
    """Validate a positive, finite number; return it as a float.

    Raises
    ------
    ParameterError
        Naming the parameter, the bad value and the unit expected.
    """
    try:
        v = float(value)
    except (TypeError, ValueError) as exc:
        raise ParameterError(f"`{name}` must be a positive number ({unit}); got {value!r}") from exc
    if not (math.isfinite(v) and v > 0):
        raise ParameterError(f"`{name}` must be a positive number ({unit}); got {value!r}")
    return v


def _table(value: Any, name: str) -> tuple[np.ndarray, np.ndarray]:
    """Validate a table of ``(time, value)`` pairs; times strictly increasing."""
    try:
        arr = np.asarray(value, dtype=np.float64)
    except (TypeError, ValueError) as exc:
        raise ParameterError(f"`{name}` must be a number, a function of time or (time, value) pairs; got {value!r}") from exc
    if arr.ndim != 2 or arr.shape[1] != 2 or arr.shape[0] < 1:
        raise ParameterError(
            f"`{name}` as a table must be a sequence of (time, value) pairs; got an array of shape {arr.shape}"
        )
    if not np.all(np.isfinite(arr)):
        raise ParameterError(f"`{name}` holds a non-finite time or value: {arr.tolist()}")
    times, values = arr[:, 0].copy(), arr[:, 1].copy()
    if np.any(np.diff(times) <= 0):
        raise ParameterError(f"`{name}` times must increase strictly; got {times.tolist()}")
    return times, values


def _elevation_history(value: Any) -> History:
    """Base-level elevation (m) as a function of time: constant, function or table (linear)."""
    if callable(value):
        return lambda t: float(value(t))
    if np.ndim(value) == 0:
        z = float(value)
        if not math.isfinite(z):
            raise ParameterError(f"`elevation` must be a finite number of metres; got {value!r}")
        return lambda t: z
    times, values = _table(value, "elevation")
    # Linear between listed times, held beyond the ends.
    return lambda t: float(np.interp(t, times, values))


def _lowering_history(value: Any) -> History:
    """Cumulative lowering (m) since time 0 for a lowering rate (m/yr, positive lowers)."""
    if callable(value):
        from scipy.integrate import quad

        def drop(t: float) -> float:
            if t <= 0:
                return 0.0
            result, _ = quad(lambda s: float(value(s)), 0.0, t, limit=200)
            return float(result)

        return drop
    if np.ndim(value) == 0:
        rate = float(value)
        if not math.isfinite(rate):
            raise ParameterError(f"`lowering_rate` must be a finite number of m/yr; got {value!r}")
        return lambda t: rate * max(t, 0.0)
    times, rates = _table(value, "lowering_rate")

    # Piecewise constant: each rate holds from its time to the next (0 before the first);
    # the integral is exact.
    def drop(t: float) -> float:
        ends = np.minimum(np.r_[times[1:], np.inf], t)
        spans = np.clip(ends - times, 0.0, None)
        return float(np.sum(spans * rates))

    return drop


@dataclass(frozen=True, eq=False)
class EdgeCondition:
    """What happens at one DEM edge.

    Build one with :func:`open_edge` or :func:`closed_edge`.

    Attributes
    ----------
    kind : {"open", "closed"}
        Open edges are outlets held at base level; closed edges are walls.
    mode : {"hold", "elevation", "lowering"}
        For open edges: cells held at their starting elevation, set to an
        elevation history, or lowered from their starting elevation.
    history : callable or None
        ``history(t)``: the base-level elevation (m) for ``"elevation"``, the
        cumulative lowering (m) since time 0 for ``"lowering"``.
    """

    kind: str
    mode: str = "hold"
    history: History | None = None

    @property
    def is_open(self) -> bool:
        """True for an open edge."""
        return self.kind == "open"

    def base_level(self, t: float, start: np.ndarray) -> np.ndarray:
        """Elevation (m) of the edge's outlet cells at time ``t`` (years since the start).

        Parameters
        ----------
        t : float
            Time since the start of the run, years.
        start : ndarray
            The cells' elevations at time 0.
        """
        if self.mode == "elevation":
            return np.full(start.shape, self.history(t))  # type: ignore[misc]
        if self.mode == "lowering":
            return start - self.history(t)  # type: ignore[misc]
        return start


def open_edge(*, elevation: Any = None, lowering_rate: Any = None) -> EdgeCondition:
    """An open edge: its cells are outlets held at a base level.

    Parameters
    ----------
    elevation : float, callable or sequence of (time, elevation), optional
        Base-level elevation in metres: a constant, a function of time
        (years since the start), or a table interpolated linearly and held
        beyond its ends. Every cell of the edge takes this elevation.
    lowering_rate : float, callable or sequence of (time, rate), optional
        Rate (m/yr, positive lowers) at which the edge's cells are lowered from
        their starting elevations: a constant, a function of time (integrated
        numerically), or a table whose rates hold from each listed time to the
        next (0 before the first).

    With neither, the edge's cells are held at their starting elevations.

    Returns
    -------
    EdgeCondition

    Examples
    --------
    >>> edge = open_edge(elevation=[(0.0, 0.0), (1e5, -50.0)])
    >>> float(edge.base_level(5e4, np.zeros(1))[0])
    -25.0
    >>> float(open_edge(lowering_rate=1e-3).base_level(2e4, np.zeros(1))[0])
    -20.0
    """
    if elevation is not None and lowering_rate is not None:
        raise ParameterError("give an open edge either `elevation` or `lowering_rate`, not both")
    if elevation is not None:
        return EdgeCondition("open", "elevation", _elevation_history(elevation))
    if lowering_rate is not None:
        return EdgeCondition("open", "lowering", _lowering_history(lowering_rate))
    return EdgeCondition("open")


def closed_edge() -> EdgeCondition:
    """A closed edge: a wall across which nothing flows.

    The model keeps the outermost ring of cells on a closed edge as a wall
    (see :func:`divides.model.simulate`).
    """
    return EdgeCondition("closed")


def _one_edge(edge: str, spec: Any) -> EdgeCondition:
    if isinstance(spec, EdgeCondition):
        return spec
    if isinstance(spec, str):
        if spec == "open":
            return open_edge()
        if spec == "closed":
            return closed_edge()
        raise ParameterError(f"edge {edge!r}: {spec!r} is not an edge condition; use 'open', 'closed', a number or open_edge(...)")
    if isinstance(spec, (int, float, np.floating, np.integer)) and not isinstance(spec, bool):
        return open_edge(elevation=float(spec))
    raise ParameterError(
        f"edge {edge!r}: {spec!r} is not an edge condition; use 'open', 'closed', a base-level "
        "elevation in metres or open_edge(elevation=... | lowering_rate=...)"
    )


def resolve_edges(spec: Mapping[str, Any] | None) -> dict[str, EdgeCondition]:
    """Complete a per-edge specification; unnamed edges are open, held at their start.

    Parameters
    ----------
    spec : mapping of edge name to condition, optional
        Keys among ``"north"``, ``"south"``, ``"west"``, ``"east"``; values
        ``"open"``, ``"closed"``, a number (open, held at that elevation) or an
        :class:`EdgeCondition`.

    Returns
    -------
    dict
        One :class:`EdgeCondition` per edge.

    Examples
    --------
    >>> edges = resolve_edges({"north": "closed", "east": 0.0})
    >>> [edges[e].kind for e in EDGES]
    ['closed', 'open', 'open', 'open']
    """
    spec = {} if spec is None else dict(spec)
    unknown = sorted(set(spec) - set(EDGES))
    if unknown:
        raise ParameterError(f"unknown edge name(s) {unknown} in `edges`; use {', '.join(EDGES)}")
    edges = {e: _one_edge(e, spec.get(e, "open")) for e in EDGES}
    if not any(c.is_open for c in edges.values()):
        raise ParameterError("every edge is closed; at least one edge must be open so water and sediment can leave")
    return edges


def as_field(
    value: Any,
    shape: tuple[int, int],
    *,
    name: str,
    unit: str,
    minimum: float | None = None,
    valid: np.ndarray | None = None,
) -> np.ndarray:
    """A constant or raster field as float64: a 1-element array or a C-contiguous flat grid.

    Parameters
    ----------
    value : float or array_like (rows, cols)
        The field.
    shape : (rows, cols)
        The model grid.
    name, unit : str
        For error messages.
    minimum : float, optional
        Smallest accepted value.
    valid : ndarray of bool, optional
        Cells whose values must be finite (others are ignored).

    Returns
    -------
    ndarray
        Shape ``(1,)`` for a constant, ``(rows * cols,)`` for a raster.
    """
    arr = np.asarray(value, dtype=np.float64) if not isinstance(value, np.ndarray) else value.astype(np.float64, copy=False)
    if arr.ndim == 0:
        v = float(arr)
        if not math.isfinite(v) or (minimum is not None and v < minimum):
            accepted = "a finite number" if minimum is None else f"a finite number >= {minimum:g}"
            raise ParameterError(f"`{name}` must be {accepted} ({unit}); got {value!r}")
        return np.array([v])
    if arr.shape != tuple(shape):
        raise ParameterError(f"`{name}` must be a number or a raster of the DEM's shape {tuple(shape)}; got shape {arr.shape}")
    flat = np.ascontiguousarray(arr, dtype=np.float64).ravel().copy()
    check = flat if valid is None else flat[np.ravel(valid)]
    if not np.all(np.isfinite(check)):
        raise ParameterError(f"`{name}` has non-finite values on valid cells ({unit} expected everywhere)")
    if minimum is not None and check.size and check.min() < minimum:
        raise ParameterError(f"`{name}` must be >= {minimum:g} {unit} everywhere; its minimum is {check.min():g}")
    if valid is not None:
        flat[~np.ravel(valid)] = 0.0
    return flat

