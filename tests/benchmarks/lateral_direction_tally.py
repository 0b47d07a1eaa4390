"""Round 79's tally of the directions given on lateral divides (run by hand, not a test; docs/validation.md,
*Regional screening*).

    python tests/benchmarks/lateral_direction_tally.py DIR [DIR ...]

Reads ``bench_regional.py --json`` records named ``<anything>-<condition>-<seed>.jsonl`` and prints, per condition,
the targets and the lateral segments the screening gave a direction, as recorded (D) and as candidate L would leave
them: a lateral segment whose verdict names a side but whose probability of motion is under
:data:`~divides.assess.segment_motion.LIKELY_MOTION` reads "undetermined". Counted on lateral segments: those of steady
landscapes measured still with a direction; of those with a direction and a measured truth (moving or still), the
share in moving stretches; and those in moving stretches pointing the measured way (their verdict is the side the
continued run moved the divide toward).
"""
from __future__ import annotations

import collections
import glob
import json
import os
import sys

from divides.assess.segment_motion import LIKELY_MOTION


def directed(m: dict, rule: str) -> bool:
    """Whether lateral segment record ``m`` has a direction under ``rule`` ("D": as recorded, "L": candidate L)."""
    if m["verdict"] not in ("a", "b"):
        return False
    p = m.get("motion_probability")
    return rule == "D" or p is None or p >= LIKELY_MOTION


def tally(records: list[dict], rule: str) -> dict:
    """Round 79's counts over ``records`` (one condition) under ``rule``."""
    out = collections.Counter()
    for r in records:
        steady = r["family"].startswith("steady_")
        out["cases"] += 1
        out["top"] += bool(r.get("top_ok"))
        out["top of"] += r.get("top_ok") is not None
        out["order"] += bool(r.get("order_ok"))
        out["order of"] += r.get("order_ok") is not None
        out["no alarm"] += bool(steady and r.get("alarm_ok"))
        out["no alarm of"] += steady
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
            print(f"{condition} {rule}: {t['cases']} cases; top {t['top']}/{t['top of']}, order {t['order']}/"
                  f"{t['order of']}, no alarm {t['no alarm']}/{t['no alarm of']}; lateral segments with a direction "
                  f"{t['directed']}: of steady landscapes measured still {t['steady still']}; in moving stretches "
                  f"{t['moving']} of {known} measured ({share}), pointing the measured way {t['moving, measured way']}")
    if kept["D"]:
        print(f"all conditions: L keeps {kept['L']} of D's {kept['D']} lateral directions pointing the measured way in "
              f"moving stretches ({kept['L'] / kept['D']:.1%})")


if __name__ == "__main__":
    main(sys.argv[1:])
