"""χ: the integral of (A0/A)^θ along channels, upstream from a common base level."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from divides.errors import GridError, ParameterError
from divides.profiles import _profile_kernels as _k
from divides.terrain import _routing_kernels as _rk
from divides.terrain.routing import FlowGraph

__all__ = ["ChiWeights", "chi_integrand", "integrate_chi", "chi_weights", "chi_at_first_channel"]


def _check_theta(theta: float) -> float:
    if not (np.isfinite(theta) and 0.0 <= theta <= 2.0):
        raise ParameterError(f"theta (concavity m/n) must be a number between 0 and 2; got {theta!r}")
    return float(theta)


def chi_integrand(area: np.ndarray, *, theta: float, a0: float = 1.0, weight: np.ndarray | float = 1.0) -> np.ndarray:
    """The χ integrand ``weight · (A0 / A) ** θ`` (Perron & Royden 2013).

    Parameters
    ----------
    area : ndarray
        Drainage area (m²), or a discharge proxy with the same units.
    theta : float
        Concavity m/n.
    a0 : float
        Reference area (m²); with 1 m² the χ–elevation slope is ksn.
    weight : ndarray or float
        Extra factor, e.g. ``((U/U0) (K0/K)) ** (1/n)`` for non-uniform uplift or erodibility.
    """
    theta = _check_theta(theta)
    if not (np.isfinite(a0) and a0 > 0):
        raise ParameterError(f"reference area a0 must be a positive area in m²; got {a0!r}")
    with np.errstate(divide="ignore"):
        return np.asarray(weight, dtype=np.float64) * (a0 / np.asarray(area, dtype=np.float64)) ** theta


def integrate_chi(
    down: np.ndarray,
    step: np.ndarray,
    area: np.ndarray,
    *,
    theta: float,
    a0: float = 1.0,
    keep: np.ndarray | None = None,
    weight: np.ndarray | float = 1.0,
    start_m: np.ndarray | None = None,
) -> np.ndarray:
    """χ at every node of a network given receivers-first.

    Parameters
    ----------
    down : ndarray of int
        Position of each node's downstream node; -1 at outlets. Every node must
        come after its downstream node.
    step : ndarray
        Distance (m) from each node to its downstream node.
    area : ndarray
        Drainage area (m²) per node (or a discharge proxy).
    theta, a0, weight :
        See :func:`chi_integrand`.
    keep : ndarray of bool, optional
        Nodes to integrate; a kept node whose downstream node is not kept is a
        base-level node (χ = 0). Others get NaN.
    start_m : ndarray, optional
        Per node: distance (m) from the point where the channel crosses the base
        level up to the base-level node (see
        :attr:`divides.terrain.sides.BaseLevel.start_m`). χ then starts at that
        crossing rather than at the node: the node gets the integral over
        ``start_m`` (the integrand interpolated linearly toward the node below).

    Returns
    -------
    ndarray
        χ in metres (trapezoidal rule between consecutive nodes).

    Examples
    --------
    >>> import numpy as np
    >>> down = np.array([-1, 0, 1])            # a three-node channel, outlet first
    >>> chi = integrate_chi(down, np.array([0, 10.0, 10.0]), np.full(3, 4.0), theta=0.5)
    >>> chi.tolist()                            # (1/4)^0.5 = 0.5 per metre
    [0.0, 5.0, 10.0]
    """
    down = np.ascontiguousarray(down, dtype=np.int64)
    m = down.size
    step = np.ascontiguousarray(step, dtype=np.float64)
    area = np.asarray(area, dtype=np.float64)
    if step.shape != (m,) or area.shape != (m,):
        raise GridError(f"down, step and area must have one length; got {m}, {step.shape}, {area.shape}")
    keep = np.ones(m, dtype=bool) if keep is None else np.ascontiguousarray(keep, dtype=bool)
    integrand = np.ascontiguousarray(np.broadcast_to(chi_integrand(area, theta=theta, a0=a0, weight=weight), (m,)))
    chi = _k.chi_trapezoid(down, step, integrand, keep)
    if start_m is None:
        return chi
    start = np.asarray(start_m, dtype=np.float64)
    if start.shape != (m,):
        raise GridError(f"start_m must have one value per node ({m}); got {start.shape}")
    base = np.flatnonzero(keep & ((down < 0) | ~keep[np.maximum(down, 0)]) & (start > 0))
    if base.size == 0:
        return chi
    d = down[base]
    f_k = integrand[base]
    with np.errstate(invalid="ignore", divide="ignore"):
        share = np.where((d >= 0) & (step[base] > 0), start[base] / step[base], 0.0)
    f_cross = np.where(d >= 0, f_k + (integrand[np.maximum(d, 0)] - f_k) * share, f_k)
    offset = np.zeros(m)
    offset[base] = 0.5 * (f_k + f_cross) * start[base]
    root = _k.network_root(down, keep)
    return chi + np.where(root >= 0, offset[np.maximum(root, 0)], 0.0)


@dataclass(frozen=True)
class ChiWeights:
    """Per-cell χ weighting for non-uniform climate, erodibility or uplift.

    Attributes
    ----------
    discharge : ndarray or None
        Runoff-weighted drainage area (m², runoff normalised by its mean) that
        replaces A in the integrand (Gelwick, Willett & Yang 2024), or None.
    factor : ndarray or float
        ``((U/U0) (K0/K)) ** (1/n)`` per cell (1 when neither raster is given).
    description : dict
        What was applied, with the reference values U0, K0 and the runoff mean.
    """

    discharge: np.ndarray | None
    factor: np.ndarray | float
    description: dict


def _raster(values: np.ndarray, flow: FlowGraph, name: str) -> np.ndarray:
    arr = np.asarray(values, dtype=np.float64)
    if arr.shape != flow.shape:
        raise GridError(f"the {name} raster must be on the DEM grid {flow.shape}; got {arr.shape}")
    good = flow.dem.valid & np.isfinite(arr)
    if not good.any():
        raise ParameterError(f"the {name} raster has no finite value on the DEM's valid cells")
    if np.any(arr[good] <= 0):
        raise ParameterError(f"the {name} raster must be positive; found {float(arr[good].min()):g}")
    return arr


def chi_weights(
    flow: FlowGraph,
    *,
    runoff: np.ndarray | None = None,
    erodibility: np.ndarray | None = None,
    uplift: np.ndarray | None = None,
    n: float = 1.0,
) -> ChiWeights:
    """Weights for generalised χ (each optional; references are the medians over valid cells).

    Parameters
    ----------
    flow : FlowGraph
    runoff : ndarray, optional
        Relative runoff or precipitation on the DEM grid; A becomes the
        runoff-weighted area with runoff divided by its mean (so uniform
        runoff gives plain A).
    erodibility, uplift : ndarray, optional
        K and U on the DEM grid; the integrand gains ((U/U0)(K0/K))^(1/n).
    n : float
        Slope exponent of the stream-power law.
    """
    if not (np.isfinite(n) and n > 0):
        raise ParameterError(f"slope exponent n must be positive; got {n!r}")
    desc: dict = {"runoff": None, "erodibility": None, "uplift": None, "n": float(n)}
    discharge = None
    if runoff is not None:
        r = _raster(runoff, flow, "runoff")
        mean = float(np.nanmean(r[flow.dem.valid]))
        discharge = flow.weighted_area(np.where(np.isfinite(r), r / mean, 1.0))
        desc["runoff"] = {"mean": mean}
    factor: np.ndarray | float = 1.0
    ratio = np.ones(flow.shape)
    for name, arr, power in (("uplift", uplift, 1.0), ("erodibility", erodibility, -1.0)):
        if arr is None:
            continue
        a = _raster(arr, flow, name)
        ref = float(np.nanmedian(a[flow.dem.valid]))
        ratio = ratio * np.where(np.isfinite(a), a / ref, 1.0) ** power
        desc[name] = {"reference": ref}
    if uplift is not None or erodibility is not None:
        factor = ratio ** (1.0 / n)
    return ChiWeights(discharge=discharge, factor=factor, description=desc)


def chi_at_first_channel(flow: FlowGraph, channel_cells: np.ndarray, chi: np.ndarray) -> np.ndarray:
    """χ carried up the hillslopes: each cell gets χ of the first channel cell on its flow path.

    Parameters
    ----------
    flow : FlowGraph
    channel_cells : ndarray of int
        Flat indices of the channel cells.
    chi : ndarray
        χ of those cells (NaN for cells that do not count).

    Returns
    -------
    ndarray, DEM shape
        NaN where the flow path meets no counted channel cell.
    """
    values = np.full(flow.receivers.size, np.nan)
    values[channel_cells] = chi
    is_target = np.zeros(flow.receivers.size, dtype=bool)
    is_target[channel_cells] = np.isfinite(chi)
    out = np.full(flow.receivers.size, np.nan)
    _rk.first_downstream_value(flow.order, flow.receivers, is_target, values, out)
    return out.reshape(flow.shape)
