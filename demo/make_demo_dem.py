"""Make ``demo/uplands.tif``, the invented Harrowmere Uplands, with the project's own model.

An invented landscape, not a real place. A ridge of uplands separates the
short streams of the River Tallow (west edge) from those of the Quern Water
(east edge). The script grows the landscape with :func:`divides.simulate`
(stream power, hillslope diffusion and uplift):

1. *Spin-up*: a low, noisy ridge is uplifted for :data:`SPIN_UP_YEARS` with
   both rivers held at the same level, until the relief and the divide have
   settled (a near steady state).
2. *Capture*: the Tallow's level then falls by :data:`DROP_M` within
   :data:`DROP_YEARS` and keeps falling at :data:`LOWERING_M_PER_YR`. A wave
   of incision climbs the western valleys, the western heads steepen, and the
   divide starts to migrate east into the Quern Water's headwaters.
3. *Snapshot*: the surface :data:`SNAPSHOT_YEARS` after the fall is the demo
   DEM (elevations raised by :data:`DATUM_M`, rounded to centimetres).
4. *Truth*: the run continues from the snapshot to measure what the demo's
   verdict should say: the side-averaged erosion rates over the first
   :data:`RATE_YEARS`, and how far the divide moves in :data:`FUTURE_YEARS`.
   These numbers are written as tags of the GeoTIFF and printed.

The north and south edges of the model are closed (walls): nothing drains
across them, so when assessing this DEM pass ``--closed-edges north,south``.
Every random number comes from :data:`SEED`, so running the script again
rewrites the same grid on the same platform. Run from anywhere::

    python demo/make_demo_dem.py [OUTPUT.tif]
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import rasterio
from affine import Affine
from scipy import ndimage

from divides import Dem, route, simulate
from divides.model import edge_catchments
from divides.model.forcing import open_edge
from divides.model.scenarios import ridge_surface

__all__ = [
    "SEED", "ROWS", "COLS", "CELL", "CRS", "TRANSFORM", "UPLIFT_M_PER_YR", "ERODIBILITY", "M", "N",
    "DIFFUSIVITY_M2_PER_YR", "SPIN_UP_YEARS", "DROP_M", "DROP_YEARS", "LOWERING_M_PER_YR",
    "SNAPSHOT_YEARS", "RATE_YEARS", "FUTURE_YEARS", "DATUM_M", "make_uplands", "write_uplands",
]

SEED = 5309
ROWS, COLS, CELL = 150, 240, 30.0
CRS = "EPSG:32630"  # WGS 84 / UTM zone 30N; the coordinates are arbitrary
TRANSFORM = Affine(CELL, 0.0, 448_200.0, 0.0, -CELL, 6_231_600.0)

# Stream power E = K A^m S^n with n = 1 and m/n = 0.45; steady steepness U/K = 12.5 m^0.9.
UPLIFT_M_PER_YR = 5e-4
ERODIBILITY = 4e-5  # m^(1-2m)/yr
M, N = 0.45, 1.0
DIFFUSIVITY_M2_PER_YR = 0.05

SPIN_UP_YEARS, SPIN_UP_DT = 8e6, 1e5
DROP_M, DROP_YEARS = 40.0, 1e4
LOWERING_M_PER_YR = 2e-4
SNAPSHOT_YEARS, DT = 5e5, 5e3
RATE_YEARS = 2e4
FUTURE_YEARS = 3e5
DATUM_M = 180.0  # the Quern Water's level; the model holds it at 0

_EDGES_CLOSED = {"north": "closed", "south": "closed"}


def _start(seed: int) -> Dem:
    """A 200 m ridge with smoothed noise, so that valleys branch as they grow."""
    ridge = ridge_surface((ROWS, COLS), cell_size=CELL, crest=0.5, relief=200.0, noise=1.0, seed=seed)
    rng = np.random.default_rng(seed + 1)
    bumps = ndimage.gaussian_filter(rng.standard_normal((ROWS, COLS)), 6.0, mode="reflect")
    z = ridge.elevation.astype(np.float64)
    z[:, 1:-1] += 8.0 * (bumps / bumps.std())[:, 1:-1]  # the edge cells stay at base level
    return Dem.from_array(z, cell_size=CELL, valid_range=None)


def _tallow_level(t: float) -> float:
    """Base level (m, model datum) of the west edge, ``t`` years after the fall began."""
    if t <= DROP_YEARS:
        return -DROP_M * t / DROP_YEARS
    return -DROP_M - LOWERING_M_PER_YR * (t - DROP_YEARS)


def _forcing(start_years: float = 0.0) -> dict:
    return {
        "uplift": UPLIFT_M_PER_YR, "erodibility": ERODIBILITY, "m": M, "n": N,
        "diffusivity": DIFFUSIVITY_M2_PER_YR,
        "edges": {**_EDGES_CLOSED, "east": 0.0,
                  "west": open_edge(elevation=lambda t: _tallow_level(t + start_years))},
    }


def make_uplands(seed: int = SEED) -> tuple[np.ndarray, dict[str, float]]:
    """Elevations (m, float64 centimetre values, north-up) of the Harrowmere Uplands, and the measured truth.

    Parameters
    ----------
    seed : int
        Seed of every random choice; the default makes ``demo/uplands.tif``.

    Returns
    -------
    elevation : ndarray, shape (ROWS, COLS)
    facts : dict
        ``erosion_west_mm_yr`` and ``erosion_east_mm_yr``: side-averaged
        erosion rates over the :data:`RATE_YEARS` after the snapshot;
        ``divide_shift_m``: mean eastward move of the divide in the
        :data:`FUTURE_YEARS` after it (positive = into the Quern Water's side);
        ``divide_speed_mm_yr``: that move over that time.
    """
    spin = simulate(_start(seed), duration=SPIN_UP_YEARS, dt=SPIN_UP_DT,
                    **{**_forcing(), "edges": {**_EDGES_CLOSED, "west": 0.0, "east": 0.0}})
    fall = simulate(spin.final, duration=SNAPSHOT_YEARS, dt=DT, **_forcing())
    snap = fall.final
    after = simulate(snap, duration=FUTURE_YEARS, dt=DT, snapshot_times=[RATE_YEARS], track=("west", "east"),
                     track_interval=FUTURE_YEARS, **_forcing(SNAPSHOT_YEARS))

    # Erosion = uplift - rate of surface rise, averaged over the cells draining off each edge.
    z0, z1 = snap.elevation.astype(np.float64), after.snapshot(RATE_YEARS).elevation.astype(np.float64)
    erosion = UPLIFT_M_PER_YR - (z1 - z0) / RATE_YEARS
    side = edge_catchments(route(snap), ("west", "east"))
    interior = np.zeros(side.shape, bool)
    interior[1:-1, 1:-1] = True  # outlets and walls are held, not eroded
    shift = float(after.divide.mean[-1] - after.divide.mean[0])
    facts = {
        "erosion_west_mm_yr": float(erosion[(side == 1) & interior].mean() * 1e3),
        "erosion_east_mm_yr": float(erosion[(side == 2) & interior].mean() * 1e3),
        "divide_shift_m": shift,
        "divide_speed_mm_yr": shift / FUTURE_YEARS * 1e3,
    }
    # centimetres: plenty, and compresses well; float64, the type of the model's own grids, so that a first run of
    # the demo compiles each fast kernel for one type only (about 8 s less of a cold start)
    z = np.round(snap.elevation + DATUM_M, 2).astype(np.float64)
    return z, facts


def write_uplands(path: str | Path, *, seed: int = SEED) -> Path:
    """Write the uplands as a compressed single-band GeoTIFF, the measured truth as tags."""
    path = Path(path)
    z, facts = make_uplands(seed)
    profile = dict(
        driver="GTiff", width=COLS, height=ROWS, count=1, dtype="float64", crs=CRS, transform=TRANSFORM,
        nodata=None, compress="deflate", predictor=3, zlevel=9,
    )
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(z, 1)
        dst.set_band_description(1, "elevation (m), invented Harrowmere Uplands")
        dst.update_tags(SOURCE="invented by demo/make_demo_dem.py with divides.simulate", SEED=str(seed),
                        **{key.upper(): f"{value:.4g}" for key, value in facts.items()})
    return path


if __name__ == "__main__":
    out = sys.argv[1] if len(sys.argv) > 1 else Path(__file__).with_name("uplands.tif")
    written = write_uplands(out)
    with rasterio.open(written) as src:
        tags = src.tags()
    print(f"wrote {written} ({written.stat().st_size / 1024:.0f} kB)")
    for key in ("EROSION_WEST_MM_YR", "EROSION_EAST_MM_YR", "DIVIDE_SHIFT_M", "DIVIDE_SPEED_MM_YR"):
        print(f"  {key.lower()} = {tags[key]}")
