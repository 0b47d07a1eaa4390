"""Knickpoints from segmented χ–elevation fits: slope breaks and steps, with significance."""

from __future__ import annotations

import math

import numpy as np
from scipy import special

from divides.profiles import _profile_kernels as _k
from divides.profiles.segments import Segmentation, ar1_coefficients, gls_sse
from divides.terrain.dem_error import DemError

__all__ = ["breaks_of", "celerity_status", "false_discovery_filter", "KNICKPOINT_ALPHA"]

#: Significance level below which a break is reported as a knickpoint (common practice).
KNICKPOINT_ALPHA = 0.05


def _ratio(value: float, scale: float) -> float:
    """value / scale, infinite (with value's sign) when a nonzero value has zero scale."""
    if scale > 0:
        return value / scale
    return 0.0 if value == 0 else math.copysign(math.inf, value)


def _two_lines(x: np.ndarray, split: int) -> np.ndarray:
    """Design of two independent lines over x, the second starting at row ``split``."""
    upper = (np.arange(x.size) >= split).astype(np.float64)
    lower = 1.0 - upper
    return np.column_stack([lower, lower * x, upper, upper * x])


def breaks_of(seg: Segmentation, chi: np.ndarray, z: np.ndarray, *, min_nodes: int,
              distance_m: np.ndarray | None = None, error: DemError | None = None) -> list[dict]:
    """Describe every break of a segmentation as a candidate knickpoint.

    Each break between segments j and j + 1 is tested by F-tests of the
    two-line fit against one line and against a smooth bend (a quadratic in χ)
    over both segments; the p-value is the larger (Gailleton et al. 2019
    distinguish the two kinds reported here). With a DEM error model both fits
    are generalised least squares (AR(1) error along the stream, prewhitened;
    Prais & Winsten 1954) and the residual variance is never taken below the
    error's σ², so neither a wave of correlated error nor a noise-free but
    slightly curved profile passes for a knickpoint. Because the break was
    placed where it fits best, the p-value is multiplied by the number of
    positions it could have taken (a Bonferroni correction for the search).

    Parameters
    ----------
    seg : Segmentation
    chi, z : ndarray
        The nodes the segmentation was fitted to.
    min_nodes : int
        Minimum segment length used in the fit.
    distance_m : ndarray, optional
        Distance (m) of each node along the stream.
    error : DemError, optional
        DEM error model (as given to :func:`segment_profile`).

    Returns
    -------
    list of dict
        ``node`` (first node of the upper segment), ``chi``, ``ksn_below``,
        ``ksn_above``, ``delta_ksn``, ``step_m`` (elevation jump at the break,
        upper line minus lower line), ``t_slope``, ``t_step``, ``p_value``
        (corrected), ``kind`` (``"slope-break"`` or ``"step"``).
    """
    out = []
    chi = np.asarray(chi, dtype=np.float64)
    z = np.asarray(z, dtype=np.float64)
    phi = ar1_coefficients(distance_m, chi.size, error)
    floor2 = max(error.sigma_m if error is not None else 0.0, max(seg.sigma, 1e-9) * 1e-3) ** 2
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
        x = chi[a:c] - chi_b  # centred on the break: well-conditioned designs
        one = gls_sse(np.column_stack([np.ones_like(x), x]), z[a:c], phi[a:c])
        two = gls_sse(_two_lines(x, int(b - a)), z[a:c], phi[a:c])
        u = x / max(float(np.ptp(x)), 1e-300)  # scaled: a well-conditioned quadratic
        bend = gls_sse(np.column_stack([np.ones_like(u), u, u * u]), z[a:c], phi[a:c])
        dof = max(int(c - a) - 4, 1)
        scale = max(two / dof, floor2)
        # two lines must beat one line and also a smooth bend: a profile that curves gradually
        # (a concavity off the true one, hillslope processes near the heads) has no knickpoint
        # F survival functions (scipy.stats.f.sf computes exactly these, with much more overhead per call)
        p = max(float(special.fdtrc(2, dof, max(one - two, 0.0) / 2.0 / scale)),
                float(special.fdtrc(1, dof, max(bend - two, 0.0) / scale)))
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
            # Searched between the neighbouring breaks: correlated error can pull the free-line
            # boundary well away from the kink.
            lo, hi = a + max(2, min_nodes // 2), c - max(1, min_nodes // 2)
            node = a + int(_k.best_hinge(chi[a:c] - chi_b, z[a:c] - z[a:c].mean(), phi[a:c], lo - a, hi - a + 1))
            out[-1]["node"] = int(node)
            out[-1]["chi"] = float(0.5 * (chi[node - 1] + chi[node]))
    return out


def celerity_status(kind: str, ksn_below: float, ksn_above: float, n: float) -> tuple[bool, str]:
    """Whether a knickpoint has one upstream speed under E = K A^m S^n, and why not if it has none.

    For n = 1 every slope travels at K A^m, so any knickpoint moves as a unit.
    For n ≠ 1 slopes travel at n K A^m S^(n−1): a slope break whose steeper
    reach is downstream (n > 1; upstream for n < 1) steepens into a shock
    with a speed, while the opposite one spreads out, and a vertical step
    has a speed set by the slope of its face, which a DEM does not resolve
    (Royden & Perron 2013).

    Examples
    --------
    >>> celerity_status("slope-break", 80.0, 50.0, 1.5)[0]
    True
    >>> celerity_status("slope-break", 50.0, 80.0, 1.5)[0]
    False
    """
    if n == 1.0:
        return True, "moves upstream as a unit (n = 1)"
    if kind == "step":
        return False, ("a vertical step: for n ≠ 1 its speed depends on the slope of its face, "
                       "which the DEM does not resolve; no arrival time")
    steeper_below = ksn_below > ksn_above
    if steeper_below == (n > 1.0):
        return True, "a slope break that travels as a sharp front"
    return False, f"a slope break that spreads out as it moves (n = {n:g}); it has no single speed, no arrival time"


def false_discovery_filter(p_values: np.ndarray, alpha: float = KNICKPOINT_ALPHA) -> tuple[np.ndarray, np.ndarray]:
    """Benjamini–Hochberg (1995) over many tests: which are significant, and the adjusted p (q) values.

    Among the knickpoints reported, the expected share that are noise is at
    most ``alpha``; when no profile has a knickpoint, the chance of reporting
    any is at most ``alpha``.

    Examples
    --------
    >>> false_discovery_filter(np.array([0.001, 0.04, 0.5]))[0].tolist()
    [True, False, False]
    """
    p = np.asarray(p_values, dtype=np.float64)
    m = p.size
    if m == 0:
        return np.zeros(0, dtype=bool), np.zeros(0)
    order = np.argsort(p, kind="stable")
    ranked = p[order] * m / np.arange(1, m + 1)
    q_sorted = np.minimum.accumulate(ranked[::-1])[::-1]
    q = np.empty(m)
    q[order] = np.minimum(q_sorted, 1.0)
    return q < alpha, q
