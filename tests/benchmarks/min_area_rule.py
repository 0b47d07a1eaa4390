"""Round 73: the default minimum basin area against candidate M on regional benchmark cases (run by hand, not a test;
docs/validation.md, *Round 73*).

    python tests/benchmarks/min_area_rule.py --seeds 141 142 ... [--split training] [--family NAME] [--json FILE]

For each cached case (generated beforehand by bench_regional.py) prints the share of the DEM's land the basins of
5, 2 and 1 × the validation's fixed channel area drain. Where 5 × drains less than half (the cases M changes) the
case is screened twice under E0, with the default and with M's minimum basin area, and both are scored against the
measured truth; every other case is unchanged by construction and not screened. M was not adopted (it changed one of
128 training cases; its rule asked for three), so it lives here only.
"""
from __future__ import annotations

import argparse
import json
import math

from bench_regional import CHANNEL_CELLS, screen_case

from divides.assess.screen import SCREENED_SHARE_CAUTION, SMALLER_AREA_MULTIPLES, _smaller_basin_shares
from divides.config import AssessConfig
from divides.errors import DividesError
from divides.model.benchmark import split_of
from divides.model.regional_benchmark import FAMILIES, case_seed, lateral_truth, load_or_build, score
from divides.terrain.routing import route

TARGETS = ("top_ok", "order_ok", "alarm_ok", "coverage_ok")

#: Candidate M: the multiples of the channel area a default minimum basin area tries, largest first (5 × is the
#: screening's default), and the share of the DEM's land their basins should drain (set before the figures; the
#: screening's caution reads the same multiples and share).
MIN_AREA_MULTIPLES = SMALLER_AREA_MULTIPLES
SCREENED_SHARE_MIN = SCREENED_SHARE_CAUTION


def shares(case) -> list[float]:
    """The land share the basins of each of :data:`MIN_AREA_MULTIPLES` × the fixed channel area drain."""
    dem = case.dem(None)
    config = AssessConfig.from_options(theta=case.parameters["theta"], closed_edges=case.closed_edges)
    flow = route(dem, conditioning=config.conditioning, closed_edges=config.closed_edges)
    area = CHANNEL_CELLS * case.cell_size ** 2
    return [s["screened_area_share"] for s in _smaller_basin_shares(dem, flow, area, math.inf, "tributaries", None)]


def _scored(case, **extra) -> dict:
    try:
        result = score(case, screen_case(case, **extra), lateral=lateral_truth(case))
    except DividesError as exc:
        return {"refused": str(exc)}
    return {k: result.get(k) for k in (*TARGETS, "main_segments", "main_insufficient", "screened_area_share",
                                       "moving_stretches", "stable_stretches", "top", "order_violations")}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--seeds", type=int, nargs="+", required=True)
    parser.add_argument("--split", default="training", choices=("training", "held-out"))
    parser.add_argument("--family", default=None)
    parser.add_argument("--n", type=int, default=24)
    parser.add_argument("--json", default=None)
    args = parser.parse_args()
    out = open(args.json, "a") if args.json else None
    for seed in args.seeds:
        for i in range(args.n):
            if split_of(case_seed(seed, i)) != args.split:
                continue
            if args.family is not None and FAMILIES[i % len(FAMILIES)] != args.family:
                continue
            case = load_or_build(seed, i)
            row = {"master_seed": seed, "index": i, "family": case.family, "shares": shares(case)}
            if row["shares"][0] < SCREENED_SHARE_MIN:  # M: the largest multiple draining half the land, else 1 ×
                k = next((k for k, v in zip(MIN_AREA_MULTIPLES, row["shares"]) if v >= SCREENED_SHARE_MIN),
                         MIN_AREA_MULTIPLES[-1])
                row["default"] = _scored(case)
                row["M"] = _scored(case, min_basin_area_m2=k * CHANNEL_CELLS * case.cell_size ** 2)
            line = f"{seed}/{i} {case.family}: shares " + " ".join(f"{v:.2f}" for v in row["shares"])
            for name in ("default", "M"):
                if name in row:
                    r = row[name]
                    line += f"; {name} " + (f"refused ({r['refused']})" if "refused" in r else
                                            " ".join(f"{k[:-3]} {r[k]}" for k in TARGETS)
                                            + f" main {r['main_segments']} ({r['main_insufficient']} insufficient)")
            print(line, flush=True)
            if out:
                out.write(json.dumps(row) + "\n")
                out.flush()


if __name__ == "__main__":
    main()
