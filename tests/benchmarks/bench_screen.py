"""Wall time and peak memory of regional screening (run by hand, not a test).

    python tests/benchmarks/bench_screen.py [--sizes 1000 2000 4000] [--level tributaries] [--forward_run no]
                                            [--holes 0]

Screens every divide between sub-basins of the ridge DEM of bench_network.py
(1 km² channels, basins of at least 5 km², 3 km segments, both cores), after a
JIT warm-up on a small grid. Each size runs in a fresh subprocess. By default the screening reads its
landscape evidence (screen's ``forward_run``: the whole-DEM run under the steady balance and the hilltop
curvature), whose share of the time is reported; ``--forward_run no`` leaves it out. ``--holes N`` punches N voids
of nodata (bench_voids.py's) into the DEM, which the screening fills first.
"""

from __future__ import annotations

import resource
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).parent))
from _harness import sweep  # noqa: E402
from bench_network import ridge_dem  # noqa: E402
from bench_voids import punch_holes  # noqa: E402


def run_one(n: int, level: str, forward_run: str = "yes", holes: str = "0") -> dict:
    import divides.assess.screen as screening
    from divides import Dem
    from divides.assess.screen import screen

    forward = forward_run == "yes"
    options = dict(theta=0.45, channel_area_m2=1e6, min_basin_area_m2=5e6, level=level, max_segment_m=3000.0,
                   forward_run=forward)
    spent = []
    timed = screening._landscape_evidence

    def clocked(*args, **kwargs):  # the forward run's share of the wall time
        t = time.perf_counter()
        out = timed(*args, **kwargs)
        spent.append(time.perf_counter() - t)
        return out

    screening._landscape_evidence = clocked
    # warm-up: basins of 2 km² on the small grid (at 5 km² it holds one basin: no divide to screen, an error)
    screen(Dem.from_array(ridge_dem(200), cell_size=30.0), **{**options, "min_basin_area_m2": 2e6})
    z = ridge_dem(n)
    punch_holes(z, int(holes))
    dem = Dem.from_array(z, cell_size=30.0)
    del z
    spent.clear()
    t0 = time.perf_counter()
    result = screen(dem, **options)
    seconds = time.perf_counter() - t0
    children = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    return {"n": n, "seconds": round(seconds, 1), "forward_seconds": round(sum(spent), 1) if forward else None,
            "cells_per_s": round(n * n / seconds), "segments": len(result.segments),
            "basins": int(result.labels.max()),
            "directed": sum(s["moves_toward_basin"] is not None for s in result.segments),
            "peak_rss_mb": round(max(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss, children) / 1024)}


def _row(r: dict) -> str:
    fwd = "" if r.get("forward_seconds") is None else f" (landscape evidence {r['forward_seconds']:.1f} s)"
    return (f"{r['n']:>5}²  screen {r['seconds']:7.1f} s{fwd}, {r['cells_per_s']:,} cells/s  "
            f"{r['basins']} basins, {r['segments']} segments "
            f"({r['directed']} with a direction), peak RSS {r['peak_rss_mb']} MB (largest process)")


if __name__ == "__main__":
    sweep(__file__, __doc__, run_one, _row, [1000, 2000, 4000],
          extra={"level": "tributaries", "forward_run": "yes", "holes": "0"})
