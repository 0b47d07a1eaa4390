"""Reliability diagram of the screening's probability of motion on regional records (run by hand, not a test).

    python tests/benchmarks/reliability_regional.py OUT.png 'LABEL=GLOB' ['LABEL=GLOB' ...]  # split at the last =

Reads bench_regional.py records (each set: the held-out cases of the files GLOB matches, one row of the figure) and,
per kind of divide, bins each judged segment in a
moving or a still stretch (main) or pair (lateral) by its ``motion_probability`` (ten bins of 0.1), then prints
and draws, per bin, the segments, their mean probability and the share that moved, with a 95 % Wilson interval
(Wilson 1927), and the calibration error (``bench_regional.probability_scores``).
Segments of one landscape are not independent, so the intervals are narrower than the data warrant.
"""
from __future__ import annotations

import glob
import json
import sys

import numpy as np
from bench_regional import given_values, probability_scores

KINDS = ("main", "lateral")


def segments(paths: list[str], kind: str, split: str = "held-out") -> tuple[np.ndarray, np.ndarray]:
    """Probabilities of motion and outcomes (1 moved) of one kind's segments with a truth in ``split``'s cases
    (:func:`bench_regional.given_values`)."""
    rows = [r for path in paths for line in open(path)
            if (r := json.loads(line))["split"] == split and "refused" not in r]
    x, y = given_values(rows, kind, "motion_probability")
    return np.asarray(x, dtype=float), np.asarray(y, dtype=float)


def wilson(k: float, n: int, z: float = 1.96) -> tuple[float, float]:
    """The Wilson score interval of k successes in n trials (Wilson 1927).

    Examples
    --------
    >>> [round(v, 4) for v in wilson(5, 10)]  # 0.5 ± 1.96 √(0.25/10 + 0.96/400) / 1.384, by hand
    [0.2366, 0.7634]
    """
    p = k / n
    centre = (p + z * z / (2 * n)) / (1 + z * z / n)
    half = z * np.sqrt(p * (1 - p) / n + z * z / (4 * n * n)) / (1 + z * z / n)
    return max(float(centre - half), 0.0), min(float(centre + half), 1.0)


def reliability(x: np.ndarray, y: np.ndarray) -> list[tuple[int, float, float, float, float]]:
    """Per non-empty bin of 0.1: count, mean probability, share moved and its Wilson interval."""
    bins = np.minimum((x * 10).astype(int), 9)
    rows = []
    for b in range(10):
        sel = bins == b
        if sel.any():
            rows.append((int(sel.sum()), float(x[sel].mean()), float(y[sel].mean()), *wilson(y[sel].sum(), sel.sum())))
    return rows


def main() -> None:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    out, sets = sys.argv[1], [a.rsplit("=", 1) for a in sys.argv[2:]]
    fig, axes = plt.subplots(len(sets), 2, figsize=(10, 4.8 * len(sets)), constrained_layout=True, squeeze=False)
    for row, (label, pattern) in zip(axes, sets):
        paths = sorted(glob.glob(pattern))
        for ax, kind in zip(row, KINDS):
            x, y = segments(paths, kind)
            rows = reliability(x, y)
            ece = probability_scores(x, y)["ece"]
            print(f"{label}, {kind}: {x.size} segments, {int(y.sum())} moved; calibration error {ece:.3f}")
            for n, p, f, lo, hi in rows:
                print(f"  mean P {p:.3f}: {n:>5} segments, moved {f:.3f} (95 % interval {lo:.3f}-{hi:.3f})")
            ax.plot([0, 1], [0, 1], color="0.6", lw=1, ls="--", label="perfect calibration")
            p, f = np.array([r[1] for r in rows]), np.array([r[2] for r in rows])
            err = np.array([[r[2] - r[3] for r in rows], [r[4] - r[2] for r in rows]])
            ax.errorbar(p, f, yerr=err, fmt="o", color="#1f4e9c", ecolor="#1f4e9c", capsize=3,
                        label="share that moved, 95 % interval (segments in the bin)")
            for n, pi, fi, _, _ in rows:
                ax.annotate(f"{n}", (pi, fi), textcoords="offset points", xytext=(6, -10), fontsize=8)
            ax.set(xlim=(-0.02, 1.05), ylim=(-0.02, 1.05), xlabel="probability of motion given (bin mean)",
                   ylabel="share of segments that moved", aspect="equal",
                   title=f"{label}\n{kind} divides: {x.size} held-out segments, calibration error {ece:.3f}")
            ax.title.set_fontsize(10)
            ax.legend(loc="lower right", fontsize=8)
    fig.savefig(out, dpi=120)


if __name__ == "__main__":
    main()
