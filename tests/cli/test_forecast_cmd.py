"""``divides forecast`` through the command line's own runner, checked with json, pyproj and PIL.

The command is registered here on a throwaway typer app that stands in for
the real one (``divides.cli.app.run`` maps failures to exit codes), so these
tests do not depend on where the real app registers it.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
import rasterio
import typer
from affine import Affine
from PIL import Image
from pyproj import Transformer

import divides.cli.app as cli_app
from divides.assess.verdict import CAUTION
from divides.cli import forecast_cmd
from divides.model.scenarios import off_centre_divide

CRS = "EPSG:32633"
LEFT, TOP, CELL = 500_000.0, 4_200_000.0, 100.0
BASE = ["--side-a", "west", "--side-b", "east", "--years", "2e5", "--closed-edges", "north,south", "--runs", "2"]


@pytest.fixture(scope="module")
def ridge_tif(tmp_path_factory) -> Path:
    """A transient ridge (crest at 0.35 of the width) as a projected GeoTIFF, written with rasterio."""
    z = off_centre_divide((32, 64), crest=0.35).run(duration=5e5, dt=2e4).final.elevation.astype(np.float32)
    path = tmp_path_factory.mktemp("dem") / "ridge.tif"
    profile = {"driver": "GTiff", "width": 64, "height": 32, "count": 1, "dtype": "float32", "crs": CRS,
               "transform": Affine(CELL, 0, LEFT, 0, -CELL, TOP)}
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(z, 1)
    return path


@pytest.fixture
def run(monkeypatch, capsys):
    """Run ``divides forecast ...`` and return (exit code, stdout, stderr)."""
    app = typer.Typer(add_completion=False, pretty_exceptions_enable=False, rich_markup_mode=None)

    @app.callback()
    def _root() -> None:  # a group, so the command is called by name as in the real app
        """Test app."""

    app.command(name="forecast")(forecast_cmd.forecast)
    monkeypatch.setattr(cli_app, "app", app)

    def _run(*args: object) -> tuple[int, str, str]:
        code = cli_app.run(["forecast", *map(str, args)])
        out = capsys.readouterr()
        return code, out.out, out.err

    return _run


def _leftovers(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if p.name.startswith("."))


def test_writes_forecast_layers_and_figure(run, ridge_tif, tmp_path):
    out = tmp_path / "fc"
    code, stdout, stderr = run(ridge_tif, *BASE, "--erosion-rate-a", "0.1", "--out", out)
    assert code == 0, stderr
    written = sorted(str(p.relative_to(out)) for p in out.rglob("*") if p.is_file())
    assert written == sorted(forecast_cmd.OUTPUT_FILES)
    assert _leftovers(tmp_path) == []  # the temporary folder was renamed, not left behind
    assert CAUTION in stdout and "Forte & Barnhart 2024" in stdout

    doc = json.loads((out / "forecast.json").read_text(encoding="utf-8"))
    assert doc["schema"] == "divides.forecast/1" and doc["years"] == 2e5
    assert doc["parameters"]["calibration"] == "erosion rate of side a"
    assert doc["parameters"]["edges"]["north"] == "closed"
    assert len(doc["runs"]) == 2
    headline = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    assert headline["schema"] == doc["schema"] and headline["displacement_m"] == doc["displacement_m"]

    # RFC 7946: a FeatureCollection of LineStrings in longitude, latitude (WGS 84), no "crs" member.
    layer = json.loads((out / "layers" / "forecast_divide.geojson").read_text(encoding="utf-8"))
    assert layer["type"] == "FeatureCollection" and "crs" not in layer
    kinds = {f["properties"]["kind"] for f in layer["features"]}
    assert {"present", "best", "low", "high", "run"} <= kinds
    # Back to the DEM's CRS with pyproj (independent of the rasterio warp used to write them), the
    # present divide lies inside the DEM, between the crest's start (0.35 of the width) and the middle.
    to_utm = Transformer.from_crs("EPSG:4326", CRS, always_xy=True)
    for feature in layer["features"]:
        assert feature["type"] == "Feature" and feature["geometry"]["type"] == "LineString"
        coords = np.asarray(feature["geometry"]["coordinates"])
        assert coords.shape[0] >= 2 and coords.shape[1] == 2
        assert np.all(np.abs(coords[:, 0]) <= 180) and np.all(np.abs(coords[:, 1]) <= 90)
        x, y = to_utm.transform(coords[:, 0], coords[:, 1])
        assert np.all((x >= LEFT) & (x <= LEFT + 64 * CELL) & (y >= TOP - 32 * CELL) & (y <= TOP))
        if feature["properties"]["kind"] == "present":
            share = (np.median(x) - LEFT) / (64 * CELL)
            assert 0.3 < share < 0.5

    with Image.open(out / "figures" / "forecast.png") as png:  # a real PNG that PIL decodes
        assert png.format == "PNG" and png.size[0] > 600 and png.size[1] > 300


def test_json_on_stdout_is_the_written_document(run, ridge_tif, tmp_path):
    out = tmp_path / "fc"
    code, stdout, stderr = run(ridge_tif, *BASE, "--erodibility-k", "3e-5", "--out", out, "--json")
    assert code == 0, stderr
    printed = json.loads(stdout)
    assert printed == json.loads((out / "forecast.json").read_text(encoding="utf-8"))
    assert printed["parameters"]["calibration"] == "erodibility K"


def test_without_out_it_writes_the_default_folder(run, ridge_tif, tmp_path, monkeypatch):
    work = tmp_path / "work"
    work.mkdir()
    monkeypatch.chdir(work)
    # --uplift: the older name of --uplift-pattern, still accepted
    code, stdout, stderr = run(ridge_tif, *BASE, "--erosion-rate-b", "0.1", "--uplift", "sides")
    assert code == 0, stderr
    assert "Uplift: one rate per side" in stdout and CAUTION in stdout
    stem = Path(ridge_tif).stem
    assert [p.name for p in work.iterdir()] == [f"divides-{stem}-forecast"]  # ./divides-<DEM>-<command>
    head = json.loads((work / f"divides-{stem}-forecast" / "summary.json").read_text(encoding="utf-8"))
    assert head["provenance"]["dem_file"] == Path(ridge_tif).name
    # a second run into the same default folder: one line naming both ways out
    code, stdout, stderr = run(ridge_tif, *BASE, "--erosion-rate-b", "0.1", "--uplift-pattern", "sides")
    assert code == 2 and stderr.count("\n") == 1 and "--overwrite" in stderr and "--out" in stderr


@pytest.mark.parametrize(
    ("extra", "needle"),
    [
        ([], "needs a calibration of erosion"),
        (["--erosion-rate-a", "fast"], "--erosion-rate-a 'fast' is not a number"),
        (["--erosion-rate-a", "0.1", "--years", "-5"], "--years '-5' is not accepted"),
        (["--erosion-rate-a", "0.1", "--closed-edges", "north,up"], "--closed-edges 'north,up' is not accepted"),
        (["--erosion-rate-a", "0.1", "--closed-edges", "north,south,east,west"], "at most three"),
        (["--erosion-rate-a", "0.1", "--theta", "3"], "--theta '3' is not accepted"),
        (["--erosion-rate-a", "0.1", "--uplift", "tilted"], "--uplift 'tilted' is not accepted"),
        (["--erosion-rate-a", "0.1", "--runs", "0"], "--runs"),
        (["--erosion-rate-a", "0.1", "--side-b", "west"], "same"),
    ],
)
def test_bad_input_is_one_line_and_exit_2_with_no_output(run, ridge_tif, tmp_path, extra, needle):
    # Project rule (DESIGN, command line): exit 2, one clear line, no partial output.
    out = tmp_path / "fc"
    code, stdout, stderr = run(ridge_tif, *BASE, *extra, "--out", out)
    assert code == 2
    assert stdout == "" and stderr.count("\n") == 1 and stderr.startswith("divides: error:")
    assert needle in stderr
    assert not out.exists() and _leftovers(tmp_path) == []


def test_existing_folder_is_kept_unless_overwrite(run, ridge_tif, tmp_path):
    out = tmp_path / "fc"
    out.mkdir()
    (out / "notes.txt").write_text("mine")
    code, _, stderr = run(ridge_tif, *BASE, "--erosion-rate-a", "0.1", "--out", out)
    assert code == 2 and "already exists" in stderr
    code, _, stderr = run(ridge_tif, *BASE, "--erosion-rate-a", "0.1", "--out", out, "--overwrite")
    assert code == 2 and "not an earlier divides output" in stderr
    assert [p.name for p in out.iterdir()] == ["notes.txt"]
    (out / "notes.txt").unlink()  # an empty folder, or an earlier output, may be replaced
    assert run(ridge_tif, *BASE, "--erosion-rate-a", "0.1", "--out", out, "--overwrite")[0] == 0
    assert run(ridge_tif, *BASE, "--erosion-rate-a", "0.2", "--out", out, "--overwrite")[0] == 0
    assert json.loads((out / "forecast.json").read_text())["parameters"]["uplift_m_per_yr"]["a"] > 0
    assert _leftovers(tmp_path) == []


def test_a_failed_write_leaves_nothing(run, ridge_tif, tmp_path, monkeypatch):
    import divides.io.writing as writing

    real = writing.atomic_write
    calls = []

    def failing(path, **kwargs):
        calls.append(path)
        if len(calls) == 2:  # the second file: the disk fills up
            raise OSError(28, "No space left on device")
        return real(path, **kwargs)

    monkeypatch.setattr(writing, "atomic_write", failing)
    out = tmp_path / "fc"
    code, stdout, stderr = run(ridge_tif, *BASE, "--erosion-rate-a", "0.1", "--out", out)
    assert code == 2 and "No space left on device" in stderr and stdout == ""
    assert not out.exists() and _leftovers(tmp_path) == []


def test_dem_without_crs_gets_no_layer(run, ridge_tif, tmp_path):
    with rasterio.open(ridge_tif) as src:
        z = src.read(1)
    plain = tmp_path / "plain.tif"
    with rasterio.open(plain, "w", driver="GTiff", width=64, height=32, count=1, dtype="float32",
                       transform=Affine(1, 0, 0, 0, -1, 32)) as dst:
        dst.write(z, 1)
    out = tmp_path / "fc"
    code, _, stderr = run(plain, *BASE, "--erosion-rate-a", "0.1", "--cell-size", "100", "--out", out)
    assert code == 0, stderr
    assert not (out / "layers").exists() and (out / "figures" / "forecast.png").is_file()
    doc = json.loads((out / "forecast.json").read_text())
    assert "layers/forecast_divide.geojson" not in doc["outputs"]
    assert any("no CRS" in note for note in doc["notes"])
