"""The demo DEM screened with voids punched into it, filled and left as outlets (a measurement, run by hand).

    python tests/benchmarks/voids_on_demo.py [--out DIR]

The demo DEM is rounded to whole metres (int16, as many DEMs are stored) and screened with the channel area the
intact DEM's default reads (6.48e4 m²), so that only the voids differ. Voids of 6 x 8 cells (-32768) are punched
(1) at five seeded places and (2) on the middle vertex of each of the four segments the rounded DEM's screening
ranks first. Each holed DEM is screened with ``--voids fill`` and ``--voids outlets``; printed: basins, segments,
the length of the divides between outlet basins, and the five top-ranked segments (midpoint lon/lat, instability,
motion azimuth). The figures of docs/methods.md §1 (*Nodata inside the data*).
"""

from __future__ import annotations

import argparse
import json
import subprocess
import tempfile
from pathlib import Path

import numpy as np
import rasterio
import rasterio.warp

DEMO = Path(__file__).resolve().parents[2] / "demo" / "uplands.tif"
CHANNEL_AREA = "64800"


def _screen(dem: Path, out: Path, *extra: str) -> dict:
    subprocess.run(["divides", "screen", str(dem), "--out", str(out), "--quiet", "--channel-area", CHANNEL_AREA,
                    *extra], check=True, capture_output=True, text=True)
    doc = json.loads((out / "screening.json").read_text())
    features = json.loads((out / "segments.geojson").read_text())["features"]
    doc["features"] = sorted(features, key=lambda f: f["properties"]["rank"])
    return doc


def _summary(name: str, doc: dict) -> str:
    def mid(f):
        c = f["geometry"]["coordinates"]
        return tuple(round(v, 4) for v in c[len(c) // 2])

    top = [(mid(f), round(f["properties"]["instability"] or 0, 3), f["properties"]["motion_azimuth_deg"])
           for f in doc["features"][:5]]
    return (f"{name:<16} basins {doc['n_basins']:>3}, segments {len(doc['segments']):>3}, outlet-basin divides "
            f"{doc['coverage']['outlet_divides_length_m'] / 1e3:.2f} km, voids {doc['dem']['voids']['cells']} cells\n"
            f"{'':<16} top five: {top}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", default=None, help="folder for the DEMs and screenings (default: a temporary one)")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        out = Path(args.out or tmp)
        out.mkdir(parents=True, exist_ok=True)
        with rasterio.open(DEMO) as src:
            profile = {**src.profile, "dtype": "int16", "nodata": -32768}
            rounded = np.rint(src.read(1)).astype(np.int16)
            transform, crs = src.transform, src.crs

        def write(name: str, z: np.ndarray) -> Path:
            with rasterio.open(out / name, "w", **profile) as dst:
                dst.write(z, 1)
            return out / name

        base = _screen(write("rounded.tif", rounded), out / "rounded")
        print(_summary("rounded", base))
        rng = np.random.default_rng(27)
        scattered = rounded.copy()
        rows, cols = rounded.shape
        for _ in range(5):
            r, c = int(rng.integers(5, rows - 11)), int(rng.integers(5, cols - 13))
            scattered[r:r + 6, c:c + 8] = -32768
        on_divide = rounded.copy()
        for f in base["features"][:4]:
            coords = f["geometry"]["coordinates"]
            lon, lat = coords[len(coords) // 2]
            (x,), (y,) = rasterio.warp.transform("EPSG:4326", crs, [lon], [lat])
            r, c = rasterio.transform.rowcol(transform, x, y)
            on_divide[r - 3:r + 3, c - 4:c + 4] = -32768
        pairs = {tuple(s["basins"]): s for s in base["segments"]}
        for name, z in (("scattered", scattered), ("on the divides", on_divide)):
            path = write(name.replace(" ", "_") + ".tif", z)
            for voids in ("fill", "outlets"):
                doc = _screen(path, out / f"{path.stem}_{voids}", "--voids", voids)
                print(_summary(f"{name}, {voids}", doc))
                if voids == "fill":  # basin labels agree with the rounded DEM's only where the basins do
                    same = [s for s in doc["segments"] if tuple(s["basins"]) in pairs]
                    kept = sum(s["moves_toward_basin"] == pairs[tuple(s["basins"])]["moves_toward_basin"]
                               for s in same)
                    change = max((abs((s["instability"] or 0) - (pairs[tuple(s["basins"])]["instability"] or 0))
                                  for s in same), default=float("nan"))
                    print(f"{'':<16} basin pairs as on the rounded DEM: {len(same)} of {len(pairs)}, same direction "
                          f"{kept}, largest change of instability {change:.3f}")


if __name__ == "__main__":
    main()
