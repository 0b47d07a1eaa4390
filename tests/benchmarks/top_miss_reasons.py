"""Why the top target is missed, over bench_regional.py records (run by hand, not a test; round 72 in
docs/validation.md, *Regional screening*).

    python tests/benchmarks/top_miss_reasons.py 'DIR/*.jsonl' [...]

For every scored case with a moving stretch whose top target is missed, each of its first main segments
(``ranking_targets``' ``top``) is sorted by why it fails the target: ``outside`` (under the 70 % share in moving
stretches), ``no direction`` (the decision's reason: insufficient data, below the confidence threshold, χ only, ...)
or ``off`` (pointing more than 45° from the measured motion). A missed case is a *ranking miss* when its main
segments in moving stretches include at least as many pointing within 45° as the target asks for (a ranking that put
them first would meet it), else a *decision miss*. Also counts, over every main segment in a moving stretch, the
decision's reasons, so that the share of moving segments the decision gives a direction is seen beside the misses,
and how often the decision's probabilities lean the measured way where it gives none.
"""
from __future__ import annotations

import collections
import glob
import json
import sys

from divides.assess.segment_motion import RUNS_AGREE_CELLS
from divides.model.regional_benchmark import TARGETS, azimuth_error

#: The target's azimuth tolerance (issue 14).
AZIMUTH_DEG = TARGETS["azimuth_deg"]


def why(m: dict) -> str:
    """Why one top-listed main segment fails the top target ("ok" where it does not)."""
    if not m["in_moving"]:
        return "outside"
    err = azimuth_error(m)
    if err is None:
        return f"no direction ({m.get('reason') or 'no reason recorded'})"
    return "ok" if err <= AZIMUTH_DEG else "off"


def _toward_b(m: dict) -> bool:
    """Whether the measured motion heads into the screening's side b (its basin ``b_side`` of the map: the
    screening's sides are its basin labels, a the lower; the truth's are west and east)."""
    return (m["measured_azimuth"] == 90.0) == (m["b_side"] == "east")


def leans_right(m: dict) -> bool:
    """Whether the decision's probabilities lean toward the side the measured motion heads for."""
    p = m["probabilities"]
    return (p["b"] > p["a"]) == _toward_b(m)


def run_way(m: dict, key: str, cells: float = RUNS_AGREE_CELLS) -> str:
    """Whether a landscape run's shift of the divide (``key``, model cells into the screening's side b) heads the
    measured way: "toward", "away", "under <cells>" (the screening's
    :data:`~divides.assess.segment_motion.RUNS_AGREE_CELLS`) or "none"."""
    v = m.get(key)
    if v is None:
        return "none"
    if abs(v) < cells:
        return f"under {cells:g} cell"
    return "toward" if (v > 0) == _toward_b(m) else "away"


def case_reasons(r: dict, top: int = 3) -> dict:
    """The reasons of one case's top-listed main segments and whether its miss is one of the ranking."""
    main = sorted(r["main"], key=lambda m: m["rank"])
    movers = [m for m in main if m["in_moving"]]
    head = main[: min(top, len(movers))] if movers else []
    pointing = sum(1 for m in movers if (e := azimuth_error(m)) is not None and e <= AZIMUTH_DEG)
    return {"reasons": [why(m) for m in head], "ranks": [m["rank"] for m in head],
            "probabilities": [m.get("motion_probability") for m in head],
            "ranking_miss": bool(movers) and pointing >= min(top, len(movers))}


def main() -> None:
    rows = [json.loads(line) for p in sys.argv[1:] for f in sorted(glob.glob(p)) for line in open(f) if line.strip()]
    scored = [r for r in rows if "refused" not in r and r["moving_stretches"] > 0]
    missed = [r for r in scored if not r.get("top_ok")]
    print(f"{len(rows)} records, {len(scored)} scored with a moving stretch, top missed in {len(missed)}"
          f" ({sum('refused' in r for r in rows)} refused)")
    kinds: collections.Counter = collections.Counter()
    for r in missed:
        c = case_reasons(r)
        kinds["ranking miss" if c["ranking_miss"] else "decision miss"] += 1
        for w in c["reasons"]:
            kinds[w] += 1
        listed = "; ".join(f"#{k} {w} P {p if p is None else round(p, 2)}"
                           for k, w, p in zip(c["ranks"], c["reasons"], c["probabilities"]))
        print(f"  {r['family']} {r['master_seed']}/{r['index']}: "
              f"{'ranking' if c['ranking_miss'] else 'decision'} miss; {listed}")
    print("top-listed segments and missed cases by reason: "
          + ", ".join(f"{k} {v}" for k, v in sorted(kinds.items())))
    movers: collections.Counter = collections.Counter()
    for r in scored:
        for m in r["main"]:
            if m["in_moving"]:
                movers[why(m)] += 1
    print("main segments in moving stretches (every scored case): "
          + ", ".join(f"{k} {v}" for k, v in sorted(movers.items())))
    leaning = [leans_right(m) for r in scored for m in r["main"]
               if m["in_moving"] and m.get("azimuth") is None and m.get("probabilities")]
    print(f"of those without a direction but with probabilities, the decision leans toward the measured motion "
          f"(P(toward it) > P(toward the other side)) in {sum(leaning)} of {len(leaning)}")
    for aimless in (True, False):
        for key in ("forward_shift_cells", "forward_shift_basin_cells"):
            runs = collections.Counter(run_way(m, key) for r in scored for m in r["main"] if m["in_moving"] and (
                m.get("azimuth") is None and m.get("probabilities") if aimless else m.get("azimuth") is not None))
            print(f"  {key} of the moving segments {'without a direction' if aimless else 'that point'}: "
                  + ", ".join(f"{k} {v}" for k, v in sorted(runs.items())))


if __name__ == "__main__":
    main()
