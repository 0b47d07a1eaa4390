"""The memory guard: a DEM that cannot fit is refused before reading, in one line, exit 2.

The huge rasters are real GeoTIFF headers written by rasterio with sparse tiles (a few KB on
disk, 10¹⁰ cells declared). Free memory is compared with the kernel's own figure
(/proc/meminfo, MemAvailable) and with psutil, both outside divides.
"""

from __future__ import annotations

import subprocess
import sys

import numpy as np
import pytest
import rasterio
import rasterio.windows
from affine import Affine

from divides.errors import GridError
from divides.io import memory
from divides.io.reading import read_dem

UTM = "EPSG:32630"


def _sparse_geotiff(path, rows: int, cols: int, dtype: str = "float32", corner: bool = False) -> None:
    """A tiled GeoTIFF declaring rows x cols cells, no tile written (GDAL SPARSE_OK) but the
    north-west 64 x 64 block when ``corner``."""
    profile = dict(driver="GTiff", width=cols, height=rows, count=1, dtype=dtype, crs=UTM,
                   transform=Affine(30.0, 0, 400000.0, 0, -30.0, 5_700_000.0), tiled=True,
                   blockxsize=512, blockysize=512, sparse_ok=True, nodata=-9999.0, bigtiff="YES")
    with rasterio.open(path, "w", **profile) as dst:
        if corner:
            block = np.add.outer(np.arange(64.0), np.arange(64.0)).astype(dtype) + 100.0
            dst.write(block, 1, window=rasterio.windows.Window(0, 0, 64, 64))


def test_available_memory_matches_the_kernel(monkeypatch):
    # /proc/meminfo MemAvailable is the kernel's estimate (proc(5)); psutil reads the same field.
    monkeypatch.delenv(memory.MEMORY_LIMIT_ENV, raising=False)
    with open("/proc/meminfo") as fh:
        kernel = next(int(line.split()[1]) * 1024 for line in fh if line.startswith("MemAvailable:"))
    got = memory.available_bytes()
    assert 0 < got <= kernel * 1.2 + 2**28  # free memory moves a little between the two reads


def test_the_environment_cap_lowers_what_is_available(monkeypatch):
    monkeypatch.setenv(memory.MEMORY_LIMIT_ENV, "64M")
    assert memory.available_bytes() == 64 * 2**20  # 64 MiB: binary prefix (IEC 80000-13)
    monkeypatch.setenv(memory.MEMORY_LIMIT_ENV, "lots")
    with pytest.raises(GridError, match="DIVIDES_MEMORY_LIMIT"):
        memory.available_bytes()


def test_a_huge_sparse_dem_is_refused_before_reading(tmp_path, monkeypatch):
    # 100 000 x 100 000 float32 cells = 37.3 GiB for the raw band alone (4 B x 10¹⁰), more than
    # this machine or any cap below has; the guard must refuse without allocating it.
    monkeypatch.setenv(memory.MEMORY_LIMIT_ENV, "8G")
    path = tmp_path / "belt.tif"
    _sparse_geotiff(path, 100_000, 100_000)
    assert path.stat().st_size < 2**20  # really sparse: a header, no data
    with pytest.raises(GridError) as info:
        read_dem(path)
    text = str(info.value)
    assert "\n" not in text and "100000 x 100000" in text and "available" in text and "bounds" in text
    # the read alone: 4 (float32 band) + 4 (elevations) + 2 (masks) = 10 B/cell x 10¹⁰ = 93.1 GiB
    assert "93.1 GiB" in text


def test_a_window_that_fits_is_read(tmp_path, monkeypatch):
    # The same declared size read through bounds of 10 x 20 cells: a few hundred bytes.
    monkeypatch.setenv(memory.MEMORY_LIMIT_ENV, "8G")
    path = tmp_path / "belt.tif"
    _sparse_geotiff(path, 100_000, 100_000, corner=True)
    dem = read_dem(path, bounds=(400000.0, 5_700_000.0 - 300.0, 400600.0, 5_700_000.0),
                   memory=memory.MemoryNeed.of("screen", "use --bounds"))
    assert dem.shape == (10, 20)
    assert dem.valid.all() and dem.elevation[0, 0] == 100.0  # the block written above


def test_the_task_need_is_added_to_the_read(tmp_path, monkeypatch):
    # 2000 x 2000 cells of float32: read 10 B/cell = 38 MiB fits in 100 MiB, but screening at
    # 60 B/cell (240 MB) does not; the message names the task and the remedy given.
    monkeypatch.setenv(memory.MEMORY_LIMIT_ENV, "100M")
    path = tmp_path / "mid.tif"
    _sparse_geotiff(path, 2000, 2000, corner=True)
    need = memory.MemoryNeed.of("screen", "screen a smaller window with --bounds")
    with pytest.raises(GridError, match=r"screen of 2000 x 2000 cells .* --bounds \(at most about \d+ x \d+"):
        read_dem(path, memory=need)
    monkeypatch.setenv(memory.MEMORY_LIMIT_ENV, "8G")
    assert read_dem(path, memory=need).shape == (2000, 2000)


@pytest.mark.parametrize("command", ["screen", "inspect"])
def test_the_command_line_exits_2_with_one_line(tmp_path, command):
    # A real process (no mocks): 10¹⁰ cells cannot fit on this machine (24 GB) nor on any
    # runner this suite targets; exit 2, one line, no traceback, nothing written.
    path = tmp_path / "belt.tif"
    _sparse_geotiff(path, 100_000, 100_000)
    out = tmp_path / "out"
    argv = [command, str(path)] + (["--out", str(out)] if command == "screen" else [])
    proc = subprocess.run([sys.executable, "-m", "divides", *argv, "--quiet"], capture_output=True, text=True,
                          timeout=120, check=False)
    lines = [line for line in proc.stderr.splitlines() if line.strip()]
    assert proc.returncode == 2, proc.stderr
    assert len(lines) == 1 and "too large for memory" in lines[0] and "--bounds" in lines[0], proc.stderr
    assert "MemoryError" not in proc.stderr and "Traceback" not in proc.stderr
    assert not out.exists()


def test_format_bytes_uses_binary_units():
    # 37.3 GiB = 4 B x 10¹⁰ / 2³⁰ (the allocation of the example)
    assert memory.format_bytes(4 * 10**10) == "37.3 GiB"
    assert np.isclose(float(memory.format_bytes(1.5 * 2**20).split()[0]), 1.5)
