"""How much the screening of one landscape moves when its DEM is resampled half a cell off its grid (run by hand, not
a test; round 63 of docs/validation.md).

    python tests/benchmarks/resampling_shift.py SEED:INDEX [SEED:INDEX ...]

Screens each regional case as ``bench_regional.py`` does (E0) and again resampled (``bench_regional.half_cell``),
matches every segment of the first screening to the nearest of the second of the same kind of divide (mid-points
within 2 cells), and prints, per kind, how many matched segments change their instability, probability of motion
or direction across 0.5 and how far the two landscape runs' shifts move, with the issue's top and order targets of
both screenings. Give it training cases only.
"""

from __future__ import annotations

import sys
from collections import Counter

import numpy as np
from bench_regional import screen_case  # this folder (scripts run from here)

from divides.model.regional_benchmark import load_or_build, score


def _rows(screening) -> list[dict]:
    out = []
    for s in screening.segments:
        k = len(s["line"].x) // 2
        out.append({"kind": s["divide_kind"], "x": float(s["line"].x[k]), "y": float(s["line"].y[k]),
                    "instability": s["instability"], "P": s["motion_probability"], "az": s["motion_azimuth_deg"],
                    "runs": (s.get("forward_shift_cells"), s.get("forward_shift_basin_cells"))})
    return out


def compare(first: list[dict], second: list[dict], cell: float, counts: Counter, shifts: dict) -> None:
    """Count the changes between two screenings' segments of one case into ``counts`` and the runs' shift changes
    into ``shifts`` (per kind, one-uplift-rate and per-basin run)."""
    xy = np.array([[s["x"], s["y"]] for s in second]).reshape(-1, 2)
    for s in first:
        kind = s["kind"]
        counts[f"{kind}: segments"] += 1
        d = np.hypot(xy[:, 0] - s["x"], xy[:, 1] - s["y"])
        near = [i for i in np.argsort(d) if d[i] <= 2.0 * cell and second[i]["kind"] == kind]
        if not near:
            continue
        t = second[near[0]]
        counts[f"{kind}: matched"] += 1
        for key in ("instability", "P"):
            if s[key] is not None and t[key] is not None:
                counts[f"{kind}: {key} crosses 0.5"] += (s[key] >= 0.5) != (t[key] >= 0.5)
        if (s["az"] is None) != (t["az"] is None):
            counts[f"{kind}: direction given in one only"] += 1
        elif s["az"] is not None and abs((s["az"] - t["az"] + 180.0) % 360.0 - 180.0) > 90.0:
            counts[f"{kind}: direction reversed"] += 1
        for run, a, b in zip(("one-uplift-rate", "per-basin"), s["runs"], t["runs"]):
            if a is not None and b is not None:
                shifts.setdefault(f"{kind}: {run} run", []).append(abs(a - b))


def main() -> None:
    counts: Counter = Counter()
    shifts: dict[str, list[float]] = {}
    for token in sys.argv[1:]:
        seed, index = map(int, token.split(":"))
        case = load_or_build(seed, index)
        screenings = [screen_case(case, resample=resample) for resample in (False, True)]
        for name, sc in zip(("as gridded", "resampled"), screenings):
            res = score(case, sc)
            for target in ("top_ok", "order_ok"):
                if res[target] is not None:
                    counts[f"{target} {name}"] += bool(res[target])
                    counts[f"{target} cases"] += name == "as gridded"
        compare(*map(_rows, screenings), case.cell_size, counts, shifts)
        print(f"screened master seed {seed} case {index}", flush=True)
    for key in sorted(counts):
        print(f"{key:45s} {counts[key]}")
    for key, values in sorted(shifts.items()):
        q = np.quantile(values, [0.5, 0.9])
        print(f"{key} shift change (cells): median {q[0]:.2f}, 90th percentile {q[1]:.2f}, "
              f"> 0.5 cell in {sum(v > 0.5 for v in values)} of {len(values)}")


if __name__ == "__main__":
    main()
