"""Mistakes are found before the work starts, and the end of a run is quiet whatever the reader does.

The rules come from the project brief ("bad input: one clear line, exit 2, no
partial output, found before the long work") and the issue on filing
outputs: an unwritable folder, a side point on nodata, a DEM with too few
valid cells and a coordinate like ``1e309`` are each one error line with no
progress line before it; a closed stdout pipe (``| head -1``) ends with exit
0 and nothing on stderr. Inputs are written with plain rasterio
(``write_geotiff`` in tests/conftest.py).
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from affine import Affine

from divides.cli import options as opt
from divides.cli.app import run

UPLANDS = Path(__file__).resolve().parents[2] / "demo" / "uplands.tif"
CRS = "EPSG:32630"
TRANSFORM = Affine(30.0, 0.0, 500_000.0, 0.0, -30.0, 4_000_000.0)  # 30 m cells, north-up


def _ridge(rows: int = 40, cols: int = 60) -> np.ndarray:
    """A north-south ridge between the west and east edges, with noise so that valleys form."""
    c = np.arange(cols, dtype=np.float64)
    profile = np.minimum(c * 2.0, (cols - 1 - c) * 2.0)
    return (100.0 + profile[None, :] + np.random.default_rng(0).random((rows, cols))).astype(np.float32)


def _one_error_line(code: int, out: str, err: str, needle: str) -> None:
    assert code == 2, err
    assert out == ""
    lines = err.splitlines()
    assert len(lines) == 1 and lines[0].startswith("divides: error:"), err  # no progress line before it
    assert needle in lines[0], lines[0]


def _run(capsys, argv: list[str]) -> tuple[int, str, str]:
    code = run(argv)
    got = capsys.readouterr()
    return code, got.out, got.err


@pytest.mark.skipif(not Path("/proc/self").is_dir(), reason="needs Linux /proc (a file system that refuses folders)")
def test_an_unwritable_out_is_refused_before_reading(capsys, tmp_path):
    code, out, err = _run(capsys, ["assess", str(UPLANDS), "--side-a", "west", "--side-b", "east",
                                   "--out", "/proc/divides-outputs"])
    _one_error_line(code, out, err, "/proc")  # one line: refused before the first progress line
    assert "--out" in err


def test_a_side_point_on_nodata_is_one_line_before_routing(capsys, write_geotiff, tmp_path):
    z = _ridge()
    z[10:20, 5:15] = -9999.0  # a nodata hole in side a
    dem = write_geotiff("hole.tif", z, crs=CRS, transform=TRANSFORM, nodata=-9999.0)
    x, y = TRANSFORM @ (10.5, 15.5)  # centre of cell (row 15, col 10): inside the hole
    code, out, err = _run(capsys, ["assess", str(dem), "--side-a", f"{x},{y}", "--side-b", "east",
                                   "--out", str(tmp_path / "out")])
    _one_error_line(code, out, err, "nodata")
    assert "--side-a" in err and not (tmp_path / "out").exists()


def test_a_side_point_outside_the_dem_is_one_line(capsys, write_geotiff, tmp_path):
    dem = write_geotiff("ridge.tif", _ridge(), crs=CRS, transform=TRANSFORM)
    code, out, err = _run(capsys, ["assess", str(dem), "--side-a", "1e300,5", "--side-b", "east",
                                   "--out", str(tmp_path / "out")])
    _one_error_line(code, out, err, "outside the DEM")


def test_an_infinite_coordinate_is_a_clear_error_without_numpy_warnings(capsys, write_geotiff, tmp_path):
    dem = write_geotiff("ridge.tif", _ridge(), crs=CRS, transform=TRANSFORM)
    # 1e309 overflows a double (IEEE 754: the largest finite double is about 1.8e308)
    code, out, err = _run(capsys, ["assess", str(dem), "--side-a", "1e309,5", "--side-b", "east",
                                   "--out", str(tmp_path / "out")])
    _one_error_line(code, out, err, "too large")
    assert "RuntimeWarning" not in err and "invalid value" not in err


def test_a_dem_with_one_valid_row_is_told_it_has_too_few_cells(capsys, write_geotiff, tmp_path):
    z = np.full((30, 40), -9999.0, dtype=np.float32)
    z[15] = np.linspace(100, 200, 40)
    dem = write_geotiff("row.tif", z, crs=CRS, transform=TRANSFORM, nodata=-9999.0)
    for command in (["assess", str(dem), "--side-a", "west", "--side-b", "east"], ["screen", str(dem)]):
        code, out, err = _run(capsys, [*command, "--out", str(tmp_path / "out")])
        _one_error_line(code, out, err, "too few valid cells")
        assert "--channel-area" not in err  # the cells are the problem, not the threshold


def test_second_run_into_the_default_folder_names_both_ways_out(capsys, write_geotiff, tmp_path, monkeypatch):
    from divides.cli import assess_cmd

    dem = write_geotiff("ridge.tif", _ridge(), crs=CRS, transform=TRANSFORM)
    work = tmp_path / "work"
    work.mkdir()
    monkeypatch.chdir(work)
    (work / "divides-ridge-screen").mkdir()  # an earlier screening's default folder
    (work / "divides-ridge-screen" / "notes.txt").write_text("mine")
    code, out, err = _run(capsys, ["screen", str(dem), "--quiet"])
    _one_error_line(code, out, err, "already exists")
    assert "--overwrite" in err and "--out" in err
    # assess has its own default folder: no collision with the screening's (the work itself is not needed here)
    chosen = []
    monkeypatch.setattr(assess_cmd, "run_assessment", lambda read, request, *, out, overwrite, progress, **_:
                        chosen.append(out) or (None, out))
    monkeypatch.setattr(assess_cmd, "print_result", lambda result, out, *, json_output: None)
    code, out, err = _run(capsys, ["assess", str(dem), "--side-a", "west", "--side-b", "east", "--quiet"])
    assert code == 0, err
    assert chosen == [work / "divides-ridge-assess"]


def test_python_errors_name_python_keywords(tmp_path):
    from divides.errors import OutputError
    from divides.report.writer import check_out_dir

    (tmp_path / "out").mkdir()
    (tmp_path / "out" / "x").write_text("x")
    with pytest.raises(OutputError) as info:
        check_out_dir(tmp_path / "out")
    assert "overwrite=True" in str(info.value) and "--" not in str(info.value)
    with pytest.raises(OutputError) as info:
        check_out_dir(tmp_path / "out", cli=True)
    assert "--overwrite" in str(info.value) and "--out" in str(info.value)


@pytest.mark.parametrize("command", ["inspect", "screen"])
def test_a_closed_stdout_pipe_ends_quietly(write_geotiff, tmp_path, command):
    # `divides ... | head -1`: the reader goes away; POSIX tools end quietly (exit 0 here, never "internal error")
    dem = str(write_geotiff("ridge.tif", _ridge(), crs=CRS, transform=TRANSFORM))
    # (screen: basins of 0.05 km² or more; the default minimum leaves this small ridge no divide to screen, an error)
    extra = (["--out", str(tmp_path / "s"), "--quiet", "--workers", "1", "--min-basin-area", "5e4"]
             if command == "screen" else [])
    proc = subprocess.Popen([sys.executable, "-m", "divides", command, dem, *extra], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, cwd=tmp_path)
    proc.stdout.close()  # closed before the program writes a line
    _, err = proc.communicate(timeout=120)
    assert proc.returncode == 0, err.decode()
    assert err.decode() == ""  # no "internal error", no traceback


def test_kernels_cold_reads_numba_cache_index_files(tmp_path, monkeypatch):
    # numba writes "<module>.<function>-<line>.pyXY.nbi" index files (numba docs, "Cache sharing")
    monkeypatch.delenv("NUMBA_CACHE_DIR", raising=False)
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "user-cache"))
    package = tmp_path / "pkg"
    assert opt.kernels_cold(package)
    tag = f"py{sys.version_info.major}{sys.version_info.minor}"
    for room, module in (("terrain", "_fill_kernels"), ("terrain", "_routing_kernels"),
                         ("terrain", "_channel_kernels"), ("profiles", "_profile_kernels")):
        cache = package / room / "__pycache__"
        cache.mkdir(parents=True, exist_ok=True)
        (cache / f"{module}.kernel-12.{tag}.nbi").write_bytes(b"")
    assert not opt.kernels_cold(package)
    monkeypatch.setenv("NUMBA_CACHE_DIR", str(tmp_path / "empty"))  # numba then looks only there
    assert opt.kernels_cold(package)


def test_cold_kernels_are_announced_before_routing(capsys, write_geotiff, tmp_path, monkeypatch):
    import divides.report.writer as writer

    dem = write_geotiff("ridge.tif", _ridge(), crs=CRS, transform=TRANSFORM)
    monkeypatch.setattr(opt, "kernels_cold", lambda package_dir=None: True)
    monkeypatch.setattr(writer, "write_assessment", lambda result, out, **kw: out)  # the drawing is not the point
    code, out, err = _run(capsys, ["assess", str(dem), "--side-a", "west", "--side-b", "east", "--no-robustness",
                                   "--closed-edges", "north,south", "--out", str(tmp_path / "out")])
    assert code == 0, err
    lines = err.splitlines()
    at = next(i for i, line in enumerate(lines) if opt.KERNELS_COLD_MESSAGE in line)
    assert at < next(i for i, line in enumerate(lines) if "routing flow" in line)


def test_overlapping_sides_are_the_only_line_on_a_small_dem(capsys, write_geotiff, tmp_path):
    dem = write_geotiff("ridge.tif", _ridge(), crs=CRS, transform=TRANSFORM)
    x, y = TRANSFORM @ (8.5, 20.5)  # a point on the west slope: its basin is part of the west side
    code, out, err = _run(capsys, ["assess", str(dem), "--side-a", "west", "--side-b", f"{x},{y}",
                                   "--out", str(tmp_path / "out")])
    # found once flow is routed; the progress lines held back meanwhile are dropped
    _one_error_line(code, out, err, "overlap")


def test_held_progress_lines_appear_when_the_time_is_up():
    import io
    import time as _time

    stream = io.StringIO()
    progress = opt.Progress(2, stream=stream)
    progress.hold(0.2)
    progress.stage("first")
    assert stream.getvalue() == ""
    _time.sleep(0.6)
    assert "[1/2] first" in stream.getvalue()  # a long run still shows its progress
    progress.hold(5.0)
    progress.stage("second")
    progress.discard()
    progress.release()
    assert "second" not in stream.getvalue()


def test_the_bounds_offered_for_a_nodata_collar_give_the_closure_asked_for(capsys, write_geotiff, tmp_path):
    """Reference: the same ridge without the collar, closed on the north. The closure acts on the grid's outermost
    row (docs/methods.md §1), so behind a collar the run is refused; with the --bounds the error offers, the
    collared DEM must give exactly the result of the DEM without it."""
    import json
    import re

    plain = write_geotiff("plain.tif", _ridge(), crs=CRS, transform=TRANSFORM)
    z = np.vstack([np.full((4, 60), -9999.0, np.float32), _ridge(), np.full((2, 60), -9999.0, np.float32)])
    collared = write_geotiff("collar.tif", z, crs=CRS, transform=TRANSFORM @ Affine.translation(0, -4), nodata=-9999.0)
    base = ["--side-a", "west", "--side-b", "east", "--closed-edges", "north", "--no-robustness", "--no-forward-run"]
    code, out, err = _run(capsys, ["assess", str(collared), *base, "--out", str(tmp_path / "refused")])
    _one_error_line(code, out, err, "collar")
    box = re.search(r"--bounds (\S+) ", err).group(1)
    summaries = []
    for name, dem, extra in (("plain", plain, []), ("cropped", collared, ["--bounds", box])):
        code, _, err = _run(capsys, ["assess", str(dem), *base, *extra, "--out", str(tmp_path / name), "--quiet"])
        assert code == 0, err
        summaries.append(json.loads((tmp_path / name / "summary.json").read_text()))
    for key in ("verdict", "contrasts", "divide", "sides"):
        assert summaries[0][key] == summaries[1][key], key


def test_a_closed_edge_partly_on_nodata_is_warned_with_its_counts(capsys, write_geotiff, tmp_path):
    z = _ridge()
    z[:3, :25] = -9999.0  # the north-west corner is nodata: 25 of the north row's 60 cells
    dem = write_geotiff("corner.tif", z, crs=CRS, transform=TRANSFORM, nodata=-9999.0)
    n_nodata = int(np.count_nonzero(z[0] == -9999.0))  # counted on the array written, with numpy
    code, _, err = _run(capsys, ["assess", str(dem), "--side-a", "west", "--side-b", "east", "--closed-edges",
                                 "north,south", "--no-robustness", "--no-forward-run", "--out", str(tmp_path / "o")])
    assert code == 0, err
    warned = [line for line in err.splitlines() if line.startswith("divides: warning: --closed-edges")]
    assert len(warned) == 1, err  # the north row only: the south row is whole
    assert f"{n_nodata} of the 60 cells" in warned[0] and f"{60 - n_nodata} valid cells" in warned[0]
