"""Issue 14's targets met over bench_regional.py records, a refused case meeting none (run by hand, not a test).

    python tests/benchmarks/targets_met.py 'DIR/A-*.jsonl' ['OTHER/*.jsonl' ...]

Each pattern is one condition (its records pooled). Counts, as round 64's rule reads them (docs/validation.md):
top (cases with a moving stretch), order (cases whose screening has both moving and still main segments, or refused
cases with both moving and still stretches), no alarm (steady landscapes) and coverage >= 90 % (every case), their
sum, and the misses by family.
"""

from __future__ import annotations

import collections
import glob
import json
import sys


def targets_met(rows: list[dict], missed: list[str] | None = None,
                ) -> tuple[collections.Counter, dict[str, collections.Counter]]:
    """The counts of one condition and its misses by family; each miss also appended to ``missed`` as
    "target family seed/index" when given."""
    t: collections.Counter = collections.Counter()
    misses: dict[str, collections.Counter] = collections.defaultdict(collections.Counter)
    for r in rows:
        refused = "refused" in r
        t["cases"] += 1
        t["refused"] += refused
        if refused:
            misses[r["family"]]["refused"] += 1
            if missed is not None:
                missed.append(f"refused {r['family']} {r['master_seed']}/{r['index']}")
        both = r["moving_stretches"] > 0 and r["stable_stretches"] > 0
        for key, applies, ok in (
                ("top", r["moving_stretches"] > 0, bool(r.get("top_ok"))),
                ("order", both if refused else r.get("order_ok") is not None, bool(r.get("order_ok"))),
                ("no_alarm", r["family"].startswith("steady_"), bool(r.get("alarm_ok"))),
                ("coverage", True, bool(r.get("coverage_ok")))):
            if applies:
                t[f"{key}_n"] += 1
                met = ok and not refused
                t[key] += met
                if not met and not refused:
                    misses[r["family"]][key] += 1
                    if missed is not None:
                        missed.append(f"{key} {r['family']} {r['master_seed']}/{r['index']}")
    t["sum"] = t["top"] + t["order"] + t["no_alarm"] + t["coverage"]
    return t, misses


def main() -> None:
    for pattern in sys.argv[1:]:
        rows = [json.loads(line) for f in sorted(glob.glob(pattern)) for line in open(f)]
        t, misses = targets_met(rows)
        print(f"{pattern}: {t['cases']} cases, refused {t['refused']}; top {t['top']}/{t['top_n']}, order "
              f"{t['order']}/{t['order_n']}, no alarm {t['no_alarm']}/{t['no_alarm_n']}, coverage "
              f"{t['coverage']}/{t['coverage_n']}; sum {t['sum']}")
        for family, c in sorted(misses.items()):
            print(f"    {family}: " + ", ".join(f"{k} {v}" for k, v in sorted(c.items())))


if __name__ == "__main__":
    main()
