"""Tabulate a judgement written by judge_held_out.sh (run by hand, not a test).

    python tests/benchmarks/judge_summary.py OUT [CONDITION ...]

Per condition (default: every one found in OUT): the targets of issue 14 over the draws' held-out cases (top,
order, no alarm, coverage ≥ 90 %, refusals), the misses by family, and the calibration error of the main divides'
probability of motion per draw and pooled (with its log loss and AUC).
"""
from __future__ import annotations

import json
import sys
from collections import Counter
from pathlib import Path

from bench_regional import given_scores


def _records(out: Path, condition: str) -> dict[int, list[dict]]:
    by_seed = {}
    for path in sorted(out.glob(f"{condition}-*.jsonl")):
        rows = [json.loads(line) for line in path.read_text().splitlines() if line.strip()]
        by_seed[int(path.stem.rsplit("-", 1)[1])] = [r for r in rows if r["split"] == "held-out"]
    return dict(sorted(by_seed.items()))


def summary(out: Path, condition: str) -> str:
    """One condition's line of targets, its misses by family and its probability's calibration."""
    by_seed = _records(out, condition)
    rows = [r for part in by_seed.values() for r in part if "refused" not in r]
    refused = [r for part in by_seed.values() for r in part if "refused" in r]
    top = [r for r in rows if r["top_ok"] is not None]
    order = [r for r in rows if r["order_ok"] is not None]
    steady = [r for r in rows if r["family"].startswith("steady_")]
    misses = Counter()
    for target, part in (("top", top), ("order", order), ("alarm", steady)):
        for r in part:
            if not r[f"{target}_ok"]:
                misses[f"{target} {r['family']} {r['master_seed']}/{r['index']}"] += 1
    per_draw = ", ".join(f"{s} {given_scores(part, 'main', 'motion_probability')['ece']:.3f}"
                         for s, part in by_seed.items())
    pooled = given_scores(rows, "main", "motion_probability")
    return (f"{condition}: {len(rows)} cases ({len(refused)} refused); top {sum(bool(r['top_ok']) for r in top)}/"
            f"{len(top)}, order {sum(bool(r['order_ok']) for r in order)}/{len(order)}, no alarm "
            f"{sum(bool(r['alarm_ok']) for r in steady)}/{len(steady)}, coverage "
            f"{sum(bool(r['coverage_ok']) for r in rows)}/{len(rows)}\n"
            f"  misses: {', '.join(sorted(misses)) or 'none'}\n  P(moving) calibration error per draw: "
            f"{per_draw}; pooled {pooled['ece']:.3f} (log loss {pooled['log_loss']:.3f}, AUC {pooled['auc']:.3f}, "
            f"{pooled['n']} main segments, {pooled['moving']} moving)")


def main() -> None:
    out = Path(sys.argv[1])
    conditions = sys.argv[2:] or sorted({p.stem.rsplit("-", 1)[0] for p in out.glob("*.jsonl")})
    print("\n".join(summary(out, c) for c in conditions))


if __name__ == "__main__":
    main()
