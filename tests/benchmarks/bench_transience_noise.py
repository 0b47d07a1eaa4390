"""How often DEM error makes a steady basin read as transient (run by hand, not a test).

    python tests/benchmarks/bench_transience_noise.py [--draws 5]

Screening reads a basin as transient when |T| >= TRANSIENT_BASIN (divides.model.transience.basin_transience,
T = ln(E_lower / E_upper)). At steady state T is 0 up to discretisation (tests/model/test_transience.py); this
adds DEM error from the project's error model (exponential covariance, divides.terrain.dem_error.DemError) to
steady landscapes and prints, per error level, the share of measured basins with |T| >= TRANSIENT_BASIN, the share
that is also at least twice its spread under screening's default DEM error model (1 m over 3 cells;
divides.model.transience.transience_spread, round 25), and the largest |T|:

- the small ridge of tests/model/test_transience.py (40 x 60 cells of 100 m, 72 m of relief), grown steady;
- the steady regional benchmark cases of master seed 0's training split (divides.model.regional_benchmark;
  cached, built if missing), at their own cell size.
"""

from __future__ import annotations

import argparse

import numpy as np

import divides
from divides.assess.screen import TRANSIENT_BASIN
from divides.model.landscape_shift import model_start
from divides.model.transience import basin_transience, transience_spread
from divides.terrain.dem_error import DemError

#: (σ in m, correlation length in cells); length 0 is white error.
ERRORS = ((0.0, 0), (0.25, 3), (0.5, 3), (1.0, 3), (2.0, 3), (1.0, 0))


def ridge() -> tuple[divides.Dem, dict]:
    """The steady ridge of tests/model/test_transience.py and its run options."""
    from divides.model.scenarios import ridge_surface
    from divides.model.simulate import simulate

    start = ridge_surface((40, 60), crest=0.5, noise=1.0, seed=3)
    dem = simulate(start, duration=3e6, dt=1e4, uplift=2e-4, erodibility=2e-5, m=0.5, n=1.0, diffusivity=0.02,
                   edges={"north": "closed", "south": "closed", "west": 0.0, "east": 0.0}).final
    return dem, {"theta": 0.5, "closed_edges": ("north", "south"), "channel_area_m2": 3e4}


def regional_steady(seed: int = 0) -> list[tuple[str, divides.Dem, dict]]:
    """The steady training cases of a master seed of the regional benchmark, with the validation's options."""
    from divides.model.benchmark import split_of
    from divides.model.regional_benchmark import FAMILIES, STEADY_FAMILIES, case_seed, load_or_build

    out = []
    for i in range(24):
        if FAMILIES[i % len(FAMILIES)] not in STEADY_FAMILIES or split_of(case_seed(seed, i)) != "training":
            continue
        case = load_or_build(seed, i)
        out.append((f"{case.family} {i}", case.dem(),
                    {"theta": case.parameters["theta"], "closed_edges": case.closed_edges,
                     "channel_area_m2": 50 * case.cell_size ** 2}))
    return out


def transient_share(dem: divides.Dem, options: dict, sigma: float, length_cells: int, draws: int) -> tuple:
    """Share of measured basins with |T| >= TRANSIENT_BASIN over ``draws`` error fields, the share that also has
    |T| >= 2 sd (sd: divides.model.transience.transience_spread under screening's default error model, 1 m over
    3 cells), and the largest |T|."""
    z = np.asarray(dem.elevation, dtype=np.float64)
    cell = float(min(np.min(dem.dx), np.min(dem.dy)))
    error, assumed = DemError(sigma, length_cells * cell), DemError(1.0, 3.0 * cell)
    flagged, significant, measured, largest = 0, 0, 0, 0.0
    for k in range(draws if sigma > 0 else 1):
        noisy = z + error.sample_grid(z.shape, (float(np.mean(dem.dy)), float(np.mean(dem.dx))),
                                      np.random.default_rng(k))
        grid = (divides.Dem.from_array(noisy, cell_size=cell) if dem.crs is None
                else divides.Dem.from_array(noisy, transform=dem.transform, crs=dem.crs))
        start = model_start(grid, n=1.0, **options)
        t, sd = basin_transience(start, 1.0), transience_spread(start, 1.0, assumed)
        ok = np.isfinite(t)
        t, sd = np.abs(t[ok]), sd[ok]
        flagged, measured = flagged + int(np.sum(t >= TRANSIENT_BASIN)), measured + t.size
        significant += int(np.sum((t >= TRANSIENT_BASIN) & (t >= 2.0 * sd)))
        largest = max(largest, float(t.max()) if t.size else 0.0)
    return flagged / max(measured, 1), significant / max(measured, 1), largest, measured


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--draws", type=int, default=5)
    args = parser.parse_args()
    landscapes = [("ridge 40 x 60, 100 m", *ridge()), *regional_steady()]
    for name, dem, options in landscapes:
        z = np.asarray(dem.elevation, dtype=np.float64)
        print(f"{name}: {dem.shape[0]} x {dem.shape[1]} cells, relief {np.nanmax(z) - np.nanmin(z):.0f} m")
        for sigma, length in ERRORS:
            share, significant, largest, n = transient_share(dem, options, sigma, length, args.draws)
            kind = "white" if length == 0 else f"L = {length} cells"
            print(f"  sigma {sigma:4.2f} m, {kind:<14} basins with |T| >= {TRANSIENT_BASIN:g}: {share:5.0%}, "
                  f"and >= 2 sd: {significant:5.0%} (of {n}), largest |T| {largest:.2f}", flush=True)


if __name__ == "__main__":
    main()
