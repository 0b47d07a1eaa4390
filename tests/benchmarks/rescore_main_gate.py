"""The screening's scores and ranking rebuilt from regional records under other run gates (run by hand, not a test).

    python tests/benchmarks/rescore_main_gate.py --told 1 FILE.jsonl [FILE.jsonl ...] [--gate B:T ...]

Reads the per-case JSON lines of ``bench_regional.py --json`` (every segment's decision probabilities, landscape
evidence, length and, for main segments, the neighbours recorded within ten cells and the truth per stretch) and
replays what :func:`divides.assess.screen.screen` does after the landscape runs
(:func:`~divides.assess.screen.rank_segments`: the score, the neighbours' scores, the probability of motion told
``--told`` metres of DEM error, the ranking) and the reported instability. It prints issue 14's targets
(top, order, steady landscapes without an alarm) and the main probability of motion's calibration error for the
shipped gate and for each ``--gate B:T``: a main segment's run term r is 1 also where the run with one rate per
outlet basin moves its divide at least B model cells toward the side the decision favours and the one-uplift-rate
run at least T (round 68, docs/validation.md, *Regional screening*). Each line also counts the cases the replay ranks
exactly as recorded: under the shipped gate, every case of records written by the current code.
Give it training cases only.
"""

from __future__ import annotations

import argparse
import json
from contextlib import contextmanager

from bench_regional import probability_scores  # this folder (scripts run from here)

from divides.assess import segment_motion
from divides.assess.screen import NEIGHBOUR_CELLS, rank_segments
from divides.model.regional_benchmark import (
    STEADY_FAMILIES,
    raises_alarm,
    ranking_targets,
)

_SHIPPED = segment_motion.evidence_features


@contextmanager
def gate(basin_cells: float | None, one_u_cells: float | None):
    """The main run term widened to (per-basin shift >= ``basin_cells`` and one-U shift >= ``one_u_cells``, both
    toward the favoured side) for the duration; the shipped term when ``basin_cells`` is None."""
    def widened(probabilities, evidence, kind="main", **options):
        logit, hill, agrees = _SHIPPED(probabilities, evidence, kind, **options)
        if agrees or kind != "main" or basin_cells is None:
            return logit, hill, agrees
        favoured = segment_motion._favoured(probabilities)
        one_u, per_basin = (None if s is None else favoured * s for s in segment_motion.run_shifts(evidence))
        wide = (favoured != 0 and one_u is not None and per_basin is not None
                and per_basin >= basin_cells and one_u >= one_u_cells)
        return logit, hill, float(wide)

    segment_motion.evidence_features = widened
    try:
        yield
    finally:
        segment_motion.evidence_features = _SHIPPED


def replay(case: dict, told_m: float) -> tuple[list[dict], list[dict]]:
    """Every segment of ``case`` scored and ranked again by :func:`divides.assess.screen.rank_segments` (new
    ``rank``, reported ``instability``, ``motion_probability``; the recorded rank kept as ``recorded_rank``), and its
    main segments in the new order. The main segments' neighbours are those the record keeps within
    :data:`~divides.assess.screen.NEIGHBOUR_CELLS`."""
    main = [{**m, "divide_kind": "main"} for m in case["main"]]
    segs = main + [dict(s) for s in case["others"]]
    at = {m["rank"]: i for i, m in enumerate(main)}
    near = [[at[r] for r, gap in m["neighbours"] if gap <= NEIGHBOUR_CELLS and r in at] for m in main]
    segs = rank_segments(segs, [s["length_m"] for s in segs], near, dem_error_m=told_m)
    for rank, s in enumerate(segs, start=1):
        s["recorded_rank"], s["rank"] = s["rank"], rank
        s["instability"] = segment_motion.bounded_instability(s["instability"], s["motion_probability"])
    return segs, sorted(main, key=lambda m: m["rank"])


def figures(cases: list[dict], told_m: float) -> dict:
    """Targets met and the main probability of motion's scores over ``cases`` as replayed."""
    out = {"top": 0, "top_of": 0, "order": 0, "order_of": 0, "no_alarm": 0, "steady": 0, "exact": 0}
    x, y = [], []
    for case in cases:
        segs, main = replay(case, told_m)
        out["exact"] += all(s["rank"] == s["recorded_rank"] for s in segs)
        t = ranking_targets(main, moving_truth=case["moving_stretches"] > 0)
        for k in ("top", "order"):
            if t[f"{k}_ok"] is not None:
                out[f"{k}_of"] += 1
                out[k] += bool(t[f"{k}_ok"])
        if case["family"] in STEADY_FAMILIES:
            out["steady"] += 1
            out["no_alarm"] += not any(raises_alarm(s) for s in segs)
        for m in main:
            if m["motion_probability"] is not None and (m["in_moving"] or m["in_stable"]):
                x.append(m["motion_probability"])
                y.append(float(m["in_moving"]))
    out.update({f"p_{k}": v for k, v in probability_scores(x, y).items()})
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("records", nargs="+")
    parser.add_argument("--told", type=float, default=1.0, help="DEM error the screenings were told (m)")
    parser.add_argument("--gate", nargs="*", default=[], metavar="B:T")
    parser.add_argument("--family", default=None, help="only cases of this family")
    parser.add_argument("--split", default="training")
    args = parser.parse_args()
    cases = []
    for name in args.records:
        with open(name) as fh:
            cases += [c for c in map(json.loads, fh)
                      if c["split"] == args.split and (args.family is None or c["family"] == args.family)]
    for label in ["shipped", *args.gate]:
        b, t = (None, None) if label == "shipped" else map(float, label.split(":"))
        with gate(b, t):
            f = figures(cases, args.told)
        print(f"{label:>8}: cases {len(cases)} top {f['top']}/{f['top_of']} order {f['order']}/{f['order_of']} "
              f"no alarm {f['no_alarm']}/{f['steady']} | main P log loss {f['p_log_loss']:.3f} "
              f"calibration {f['p_ece']:.3f} AUC {f['p_auc']:.3f} | replayed exactly {f['exact']}", flush=True)


if __name__ == "__main__":
    main()
