"""Throughput and memory of conditioning + routing (run by hand, not a test).

    python tests/benchmarks/bench_flow.py [--sizes 1000 2000 4000] [--method fill] [--threads 1 2]

Each size and thread count runs in a fresh subprocess so peak memory is that run's own.
The DEM is a seeded fractal surface (spectral synthesis, power spectrum ~ k^-beta) on
a gentle regional tilt, so it has both depressions and long drainage paths.
Prints cells/s for fill + flats + D8 + order + area (after JIT warm-up of every kernel,
the parallel ones included), the CPU seconds, the load average, and peak resident memory
beyond the input.
"""

from __future__ import annotations

import argparse
import json
import resource
import subprocess
import sys
import time

import numpy as np


def fractal_dem(n: int, *, beta: float = 3.2, relief: float = 800.0, tilt: float = 0.02, seed: int = 0) -> np.ndarray:
    """Seeded fractal surface in metres (float32), n x n cells of 30 m."""
    rng = np.random.default_rng(seed)
    ky = np.fft.fftfreq(n)[:, None]
    kx = np.fft.rfftfreq(n)[None, :]
    k = np.hypot(kx, ky)
    k[0, 0] = 1.0
    spectrum = (rng.standard_normal(k.shape) + 1j * rng.standard_normal(k.shape)) * k ** (-beta / 2.0)
    spectrum[0, 0] = 0.0
    z = np.fft.irfft2(spectrum, s=(n, n))
    z = (z - z.min()) / np.ptp(z) * relief
    z += tilt * 30.0 * np.arange(n)[:, None]
    return z.astype(np.float32)


def _peak_rss_bytes() -> int:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024


def _current_rss_bytes() -> int:
    with open("/proc/self/statm") as fh:
        return int(fh.read().split()[1]) * resource.getpagesize()


def warm_up(method: str = "fill") -> None:
    """Compile (or load from the cache) every routing kernel, the parallel ones too, on a small DEM."""
    from divides import Dem, route
    from divides.terrain import conditioning, routing

    smallest = conditioning.PARALLEL_MIN_CELLS, routing.PARALLEL_ROUTING_MIN_CELLS
    conditioning.PARALLEL_MIN_CELLS = routing.PARALLEL_ROUTING_MIN_CELLS = 0  # the paths of large grids
    try:
        route(Dem.from_array(fractal_dem(64, seed=1), cell_size=30.0), conditioning=method)
    finally:
        conditioning.PARALLEL_MIN_CELLS, routing.PARALLEL_ROUTING_MIN_CELLS = smallest


def load_average() -> str:
    """The 1, 5 and 15 minute load averages (other work on the machine)."""
    with open("/proc/loadavg") as fh:
        return " ".join(fh.read().split()[:3])


def run_one(n: int, method: str, threads: int | None = None) -> dict:
    import numba

    from divides import Dem, route

    if threads:
        numba.set_num_threads(threads)
    warm_up(method)
    dem = Dem.from_array(fractal_dem(n), cell_size=30.0)
    base = _current_rss_bytes()
    t0, c0 = time.perf_counter(), time.process_time()
    flow = route(dem, conditioning=method)
    seconds, cpu = time.perf_counter() - t0, time.process_time() - c0
    peak = _peak_rss_bytes()
    return {
        "n": n,
        "cells": n * n,
        "threads": numba.get_num_threads(),
        "seconds": round(seconds, 3),
        "cpu_seconds": round(cpu, 3),
        "load": load_average(),
        "cells_per_s": round(n * n / seconds),
        "peak_beyond_input_bytes_per_cell": round(max(0, peak - base) / (n * n), 1),
        "filled_cells": flow.conditioned.filled_cells,
        "flat_cells": flow.n_flat_cells,
    }


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[1000, 2000, 4000])
    parser.add_argument("--method", default="fill", choices=["fill", "breach"])
    parser.add_argument("--threads", type=int, nargs="+", default=[0],
                        help="numba threads per run (0: all, the default)")
    parser.add_argument("--one", type=int, help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.one:
        print(json.dumps(run_one(args.one, args.method, args.threads[0])))
        return
    for n in args.sizes:
        for threads in args.threads:
            out = subprocess.run(
                [sys.executable, __file__, "--one", str(n), "--method", args.method, "--threads", str(threads)],
                capture_output=True, text=True, check=True,
            )
            r = json.loads(out.stdout.strip().splitlines()[-1])
            print(
                f"{r['n']:>5}²  {r['threads']} thread(s)  {r['seconds']:7.2f} s (CPU {r['cpu_seconds']:.2f} s)  "
                f"{r['cells_per_s'] / 1e6:6.2f} M cells/s  peak beyond input "
                f"{r['peak_beyond_input_bytes_per_cell']:5.1f} B/cell  (filled {r['filled_cells']}, flats "
                f"{r['flat_cells']}; load average {r['load']})"
            )


if __name__ == "__main__":
    main()
