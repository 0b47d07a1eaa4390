"""Rounds 74's to 78's candidates F, G and J (docs/validation.md, *Regional screening*; run by hand, not a test).

    python tests/benchmarks/run_direction_rule.py [--runs-agree | --after-ranking] [the options of bench_regional.py]
    python tests/benchmarks/run_direction_rule.py --tally DIR   # D-<condition>-<seed>.jsonl: bench_regional.py's
                                                                # records; F-, G- or J-<condition>-<seed>.jsonl:
                                                                # this script's (G: --runs-agree; J: --after-ranking)

Screens as ``bench_regional.py`` does, with one change on the screening's path: where the near-divide decision gives
a segment no direction because it falls below the confidence threshold, the segment is judged again by the
calibrated decision that reads a forward run (``decide(..., forward_in_decision=True)``, the same threshold), its
forward shift the one-uplift-rate landscape run's (``forward_shift_cells``: model cells, positive into b, the unit
that decision was fitted on). The segment takes that decision's direction, basis, reason and confidence only where it
names a side; its probabilities, and so its score, instability, probability of motion and tier, stay the near-divide
decision's. Records gain ``run_direction`` (1 on the segments so given a direction).

Round 75's candidate G (``--runs-agree``) is F only where the screening is told less than
``PROMOTE_TOLD_ERROR_M`` of DEM error and the per-outlet-basin run does not move the divide the other way from the
side F names (``forward_shift_basin_cells`` finite, and 0 or more toward that side).

Round 76's candidate J (``--after-ranking``) is G applied once the segments are ranked: the ranking is the
default's, segment for segment, and only the directions (with their basis, reason and confidence, and so the motion
azimuths) of the segments G names a side change. Since round 78 J changes main divides only (round 76 changed
lateral ones too).

``--tally`` prints each round's counts per condition, default (D) against each candidate: the deciding cases
(training cases but the partial base-level falls of master seeds up to :data:`READ_PBLF_LAST`, which round 72 read)
and, beside them, those partial base-level falls; how many main segments the candidate gave a direction and how many
of steady landscapes have one; then each case where the candidate changes a target.
"""

from __future__ import annotations

import json
import math
import sys
from pathlib import Path

import bench_regional
from bench_regional_steadiness import contrasts_of

import divides.assess.screen as screening
import divides.model.regional_benchmark as benchmark
from divides.assess.verdict import DEFAULT_THRESHOLD, decide
from targets_met import targets_met

#: The near-divide decision's reason when no outcome reaches the threshold (divides.assess.verdict.decide).
BELOW_THRESHOLD = "below the confidence threshold"

#: Round 72 read the partial base-level falls among the training cases of master seeds 117 to this one.
READ_PBLF_LAST = 140


def run_direction(row: dict, min_confidence: float = DEFAULT_THRESHOLD, *, runs_agree: bool = False) -> dict:
    """The keys of a screened ``row`` that candidate F (G with ``runs_agree``, told error aside) changes (empty where
    it changes none)."""
    shift = row.get("forward_shift_cells")
    if row.get("reason") != BELOW_THRESHOLD or shift is None or not math.isfinite(shift):
        return {}
    v = decide(contrasts_of(row["contrasts"]), min_confidence=min_confidence, forward_shift=float(shift),
               forward_in_decision=True)
    if v.moves_toward not in ("a", "b"):
        return {}
    if runs_agree:
        basin = row.get("forward_shift_basin_cells")
        if basin is None or not math.isfinite(basin) or (basin if v.moves_toward == "b" else -basin) < 0.0:
            return {}
    return {"verdict": v.moves_toward, "moves_toward": v.moves_toward, "basis": v.basis, "reason": v.reason,
            "confidence": v.confidence, "run_direction": True}


def _patch(runs_agree: bool, after_ranking: bool = False) -> None:
    """Make every screening of this process apply candidate F (G with ``runs_agree``) just before it ranks its
    segments, or G just after (J, ``after_ranking``)."""
    ranked = screening.rank_segments
    runs_agree = runs_agree or after_ranking

    def with_run_direction(rows, lengths, near, *, dem_error_m):
        told_much = runs_agree and dem_error_m >= screening.PROMOTE_TOLD_ERROR_M
        applies = near is not None and not told_much  # only with the landscape evidence: the runs measured the shift
        if applies and not after_ranking:
            for r in rows:
                r.update(run_direction(r, runs_agree=runs_agree))
        rows = ranked(rows, lengths, near, dem_error_m=dem_error_m)
        if applies and after_ranking:  # round 78: main divides only
            for r in rows:
                if r["divide_kind"] == "main":
                    r.update(run_direction(r, runs_agree=runs_agree))
        return rows

    screening.rank_segments = with_run_direction
    screening.EVIDENCE_KEYS = (*screening.EVIDENCE_KEYS, "run_direction")
    benchmark.EVIDENCE_KEYS = (*benchmark.EVIDENCE_KEYS, "run_direction")


def _records(out: Path, variant: str, condition: str) -> list[dict]:
    rows = [json.loads(line) for p in sorted(out.glob(f"{variant}-{condition}-*.jsonl")) for line in open(p)]
    return [r for r in rows if r["split"] == "training"]


def _read_pblf(r: dict) -> bool:
    return r["family"] == "partial_base_level_fall" and r["master_seed"] <= READ_PBLF_LAST


def _outcomes(r: dict) -> tuple:
    return tuple(r.get(k) if "refused" not in r else None for k in ("top_ok", "order_ok", "alarm_ok"))


def tally(out: Path) -> None:
    """Print the counts of rounds 74 to 78 from the records in ``out`` (see the module's docstring)."""
    conditions = sorted({p.stem.split("-")[1] for p in out.glob("D-*.jsonl")})
    candidates = sorted({p.stem.split("-")[0] for p in out.glob("*.jsonl")} - {"D"})
    for condition in conditions:
        by_variant = {v: _records(out, v, condition) for v in ("D", *candidates)}
        for part, keep in (("deciding", lambda r: not _read_pblf(r)), ("round 72's", _read_pblf)):
            if not any(keep(r) for r in by_variant["D"]):
                continue
            for v, rows in by_variant.items():
                kept = [r for r in rows if keep(r)]
                t, _ = targets_met(kept)
                given = [(r, m) for r in kept for m in r.get("main", []) if m.get("run_direction")]
                moving = [m for _, m in given if m["in_moving"]]
                errors = [benchmark.azimuth_error(m) for m in moving]  # None: no direction; 0.0 is a right one
                right = sum(e is not None and e <= benchmark.TARGETS["azimuth_deg"] for e in errors)
                still = sum(m["in_stable"] and not r["family"].startswith("steady_") for r, m in given)
                steady = [m for r in kept if r["family"].startswith("steady_") for m in r.get("main", [])]
                pointing = sum(m["verdict"] in ("a", "b") for m in steady)
                lateral = [m for r in kept if r["family"].startswith("steady_") for m in r.get("lateral", [])]
                lateral_pointing = sum(m["verdict"] in ("a", "b") for m in lateral)
                print(f"{condition} {part} {v}: {t['cases']} cases ({t['refused']} refused); top {t['top']}/"
                      f"{t['top_n']}, order {t['order']}/{t['order_n']}, no alarm {t['no_alarm']}/"
                      f"{t['no_alarm_n']}; main segments given a direction by the candidate {len(given)} (in moving "
                      f"stretches {len(moving)}, within 45 degrees {right}; in still stretches of transient "
                      f"landscapes {still}); main segments of steady landscapes with a direction "
                      f"{pointing}/{len(steady)}; lateral ones {lateral_pointing}/{len(lateral)}")
        default = {(r["master_seed"], r["index"]): r for r in by_variant["D"]}
        for v in candidates:
            for r in by_variant[v]:
                d = default.get((r["master_seed"], r["index"]))
                if d is not None and _outcomes(d) != _outcomes(r):
                    print(f"  {condition} {v} {r['family']} {r['master_seed']}/{r['index']}: top, order, no alarm "
                          f"{_outcomes(d)} -> {_outcomes(r)}")


if __name__ == "__main__":
    if sys.argv[1:2] == ["--tally"]:
        tally(Path(sys.argv[2]))
    else:
        flags = {f: f in sys.argv for f in ("--runs-agree", "--after-ranking")}
        sys.argv = [a for a in sys.argv if a not in flags]
        _patch(flags["--runs-agree"], flags["--after-ranking"])
        bench_regional.main()
