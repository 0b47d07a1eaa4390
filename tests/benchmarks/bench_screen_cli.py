"""Wall time and peak memory of the `divides screen` command on a GeoTIFF (run by hand, not a test).

    python tests/benchmarks/bench_screen_cli.py [--sizes 4000 10000] [--scratch DIR] [-- extra screen options]

The 100 M-cell target of the large-DEM work: `divides screen` on a 10 000 x 10 000 DEM in at most
6 minutes with at most 6 GiB in any process. For each size the ridge DEM of bench_network.py
(seeded fractal relief on a north-south ridge, 30 m cells, UTM) is written as a tiled,
deflate-compressed float32 GeoTIFF in a scratch folder outside the repository (made in a
subprocess of its own, so its memory is not counted), the command runs once on a 300² DEM to
load the kernel cache, and then once on the big DEM under ``/usr/bin/time -v``. Printed: wall
time of the whole command (read, screen, outputs), cells/s and the peak resident memory of the
largest process (the command and any worker it starts). Options as bench_screen.py: 1 km²
channels, basins of at least 5 km², 3 km segments. Extra arguments after ``--`` go to the
command (e.g. ``-- --tiled``).
"""

from __future__ import annotations

import argparse
import os
import re
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

HERE = Path(__file__).parent
ROOT = HERE.parent.parent
OPTIONS = ["--theta", "0.45", "--channel-area", "1e6", "--min-basin-area", "5e6", "--max-segment", "3000",
           "--quiet", "--overwrite"]


def write_dem(n: int, path: Path) -> None:
    """The ridge DEM of bench_network.py as a tiled GeoTIFF (in this process; call it in a child)."""
    import numpy as np
    import rasterio
    from affine import Affine

    sys.path.insert(0, str(HERE))
    from bench_network import ridge_dem

    z = ridge_dem(n)
    with rasterio.open(path, "w", driver="GTiff", width=n, height=n, count=1, dtype="float32",
                       crs="EPSG:32633", transform=Affine(30.0, 0, 400000.0, 0, -30.0, 5_000_000.0 + 30.0 * n),
                       tiled=True, blockxsize=512, blockysize=512, compress="deflate", nodata=np.float32(-9999),
                       BIGTIFF="IF_SAFER") as dst:
        dst.write(z, 1)


def run_screen(dem: Path, out: Path, extra: list[str]) -> dict:
    """Run the command under /usr/bin/time -v; wall seconds and peak RSS (largest process)."""
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    cmd = ["/usr/bin/time", "-v", sys.executable, "-m", "divides", "screen", str(dem), "--out", str(out),
           *OPTIONS, *extra]
    done = subprocess.run(cmd, capture_output=True, text=True, env=env)
    if done.returncode != 0:
        raise SystemExit(f"screen failed ({done.returncode}):\n{done.stderr[-3000:]}")
    wall = re.search(r"Elapsed \(wall clock\) time.*: (?:(\d+):)?(\d+):([\d.]+)", done.stderr)
    h, m, s = wall.groups()
    seconds = int(h or 0) * 3600 + int(m) * 60 + float(s)
    peak_kb = int(re.search(r"Maximum resident set size \(kbytes\): (\d+)", done.stderr).group(1))
    return {"seconds": seconds, "peak_gib": peak_kb / 2**20, "stdout": done.stdout}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[4000, 10000])
    parser.add_argument("--scratch", default=None, help="folder for the DEMs and outputs (default: a temporary one)")
    parser.add_argument("--write-one", nargs=2, help=argparse.SUPPRESS)
    args, extra = parser.parse_known_args()
    extra = [e for e in extra if e != "--"]
    if args.write_one:
        write_dem(int(args.write_one[0]), Path(args.write_one[1]))
        return
    folder = Path(args.scratch or tempfile.mkdtemp(prefix="bench-screen-"))
    folder.mkdir(parents=True, exist_ok=True)
    try:
        for n in [300, *args.sizes]:
            dem = folder / f"ridge{n}.tif"
            if not dem.exists():
                subprocess.run([sys.executable, __file__, "--write-one", str(n), str(dem)], check=True)
            r = run_screen(dem, folder / f"out{n}", extra)
            if n == 300:  # the kernel cache is loaded (or compiled) now
                continue
            load = os.getloadavg()
            print(f"{n:>6}²  divides screen {r['seconds']:7.1f} s  {n * n / r['seconds'] / 1e6:5.2f} M cells/s  "
                  f"peak RSS {r['peak_gib']:5.2f} GiB (largest process)  load {load[0]:.1f} {load[1]:.1f}",
                  flush=True)
            print("        " + r["stdout"].splitlines()[0] if r["stdout"] else "", flush=True)
    finally:
        if args.scratch is None:
            shutil.rmtree(folder, ignore_errors=True)


if __name__ == "__main__":
    main()
