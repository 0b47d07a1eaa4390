"""Rounds 79's and 80's tally of the directions given on lateral divides (run by hand, not a test; docs/validation.md,
*Regional screening*).

    python tests/benchmarks/lateral_direction_tally.py DIR [DIR ...]

Reads ``bench_regional.py --json`` records named ``<anything>-<condition>-<seed>.jsonl`` and prints, per condition,
the targets (``targets_met.py``) and the lateral segments the screening gave a direction, as recorded (D) and as
candidate L, shipped since round 80, would leave them (:func:`divides.assess.screen.withhold_unlikely_lateral`).
Counted on lateral segments: those of steady landscapes measured still with a direction; of those with a direction
and a measured truth (moving or still), the share in moving stretches; and those in moving stretches pointing the
measured way (their verdict is the side the continued run moved the divide toward).
"""
from __future__ import annotations

import collections
import glob
import json
import os
import sys

from targets_met import targets_met

from divides.assess.screen import withhold_unlikely_lateral


def directed(m: dict, rule: str) -> bool:
    """Whether lateral segment record ``m`` has a direction under ``rule`` ("D": as recorded, "L": candidate L)."""
    if rule == "D":
        return m["verdict"] in ("a", "b")
    row = {"divide_kind": "lateral", "verdict": m["verdict"], "moves_toward": m["verdict"], "basis": None,
           "reason": None, "motion_probability": m.get("motion_probability")}
    withhold_unlikely_lateral(row)
    return row["verdict"] in ("a", "b")


def tally(records: list[dict], rule: str) -> collections.Counter:
    """Round 80's counts over ``records`` (one condition) under ``rule``."""
    out, _ = targets_met(records)
    for r in records:
        steady = r["family"].startswith("steady_")
        for m in r.get("lateral", []):
            if not directed(m, rule):
                continue
            out["directed"] += 1
            out["steady still"] += steady and bool(m["in_stable"])
            out["moving"] += bool(m["in_moving"])
            out["still"] += bool(m["in_stable"])
            out["moving, measured way"] += bool(m["in_moving"]) and m["verdict"] == m["truth"]
    return out


def main(dirs: list[str]) -> None:
    by_condition: dict[str, list[dict]] = collections.defaultdict(list)
    for d in dirs:
        for path in sorted(glob.glob(os.path.join(d, "*.jsonl"))):
            condition = os.path.basename(path).rsplit("-", 2)[-2]
            with open(path) as fh:
                by_condition[condition] += [json.loads(line) for line in fh if line.strip()]
    kept = collections.Counter()
    for condition, records in sorted(by_condition.items()):
        records = [r for r in records if "refused" not in r]
        for rule in ("D", "L"):
            t = tally(records, rule)
            known = t["moving"] + t["still"]
            share = f"{t['moving'] / known:.1%}" if known else "n/a"
            kept[rule] += t["moving, measured way"]
            print(f"{condition} {rule}: {t['cases']} cases; top {t['top']}/{t['top_n']}, order {t['order']}/"
                  f"{t['order_n']}, no alarm {t['no_alarm']}/{t['no_alarm_n']}; lateral segments with a direction "
                  f"{t['directed']}: of steady landscapes measured still {t['steady still']}; in moving stretches "
                  f"{t['moving']} of {known} measured ({share}), pointing the measured way {t['moving, measured way']}")
    if kept["D"]:
        print(f"all conditions: L keeps {kept['L']} of D's {kept['D']} lateral directions pointing the measured way in "
              f"moving stretches ({kept['L'] / kept['D']:.1%})")


if __name__ == "__main__":
    main(sys.argv[1:])
