"""Tabulate a judgement written by judge_held_out.sh (run by hand, not a test).

    python tests/benchmarks/judge_summary.py OUT [CONDITION ...]

Per condition (default: every one found in OUT): the targets of issue 14 over the draws' held-out cases as
targets_met.py counts them (a refused case a miss of every target it has), each miss by family and case, and the
calibration error of the main divides' probability of motion per draw and pooled (with its log loss and AUC).
"""
from __future__ import annotations

import json
import sys
from pathlib import Path

from bench_regional import given_scores
from targets_met import targets_met


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
    missed: list[str] = []
    t, _ = targets_met([r for part in by_seed.values() for r in part], missed)
    per_draw = ", ".join(f"{s} {given_scores(scored, 'main', 'motion_probability')['ece']:.3f}"
                         for s, part in by_seed.items() if (scored := [r for r in part if "refused" not in r]))
    pooled = given_scores(rows, "main", "motion_probability")
    lines = [f"{condition}: {t['cases']} cases ({t['refused']} refused); top {t['top']}/{t['top_n']}, order "
             f"{t['order']}/{t['order_n']}, no alarm {t['no_alarm']}/{t['no_alarm_n']}, coverage "
             f"{t['coverage']}/{t['coverage_n']}"]
    lines += [f"  {r['family']} {r['master_seed']}/{r['index']} refused: {r['refused']}"
              for part in by_seed.values() for r in part if "refused" in r]
    lines += [f"  misses: {', '.join(sorted(missed)) or 'none'}",
              f"  P(moving) calibration error per draw: {per_draw}; pooled {pooled['ece']:.3f} (log loss "
              f"{pooled['log_loss']:.3f}, AUC {pooled['auc']:.3f}, {pooled['n']} main segments, "
              f"{pooled['moving']} moving)"]
    return "\n".join(lines)


def main() -> None:
    out = Path(sys.argv[1])
    conditions = sys.argv[2:] or sorted({p.stem.rsplit("-", 1)[0] for p in out.glob("*.jsonl")})
    print("\n".join(summary(out, c) for c in conditions))


if __name__ == "__main__":
    main()
