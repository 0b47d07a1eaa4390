"""Routing on all threads in memory, and tiled routing from a GeoTIFF (run by hand, not a test).

    python tests/benchmarks/bench_tiled.py [--sizes 2000 4000] [--tile 1024] [--mode memory|tiled]

memory: fill + flats + D8 + order + area on the seeded fractal DEM of bench_flow.py, best of
three after JIT warm-up, with 1 thread and with all numba threads (same result, checked).
tiled: the DEM is written as a tiled GeoTIFF, routed tile by tile (serial scheduler, scratch
tiles on disk) and the time per tile cell is used to extrapolate to 10⁹ and 10¹⁰ cells on
a cluster (assumptions printed). Each size runs in a fresh subprocess (peak memory its own).
"""

from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).parent))
from _harness import peak_rss_mb, sweep  # noqa: E402
from bench_flow import fractal_dem  # noqa: E402


def _memory(n: int) -> dict:
    import numba

    from divides import Dem, route

    route(Dem.from_array(fractal_dem(256, seed=1), cell_size=30.0))  # JIT warm-up (or cache load)
    dem = Dem.from_array(fractal_dem(n), cell_size=30.0)
    out = {"n": n, "mode": "memory"}
    results = {}
    for threads in (1, numba.config.NUMBA_NUM_THREADS):
        numba.set_num_threads(threads)
        best = float("inf")
        for _ in range(3):
            t0 = time.perf_counter()
            flow = route(dem)
            best = min(best, time.perf_counter() - t0)
        results[threads] = flow
        out[f"cells_per_s_{threads}"] = round(n * n / best)
    a, b = results.values()
    out["identical"] = bool(np.array_equal(a.direction, b.direction) and np.array_equal(a.area, b.area))
    out["peak_rss_mb"] = peak_rss_mb()
    return out


def _tiled(n: int, tile: int) -> dict:
    import rasterio
    from affine import Affine

    from divides.io.tiles import RasterTiles, ScratchTiles
    from divides.terrain.tiled_routing import route_tiled

    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "dem.tif"
        z = fractal_dem(n)
        with rasterio.open(path, "w", driver="GTiff", width=n, height=n, count=1, dtype="float32",
                           crs="EPSG:32633", transform=Affine(30.0, 0, 400000.0, 0, -30.0, 5_000_000.0),
                           tiled=True, blockxsize=256, blockysize=256) as dst:
            dst.write(z, 1)
        del z
        source = RasterTiles(path)
        route_tiled(source, tile_shape=(128, 128), store=ScratchTiles(Path(folder) / "warm"))  # JIT warm-up
        base = peak_rss_mb()
        store = ScratchTiles(Path(folder) / "scratch")
        t0 = time.perf_counter()
        result = route_tiled(source, tile_shape=(tile, tile), store=store)
        seconds = time.perf_counter() - t0
        scratch_bytes = sum(f.stat().st_size for f in store.path.iterdir())
        store.close()
    return {"n": n, "mode": "tiled", "tile": tile, "seconds": round(seconds, 2),
            "tiles": len(list(result.grid.tiles())), "crossing_flats": result.n_crossing_flats,
            "s_per_mcell": round(seconds / (n * n / 1e6), 3), "scratch_b_per_cell": round(scratch_bytes / n / n, 1),
            "peak_rss_mb": peak_rss_mb(), "peak_beyond_start_mb": peak_rss_mb() - base}


def run_one(n: int, mode: str, tile: str) -> dict:
    return _memory(n) if mode == "memory" else _tiled(n, int(tile))


def _row(r: dict) -> str:
    if r["mode"] == "memory":
        threads = [k for k in r if k.startswith("cells_per_s_")]
        rates = ", ".join(f"{k.rsplit('_', 1)[1]} thread(s) {r[k] / 1e6:.2f} M cells/s" for k in threads)
        return f"{r['n']:>5}²  in memory: {rates}; identical {r['identical']}; peak RSS {r['peak_rss_mb']} MB"
    per_cell = r["s_per_mcell"] / 1e6
    lines = [f"{r['n']:>5}²  tiled ({r['tile']}² tiles, {r['tiles']} tiles, {r['crossing_flats']} flats across seams): "
             f"{r['seconds']} s = {r['s_per_mcell']} s per M cells on one worker; scratch "
             f"{r['scratch_b_per_cell']} B/cell; peak RSS {r['peak_rss_mb']} MB "
             f"({r['peak_beyond_start_mb']} MB beyond the start)"]
    for cells in (1e9, 1e10):
        for workers in (16, 64):
            # assumptions: tile stages scale with workers; the graph stages stay < 5 % (measured
            # share here); disk/network bandwidth keeps up (tiles read/written ~4 times each)
            lines.append(f"        extrapolated {cells:.0e} cells on {workers} workers: "
                         f"{cells * per_cell / workers / 60:.0f} min")
    return "\n".join(lines)


if __name__ == "__main__":
    sweep(__file__, __doc__, run_one, _row, [2000, 4000], extra={"mode": "memory", "tile": "1024"})
