"""Round 71 (a measurement): the probability of motion on training landscapes of several slope exponents, and one
recalibration over them scored leave-one-seed-out (run by hand, not a test; docs/validation.md, *Round 71*).

    python tests/benchmarks/recalibrate_by_exponent.py 'N=GLOB' ['N=GLOB' ...]   # e.g. '1.5=R71/n1.5-*.jsonl'

Each set: bench_regional.py records of training cases grown with slope exponent N, one file per master seed (the
seed read from the file name's last ``-SEED``). Prints per N and kind of divide the shipped probability's calibration
error, log loss and share of middle bins (0.1-0.9) above the diagonal, then the candidate
P' = 1 / (1 + exp(-(a + b logit P))) fitted on every N pooled (each N weighing the same) with one seed left out and
scored on it, and the plan's two numbers: the out-of-fold main log loss summed over the N against the shipped one,
and the change of the main calibration error at N = 1.
"""
from __future__ import annotations

import glob
import re
import sys

import numpy as np
from bench_regional import _logit, probability_scores
from reliability_regional import KINDS, reliability, segments
from scipy.optimize import minimize


def fit(parts: list[tuple[np.ndarray, np.ndarray]]) -> tuple[float, float]:
    """(a, b) by maximum likelihood over ``parts`` (probabilities, outcomes), each part weighing the same."""
    xs = [_logit(x) for x, _ in parts]

    def loss(w):
        total = 0.0
        for z, (_, y) in zip(xs, parts):
            q = np.clip(1 / (1 + np.exp(-(w[0] + w[1] * z))), 1e-12, 1 - 1e-12)
            total += -np.mean(y * np.log(q) + (1 - y) * np.log(1 - q))
        return total

    return tuple(minimize(loss, np.array([0.0, 1.0]), method="Nelder-Mead").x)


def main() -> None:
    sets = [a.rsplit("=", 1) for a in sys.argv[1:]]
    data: dict[tuple[str, str, int], tuple[np.ndarray, np.ndarray]] = {}
    seeds: set[int] = set()
    for n, pattern in sets:
        for path in sorted(glob.glob(pattern)):
            seed = int(re.search(r"-(\d+)\.jsonl$", path).group(1))
            seeds.add(seed)
            for kind in KINDS:
                data[(n, kind, seed)] = segments([path], kind, split="training")
    exponents = [n for n, _ in sets]
    for kind in KINDS:
        print(f"{kind} divides, shipped probability of motion:")
        for n in exponents:
            x = np.concatenate([data[(n, kind, s)][0] for s in sorted(seeds)])
            y = np.concatenate([data[(n, kind, s)][1] for s in sorted(seeds)])
            sc = probability_scores(x, y)
            middle = [r for r in reliability(x, y) if 0.1 <= r[1] < 0.9]
            above = sum(r[0] for r in middle if r[2] > r[1])
            print(f"  n = {n}: {sc['n']} segments ({sc['moving']} moved), calibration error {sc['ece']:.3f}, "
                  f"log loss {sc['log_loss']:.3f}; middle bins {len(middle)} ({sum(r[0] for r in middle)} "
                  f"segments), above the diagonal {sum(r[2] > r[1] for r in middle)} ({above} segments)")
        shipped = {n: [] for n in exponents}
        recal = {n: [] for n in exponents}
        for left in sorted(seeds):
            a, b = fit([(np.concatenate([data[(n, kind, s)][0] for s in seeds if s != left]),
                         np.concatenate([data[(n, kind, s)][1] for s in seeds if s != left])) for n in exponents])
            print(f"  fitted without seed {left}: a = {a:.3f}, b = {b:.3f}")
            for n in exponents:
                x, y = data[(n, kind, left)]
                shipped[n].append((x, y))
                recal[n].append((1 / (1 + np.exp(-(a + b * _logit(x)))), y))
        total = {"shipped": 0.0, "recalibrated": 0.0}
        for n in exponents:
            row = []
            for name, parts in (("shipped", shipped[n]), ("recalibrated", recal[n])):
                sc = probability_scores(np.concatenate([p for p, _ in parts]), np.concatenate([y for _, y in parts]))
                total[name] += sc["log_loss"]
                row.append(f"{name} log loss {sc['log_loss']:.3f}, calibration error {sc['ece']:.3f}")
            print(f"  out of fold, n = {n}: " + "; ".join(row))
        change = total["recalibrated"] / total["shipped"] - 1
        print(f"  out-of-fold log loss summed over n: shipped {total['shipped']:.3f}, recalibrated "
              f"{total['recalibrated']:.3f} ({100 * change:+.1f} %)")


if __name__ == "__main__":
    main()
