"""Throughput and memory of the forward model per time step (run by hand, not a test).

    python tests/benchmarks/bench_model.py [--size 1000] [--steps 5] [--n 1.0] [--diffusivity 0.01]

A seeded ridge (north and south edges closed, west and east open) of
``size`` x ``size`` cells of 30 m is run for a few warm-up steps (JIT and a
drainage network forming), then for ``--steps`` timed steps, each of which
routes the surface (fill + flats + D8 + order + area), erodes it by the implicit
stream-power step, diffuses it and records the west-east divide. Prints
node-updates per second per step (the final routing a divide track needs
is counted in), the routing's share, and peak resident memory beyond the
starting surface. The run is in a fresh
subprocess so the peak is its own.
"""

from __future__ import annotations

import argparse
import json
import resource
import subprocess
import sys
import time


def _peak_rss_bytes() -> int:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024


def _current_rss_bytes() -> int:
    with open("/proc/self/statm") as fh:
        return int(fh.read().split()[1]) * resource.getpagesize()


def run_one(size: int, steps: int, n: float, diffusivity: float) -> dict:
    import numpy as np

    from divides.model import scenarios, simulate

    options = {
        "uplift": 1e-3, "erodibility": 2e-5 if n == 1.0 else 2e-5 ** n, "m": 0.5 * n, "n": n,
        "diffusivity": diffusivity, "edges": {"north": "closed", "south": "closed", "west": 0.0, "east": 0.0},
        "track": ("west", "east"),
    }
    warm = scenarios.ridge_surface((64, 64), cell_size=30.0, relief=500.0, noise=5.0, seed=1)
    simulate(warm, duration=3e3, dt=1e3, **options)  # JIT warm-up (or cache load)
    start = scenarios.ridge_surface((size, size), cell_size=30.0, relief=500.0, noise=5.0, seed=0)
    # A few untimed steps so the drainage network exists (filling is cheap on a carved surface).
    start = simulate(start, duration=3e3, dt=1e3, **options).final
    # Time the routing (depression filling + route()) by wrapping both where the driver calls them.
    module = sys.modules["divides.model.simulate"]
    spent = {"route": 0.0}
    originals = {"route": module.route, "fill_depressions": module.fill_depressions}

    def timed(name):
        def wrapper(*args, **kwargs):
            t0 = time.perf_counter()
            out = originals[name](*args, **kwargs)
            spent["route"] += time.perf_counter() - t0
            return out

        return wrapper

    for name in originals:
        setattr(module, name, timed(name))
    base = _current_rss_bytes()
    t0 = time.perf_counter()
    result = simulate(start, duration=steps * 1e3, dt=1e3, **options)
    seconds = time.perf_counter() - t0
    for name, fn in originals.items():
        setattr(module, name, fn)
    peak = _peak_rss_bytes()
    cells = size * size
    per_step = seconds / steps
    return {
        "size": size,
        "steps": steps,
        "n": n,
        "seconds_per_step": round(per_step, 4),
        "route_seconds_per_step": round(spent["route"] / steps, 4),
        "node_updates_per_s": round(cells / per_step),
        "peak_beyond_start_bytes_per_cell": round(max(0, peak - base) / cells, 1),
        "residual_m3_max": float(np.max(np.abs(result.budget.residual_m3))),
        "uplift_m3_per_step": float(result.budget.uplift_m3[0]),
    }


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--size", type=int, default=1000)
    parser.add_argument("--steps", type=int, default=5)
    parser.add_argument("--n", type=float, default=1.0)
    parser.add_argument("--diffusivity", type=float, default=0.01)
    parser.add_argument("--one", action="store_true", help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.one:
        print(json.dumps(run_one(args.size, args.steps, args.n, args.diffusivity)))
        return
    out = subprocess.run(
        [sys.executable, __file__, "--one", "--size", str(args.size), "--steps", str(args.steps),
         "--n", str(args.n), "--diffusivity", str(args.diffusivity)],
        capture_output=True, text=True, check=True,
    )
    r = json.loads(out.stdout.strip().splitlines()[-1])
    print(
        f"{r['size']:>5}², n = {r['n']:g}: {r['seconds_per_step']:.3f} s/step "
        f"(routing {r['route_seconds_per_step']:.3f} s)  {r['node_updates_per_s'] / 1e6:.2f} M node-updates/s  "
        f"peak beyond start {r['peak_beyond_start_bytes_per_cell']:.1f} B/cell  "
        f"budget residual {r['residual_m3_max']:.2e} m³ of {r['uplift_m3_per_step']:.2e} m³ uplift per step"
    )


if __name__ == "__main__":
    main()
