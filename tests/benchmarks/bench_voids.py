"""Throughput and memory of filling holes of nodata (run by hand, not a test).

    python tests/benchmarks/bench_voids.py [--size 4000] [--holes 400] [--big 1000]

The DEM is bench_flow's seeded fractal surface; ``--holes`` voids of 6 x 8 to 60 x 80 cells are punched at seeded
places, and one square hole ``--big`` cells a side in the middle (0: none). Prints the holes' cells, the time of
:func:`divides.terrain.voids.fill_voids`, DEM cells/s and filled cells/s, and the peak resident memory beyond the
DEM before the fill (the fill runs in a fresh process that loads the holed DEM, so the peak is its own).
"""

from __future__ import annotations

import argparse
import os
import resource
import subprocess
import sys
import tempfile
import time

import numpy as np

from bench_flow import _current_rss_bytes, fractal_dem


def _fill(path: str) -> None:
    """In this fresh process: load the holed DEM, fill it, print the figures."""
    from divides import Dem
    from divides.terrain.voids import fill_voids

    fill_voids(Dem.from_array(fractal_dem(64, seed=1), cell_size=30.0))  # imports, as a warm-up
    dem = Dem.from_array(np.load(path), cell_size=30.0, copy=False)
    n_rows, n_cols = dem.shape
    holes = int(np.count_nonzero(~dem.valid))
    base = _current_rss_bytes()
    start = time.perf_counter()
    _, report = fill_voids(dem)
    seconds = time.perf_counter() - start
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
    print(f"{n_rows} x {n_cols} DEM, {report.holes} holes, {holes:,} nodata cells (largest hole "
          f"{report.largest_cells:,}): filled in {seconds:.2f} s, {n_rows * n_cols / seconds:,.0f} DEM cells/s, "
          f"{holes / seconds:,.0f} filled cells/s, peak memory {(peak - base) / 2**20:,.0f} MB beyond the DEM")


def punch_holes(z: np.ndarray, count: int, seed: int = 7) -> None:
    """Set ``count`` seeded voids of 6 x 8 to 60 x 80 cells to NaN, in place, clear of the grid's edge."""
    rng = np.random.default_rng(seed)
    rows, cols = z.shape
    for _ in range(count):
        scale = int(rng.integers(1, 11))
        h, w = 6 * scale, 8 * scale
        r, c = int(rng.integers(2, rows - h - 2)), int(rng.integers(2, cols - w - 2))
        z[r:r + h, c:c + w] = np.nan


def main() -> None:
    if len(sys.argv) == 3 and sys.argv[1] == "--child":
        _fill(sys.argv[2])
        return
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--size", type=int, default=4000)
    parser.add_argument("--holes", type=int, default=400)
    parser.add_argument("--big", type=int, default=1000)
    args = parser.parse_args()

    n = args.size
    z = fractal_dem(n, seed=3)
    punch_holes(z, args.holes)
    if args.big:
        lo = (n - args.big) // 2
        z[lo:lo + args.big, lo:lo + args.big] = np.nan
    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "holed.npy")
        np.save(path, z)
        del z
        subprocess.run([sys.executable, __file__, "--child", path], check=True)


if __name__ == "__main__":
    main()
