"""Across-divide contrasts with block-bootstrap intervals."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from divides.assess.points import METRICS, MIN_FACING, DividePoints

__all__ = ["Contrast", "PRACTICAL_SHARE", "SPREAD_RATIO", "LARGE_SHARE", "compute_contrasts", "block_bootstrap_mean", "unique_points"]


@dataclass(frozen=True)
class Contrast:
    """One metric compared across the divide.

    Attributes
    ----------
    metric : str
    unit : str
    a, b : float
        Mean value on each side over the (de-duplicated) divide points.
    difference : float
        a − b.
    ci95 : (float, float)
        95 % interval of the difference (moving-block bootstrap along the divide).
    moves_toward : str
        ``"a"``, ``"b"`` or ``"none"`` (interval spans zero, or too few points).
    n_points : int
        Independent points used (after de-duplication).
    rule : str
        Which side the divide moves toward, e.g. "higher χ".
    consistency : float
        |mean difference| / its standard deviation along the divide.
    why_none : str
        When ``moves_toward`` is "none": "interval spans zero", "too small",
        "not consistent along the divide" or "too few points"; else "".
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

    def to_dict(self) -> dict:
        """JSON-ready form (the ``contrasts`` entries of summary.json)."""
        def f(v):
            return None if v is None or not np.isfinite(v) else float(v)
        return {"metric": self.metric, "unit": self.unit, "a": f(self.a), "b": f(self.b),
                "difference": f(self.difference), "ci95": [f(self.ci95[0]), f(self.ci95[1])],
                "moves_toward": self.moves_toward, "n_points": self.n_points, "rule": self.rule,
                "consistency": f(self.consistency), "why_none": self.why_none}


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


def unique_points(points: DividePoints, metric: str) -> np.ndarray:
    """Indices of points kept for a metric: finite on both sides, facing the divide from both sides
    (:data:`divides.assess.points.MIN_FACING`), one per distinct pair of source cells.

    Neighbouring divide points often drain to the same channel head (χ, hillslope
    relief) or reference cell (the other metrics); counting each pair once keeps
    the bootstrap from treating copies as independent evidence.
    """
    va, vb = points.values[metric]
    ok = np.isfinite(va) & np.isfinite(vb) & (points.facing >= MIN_FACING)
    if metric in ("chi", "hillslope_relief"):
        key_a, key_b = points.head_a, points.head_b
    else:
        key_a, key_b = points.ref_a, points.ref_b
    if metric == "hillslope_relief":
        return np.flatnonzero(ok)  # divide elevation differs point to point: every point counts
    idx = np.flatnonzero(ok)
    _, first = np.unique(np.column_stack([key_a[idx], key_b[idx]]), axis=0, return_index=True)
    return idx[np.sort(first)]


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

#: A large difference (at least this share of the metric's size) needs only to exceed its
#: spread once (consistency >= 1) instead of SPREAD_RATIO times: a strong asymmetry can vary
#: along a real divide and still be evidence.
LARGE_SHARE = 0.25


def compute_contrasts(
    points: DividePoints,
    *,
    block_points: int,
    n_boot: int,
    base_level_m: float,
    seed: int = 0,
    min_points: int = 3,
) -> list[Contrast]:
    """Every metric of :data:`METRICS` compared across the divide.

    The difference is the mean over divide points of (a − b); its 95 %
    interval comes from a moving-block bootstrap along the divide, because
    neighbouring points are not independent. ``moves_toward`` follows the rule
    of each metric (higher χ, higher channel elevation, gentler gradient,
    lower relief, lower hillslope relief) and is ``"none"`` when the interval
    spans zero, the difference is below :data:`PRACTICAL_SHARE` of the
    metric's mean size (for channel elevation: of its height above the
    common base level), or it does not hold along the divide: it must be at
    least :data:`SPREAD_RATIO` times its spread, or at least its spread when
    it is large (:data:`LARGE_SHARE` of the metric's size or more).
    """
    rng = np.random.default_rng(seed)
    out = []
    for metric, (unit, rule) in METRICS.items():
        idx = unique_points(points, metric)
        va, vb = points.values[metric]
        label = f"{rule} {'χ' if metric == 'chi' else metric.replace('_', ' ')}"
        if idx.size < min_points:
            out.append(Contrast(metric, unit, np.nan, np.nan, np.nan, (np.nan, np.nan), "none", int(idx.size), label,
                                why_none="too few points"))
            continue
        a, b = va[idx], vb[idx]
        diff = a - b
        # keep the along-divide order for the blocks
        boots = block_bootstrap_mean(diff, block=max(1, int(block_points * idx.size / max(points.size, 1))),
                                     n_boot=n_boot, rng=rng)
        lo, hi = (float(v) for v in np.percentile(boots, [2.5, 97.5]))
        mean = float(diff.mean())
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
        out.append(Contrast(metric, unit, float(a.mean()), float(b.mean()), mean, (lo, hi), toward,
                            int(idx.size), label, float(consistency), why))
    return out
