"""The regional targets on a grid twice as fine and twice as coarse (run by hand, not a test).

    python tests/benchmarks/bench_regional_resolution.py [--seeds 0 1 2 3 4] [--length-in-native-cells]
                                                         [--auto-channel-area]

Screens the TRAINING regional cases of the master seeds given (docs/validation.md, *Resolution*) as the benchmark
screens them (the channel area held at the same m²), on three grids of the same surface:

- native: the case as generated;
- refined x2: interpolated onto cells half as wide (cubic spline), so no detail the native grid lacks;
- coarsened x2: 2 x 2 means.

Each screening is scored against the same truth, the stretches' rows scaled with the grid. With
``--length-in-native-cells`` the refined grid is screened with the DEM error's correlation length at three native
cells (the default is three cells of the grid screened). With ``--auto-channel-area`` each grid is screened with the
screening's own default channel area (round 64), refusals counted apart. A measurement: nothing is chosen from it.
"""

from __future__ import annotations

import argparse
import collections
import dataclasses
import time

import numpy as np
from scipy import ndimage

from divides.assess.screen import screen
from divides.errors import DividesError
from divides.io.dem import Dem
from divides.model.regional_benchmark import case_seed, load_or_build, score, split_of

CHANNEL_CELLS = 50  # as bench_regional.py

GRIDS = {"native": 1.0, "refined x2": 2.0, "coarsened x2": 0.5}


def resampled(z: np.ndarray, factor: float) -> np.ndarray:
    """``z`` on a grid ``factor`` times as fine (2: cubic spline) or as coarse (0.5: 2 x 2 means)."""
    if factor == 2.0:
        return ndimage.zoom(z, 2, order=3, mode="nearest", grid_mode=True)
    if factor == 0.5:
        r, c = z.shape
        return z[: r // 2 * 2, : c // 2 * 2].reshape(r // 2, 2, c // 2, 2).mean(axis=(1, 3))
    return z


def run_case(seed: int, index: int, factor: float, *, native_length: bool, auto_area: bool = False) -> dict:
    """The score of one training case screened on the grid ``factor`` times as fine (None where it was refused)."""
    case = load_or_build(seed, index)
    cell = case.cell_size / factor
    dem = Dem.from_array(resampled(np.asarray(case.elevation, np.float64), factor).astype(np.float32),
                         cell_size=cell, valid_range=None)
    extra = {"dem_error_length_m": 3 * case.cell_size} if native_length else {}
    try:
        result = screen(dem, theta=case.parameters["theta"], closed_edges=case.closed_edges, workers=1, seed=0,
                        channel_area_m2=None if auto_area else CHANNEL_CELLS * case.cell_size ** 2, **extra)
    except DividesError:
        return None
    rows = dataclasses.replace(case, cell_size=cell,
                               stretches=[{**s, "row0": s["row0"] * factor} for s in case.stretches])
    return score(rows, result)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seeds", type=int, nargs="+", default=[0, 1, 2, 3, 4])
    parser.add_argument("--length-in-native-cells", action="store_true")
    parser.add_argument("--auto-channel-area", action="store_true")
    args = parser.parse_args()
    cases = [(s, i) for s in args.seeds for i in range(24) if split_of(case_seed(s, i)) == "training"]
    for name, factor in GRIDS.items():
        start = time.perf_counter()
        counts = collections.Counter()
        misses = collections.Counter()
        for seed, index in cases:
            r = run_case(seed, index, factor, native_length=args.length_in_native_cells and factor == 2.0,
                         auto_area=args.auto_channel_area)
            if r is None:
                counts["refused", "n"] += 1
                continue
            for target, key in (("top", "top_ok"), ("order", "order_ok")):
                if r[key] is not None:
                    counts[target, "n"] += 1
                    counts[target, "ok"] += bool(r[key])
                    misses[target, r["family"]] += not r[key]
            if r["family"].startswith("steady"):
                counts["no alarm", "n"] += 1
                counts["no alarm", "ok"] += bool(r["alarm_ok"])
                misses["alarm", r["family"]] += not r["alarm_ok"]
        figures = ", ".join(f"{t} {counts[t, 'ok']}/{counts[t, 'n']}" for t in ("top", "order", "no alarm"))
        print(f"{name}: {len(cases)} training cases; {figures}; "
              f"refused {counts['refused', 'n']}; misses {dict((k, v) for k, v in misses.items() if v)} "
              f"({time.perf_counter() - start:.0f} s)")


if __name__ == "__main__":
    main()
