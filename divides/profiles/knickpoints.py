"""Knickpoints from segmented χ–elevation fits: slope breaks and steps, with significance."""

from __future__ import annotations

import math

import numpy as np
from scipy import stats

from divides.profiles.segments import Segmentation

__all__ = ["breaks_of", "KNICKPOINT_ALPHA"]

#: Significance level below which a break is reported as a knickpoint (common practice).
KNICKPOINT_ALPHA = 0.05


def _ratio(value: float, scale: float) -> float:
    """value / scale, infinite (with value's sign) when a nonzero value has zero scale."""
    if scale > 0:
        return value / scale
    return 0.0 if value == 0 else math.copysign(math.inf, value)


def _line_sse(x: np.ndarray, y: np.ndarray) -> float:
    if x.size < 3:
        return 0.0
    mx, my = x.mean(), y.mean()
    sxx = float(np.sum((x - mx) ** 2))
    if sxx <= 0:
        return float(np.sum((y - my) ** 2))
    b = float(np.sum((x - mx) * (y - my))) / sxx
    return float(np.sum((y - my - b * (x - mx)) ** 2))


def _hinge_position(x: np.ndarray, y: np.ndarray, lo: int, hi: int) -> int:
    """Index in [lo, hi) where a continuous two-line (hinge) fit of y(x) has least misfit."""
    best, arg = np.inf, lo
    for j in range(lo, hi):
        h = 0.5 * (x[j - 1] + x[j])
        design = np.column_stack([np.ones_like(x), np.minimum(x - h, 0.0), np.maximum(x - h, 0.0)])
        coef, *_ = np.linalg.lstsq(design, y, rcond=None)
        sse = float(np.sum((design @ coef - y) ** 2))
        if sse < best:
            best, arg = sse, j
    return arg


def breaks_of(seg: Segmentation, chi: np.ndarray, z: np.ndarray, *, min_nodes: int) -> list[dict]:
    """Describe every break of a segmentation as a candidate knickpoint.

    Each break between segments j and j + 1 is tested by an F-test of the
    two-line fit against one line over both segments (Gailleton et al. 2019
    distinguish the two kinds reported here). Because the break was placed
    where it fits best, the p-value is multiplied by the number of positions
    it could have taken (a Bonferroni correction for the search).

    Parameters
    ----------
    seg : Segmentation
    chi, z : ndarray
        The nodes the segmentation was fitted to.
    min_nodes : int
        Minimum segment length used in the fit.

    Returns
    -------
    list of dict
        ``node`` (first node of the upper segment), ``chi``, ``ksn_below``,
        ``ksn_above``, ``delta_ksn``, ``step_m`` (elevation jump at the break,
        upper line minus lower line), ``t_slope``, ``t_step``, ``p_value``
        (corrected), ``kind`` (``"slope-break"`` or ``"step"``).
    """
    out = []
    sigma = max(seg.sigma, 1e-9)
    for j in range(seg.n_segments - 1):
        a, b, c = seg.bounds[j], seg.bounds[j + 1], seg.bounds[j + 2]
        node = int(b)
        chi_b = 0.5 * (chi[b - 1] + chi[b])
        lower = seg.intercept[j] + seg.slope[j] * chi_b
        upper = seg.intercept[j + 1] + seg.slope[j + 1] * chi_b
        step = float(upper - lower)
        delta = float(seg.slope[j + 1] - seg.slope[j])
        t_slope = _ratio(delta, math.hypot(seg.slope_se[j], seg.slope_se[j + 1]))
        t_step = _ratio(step, math.hypot(seg.predict_se(j, chi_b), seg.predict_se(j + 1, chi_b)))
        two = _line_sse(chi[a:b], z[a:b]) + _line_sse(chi[b:c], z[b:c])
        one = _line_sse(chi[a:c], z[a:c])
        dof = max(int(c - a) - 4, 1)
        f = max(one - two, 0.0) / 2.0 / max(two / dof, sigma**2 * 1e-6)
        p = float(stats.f.sf(f, 2, dof))
        positions = max(1, int(c - a) - 2 * min_nodes + 1)
        out.append({
            "node": node,
            "chi": float(chi_b),
            "ksn_below": float(seg.slope[j]),
            "ksn_above": float(seg.slope[j + 1]),
            "delta_ksn": delta,
            "step_m": step,
            "t_slope": float(t_slope),
            "t_step": float(t_step),
            "p_value": min(1.0, p * positions),
            "kind": "step" if abs(t_step) > abs(t_slope) else "slope-break",
        })
        if out[-1]["kind"] == "slope-break":
            # A kink is located better by a continuous hinge (3 parameters) than by two free lines.
            lo, hi = max(a + 2, b - min_nodes), min(c - 1, b + min_nodes)
            node = a + _hinge_position(chi[a:c], z[a:c], lo - a, hi - a + 1)
            out[-1]["node"] = int(node)
            out[-1]["chi"] = float(0.5 * (chi[node - 1] + chi[node]))
    return out
