"""Round 63's candidates: the second tier of screen.rank_key with sub-cell landscape-run shifts read as ties (run by
hand, not a test).

    python tests/benchmarks/sub_cell_order.py --set E0 1 E0-*.jsonl --set E5 5 E5-*.jsonl [--split training]

Each ``--set`` names a condition, the DEM error its screenings were told (m) and ``bench_regional.py --json``
records. Every case's main-divide segments are sorted again from the records (``screen.rank_key`` on the ranking
score, then the longer segment first, as screen.screen sorts) with the second tier's larger |shift| of the two
landscape runs read by each candidate of round 63 (docs/validation.md): as it is (round 62's key), N0.5 (shipped
since round 63) and N1 as 0 under 0.5 and 1 model cell, F1 rounded down to whole cells. Each candidate's order is
checked against the screened one (records screened before round 63 agree with round 62's key, later ones with
N0.5's). The top and order targets come from ``regional_benchmark.ranking_targets``, the steady landscapes without
an alarm from the records (the ranking does not enter them). Prints the targets per condition and candidate and
their sum over the conditions.
"""

from __future__ import annotations

import argparse
import glob
import json
import math
from collections.abc import Callable

from divides.assess.screen import PROMOTE_TOLD_ERROR_M, rank_key, run_size
from divides.model.regional_benchmark import ranking_targets


def _floor_below(cells: float) -> Callable[[float], float]:
    return lambda size: 0.0 if size < cells else size


#: Candidate name -> how the second tier reads the larger |shift| of the two runs (model cells; inf: neither run
#: measured the segment, which keeps its place first).
CANDIDATES: dict[str, Callable[[float], float]] = {
    "round 62": lambda size: size,
    "N0.5": _floor_below(0.5),
    "N1": _floor_below(1.0),
    "F1": lambda size: size if math.isinf(size) else float(math.floor(size)),
}


def key(m: dict, told_m: float, read: Callable[[float], float]) -> tuple:
    """The sort key of a main segment's record under one candidate (ascending: rank 1 first)."""
    k = rank_key(m.get("ranking_score"), m, promote=told_m >= PROMOTE_TOLD_ERROR_M)
    if k[0] == 1:  # the second tier: (1, -beside a scored one, -size, -score)
        size = run_size(m)
        k = (1, k[1], -read(math.inf if size is None else size), k[3])
    return (*k, -m["length_m"])


def case_targets(case: dict, told_m: float, read: Callable[[float], float]) -> dict:
    """Top, order and no-alarm of one case with its main segments sorted by ``read``'s key."""
    ranked = sorted(case["main"], key=lambda m: key(m, told_m, read))
    main = [{**m, "rank": i + 1} for i, m in enumerate(ranked)]
    out = ranking_targets(main, moving_truth=case["moving_stretches"] > 0)
    steady = case["family"].startswith("steady_")
    return {"top": out["top_ok"], "order": out["order_ok"], "alarm_ok": case["alarm_ok"] if steady else None}


def _records(patterns: list[str], split: str) -> list[dict]:
    rows = []
    for pattern in patterns:
        for name in sorted(glob.glob(pattern)):
            with open(name) as fh:
                rows += [r for r in map(json.loads, fh) if split == "all" or r["split"] == split]
    return rows


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--set", nargs="+", action="append", required=True, metavar="NAME TOLD FILE",
                        help="a condition's name, the DEM error its screenings were told (m) and its records")
    parser.add_argument("--split", default="training", choices=("training", "held-out", "all"))
    parser.add_argument("--families", action="store_true", help="also print each candidate's misses by family")
    args = parser.parse_args()
    sums = dict.fromkeys(CANDIDATES, 0)
    for name, told, *patterns in args.set:
        rows = _records(patterns, args.split)
        print(f"{name} (told {told} m): {len(rows)} cases")
        for cand, read in CANDIDATES.items():
            # the key of the ranking the records were screened with gives their order in every case
            off = sum([m["rank"] for m in sorted(r["main"], key=lambda m: key(m, float(told), read))]
                      != sorted(m["rank"] for m in r["main"]) for r in rows)
            res = [(r["family"], case_targets(r, float(told), read)) for r in rows]
            got = {t: sum(bool(x[t]) for _, x in res) for t in ("top", "order", "alarm_ok")}
            of = {t: sum(x[t] is not None for _, x in res) for t in ("top", "order", "alarm_ok")}
            total = sum(got.values())
            sums[cand] += total
            print(f"  {cand:8s} top {got['top']}/{of['top']}  order {got['order']}/{of['order']}  "
                  f"no alarm {got['alarm_ok']}/{of['alarm_ok']}  targets {total}  (off the screened order in {off})")
            if args.families:
                misses: dict[str, int] = {}
                for fam, x in res:
                    for t in ("top", "order"):
                        if x[t] is False:
                            misses[f"{t} {fam}"] = misses.get(f"{t} {fam}", 0) + 1
                print("           misses: " + ", ".join(f"{k} {v}" for k, v in sorted(misses.items())))
    print("sum over the conditions: " + ", ".join(f"{c} {v}" for c, v in sums.items()))


if __name__ == "__main__":
    main()
