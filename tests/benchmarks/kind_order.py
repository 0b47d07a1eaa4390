"""How a screening orders main and lateral segments against each other on regional cases (run by hand, not a test).

    python tests/benchmarks/kind_order.py --told 1 E0-*.jsonl [--split training|held-out|all]

Reads the per-case JSON lines of ``bench_regional.py --json`` (each segment's rank, divide kind, probability of
motion, ranking score and landscape evidence; the truth of main segments per stretch and of lateral ones per pair of
basins) and prints, for the ranking as screened and for the orders of rounds 61 and 62 rebuilt from the records:

* **cross-kind misorder**: of the pairs of a still and a moving segment of different kinds in one case, the share in
  which the still one ranks above;
* **ordered across kinds**: of the cases with moving and still segments of both kinds, those in which every moving
  segment of either kind ranks above every still one;
* the main targets (top, order, steady landscapes without an alarm), recomputed from the main segments' new ranks.

Orders: ``as screened`` (the records' ranks); ``K0`` one sort of all segments by
:func:`divides.assess.screen.rank_key` (as shipped before round 62; rebuilt only from records that keep every
segment's verdict, written since round 62); ``K1`` each kind in the order screened, the kinds interleaved by the
running minimum of the probability of motion down each kind's list (round 61, not adopted); ``K2`` each kind in the
order screened, the kinds interleaved by
:func:`divides.assess.screen.interleave_kinds`; ``K3`` K2 where the screening is told (``--told``, metres) less than
``PROMOTE_TOLD_ERROR_M``, the order screened otherwise (round 62's rule: on records screened since, the order as
screened). Each kind's order screened is rank_key's before and after round 62. A segment is moving when the truth
says so (a main segment at least 70 % in moving stretches; a lateral pair that moved), still when it says it did not.
docs/validation.md, rounds 61 and 62.
"""

from __future__ import annotations

import argparse
import copy
import json

from divides.assess.screen import PROMOTE_TOLD_ERROR_M, interleave_kinds, rank_key
from divides.model.regional_benchmark import ranking_targets

ORDERS = ("as screened", "K0", "K1", "K2", "K3")


def _segments(case: dict) -> list[dict]:
    """Every segment of a case with its ``truth`` ("moving", "still" or None), in the order screened."""
    truth = {m["rank"]: "moving" if m["in_moving"] else ("still" if m["in_stable"] else None)
             for m in (*case["main"], *case.get("lateral", []))}  # the benchmark's own classes of both kinds
    segs = [{**m, "divide_kind": m.get("kind")} for m in case["main"]] + list(case["others"])
    return sorted(({**s, "truth": truth.get(s["rank"])} for s in segs), key=lambda s: s["rank"])


def reranked(segs: list[dict], order: str, told_m: float) -> dict[int, int] | None:
    """The new rank of each screened rank under ``order`` (None: K0 from records without every verdict)."""
    promote = told_m >= PROMOTE_TOLD_ERROR_M
    if order == "K0":
        if any("verdict" not in s for s in segs):
            return None
        segs = sorted(segs, key=lambda s: (*rank_key(s["ranking_score"], s, promote=promote), -s["length_m"],
                                           s["rank"]))
    elif order == "K1":
        floor: dict[str, float] = {}
        key = []
        for s in segs:  # the running minimum of each kind's probabilities, unknown read as 0
            floor[s["divide_kind"]] = min(floor.get(s["divide_kind"], 1.0), s["motion_probability"] or 0.0)
            key.append(floor[s["divide_kind"]])
        segs = [segs[i] for i in sorted(range(len(segs)), key=lambda i: (-key[i], i))]
    elif order == "K2" or (order == "K3" and not promote):
        segs = [segs[i] for i in interleave_kinds([s["divide_kind"] for s in segs],
                                                  [s["motion_probability"] for s in segs])]
    return {s["rank"]: i + 1 for i, s in enumerate(segs)}


def figures(cases: list[dict], order: str, told_m: float) -> dict | None:
    """Cross-kind misorder, cases ordered across kinds and the main targets of ``cases`` under ``order`` (None: see
    :func:`reranked`)."""
    out = {"misordered": 0, "pairs": 0, "ordered": 0, "eligible": 0, "top": 0, "order": 0, "no_alarm": 0}
    for case in cases:
        segs = _segments(case)
        new = reranked(segs, order, told_m)
        if new is None:
            return None
        moving = [(new[s["rank"]], s["divide_kind"]) for s in segs if s["truth"] == "moving"]
        still = [(new[s["rank"]], s["divide_kind"]) for s in segs if s["truth"] == "still"]
        for rank_s, kind_s in still:
            for rank_m, kind_m in moving:
                if kind_s != kind_m:
                    out["pairs"] += 1
                    out["misordered"] += rank_s < rank_m
        if {k for _, k in moving} == {"main", "lateral"} == {k for _, k in still}:
            out["eligible"] += 1
            out["ordered"] += max(r for r, _ in moving) < min(r for r, _ in still)
        main = copy.deepcopy(case["main"])
        for m in main:
            m["rank"] = new[m["rank"]]
        main.sort(key=lambda m: m["rank"])
        targets = ranking_targets(main, moving_truth=case["moving_stretches"] > 0)
        out["top"] += targets["top_ok"] is True
        out["order"] += targets["order_ok"] is True
        out["no_alarm"] += bool(case["family"].startswith("steady") and case["alarm_ok"])
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("files", nargs="+")
    parser.add_argument("--told", type=float, required=True, help="DEM error the screenings were told (m)")
    parser.add_argument("--split", choices=("training", "held-out", "all"), default="all")
    args = parser.parse_args()
    cases = [c for f in args.files for c in map(json.loads, open(f)) if args.split in ("all", c["split"])]
    print(f"{len(cases)} cases, told {args.told:g} m")
    for order in ORDERS:
        f = figures(cases, order, args.told)
        if f is None:
            print(f"{order:>11}: not rebuilt (the records do not keep every segment's verdict)")
            continue
        print(f"{order:>11}: cross-kind misorder {f['misordered']} / {f['pairs']} = "
              f"{f['misordered'] / max(f['pairs'], 1):.3f}; ordered across kinds {f['ordered']} of {f['eligible']}; "
              f"top {f['top']}, order {f['order']}, no alarm {f['no_alarm']}")


if __name__ == "__main__":
    main()
