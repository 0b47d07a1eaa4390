"""Make ``demo/uplands.tif``, the invented Harrowmere Uplands.

An invented landscape, not a real place: a slightly sinuous, tilted ridge
separates the basin of the River Tallow (west edge, low base level, steep
flank) from that of the Quern Water (east edge, higher base level, gentle
flank). Each flank is cut by a few branching valleys. The relief comes from
simple closed-form profiles, explicitly carved valley trees and smoothed
random noise; the seed fixes every number, so running this script again
rewrites the same grid.

Run from anywhere::

    python demo/make_demo_dem.py [OUTPUT.tif]
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import rasterio
from affine import Affine
from scipy import ndimage

__all__ = ["SEED", "ROWS", "COLS", "CELL", "CRS", "TRANSFORM", "make_uplands", "write_uplands"]

SEED = 5309
ROWS, COLS, CELL = 200, 240, 30.0
CRS = "EPSG:32630"  # WGS 84 / UTM zone 30N; the coordinates are arbitrary
TRANSFORM = Affine(CELL, 0.0, 448_200.0, 0.0, -CELL, 6_231_600.0)

WIDTH_M, HEIGHT_M = COLS * CELL, ROWS * CELL


def _divide_x(y: np.ndarray) -> np.ndarray:
    """East coordinate (m from the west edge) of the ridge crest at northing ``y``."""
    return 3450.0 + 0.15 * (y - HEIGHT_M / 2) + 120.0 * np.sin(2 * np.pi * y / 4200.0)


def _base_west(y: np.ndarray) -> np.ndarray:
    return 140.0 + 0.006 * y  # the Tallow flows south, gently


def _base_east(y: np.ndarray) -> np.ndarray:
    return 235.0 + 0.005 * y  # the Quern Water sits higher


def _crest(y: np.ndarray) -> np.ndarray:
    return 560.0 + 25.0 * np.sin(2 * np.pi * y / 3000.0 + 1.0)


def _base_surface(x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Concave-up flanks from each river up to the crest, and the base level under each cell."""
    xd = _divide_x(y)
    west = x < xd
    u = np.clip(x / xd, 0, 1)
    v = np.clip((WIDTH_M - x) / (WIDTH_M - xd), 0, 1)
    zw = _base_west(y) + (_crest(y) - _base_west(y)) * u**1.6
    ze = _base_east(y) + (_crest(y) - _base_east(y)) * v**1.3
    z = np.where(west, zw, ze)
    base = np.where(west, _base_west(y), _base_east(y))
    return z, base


def _noise(rng: np.random.Generator, sigmas: list[float], amplitudes: list[float]) -> np.ndarray:
    """Sum of Gaussian-smoothed white noise fields, each scaled to unit spread."""
    total = np.zeros((ROWS, COLS))
    for sigma, amp in zip(sigmas, amplitudes):
        field = ndimage.gaussian_filter(rng.standard_normal((ROWS, COLS)), sigma, mode="reflect")
        total += amp * field / field.std()
    return total


def _path(rng: np.random.Generator, start: tuple[float, float], end: tuple[float, float]) -> np.ndarray:
    """A wandering line of points (x, y) in metres from ``start`` to ``end``, about 10 m apart."""
    (x0, y0), (x1, y1) = start, end
    n = max(int(np.hypot(x1 - x0, y1 - y0) / 10.0), 2)
    t = np.linspace(0.0, 1.0, n)
    # Sideways wander: a random smooth curve pinned to zero at both ends.
    wander = ndimage.gaussian_filter1d(rng.standard_normal(n), n / 8, mode="nearest")
    wander = (wander - wander[0] - t * (wander[-1] - wander[0])) / (np.abs(wander).max() + 1e-12)
    length = np.hypot(x1 - x0, y1 - y0)
    nx, ny = -(y1 - y0) / length, (x1 - x0) / length
    amp = 0.12 * length
    return np.c_[x0 + t * (x1 - x0) + amp * wander * nx, y0 + t * (y1 - y0) + amp * wander * ny]


def _valleys(rng: np.random.Generator) -> list[tuple[np.ndarray, np.ndarray]]:
    """Valley centre-lines as (points, carving fraction along them), mouth to head."""
    lines = []
    for side in ("west", "east"):
        mouths = np.array([800.0, 2250.0, 3700.0, 5150.0]) + rng.uniform(-150, 150, 4)
        for ym in mouths:
            yh = ym + rng.uniform(-350, 350)
            xd = float(_divide_x(np.array(yh)))
            xm, xh = (15.0, xd - 160.0) if side == "west" else (WIDTH_M - 15.0, xd + 160.0)
            trunk = _path(rng, (xm, ym), (xh, yh))
            s = np.linspace(1.0, 0.0, len(trunk))  # 1 at the mouth, 0 at the head
            k_trunk = 0.55 * np.sqrt(s)
            lines.append((trunk, k_trunk))
            for offset in (-1.0, 1.0):
                j = int(rng.uniform(0.35, 0.6) * len(trunk))
                yt = trunk[j, 1] + offset * rng.uniform(450, 620)
                xdt = float(_divide_x(np.array(yt)))
                xt = xdt - 220.0 if side == "west" else xdt + 220.0
                branch = _path(rng, tuple(trunk[j]), (xt, yt))
                sb = np.linspace(1.0, 0.0, len(branch))
                lines.append((branch, k_trunk[j] * np.sqrt(sb)))
    return lines


def make_uplands(seed: int = SEED) -> np.ndarray:
    """Elevations (m, float32, north-up) of the Harrowmere Uplands.

    Parameters
    ----------
    seed : int
        Seed of every random choice; the default makes ``demo/uplands.tif``.

    Returns
    -------
    ndarray, shape (ROWS, COLS)
    """
    rng = np.random.default_rng(seed)
    col_x = (np.arange(COLS) + 0.5) * CELL
    row_y = HEIGHT_M - (np.arange(ROWS) + 0.5) * CELL  # row 0 is the northern edge
    x, y = np.meshgrid(col_x, row_y)
    z0, base = _base_surface(x, y)
    z0 = ndimage.gaussian_filter(z0, 1.5, mode="nearest")  # round the crest a little
    # Broad hummocks, fading out toward the rivers so the valley bottoms stay open.
    taper = np.clip((z0 - base) / 100.0, 0.0, 1.0)
    z0 = z0 + taper * _noise(rng, [16.0, 8.0, 4.0], [22.0, 9.0, 3.0])

    carved = z0.copy()
    for points, k in _valleys(rng):
        cols = np.clip((points[:, 0] / CELL).astype(int), 0, COLS - 1)
        rows = np.clip(((HEIGHT_M - points[:, 1]) / CELL).astype(int), 0, ROWS - 1)
        on_line = np.zeros((ROWS, COLS), bool)
        on_line[rows, cols] = True
        # Later points on a cell overwrite earlier ones: keep the most carved (mouthward) value.
        k_at = np.zeros((ROWS, COLS))
        np.maximum.at(k_at, (rows, cols), k)
        dist, (ir, ic) = ndimage.distance_transform_edt(~on_line, sampling=CELL, return_indices=True)
        k_near = k_at[ir, ic]
        z_line, b_line = z0[ir, ic], base[ir, ic]
        floor = b_line + (z_line - b_line) * (1.0 - k_near)
        half_width = 90.0 + 420.0 * k_near  # valleys widen downstream
        weight = np.clip(1.0 - dist / half_width, 0.0, 1.0) ** 1.5
        carved = np.minimum(carved, z0 - np.maximum(z0 - floor, 0.0) * weight)

    # Soften the steps left by cell-by-cell carving.
    carved = z0 - ndimage.gaussian_filter(z0 - carved, 1.0, mode="nearest")
    roughness = _noise(rng, [2.0, 1.0], [1.2, 0.5]) * taper
    z = carved + roughness
    return np.round(z, 2).astype(np.float32)  # centimetres: plenty, and compresses well


def write_uplands(path: str | Path, *, seed: int = SEED) -> Path:
    """Write the uplands as a compressed single-band GeoTIFF."""
    path = Path(path)
    z = make_uplands(seed)
    profile = dict(
        driver="GTiff", width=COLS, height=ROWS, count=1, dtype="float32", crs=CRS, transform=TRANSFORM,
        nodata=None, compress="deflate", predictor=3, zlevel=9,
    )
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(z, 1)
        dst.set_band_description(1, "elevation (m), invented Harrowmere Uplands")
        dst.update_tags(SOURCE="invented by demo/make_demo_dem.py", SEED=str(seed))
    return path


if __name__ == "__main__":
    out = sys.argv[1] if len(sys.argv) > 1 else Path(__file__).with_name("uplands.tif")
    written = write_uplands(out)
    print(f"wrote {written} ({written.stat().st_size / 1024:.0f} kB)")
