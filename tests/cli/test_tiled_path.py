"""``--tiled``/``--scratch`` and the automatic tiled path of ``divides screen`` and ``assess``.

Reference for the results: the in-memory path of the same command on the same DEM (routing by
tiles equals in-memory routing: tests/terrain/test_tiled_flow.py, whose reference is
test_routing.py's scikit-image and networkx checks). The demo landscape, stored here as float32 (the tiled
path's precision; the demo file itself is float64), has 30 m cells, so drainage areas are whole m² and every
number must match.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from divides.cli.app import run
from divides.io import memory

DEMO = Path(__file__).resolve().parents[2] / "demo" / "uplands.tif"


@pytest.fixture(scope="module")
def uplands(tmp_path_factory) -> str:
    """The demo landscape as a float32 GeoTIFF (its centimetre values, rounded to float32)."""
    import rasterio

    path = tmp_path_factory.mktemp("uplands") / "uplands.tif"
    with rasterio.open(DEMO) as src:
        profile, z = {**src.profile, "dtype": "float32"}, src.read(1).astype("float32")
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(z, 1)
    return str(path)


def _judged(folder: Path) -> dict:
    doc = json.loads((folder / "screening.json").read_text())
    return {k: doc[k] for k in ("segments", "gaps", "coverage", "n_basins")}


def test_screen_tiled_equals_in_memory_and_clears_its_scratch(tmp_path, capsys, uplands):
    scratch = tmp_path / "scratch"
    base = ["screen", uplands, "--quiet", "--level", "outlets"]
    assert run([*base, "--out", str(tmp_path / "mem")]) == 0
    assert run([*base, "--out", str(tmp_path / "tiles"), "--tiled", "--scratch", str(scratch)]) == 0
    capsys.readouterr()
    assert _judged(tmp_path / "tiles") == _judged(tmp_path / "mem")
    assert scratch.is_dir() and list(scratch.iterdir()) == []  # the intermediate tiles are gone


def test_screen_tiled_fills_voids_as_in_memory(tmp_path, capsys, uplands):
    # Holes of nodata are filled before routing on either path (docs/methods.md §1), so the tiled screening of a
    # holed DEM is the in-memory one, filled cells and their layer included.
    import numpy as np
    import rasterio

    path = tmp_path / "holed.tif"
    with rasterio.open(uplands) as src:
        profile, z = src.profile, src.read(1)
    z[60:66, 100:108] = np.nan
    z[20:23, 30:35] = np.nan
    with rasterio.open(path, "w", **{**profile, "nodata": float("nan")}) as dst:
        dst.write(z, 1)
    base = ["screen", str(path), "--quiet", "--level", "outlets"]
    assert run([*base, "--out", str(tmp_path / "mem")]) == 0
    assert run([*base, "--out", str(tmp_path / "tiles"), "--tiled"]) == 0
    capsys.readouterr()
    assert _judged(tmp_path / "tiles") == _judged(tmp_path / "mem")
    voids = json.loads((tmp_path / "tiles" / "screening.json").read_text())["dem"]["voids"]
    assert voids["filled_cells"] == 48 + 15
    assert (tmp_path / "tiles" / "layers" / "filled_voids.geojson").read_text() == (
        tmp_path / "mem" / "layers" / "filled_voids.geojson").read_text()


def test_tiled_path_starts_by_itself_when_routing_would_not_fit(tmp_path, capsys, monkeypatch, uplands):
    # No machine here is too small for the demo: make "in-memory routing fits" false, as the
    # guard would find on a DEM larger than memory, and the command must route by tiles itself.
    monkeypatch.setattr(memory, "fits", lambda cells, per_cell: False)
    code = run(["screen", uplands, "--out", str(tmp_path / "auto"), "--level", "outlets"])
    captured = capsys.readouterr()
    assert code == 0, captured.err
    assert "routing by tiles" in captured.err


@pytest.mark.parametrize("command", ["screen", "assess"])
def test_tiled_with_breaching_is_one_line(tmp_path, capsys, command, uplands):
    sides = ["--side-a", "west", "--side-b", "east"] if command == "assess" else []
    out = tmp_path / "never"
    code = run([command, uplands, *sides, "--out", str(out), "--tiled", "--conditioning", "breach"])
    captured = capsys.readouterr()
    lines = captured.err.strip().splitlines()
    assert code == 2 and len(lines) == 1 and "--tiled" in lines[0] and "Traceback" not in captured.err
    assert not out.exists()


def test_scratch_that_is_a_file_is_one_line(tmp_path, capsys, uplands):
    blocker = tmp_path / "file"
    blocker.write_text("x")
    code = run(["screen", uplands, "--out", str(tmp_path / "never"), "--tiled", "--scratch", str(blocker)])
    lines = capsys.readouterr().err.strip().splitlines()
    assert code == 2 and len(lines) == 1 and "--scratch" in lines[0]


@pytest.mark.parametrize("tiled", [False, True])
def test_when_nothing_fits_the_guard_names_bounds(tmp_path, capsys, monkeypatch, tiled, uplands):
    # 100 kB cannot hold the demo (36 000 cells x tens of bytes) on either path.
    monkeypatch.setenv(memory.MEMORY_LIMIT_ENV, "100K")
    out = tmp_path / "never"
    code = run(["screen", uplands, "--out", str(out)] + (["--tiled"] if tiled else []))
    captured = capsys.readouterr()
    lines = captured.err.strip().splitlines()
    assert code == 2 and len(lines) == 1, captured.err
    assert "too large for memory" in lines[0] and "--bounds" in lines[0]
    assert ("routing by tiles" in lines[0]) == tiled
    assert not out.exists()


def test_assess_tiled_equals_in_memory(tmp_path, capsys, uplands):
    base = ["assess", uplands, "--side-a", "west", "--side-b", "east", "--closed-edges", "north,south",
            "--no-robustness", "--quiet"]
    assert run([*base, "--out", str(tmp_path / "mem")]) == 0
    assert run([*base, "--out", str(tmp_path / "tiles"), "--tiled", "--scratch", str(tmp_path / "scratch")]) == 0
    capsys.readouterr()
    mem, tiles = (json.loads((tmp_path / name / "summary.json").read_text()) for name in ("mem", "tiles"))
    for key in ("verdict", "contrasts", "divide"):
        assert tiles[key] == mem[key], key


def _on_a_cluster(argv, tmp_path, capsys) -> set[str]:
    """Run ``argv --tiled`` on a fresh 2-worker in-process Dask cluster; the task kinds it ran."""
    from divides.terrain.cluster import cluster_client

    with cluster_client(workers=2, processes=False) as client:
        code = run([*argv, "--tiled", "--scratch", str(tmp_path / "scratch"), "--scheduler", client.scheduler.address])
        ran = client.run_on_scheduler(lambda dask_scheduler: sorted(dask_scheduler.task_prefixes))
    captured = capsys.readouterr()
    assert code == 0, captured.err
    return set(ran)


def test_screen_tiled_runs_its_tiles_on_the_cluster_given(tmp_path, capsys, uplands):
    # --scheduler sends the tiles (not only the divide segments) to the cluster; the result equals
    # the in-memory screening (reference as above). Two in-process workers keep the test short.
    base = ["screen", uplands, "--quiet", "--level", "outlets"]
    assert run([*base, "--out", str(tmp_path / "mem")]) == 0
    ran = _on_a_cluster([*base, "--out", str(tmp_path / "cluster")], tmp_path, capsys)
    assert {"flood", "d8", "final_area", "assess_pairs"} <= ran, ran
    assert _judged(tmp_path / "cluster") == _judged(tmp_path / "mem")


def test_assess_tiled_runs_its_tiles_on_the_cluster_given(tmp_path, capsys, uplands):
    # assess --tiled --scheduler routes its tiles on that cluster, and the verdict equals the
    # in-memory assessment (reference: the in-memory path, itself checked against scikit-image's
    # reconstruction and networkx in tests/terrain).
    base = ["assess", uplands, "--side-a", "west", "--side-b", "east", "--closed-edges", "north,south",
            "--no-robustness", "--no-forward-run", "--quiet"]
    assert run([*base, "--out", str(tmp_path / "mem")]) == 0
    ran = _on_a_cluster([*base, "--out", str(tmp_path / "cluster")], tmp_path, capsys)
    assert {"flood", "d8", "final_area"} <= ran, ran
    mem, tiles = (json.loads((tmp_path / name / "summary.json").read_text()) for name in ("mem", "cluster"))
    for key in ("verdict", "contrasts", "divide"):
        assert tiles[key] == mem[key], key
