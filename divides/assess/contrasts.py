"""Across-divide contrasts with block-bootstrap intervals, on honest (de-duplicated, effective) samples."""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np
from scipy import stats

from divides.assess.points import METRICS, MIN_FACING, DividePoints
from divides.terrain.dem_error import DemError

__all__ = ["Contrast", "DivideSamples", "PRACTICAL_SHARE", "SPREAD_RATIO", "LARGE_SHARE", "MIN_SAMPLES",
           "ROUNDING_SHARE", "INSUFFICIENT", "compute_contrasts", "block_bootstrap_mean", "divide_samples",
           "interval_of_mean"]

#: Near-divide metrics: read at the same samples, they describe the present state of the divide.
NEAR_DIVIDE = ("channel_elevation", "hillslope_gradient", "local_relief", "hillslope_relief")

#: Fewest independent samples per side for a contrast to get an interval and a vote. With fewer,
#: the moving-block bootstrap has too few distinct resamples to give a percentile interval (and
#: the t-calibration below widens it by more than a third: t(0.975, 5) / z(0.975) = 1.31), so the
#: contrast is "insufficient data". Six keeps the bootstrap usable (Efron & Tibshirani 1993,
#: ch. 13: percentile intervals are too narrow by about sqrt((n − 1)/n) and undercover for
#: small n, which the t-calibration corrects) while letting a divide with a handful of valleys
#: on each side be judged; the coverage at this size is tested
#: (tests/assess/test_contrasts_verdict.py).
MIN_SAMPLES = 6

#: ``why_none`` of a contrast without enough independent samples.
INSUFFICIENT = "insufficient data"


@dataclass(frozen=True)
class Contrast:
    """One metric compared across the divide.

    Attributes
    ----------
    metric : str
    unit : str
    a, b : float
        Mean value on each side over the samples.
    difference : float
        a − b.
    ci95 : (float, float)
        95 % interval of the difference (moving-block bootstrap along the divide, t-calibrated
        for the effective sample size, never narrower than the DEM error allows); NaN when
        the data are insufficient.
    moves_toward : str
        ``"a"``, ``"b"`` or ``"none"``.
    n_points : int
        Independent samples: de-duplicated (one per pair of source cells), then discounted
        for the correlation of DEM error along the divide and capped by the number of
        distinct source cells on either side (the floor of the effective sample size).
    rule : str
        Which side the divide moves toward, e.g. "higher χ".
    consistency : float
        |mean difference| / its standard deviation along the divide.
    why_none : str
        When ``moves_toward`` is "none": "interval spans zero", "too small",
        "not consistent along the divide" or "insufficient data"; else "".
    n_samples : int
        De-duplicated samples before the DEM-error discount.
    n_effective : float
        Effective sample size (see ``n_points``).
    balanced : bool
        The whole 95 % interval lies within ± :data:`PRACTICAL_SHARE` of the metric's size:
        positive evidence that the two sides do not differ by a difference that would count.
    """

    metric: str
    unit: str
    a: float
    b: float
    difference: float
    ci95: tuple[float, float]
    moves_toward: str
    n_points: int
    rule: str
    consistency: float = float("nan")
    why_none: str = ""
    n_samples: int = 0
    n_effective: float = 0.0
    balanced: bool = False

    @property
    def sufficient(self) -> bool:
        """Enough independent samples for an interval and a vote."""
        return not self.why_none.startswith(INSUFFICIENT)

    def to_dict(self) -> dict:
        """JSON-ready form (the ``contrasts`` entries of summary.json)."""
        def f(v):
            return None if v is None or not np.isfinite(v) else float(v)
        return {"metric": self.metric, "unit": self.unit, "a": f(self.a), "b": f(self.b),
                "difference": f(self.difference), "ci95": [f(self.ci95[0]), f(self.ci95[1])],
                "moves_toward": self.moves_toward, "n_points": self.n_points, "rule": self.rule,
                "consistency": f(self.consistency), "why_none": self.why_none, "n_samples": self.n_samples,
                "n_effective": f(self.n_effective), "balanced": self.balanced}


def block_bootstrap_mean(values: np.ndarray, *, block: int, n_boot: int, rng: np.random.Generator) -> np.ndarray:
    """Moving-block bootstrap of the mean of a serially correlated sequence (Künsch 1989).

    Blocks of ``block`` consecutive values are drawn with replacement until the
    resample is as long as the data.
    """
    n = values.size
    block = int(max(1, min(block, n)))
    n_blocks = int(np.ceil(n / block))
    starts = rng.integers(0, n - block + 1, size=(n_boot, n_blocks))
    idx = (starts[:, :, None] + np.arange(block)[None, None, :]).reshape(n_boot, -1)[:, :n]
    return values[idx].mean(axis=1)


def interval_of_mean(values: np.ndarray, *, block: int, n_effective: float, n_boot: int,
                     rng: np.random.Generator, floor_se: float = 0.0) -> tuple[float, float]:
    """95 % interval of the mean of a sequence along the divide.

    The moving-block bootstrap percentiles (Künsch 1989) are widened about the mean by
    t(0.975, n_eff − 1) / z(0.975) · sqrt(n / (n − 1)): the percentile interval behaves like
    a z-interval with the biased variance, too narrow for small samples (Efron & Tibshirani
    1993, ch. 13; the t-quantile is Student's). Its half-width is never below
    t · ``floor_se``, with ``floor_se`` the standard error of the mean that the DEM error
    alone would cause.
    """
    n = values.size
    boots = block_bootstrap_mean(values, block=block, n_boot=n_boot, rng=rng)
    lo, hi = np.percentile(boots, [2.5, 97.5])
    mean = float(values.mean())
    t = float(stats.t.ppf(0.975, max(n_effective - 1.0, 1.0)))
    widen = t / float(stats.norm.ppf(0.975)) * np.sqrt(n / max(n - 1, 1))
    low, high = mean - widen * (mean - lo), mean + widen * (hi - mean)
    floor = t * floor_se
    return float(min(low, mean - floor)), float(max(high, mean + floor))


@dataclass(frozen=True, eq=False)
class DivideSamples:
    """The de-duplicated samples every near-divide metric is read at.

    Divide points that drain to the same pair of source cells (the first cell reaching
    the reference area on each side, or the channel head when that is finer) are one
    sample: their metric values are averaged. Only points where both sides drain away
    from the divide (:data:`divides.assess.points.MIN_FACING`) and every near-divide metric
    is defined on both sides are used, so each metric is judged on the same samples.

    Attributes
    ----------
    members : list of ndarray
        Divide-point indices of each sample, in along-divide order of first appearance.
    values : dict
        Metric -> (side a, side b) arrays, one value per sample (χ may be NaN).
    xy : ndarray, shape (n, 2)
        Mean position of each sample's divide points, metres east and north (``DividePoints.east_m``,
        ``north_m``): the DEM error's correlation is read over these distances.
    key_a, key_b : ndarray of int
        Source cell of each sample on each side.
    """

    members: list
    values: dict
    xy: np.ndarray
    key_a: np.ndarray
    key_b: np.ndarray

    @property
    def size(self) -> int:
        """Number of samples."""
        return len(self.members)

    def distinct(self) -> int:
        """Fewest distinct source cells on either side: a cell facing several cells across the
        divide is one measurement on its side."""
        return int(min(np.unique(self.key_a).size, np.unique(self.key_b).size)) if self.size else 0

    def error_effective(self, dem_error: DemError) -> float:
        """The error model's own effective sample size of these samples (O(n²): computed once)."""
        cache = self.__dict__.setdefault("_error_effective", {})
        if dem_error not in cache:
            cache[dem_error] = dem_error.effective_sample_size(self.xy)
        return cache[dem_error]

    def effective(self, dem_error: DemError | None, error_share: float = 1.0) -> float:
        """Independent samples under the DEM error's correlation, capped by :meth:`distinct`.

        The DEM error makes samples correlated in proportion to its share of their variance
        (``error_share`` = error variance / total variance, clipped to 0–1): the correlation
        of samples i ≠ j is share · ρ(d_ij), and n_eff = n² / Σ_ij corr_ij (Bretherton et al.
        1999). With share 1 (differences that are all DEM error) this is the error model's own
        effective sample size.
        """
        n = self.size
        if n == 0:
            return 0.0
        n_eff = float(n)
        if dem_error is not None and n > 1:
            total_rho = n * n / self.error_effective(dem_error)  # Σ_ij ρ(d_ij)
            share = float(np.clip(error_share, 0.0, 1.0))
            n_eff = n * n / (n + share * (total_rho - n))
        return float(min(n_eff, self.distinct()))


def divide_samples(points: DividePoints) -> DivideSamples:
    """Group the divide points into independent samples (see :class:`DivideSamples`)."""
    ok = points.facing >= MIN_FACING
    for metric in NEAR_DIVIDE:
        va, vb = points.values[metric]
        ok &= np.isfinite(va) & np.isfinite(vb)
    idx = np.flatnonzero(ok)
    pairs = {"ref": (points.ref_a, points.ref_b), "head": (points.head_a, points.head_b)}
    # the coarser of the two pairs of source cells (fewer distinct pairs) is the unit of independence
    counts = {k: np.unique(np.column_stack([a[idx], b[idx]]), axis=0).shape[0] if idx.size else 0
              for k, (a, b) in pairs.items()}
    ka, kb = pairs["ref"] if counts["ref"] <= counts["head"] else pairs["head"]
    members: list = []
    if idx.size:
        _, first, inverse = np.unique(np.column_stack([ka[idx], kb[idx]]), axis=0, return_index=True,
                                      return_inverse=True)
        inverse = np.asarray(inverse).ravel()
        for g in np.argsort(first, kind="stable"):
            members.append(idx[inverse == g])
    values = {}
    for metric in METRICS:
        va, vb = points.values[metric]
        with np.errstate(invalid="ignore"):
            values[metric] = tuple(np.array([np.nanmean(v[m]) if np.isfinite(v[m]).any() else np.nan
                                             for m in members]) for v in (va, vb))
    # in metres, not in the CRS's unit: on a geographic DEM degrees read as metres made every sample one
    xy = np.array([[points.east_m[m].mean(), points.north_m[m].mean()] for m in members]).reshape(-1, 2)
    key_a = np.array([ka[m[0]] for m in members], dtype=np.int64)
    key_b = np.array([kb[m[0]] for m in members], dtype=np.int64)
    return DivideSamples(members, values, xy, key_a, key_b)


#: A difference smaller than this share of the metric's typical size is not evidence of
#: motion, however well determined (practical significance; common practice).
PRACTICAL_SHARE = 0.05

#: The mean difference must be at least this many times its spread (standard deviation)
#: along the divide: the asymmetry must hold along nearly the whole divide, not on average
#: only. Forte & Whipple (2018) compare the mean across-divide difference with its spread;
#: across stable model divides, asymmetries of a few metres with a spread of the same size
#: are common (valley spacing and hillslope length differ from side to side; Scherler &
#: Schwanghart 2020), while moving divides in the validation scenarios show ratios of 2-12.
SPREAD_RATIO = 2.0

#: A sample's across-divide difference at most this share of its larger value is rounding, taken as none: on a model
#: steady state the two flanks of a divide can be equal to the last digits, and the signs of the rounding errors then
#: made a consistency (|mean| / spread of rounding errors) and a z of their own, which changed when the same DEM was
#: turned or mirrored (tests/assess/test_screen.py). Far above float64 rounding (about 1e-15 of a value after a few
#: operations) and far below what any DEM resolves (float32 keeps about 1e-7 of a value).
ROUNDING_SHARE = 1e-9

#: A large difference (at least this share of the metric's size) needs only to exceed its
#: spread once (consistency >= 1) instead of SPREAD_RATIO times: a strong asymmetry can vary
#: along a real divide and still be evidence.
LARGE_SHARE = 0.25


def _floor_sd(metric: str, dem_error: DemError | None, cell_m: float) -> float:
    """Standard deviation of one sample's across-divide difference due to DEM error alone.

    Channel elevation: two elevations (sqrt 2 σ). Relief metrics: two differences of two
    elevations (2 σ). Gradient: a central difference has error σ / (sqrt 2 · cell) per
    component; two sides give about σ / cell. χ depends on drainage area only: 0.
    """
    if dem_error is None or dem_error.sigma_m == 0:
        return 0.0
    sigma = dem_error.sigma_m
    return {"channel_elevation": np.sqrt(2.0) * sigma, "local_relief": 2.0 * sigma,
            "hillslope_relief": 2.0 * sigma, "hillslope_gradient": sigma / max(cell_m, 1e-9)}.get(metric, 0.0)


def compute_contrasts(
    points: DividePoints,
    *,
    block_points: int,
    n_boot: int,
    base_level_m: float,
    seed: int = 0,
    dem_error: DemError | None = None,
    cell_m: float = 1.0,
    mirrored: bool = False,
    min_samples: int = MIN_SAMPLES,
    samples: DivideSamples | None = None,
) -> list[Contrast]:
    """Every metric of :data:`METRICS` compared across the divide.

    All metrics are read at the same de-duplicated samples (:func:`divide_samples`).
    The difference is the mean over samples of (a − b); its 95 % interval comes
    from a moving-block bootstrap along the divide (:func:`interval_of_mean`), whose
    block is at least n / n_eff samples long so that DEM error shared by neighbouring
    samples stays inside a block. With fewer than ``min_samples`` independent samples
    the contrast is ``"insufficient data"``: no interval, no vote.

    ``moves_toward`` follows the rule of each metric (higher χ, higher channel
    elevation, gentler gradient, lower relief, lower hillslope relief) and is
    ``"none"`` when the interval spans zero, the difference is below
    :data:`PRACTICAL_SHARE` of the metric's mean size (for channel elevation: of
    its height above the common base level), or it does not hold along the divide:
    it must be at least :data:`SPREAD_RATIO` times its spread, or at least its
    spread when it is large (:data:`LARGE_SHARE` of the metric's size or more).

    ``mirrored``: channel elevation is read at the channel heads, so it and the
    hillslope relief (divide elevation minus the same cells) are one measurement
    seen twice; they pass or fail together (both must pass).
    """
    rng = np.random.default_rng(seed)
    samples = divide_samples(points) if samples is None else samples
    out = []
    for metric, (unit, rule) in METRICS.items():
        va, vb = samples.values[metric]
        label = f"{rule} {'χ' if metric == 'chi' else metric.replace('_', ' ')}"
        keep = np.isfinite(va) & np.isfinite(vb)
        n = int(keep.sum())
        sub = samples if n == samples.size else DivideSamples(  # χ may be undefined on some samples
            [samples.members[i] for i in np.flatnonzero(keep)], {}, samples.xy[keep], samples.key_a[keep],
            samples.key_b[keep])
        a, b = va[keep], vb[keep]
        diff = a - b
        diff[np.abs(diff) <= ROUNDING_SHARE * np.maximum(np.abs(a), np.abs(b))] = 0.0
        mean = float(diff.mean()) if n else float("nan")
        floor_sd = _floor_sd(metric, dem_error, cell_m)
        variance = float(diff.var(ddof=1)) if n > 1 else 0.0
        share = 1.0 if variance <= 0 else floor_sd ** 2 / variance
        n_eff = sub.effective(dem_error if floor_sd > 0 else None, share)
        lo = hi = float("nan")
        if n_eff >= min_samples:
            block = max(1, int(round(block_points * n / max(points.size, 1))), int(np.ceil(n / max(n_eff, 1.0))))
            # the DEM error's own part of the uncertainty of the mean: σ_d / sqrt(n_eff of the error model)
            error_n = sub.error_effective(dem_error) if dem_error is not None else float(n)
            lo, hi = interval_of_mean(diff, block=block, n_effective=n_eff, n_boot=n_boot, rng=rng,
                                      floor_se=floor_sd / np.sqrt(max(error_n, 1.0)))
        if not (np.isfinite(lo) and np.isfinite(hi) and hi > lo):
            out.append(Contrast(metric, unit, float(a.mean()) if n else np.nan, float(b.mean()) if n else np.nan,
                                mean, (np.nan, np.nan), "none", int(np.floor(n_eff + 1e-9)), label,
                                why_none=INSUFFICIENT, n_samples=n, n_effective=float(n_eff)))
            continue
        offset = base_level_m if metric == "channel_elevation" else 0.0
        scale = 0.5 * (abs(float(a.mean()) - offset) + abs(float(b.mean()) - offset))
        spread = float(diff.std())
        consistency = abs(mean) / spread if spread > 0 else (np.inf if mean != 0 else 0.0)
        why = ("interval spans zero" if not (lo > 0 or hi < 0)
               else "too small" if abs(mean) < PRACTICAL_SHARE * scale
               else "not consistent along the divide"
               if consistency < SPREAD_RATIO and not (consistency >= 1.0 and abs(mean) >= LARGE_SHARE * scale)
               else "")
        if not why:
            higher = "a" if mean > 0 else "b"
            lower = "b" if higher == "a" else "a"
            toward = higher if rule == "higher" else lower
        else:
            toward = "none"
        balanced = bool(-PRACTICAL_SHARE * scale < lo and hi < PRACTICAL_SHARE * scale)
        out.append(Contrast(metric, unit, float(a.mean()), float(b.mean()), mean, (lo, hi), toward,
                            int(np.floor(n_eff + 1e-9)), label, float(consistency), why, n, float(n_eff), balanced))
    if mirrored:
        out = _together(out, ("channel_elevation", "hillslope_relief"))
    return out


def _together(contrasts: list[Contrast], names: tuple[str, str]) -> list[Contrast]:
    """Make two mirrored contrasts pass or fail together: a vote only when both pass, balanced
    only when both are."""
    by = {c.metric: c for c in contrasts}
    if not all(n in by for n in names):
        return contrasts
    first, second = (by[n] for n in names)
    why = first.why_none or second.why_none
    balanced = first.balanced and second.balanced
    fixed = {}
    for c, other in ((first, second), (second, first)):
        own = c.why_none or (f"{why} (as its mirror, {other.metric.replace('_', ' ')})" if why else "")
        fixed[c.metric] = dataclasses.replace(c, why_none=own, moves_toward="none" if why else c.moves_toward,
                                              balanced=balanced)
    return [fixed.get(c.metric, c) for c in contrasts]
