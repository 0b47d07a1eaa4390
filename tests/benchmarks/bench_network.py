"""Throughput of channels + sides + divide (run by hand, not a test).

    python tests/benchmarks/bench_network.py [--sizes 1000 2000 4000]

Routes a seeded fractal DEM (see bench_flow.py; tilted toward the north edge,
with a ridge so that the west and east edges both drain large basins), then
times, after JIT warm-up: channel extraction at a fixed threshold, the west
and east sides, the common base level and the divide between the sides.
Each size runs in a fresh subprocess; prints seconds and peak memory.
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).parent))
from _harness import peak_rss_mb, sweep  # noqa: E402
from bench_flow import fractal_dem  # noqa: E402


def ridge_dem(n: int) -> np.ndarray:
    """Fractal relief on a north–south ridge: the west and east edges drain big basins."""
    z = fractal_dem(n, tilt=0.0)
    ridge = 1500.0 * (1.0 - np.abs(np.linspace(-1.0, 1.0, n)))[None, :]
    return (z + ridge).astype(np.float32)


def run_one(n: int) -> dict:
    from divides import Dem, route
    from divides.assess.sides import common_base_level, parse_side, resolve_sides
    from divides.terrain.channels import extract_channels
    from divides.terrain.divide_lines import divide_between

    def stages(dem):
        t = {}
        t0 = time.perf_counter()
        flow = route(dem)
        t["route"] = time.perf_counter() - t0
        t0 = time.perf_counter()
        channels = extract_channels(flow, threshold_m2=1e6)
        sides = resolve_sides(flow, parse_side("west"), parse_side("east"))
        base = common_base_level(channels, sides)
        divide = divide_between(dem, sides.a.mask, sides.b.mask)
        t["network"] = time.perf_counter() - t0
        return t, channels, divide, base

    stages(Dem.from_array(ridge_dem(128), cell_size=30.0))  # warm-up
    times, channels, divide, base = stages(Dem.from_array(ridge_dem(n), cell_size=30.0))
    return {
        "n": n,
        "route_s": round(times["route"], 3),
        "network_s": round(times["network"], 3),
        "channel_cells": channels.size,
        "divide_km": round(divide.length_m / 1000, 2),
        "peak_rss_mb": peak_rss_mb(),
    }


def _row(r: dict) -> str:
    return (f"{r['n']:>5}²  channels+sides+divide {r['network_s']:6.2f} s (routing {r['route_s']:.2f} s)  "
            f"{r['channel_cells']} channel cells, divide {r['divide_km']} km, peak RSS {r['peak_rss_mb']} MB")


if __name__ == "__main__":
    sweep(__file__, __doc__, run_one, _row, [1000, 2000, 4000])
