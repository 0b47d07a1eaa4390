"""Throughput of the river-profile analysis (run by hand, not a test).

    python tests/benchmarks/bench_profiles.py [--sizes 1000 2000 4000]

On the ridge DEM of bench_network.py (west vs east sides, 1 km² channels),
times after JIT warm-up: χ, the concavity scan with bootstrap (100
resamples, three networks: a, b, both), segmentation of every stream and
knickpoint detection — i.e. ``analyse_profiles(theta="auto")``.
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).parent))
from _harness import peak_rss_mb, sweep  # noqa: E402
from bench_network import ridge_dem  # noqa: E402


def run_one(n: int) -> dict:
    from divides import Dem, common_base_level, extract_channels, parse_side, resolve_sides, route
    from divides.profiles import analyse_profiles

    def once(size):
        dem = Dem.from_array(ridge_dem(size), cell_size=30.0)
        flow = route(dem)
        channels = extract_channels(flow, threshold_m2=1e6)
        sides = resolve_sides(flow, parse_side("west"), parse_side("east"))
        base = common_base_level(channels, sides)
        t0 = time.perf_counter()
        result = analyse_profiles(channels, sides, base, theta="auto")
        return time.perf_counter() - t0, channels, result

    once(200)  # warm-up
    seconds, channels, result = once(n)
    return {
        "n": n, "seconds": round(seconds, 2), "channel_cells": channels.size, "streams": len(result.streams),
        "knickpoints": len(result.knickpoints), "theta": result.theta,
        "peak_rss_mb": peak_rss_mb(),
    }


def _row(r: dict) -> str:
    return (f"{r['n']:>5}²  profiles {r['seconds']:6.2f} s  {r['channel_cells']} channel cells, "
            f"{r['streams']} streams, {r['knickpoints']} knickpoints, θ={r['theta']}, peak RSS {r['peak_rss_mb']} MB")


if __name__ == "__main__":
    sweep(__file__, __doc__, run_one, _row, [1000, 2000, 4000])
