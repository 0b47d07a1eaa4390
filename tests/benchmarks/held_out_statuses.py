"""Measure every slow held-out test of tests/assess/test_screen_regional.py and print its known-miss tables (run by
hand after the screening's default changes, not a test).

    python tests/benchmarks/held_out_statuses.py --seeds 1 2 3 ... [--records FILE.jsonl]
    python tests/benchmarks/held_out_statuses.py --from-records A.jsonl B.jsonl ...

The first form screens each draw's held-out cases as the tests do (their ``_held_out``: cached cases, the test's
options) and, with ``--records``, writes the scored cases as JSON lines; two processes over disjoint seeds use both
cores. The second reads such files without screening. Both then call each held-out test on every draw its
parametrisation lists and print, per test, the draws it misses with their measured reasons, in the form of the
module's ``*_MISSES`` tables (paste them over the old ones; docs/validation.md records each change of status).
"""

from __future__ import annotations

import argparse
import importlib.util
import json
import sys
import textwrap
from collections.abc import Callable
from pathlib import Path

from divides.model.regional_benchmark import raises_alarm

TESTS = Path(__file__).resolve().parents[1] / "assess" / "test_screen_regional.py"
ORDINAL = ("first", "second", "third")


def _tests():
    spec = importlib.util.spec_from_file_location("test_screen_regional", TESTS)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def _top(cases: list[dict], _) -> str:
    judged = [c for c in cases if c["top_ok"] is not None]
    missed = []
    for c in judged:
        if c["top_ok"]:
            continue
        by_rank = {m["rank"]: m for m in c["main"]}
        parts = []
        for i, t in enumerate(c["top"]):
            share, aimless = t["moving_share"] or 0.0, "" if t["azimuth"] is not None else ", no direction"
            if not by_rank[t["rank"]]["in_moving"]:
                where = "outside moving stretches" if share == 0 else f"{100 * share:.0f} % in moving stretches"
                parts.append(f"{ORDINAL[i]} {where}{aimless}")
            elif t["azimuth"] is None:
                parts.append(f"{ORDINAL[i]} in a moving stretch, no direction")
            elif t["azimuth_error"] > 45:
                off = t["azimuth_error"]
                parts.append(f"{ORDINAL[i]} {off:.1f} degrees off the measured motion" if off < 46 else
                             f"{ORDINAL[i]} {off:.0f} degrees off the measured motion")
        missed.append(f"{c['family']} case {c['index']}: " + ("main segments ranked " + "; ".join(parts) if parts
                      else "no main segment in a moving stretch"))
    return f"top target in {sum(bool(c['top_ok']) for c in judged)} of {len(judged)} cases ({'; '.join(missed)})"


def _order(cases: list[dict], _) -> str:
    judged = [c for c in cases if c["order_ok"] is not None]
    missed = [f"{c['family']} case {c['index']}: {c['order_violations']} pair{'s' * (c['order_violations'] != 1)}"
              for c in judged if not c["order_ok"]]
    return f"order in {sum(bool(c['order_ok']) for c in judged)} of {len(judged)} cases ({'; '.join(missed)})"


def _alarm(cases: list[dict], _) -> str:
    steady = [c for c in cases if c["family"].startswith("steady_")]
    alarms = [f"a {kind} segment in {c['family']} case {c['index']} at {m['instability']:.2f}, probability of motion "
              f"{m['motion_probability']:.2f}, confidence {m['confidence']:.2f}"
              for c in steady if not c["alarm_ok"]
              for kind, segments in (("main", c["main"]), ("lateral", c.get("others", [])))
              for m in segments
              if raises_alarm(m)]
    return f"{sum(bool(c['alarm_ok']) for c in steady)} of {len(steady)} steady cases without an alarm " \
           f"({'; '.join(alarms)})"


def _lateral_scaling(cases: list[dict], tests) -> str:
    own, _, _ = tests._lateral_log_loss(cases, tests.INSTABILITY_SCALING["lateral"])
    main, _, _ = tests._lateral_log_loss(cases, tests.INSTABILITY_SCALING["main"])
    return f"the main divide's scaling scores {main:.3f} against the lateral segments' own {own:.3f}"


def _lateral_mean(cases: list[dict], tests) -> str:
    _, mean, moved = tests._lateral_log_loss(cases, tests.INSTABILITY_SCALING["lateral"])
    return f"the lateral segments' mean instability {mean:.3f} against a moved share of {moved:.3f}"


def _probability(cases: list[dict], tests) -> str:
    loss, ece, score, n, moving = tests._probability_figures(cases)
    return (f"calibration error {ece:.3f} (log loss {loss:.3f} against the score's {score:.3f}; {n} segments, "
            f"{moving} moving)")


#: table name -> (test, its reason, the module's tuple of draws it runs on)
TABLES: dict[str, tuple[str, Callable, str]] = {
    "TOP_MISSES": ("test_held_out_top_ranked_segments_move_where_the_truth_moves", _top, "HELD_OUT_SEEDS"),
    "ORDER_MISSES": ("test_held_out_still_segments_rank_below_moving_ones", _order, "HELD_OUT_SEEDS"),
    "ALARM_MISSES": ("test_held_out_steady_landscapes_raise_no_alarm", _alarm, "HELD_OUT_SEEDS"),
    "LATERAL_SCALING_MISSES": ("test_held_out_lateral_own_scaling_beats_the_main_divides", _lateral_scaling,
                               "HELD_OUT_SEEDS"),
    "LATERAL_MEAN_MISSES": ("test_held_out_lateral_instability_is_calibrated_in_the_large", _lateral_mean,
                            "HELD_OUT_SEEDS"),
    "PROBABILITY_MISSES": ("test_held_out_probability_of_motion_is_calibrated", _probability, "PROBABILITY_SEEDS"),
}


def tables(tests, records: dict[int, list[dict]]) -> str:
    """The ``*_MISSES`` tables measured on ``records`` (draw -> its scored held-out cases), as Python source."""
    tests._held_out = lambda seed: tuple(records[seed])  # the tests read these in place of screening again
    out = []
    for name, (test, reason, seeds) in TABLES.items():
        lines = [f"{name}: dict[int, str] = {{"]
        for seed in (s for s in getattr(tests, seeds) if s in records):
            try:
                getattr(tests, test)(seed)
                continue
            except AssertionError:
                pass
            text = textwrap.wrap(reason(records[seed], tests), 108, break_on_hyphens=False)
            indent = "\n" + " " * (6 + len(str(seed)))
            lines.append(f"    {seed}: " + indent.join(f'"{t} "' for t in text[:-1]) + indent * (len(text) > 1)
                         + f'"{text[-1]}",')
        out.append("\n".join(lines + ["}"]))
    return "\n\n".join(out)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--seeds", nargs="*", type=int, default=[], help="draws to screen (master seeds)")
    parser.add_argument("--records", help="write the scored cases of --seeds here (JSON lines)")
    parser.add_argument("--from-records", nargs="*", default=[], metavar="FILE", help="read scored cases instead")
    args = parser.parse_args()
    tests = _tests()
    records: dict[int, list[dict]] = {}
    for name in args.from_records:
        with open(name) as fh:
            for line in fh:
                row = json.loads(line)
                if "records" in row:  # other lines (as a log of statuses may add) are skipped
                    records[row["seed"]] = row["records"]
    sink = open(args.records, "w") if args.records else None
    for seed in args.seeds:
        # through JSON, as --from-records reads them, so both forms measure the same numbers
        records[seed] = json.loads(json.dumps(list(tests._held_out(seed)), default=float))
        if sink:
            sink.write(json.dumps({"seed": seed, "records": records[seed]}) + "\n")
            sink.flush()
        print(f"screened master seed {seed}", file=sys.stderr, flush=True)
    if sink:
        sink.close()
    print(tables(tests, records))


if __name__ == "__main__":
    main()
