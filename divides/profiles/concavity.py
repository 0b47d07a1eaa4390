"""Concavity θ = m/n: by collinearity of tributaries with their trunk in χ–z, and by slope–area."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy import stats

from divides.errors import ParameterError
from divides.profiles import _profile_kernels as _k
from divides.profiles.chi import integrate_chi

__all__ = ["ConcavityEstimate", "REFERENCE_THETA", "THETA_GRID", "disorder", "concavity_by_collinearity",
           "concavity_by_slope_area", "bounded_by_data"]

#: The usual reference concavity for normalised steepness (Wobus et al. 2006; Kirby & Whipple 2012).
REFERENCE_THETA = 0.45

#: Concavities scanned by the collinearity search.
THETA_GRID = np.round(np.arange(0.05, 0.951, 0.01), 2)

#: Added in quadrature to the bootstrap half-width of the collinearity interval. Chosen on
#: training networks only (tests/profiles/synthetic.py, seeds 5000-5079: the smallest of
#: 0, 0.002, 0.003, 0.004, 0.005 giving ≥ 95 % coverage); it covers the bias of χ integrated on a grid
#: (0.004 on average on noise-free networks of 30 m nodes). Coverage is checked on held-out seeds.
THETA_ALLOWANCE = 0.003

#: Half-width and step of the finer scan around the coarse minimum.
FINE_HALF_WIDTH, FINE_STEP = 0.05, 0.002


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


def bounded_by_data(estimate: ConcavityEstimate) -> bool:
    """Whether ``estimate`` may stand in for θ: finite, with a 95 % interval that lies inside the range the
    collinearity search scans (:data:`THETA_GRID`'s ends, 0.05–0.95).

    An interval that reaches an end of the searched range (the minimum found at its edge) or runs beyond it (a loose
    slope–area regression) says the data do not bound θ there; the reference :data:`REFERENCE_THETA` serves better
    (round 70, docs/validation.md: such estimates, 0.002 and 2.79 on two model landscapes of true θ 0.53 and 0.44,
    raised an alarm in a steady landscape and made screening refuse).

    Examples
    --------
    >>> bounded_by_data(ConcavityEstimate(0.41, (0.31, 0.52), "collinearity"))
    True
    >>> bounded_by_data(ConcavityEstimate(0.002, (0.002, 0.64), "collinearity"))  # the scan's lowest value
    False
    >>> bounded_by_data(ConcavityEstimate(2.79, (0.62, 4.96), "slope-area"))
    False
    """
    lo, hi = estimate.ci95
    return bool(np.isfinite(estimate.value) and np.isfinite(lo) and np.isfinite(hi)
                and THETA_GRID[0] < lo and hi < THETA_GRID[-1])


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


def _basin_disorder(chi: np.ndarray, z: np.ndarray, sel: np.ndarray, labels: np.ndarray) -> np.ndarray:
    """Summed disorder over basins, for every row (θ) of ``chi``, of the nodes ``sel`` in basins ``labels``.

    Each basin's cloud is scored on its own and normalised by its own relief
    (Hergarten, Robl & Stüwe 2016), so basins of different steepness never
    share one cloud: a difference in ksn between networks cannot read as concavity.
    """
    rank = np.argsort(labels, kind="stable")
    order = sel[rank]
    b = labels[rank]
    starts = np.r_[0, np.flatnonzero(np.diff(b)) + 1, b.size].astype(np.int64)
    return _k.basin_disorder(chi, np.ascontiguousarray(z[order]), np.ascontiguousarray(order, dtype=np.int64), starts)


def concavity_by_collinearity(
    down: np.ndarray,
    step: np.ndarray,
    area: np.ndarray,
    z: np.ndarray,
    keep: np.ndarray,
    groups: np.ndarray,
    *,
    basins: np.ndarray | None = None,
    a0: float = 1.0,
    weight: np.ndarray | float = 1.0,
    thetas: np.ndarray = THETA_GRID,
    n_boot: int = 100,
    max_nodes: int = 20000,
    boot_nodes: int = 3000,
    seed: int = 0,
) -> ConcavityEstimate:
    """θ that makes tributaries most collinear with their own trunk in χ–z, basin by basin.

    For each θ of the grid, χ is integrated over the network and the disorder
    of each basin's χ–z cloud measured (Hergarten, Robl & Stüwe 2016); the
    estimate minimises the sum of the basins' disorders. At the right θ a
    steady-state basin with uniform uplift and erodibility collapses onto one
    line; separate basins may lie on lines of different slope (different
    ksn), so they are never pooled into one cloud (Mudd et al. 2018 also
    score each basin against its own trunk). Only basins with at least two
    links (a trunk and a tributary) carry information; a single stream is
    ordered at every θ.

    The 95 % interval is θ̂ ± √((1.96 s)² + δ²): s is the standard deviation of
    θ over a two-stage bootstrap, basins first and then tributary links within
    each drawn basin (nodes of a link move together, since their errors are
    correlated; basins that disagree widen the interval), and δ =
    :data:`THETA_ALLOWANCE`. Its coverage is tested on noisy synthetic networks.

    Parameters
    ----------
    down, step, area : ndarray
        Receivers-first network (see :func:`integrate_chi`).
    z : ndarray
        Elevation of each node (m); any offset per basin is irrelevant.
    keep : ndarray of bool
        Nodes of the network to use (χ = 0 where a kept node drains to an unkept one).
    groups : ndarray of int
        Bootstrap unit of each node (e.g. the channel link id).
    basins : ndarray of int, optional
        Basin of each node (e.g. the base node of its network); default one basin.
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
        ``n_units`` counts the links of the basins that were scored.
    """
    if n_boot < 0:
        raise ParameterError(f"n_boot must be >= 0; got {n_boot}")
    thetas = np.asarray(thetas, dtype=np.float64)
    rng = np.random.default_rng(seed)
    grp_all = np.asarray(groups)
    bas_all = np.zeros(grp_all.shape, dtype=np.int64) if basins is None else np.asarray(basins)
    idx = np.flatnonzero(keep)
    # keep only basins with a trunk and at least one tributary: the rest cannot tell θ
    pairs = np.unique(np.column_stack([bas_all[idx], grp_all[idx]]), axis=0)
    bas_ids, links_per = np.unique(pairs[:, 0], return_counts=True)
    useful = bas_ids[links_per >= 2]
    idx = idx[np.isin(bas_all[idx], useful)]
    n_links = int(links_per[links_per >= 2].sum())
    if idx.size < 10 or useful.size == 0:
        return ConcavityEstimate(np.nan, (np.nan, np.nan), "collinearity", n_links,
                                 "too few channel links to compare tributaries with a trunk")
    zz = np.asarray(z, dtype=np.float64)[idx]
    grp = grp_all[idx]
    bas = bas_all[idx]
    # a bootstrap unit is a link within its basin
    unit = np.unique(np.column_stack([bas, grp]), axis=0, return_inverse=True)[1].ravel()

    def chi_at(grid: np.ndarray) -> np.ndarray:
        out = np.empty((grid.size, idx.size))
        for t, theta in enumerate(grid):
            out[t] = integrate_chi(down, step, area, theta=theta, a0=a0, keep=keep, weight=weight)[idx]
        return out

    chi = chi_at(thetas)
    thin = _thin(unit, max_nodes, rng)
    coarse = _basin_disorder(chi, zz, thin, bas[thin])
    if np.ptp(coarse) <= 1e-12:
        return ConcavityEstimate(np.nan, (np.nan, np.nan), "collinearity", n_links,
                                 "the χ–z clouds are equally ordered at every θ (no tributaries to align)",
                                 {"theta": thetas.tolist(), "disorder": coarse.tolist()})
    # refine around the coarse minimum, so the estimate and its interval are not
    # quantised to the coarse step (which would be most of the interval on good data)
    centre = float(thetas[int(np.argmin(coarse))])
    fine = np.round(np.arange(centre - FINE_HALF_WIDTH, centre + FINE_HALF_WIDTH + 1e-9, FINE_STEP), 4)
    fine = fine[(fine > 0) & (fine < 1.5)]
    thetas = np.union1d(thetas, fine)
    chi = chi_at(thetas)

    def scan(sel: np.ndarray, labels: np.ndarray | None = None) -> np.ndarray:
        return _basin_disorder(chi, zz, sel, bas[sel] if labels is None else labels)

    main = scan(thin)
    best = float(thetas[int(np.argmin(main))])
    boots = []
    if n_boot:
        members = [np.flatnonzero(unit == u) for u in range(int(unit.max()) + 1)]
        unit_basin = np.array([bas[m[0]] for m in members])
        strata = [np.flatnonzero(unit_basin == b) for b in np.unique(unit_basin)]
        for _ in range(n_boot):
            # two stages (clustered data): basins with replacement, then links within each drawn
            # basin, so disagreement between basins widens the interval; a basin drawn twice
            # counts twice
            drawn = rng.integers(0, len(strata), size=len(strata)) if len(strata) > 1 else [0]
            parts = [np.concatenate([members[u] for u in rng.choice(strata[d], size=strata[d].size, replace=True)])
                     for d in drawn]
            sel = np.concatenate(parts)
            labels = np.repeat(np.arange(len(parts)), [p.size for p in parts])
            if sel.size > boot_nodes:
                keep_rows = _thin(labels * (int(unit.max()) + 1) + unit[sel], boot_nodes, rng)
                sel, labels = sel[keep_rows], labels[keep_rows]
            boots.append(float(thetas[int(np.argmin(scan(sel, labels)))]))
    if len(boots) >= 2:
        # normal interval with the bootstrap standard error, plus an allowance for the bias of
        # χ discretised on the grid; percentile intervals of this lumpy statistic undercover
        half = math.hypot(1.96 * float(np.std(boots, ddof=1)), THETA_ALLOWANCE)
        # θ outside the scanned range cannot be told apart: the interval stops at its ends
        lo, hi = max(best - half, float(thetas[0])), min(best + half, float(thetas[-1]))
    else:
        lo, hi = np.nan, np.nan
    return ConcavityEstimate(best, (lo, hi), "collinearity", n_links, "",
                             {"theta": thetas.tolist(), "disorder": main.tolist(), "bootstrap": boots,
                              "n_basins": int(useful.size)})


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
