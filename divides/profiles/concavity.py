"""Concavity θ = m/n: by collinearity of tributaries with their trunk in χ–z, and by slope–area."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy import stats

from divides.errors import ParameterError
from divides.profiles import _profile_kernels as _k
from divides.profiles.chi import integrate_chi

__all__ = ["ConcavityEstimate", "REFERENCE_THETA", "THETA_GRID", "disorder", "concavity_by_collinearity",
           "concavity_by_slope_area"]

#: The usual reference concavity for normalised steepness (Wobus et al. 2006; Kirby & Whipple 2012).
REFERENCE_THETA = 0.45

#: Concavities scanned by the collinearity search.
THETA_GRID = np.round(np.arange(0.05, 0.951, 0.01), 2)


@dataclass(frozen=True)
class ConcavityEstimate:
    """A concavity estimate with its 95 % interval.

    Attributes
    ----------
    value : float
        Best estimate (NaN when the data cannot tell).
    ci95 : (float, float)
    method : str
        ``"collinearity"``, ``"slope-area"`` or ``"reference"``.
    n_units : int
        Tributary links (collinearity) or area bins (slope–area) used.
    note : str
        Why the estimate is missing or weak, if it is.
    scores : dict
        Method details (θ grid and disorder, or the regression).
    """

    value: float
    ci95: tuple[float, float]
    method: str
    n_units: int = 0
    note: str = ""
    scores: dict = field(default_factory=dict, repr=False)

    def to_dict(self) -> dict:
        """JSON-ready form (without the scan details)."""
        return {"value": _nan_none(self.value), "ci95": [_nan_none(v) for v in self.ci95],
                "method": self.method, "n_units": self.n_units, "note": self.note}


def _nan_none(v: float) -> float | None:
    return None if v is None or not np.isfinite(v) else float(v)


def disorder(chi: np.ndarray, z: np.ndarray) -> float:
    """Disorder of a χ–z cloud (Hergarten, Robl & Stüwe 2016): 0 when z never falls as χ grows.

    Nodes sorted by χ; ``D = Σ|z(i+1) − z(i)| / (max z − min z) − 1``.

    Examples
    --------
    >>> disorder(np.array([0.0, 1.0, 2.0]), np.array([0.0, 5.0, 10.0]))
    0.0
    >>> disorder(np.array([0.0, 1.0, 2.0]), np.array([0.0, 10.0, 5.0]))
    0.5
    """
    order = np.argsort(chi, kind="stable")
    return float(_k.disorder_sorted(np.ascontiguousarray(np.asarray(z, dtype=np.float64)[order])))


def _thin(groups: np.ndarray, max_nodes: int, rng: np.random.Generator) -> np.ndarray:
    """Indices of an even subsample of at most ``max_nodes`` nodes, every group kept."""
    n = groups.size
    if n <= max_nodes:
        return np.arange(n)
    stride = int(np.ceil(n / max_nodes))
    order = np.lexsort((np.arange(n), groups))
    rank = np.empty(n, dtype=np.int64)
    starts = np.r_[0, np.flatnonzero(np.diff(groups[order])) + 1]
    rank[order] = np.arange(n) - np.repeat(starts, np.diff(np.r_[starts, n]))
    offset = rng.integers(0, stride)
    return np.flatnonzero((rank + offset) % stride == 0)


def concavity_by_collinearity(
    down: np.ndarray,
    step: np.ndarray,
    area: np.ndarray,
    z: np.ndarray,
    keep: np.ndarray,
    groups: np.ndarray,
    *,
    a0: float = 1.0,
    weight: np.ndarray | float = 1.0,
    thetas: np.ndarray = THETA_GRID,
    n_boot: int = 100,
    max_nodes: int = 20000,
    boot_nodes: int = 3000,
    seed: int = 0,
) -> ConcavityEstimate:
    """θ that makes tributaries most collinear with their trunk in χ–z.

    For each θ of the grid, χ is integrated over the network and the disorder
    of the χ–z cloud measured (Hergarten, Robl & Stüwe 2016): at the right θ a
    steady-state network with uniform uplift and erodibility collapses onto
    one line. The interval comes from a bootstrap over tributary links
    (nodes of a link move together, since they are not independent), in the
    spirit of Mudd et al. (2018).

    Parameters
    ----------
    down, step, area : ndarray
        Receivers-first network (see :func:`integrate_chi`).
    z : ndarray
        Elevation of each node above the common base level (m).
    keep : ndarray of bool
        Nodes of the network to use (χ = 0 where a kept node drains to an unkept one).
    groups : ndarray of int
        Bootstrap unit of each node (e.g. the channel link id).
    a0, weight :
        As in :func:`integrate_chi`.
    thetas : ndarray
        Concavities scanned.
    n_boot : int
        Bootstrap resamples (0 for none).
    max_nodes, boot_nodes : int
        Even thinning for the scan and for each bootstrap resample.
    seed : int
        Random seed (results are reproducible).

    Returns
    -------
    ConcavityEstimate
    """
    if n_boot < 0:
        raise ParameterError(f"n_boot must be >= 0; got {n_boot}")
    thetas = np.asarray(thetas, dtype=np.float64)
    rng = np.random.default_rng(seed)
    idx = np.flatnonzero(keep)
    units = np.unique(np.asarray(groups)[idx])
    if idx.size < 10 or units.size < 2:
        return ConcavityEstimate(np.nan, (np.nan, np.nan), "collinearity", int(units.size),
                                 "too few channel links to compare tributaries with a trunk")
    chi = np.empty((thetas.size, idx.size))
    for t, theta in enumerate(thetas):
        chi[t] = integrate_chi(down, step, area, theta=theta, a0=a0, keep=keep, weight=weight)[idx]
    zz = np.asarray(z, dtype=np.float64)[idx]
    grp = np.asarray(groups)[idx]

    def scan(sel: np.ndarray) -> np.ndarray:
        return np.array([disorder(chi[t, sel], zz[sel]) for t in range(thetas.size)])

    main = scan(_thin(grp, max_nodes, rng))
    if np.ptp(main) <= 1e-12:
        return ConcavityEstimate(np.nan, (np.nan, np.nan), "collinearity", int(units.size),
                                 "the χ–z cloud is equally ordered at every θ (no tributaries to align)",
                                 {"theta": thetas.tolist(), "disorder": main.tolist()})
    best = float(thetas[int(np.argmin(main))])
    boots = []
    if n_boot:
        members = {u: np.flatnonzero(grp == u) for u in units}
        for _ in range(n_boot):
            pick = rng.choice(units, size=units.size, replace=True)
            sel = np.concatenate([members[u] for u in pick])
            if sel.size > boot_nodes:
                sel = sel[_thin(grp[sel], boot_nodes, rng)]
            boots.append(float(thetas[int(np.argmin(scan(sel)))]))
    lo, hi = (float(np.percentile(boots, 2.5)), float(np.percentile(boots, 97.5))) if boots else (np.nan, np.nan)
    return ConcavityEstimate(best, (min(lo, best), max(hi, best)), "collinearity", int(units.size), "",
                             {"theta": thetas.tolist(), "disorder": main.tolist(), "bootstrap": boots})


def concavity_by_slope_area(
    area: np.ndarray, slope: np.ndarray, *, bins_per_decade: int = 10, min_per_bin: int = 5
) -> ConcavityEstimate:
    """θ from log-binned slope–area regression of channel cells (Flint's law S = ks A^−θ).

    Slopes are binned by log area; the bin medians are regressed in log–log
    space. The interval is the regression's 95 % t-interval on the slope.
    """
    a = np.asarray(area, dtype=np.float64)
    s = np.asarray(slope, dtype=np.float64)
    ok = (a > 0) & (s > 0) & np.isfinite(a) & np.isfinite(s)
    la, ls = np.log10(a[ok]), np.log10(s[ok])
    if la.size < 3 * min_per_bin:
        return ConcavityEstimate(np.nan, (np.nan, np.nan), "slope-area", 0, "too few channel cells with a slope")
    which = np.floor(la * bins_per_decade).astype(np.int64)
    xs, ys = [], []
    for b in np.unique(which):
        sel = which == b
        if np.count_nonzero(sel) >= min_per_bin:
            xs.append(np.median(la[sel]))
            ys.append(np.median(ls[sel]))
    if len(xs) < 4:
        return ConcavityEstimate(np.nan, (np.nan, np.nan), "slope-area", len(xs), "fewer than 4 area bins")
    fit = stats.linregress(xs, ys)
    t = stats.t.ppf(0.975, len(xs) - 2)
    theta = -fit.slope
    return ConcavityEstimate(float(theta), (float(theta - t * fit.stderr), float(theta + t * fit.stderr)),
                             "slope-area", len(xs), "",
                             {"log_ks": float(fit.intercept), "r": float(fit.rvalue), "bins_log_area": xs,
                              "bins_log_slope": ys})
