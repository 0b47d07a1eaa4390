"""Routing on all threads in memory, and tiled routing from a GeoTIFF (run by hand, not a test).

    python tests/benchmarks/bench_tiled.py [--sizes 2000 4000] [--tile 1024] [--mode memory|tiled]

memory: fill + flats + D8 + order + area on the seeded fractal DEM of bench_flow.py, best of
five after JIT warm-up, with 1 thread and with all numba threads (same result, checked): cells/s,
wall and CPU seconds with the load average, and the wall / CPU seconds of each step.
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
from bench_flow import fractal_dem, load_average, warm_up  # noqa: E402


def _phases(dem, repeats: int = 3) -> dict:
    """Wall and CPU seconds of each step of ``route`` (the steps of ``_route_conditioned``), best of ``repeats``."""
    import numba

    from divides.terrain import _fill_kernels as _fk
    from divides.terrain import _routing_kernels as _k
    from divides.terrain.conditioning import fill_depressions, outlet_mask
    from divides.terrain.routing import flow_order

    rows, cols = dem.shape
    n = rows * cols
    best: dict[str, list[float]] = {}

    def clock(name, fn, *args):
        w, c = time.perf_counter(), time.process_time()
        out = fn(*args)
        w, c = time.perf_counter() - w, time.process_time() - c
        b = best.setdefault(name, [float("inf"), float("inf")])
        b[0], b[1] = min(b[0], w), min(b[1], c)
        return out

    for _ in range(repeats):
        outlets = clock("outlets", outlet_mask, dem)
        filled = clock("fill", fill_depressions, dem.elevation, dem.valid, outlets)[0]
        clock("fill totals", _fk.raised_totals, filled.ravel(), dem.elevation.ravel(), rows, cols, dem.cell_area)
        z, valid = filled.ravel(), dem.valid.ravel()
        dist = _k.row_distances(dem.dx, dem.dy)
        rec, code = np.empty(n, dtype=np.int32), np.empty(n, dtype=np.uint8)
        clock("D8", _k.d8_steepest, z, valid, outlets.ravel(), rows, cols, dist, rec, code)
        clock("flats", _k.resolve_flats, z, rows, cols, dist, rec, code)
        n_valid = int(np.count_nonzero(valid))
        order, starts = clock("order", flow_order, code, valid, rows, cols, n_valid)
        area = np.zeros(n)
        clock("drainage area", _k.accumulate_area, order, rec, starts, cols, dem.cell_area, numba.get_num_threads(), area)
    return {k: [round(v[0], 4), round(v[1], 4)] for k, v in best.items()}


def _memory(n: int) -> dict:
    import numba

    from divides import Dem, route

    warm_up()  # every kernel compiled or loaded from the cache, the parallel ones too
    dem = Dem.from_array(fractal_dem(n), cell_size=30.0)
    out = {"n": n, "mode": "memory", "runs": {}}
    results = {}
    for threads in sorted({1, numba.config.NUMBA_NUM_THREADS}):
        numba.set_num_threads(threads)
        best, cpu = float("inf"), float("inf")
        for _ in range(5):
            t0, c0 = time.perf_counter(), time.process_time()
            flow = route(dem)
            best, cpu = min(best, time.perf_counter() - t0), min(cpu, time.process_time() - c0)
        results[threads] = flow
        out["runs"][threads] = {"cells_per_s": round(n * n / best), "wall_s": round(best, 3), "cpu_s": round(cpu, 3),
                                "load": load_average(), "phases": _phases(dem)}
    flows = list(results.values())
    a, b = flows[0], flows[-1]
    out["identical"] = bool(np.array_equal(a.direction, b.direction) and np.array_equal(a.order, b.order)
                            and np.array_equal(a.area.view(np.uint64), b.area.view(np.uint64))
                            and np.array_equal(a.conditioned.surface.view(np.uint32), b.conditioned.surface.view(np.uint32)))
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
        lines = [(f"{r['n']:>5}²  in memory (route: fill + flats + D8 + order + area, best of 5); results identical "
                  f"on all thread counts: {r['identical']}; peak RSS {r['peak_rss_mb']} MB")]
        for threads, run in r["runs"].items():
            lines.append(f"        {threads} thread(s): {run['cells_per_s'] / 1e6:5.2f} M cells/s  (wall {run['wall_s']} s, "
                         f"CPU {run['cpu_s']} s; load average {run['load']})")
            lines.append("            per step, wall / CPU s: " + "; ".join(
                f"{name} {w:.3f}/{c:.3f}" for name, (w, c) in run["phases"].items()))
        return "\n".join(lines)
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
