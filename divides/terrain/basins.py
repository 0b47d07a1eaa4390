"""Basins and sub-basins above a minimum area, as labels for regional divide screening."""

from __future__ import annotations

import numpy as np

from divides.errors import ParameterError
from divides.profiles import _profile_kernels as _pk
from divides.terrain.routing import FlowGraph

__all__ = ["basin_labels", "LEVELS"]

LEVELS = ("tributaries", "outlets")


def basin_labels(flow: FlowGraph, *, min_area_m2: float, level: str = "tributaries") -> np.ndarray:
    """Label every cell with the basin it belongs to; 0 for cells of smaller basins.

    Parameters
    ----------
    flow : FlowGraph
    min_area_m2 : float
        Smallest basin kept (m²).
    level : {"tributaries", "outlets"}
        ``"outlets"``: one basin per outlet draining at least ``min_area_m2``.
        ``"tributaries"``: also split each basin where two branches of at
        least ``min_area_m2`` join, each branch's upstream area becoming a
        basin of its own (the part below the junction keeps the label of the
        basin downstream), so the divides between large tributaries are
        screened too.

    Returns
    -------
    ndarray of int32, DEM shape
        Labels 1, 2, … (in order of decreasing area at the basin's mouth); 0 elsewhere.
    """
    if level not in LEVELS:
        raise ParameterError(f"basin level must be one of {', '.join(LEVELS)}; got {level!r}")
    if not (np.isfinite(min_area_m2) and min_area_m2 > 0):
        raise ParameterError(f"minimum basin area must be positive (m²); got {min_area_m2!r}")
    area = flow.area.ravel()
    rec = flow.receivers
    n = rec.size
    big = area >= min_area_m2
    is_outlet = rec == np.arange(n, dtype=rec.dtype)
    seeds = big & is_outlet
    if level == "tributaries":
        donor = big & ~is_outlet
        n_big = np.bincount(rec[donor], minlength=n)
        seeds |= donor & (n_big[rec] >= 2)
    seed_idx = np.flatnonzero(seeds)
    ranking = seed_idx[np.argsort(-area[seed_idx], kind="stable")]
    values = np.zeros(n, dtype=np.float64)
    values[ranking] = np.arange(1, ranking.size + 1)
    out = np.full(n, np.nan)
    _pk.first_downstream_value(flow.order, rec, seeds, values, out)
    return np.nan_to_num(out, nan=0.0).astype(np.int32).reshape(flow.shape)
