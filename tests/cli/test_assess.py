"""``divides assess`` end to end: options reach the analysis, outputs follow the contract.

The references are outside the code under test: the values typed on the
command line, the output contract of DESIGN.md (summary.json keys, files of
--out), rasterio reading the DEM and the output rasters, pyproj for lon/lat,
and the definition of runoff-weighted χ (Gelwick et al. 2024: χ integrates
(A0/Q)^θ with Q the runoff-weighted area, runoff scaled by its mean). Runs use
the demo DEM with --no-robustness to stay quick.
"""

from __future__ import annotations

import contextlib
import io
import json
import os
import subprocess
import sys
import textwrap
from pathlib import Path

import numpy as np
import pyproj
import pytest
import rasterio

from divides.cli.app import run

UPLANDS = Path(__file__).resolve().parents[2] / "demo" / "uplands.tif"
BASE = ["--side-a", "west", "--side-b", "east", "--closed-edges", "north,south", "--no-robustness"]
# Options with values chosen here: the run must carry exactly these into summary.json.
TYPED = ["--theta", "0.5", "--channel-area", "90000", "--reference-area", "180000", "--dem-error", "0.5",
         "--erosion-rate-a", "0.7", "--seed", "7", "--name-a", "River Tallow", "--name-b", "Quern Water"]


def _run(argv: list[str]) -> tuple[int, str, str]:
    """Run the command line in this process, returning (code, stdout, stderr)."""
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = run(argv)
    return code, out.getvalue(), err.getvalue()


@pytest.fixture(scope="module")
def typed_run(tmp_path_factory):
    folder = tmp_path_factory.mktemp("assess") / "out"
    code, out, err = _run(["assess", str(UPLANDS), *BASE, *TYPED, "--json", "--out", str(folder)])
    assert code == 0, err
    return {"folder": folder, "stdout": out, "stderr": err,
            "summary": json.loads((folder / "summary.json").read_text(encoding="utf-8"))}


def test_typed_options_reach_the_assessment(typed_run):
    p = typed_run["summary"]["parameters"]
    # The values typed in TYPED and BASE, converted to the library's units (mm/yr stays mm/yr).
    assert p["theta"] == 0.5 and p["theta_used"] == 0.5
    assert p["channel_area_m2"] == 90000 and p["channel_area_used_m2"] == 90000
    assert p["reference_area_m2"] == 180000 and p["reference_area_used_m2"] == 180000
    assert p["dem_error_m"] == 0.5
    assert p["erosion_rate_a_mm_yr"] == 0.7 and p["erosion_rate_b_mm_yr"] is None
    assert p["seed"] == 7
    assert sorted(p["closed_edges"]) == ["north", "south"]
    assert p["robustness"] is False and typed_run["summary"]["robustness"]["runs"] == []


def test_json_on_stdout_is_the_summary_file(typed_run):
    assert json.loads(typed_run["stdout"]) == typed_run["summary"]


def test_summary_follows_the_output_contract(typed_run):
    # Keys fixed by the output contract of DESIGN.md.
    s = typed_run["summary"]
    assert s["schema"] == "divides.assessment/1"
    assert set(s) >= {"dem", "parameters", "sides", "divide", "profiles", "contrasts", "knickpoints", "verdict"}
    assert set(s["verdict"]) >= {"moves_toward", "aggressor", "confidence", "rate_mm_per_yr", "text"}
    assert set(s["sides"]["a"]) >= {"spec", "area_km2", "n_channel_heads", "base_level_m"}
    assert (s["sides"]["a"]["spec"], s["sides"]["b"]["spec"]) == ("west", "east")
    # An erosion rate was given, so the contract's rate has its three values.
    assert set(s["verdict"]["rate_mm_per_yr"]) == {"low", "best", "high"}
    with rasterio.open(UPLANDS) as src:  # the DEM as rasterio reads it
        assert s["dem"]["shape"] == [src.height, src.width]
        assert s["dem"]["cell_size_m"] == pytest.approx(list(src.res))
        assert rasterio.crs.CRS.from_user_input(s["dem"]["crs"]) == src.crs
        assert s["dem"]["geographic"] is False


def test_output_files_follow_the_contract(typed_run):
    folder = typed_run["folder"]
    for name in ("summary.json", "verdict.txt", "report.html"):
        assert (folder / name).is_file()
    pngs = sorted(folder.glob("figures/*.png"))
    assert pngs and all(p.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" for p in pngs)  # the PNG signature
    for layer in folder.glob("layers/*.geojson"):
        assert json.loads(layer.read_text(encoding="utf-8"))["type"] == "FeatureCollection"  # RFC 7946
    tifs = sorted(folder.glob("rasters/*.tif"))
    assert tifs
    with rasterio.open(UPLANDS) as dem:
        for tif in tifs:  # "same grid as the DEM" (DESIGN.md), as rasterio sees both files
            with rasterio.open(tif) as r:
                assert (r.height, r.width) == (dem.height, dem.width) and r.transform == dem.transform
                assert r.crs == dem.crs
    assert not [p for p in folder.parent.iterdir() if p.name.startswith(".")]  # no temporary folder left


def test_progress_lines_are_plain_and_in_order(typed_run):
    lines = typed_run["stderr"].splitlines()
    stages = [line for line in lines if line.startswith("divides: [")]
    assert [line[:14] for line in stages] == ["divides: [1/3]", "divides: [2/3]", "divides: [3/3]"]
    assert "\x1b[" not in typed_run["stderr"] and "\r" not in typed_run["stderr"]  # not a terminal: no colour, no redraw
    assert not [line for line in lines if "error" in line or "Traceback" in line]


def test_text_output_default_folder_and_quiet(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    code, out, err = _run(["assess", str(UPLANDS), *BASE, "--quiet"])
    assert code == 0
    assert err == ""  # --quiet: nothing on stderr
    folder = tmp_path / "divides-uplands-assess"  # the documented default: ./divides-<DEM name>-<command>
    summary = json.loads((folder / "summary.json").read_text(encoding="utf-8"))
    assert out.startswith(summary["verdict"]["text"])
    # The cautions every verdict carries (project rules).
    assert "field" in out and "licensed professionals" in out
    report = [line for line in out.splitlines() if line.startswith("Report:")]
    assert len(report) == 1 and Path(report[0].split(None, 1)[1]) == folder / "report.html"
    assert (folder / "report.html").is_file()

    # Again: refused without --overwrite (nothing changes), replaced with it.
    (folder / "marker").write_text("from the first run")
    code, out, err = _run(["assess", str(UPLANDS), *BASE, "--quiet"])
    # one line naming both ways out
    assert code == 2 and "--overwrite" in err and "--out" in err and (folder / "marker").exists()
    assert len(err.strip().splitlines()) == 1
    code, out, err = _run(["assess", str(UPLANDS), *BASE, "--quiet", "--overwrite"])
    assert code == 0, err
    assert not (folder / "marker").exists() and (folder / "summary.json").is_file()


def _write_like_dem(path: Path, values: np.ndarray) -> str:
    with rasterio.open(UPLANDS) as src:
        profile = src.profile
    profile.update(dtype="float32", nodata=None)
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(values.astype(np.float32), 1)
    return str(path)


def _chi(tmp_path: Path, name: str, *extra: str) -> tuple[float, float]:
    code, out, err = _run(["assess", str(UPLANDS), *BASE, "--channel-area", "90000", "--json", "--quiet",
                           "--out", str(tmp_path / name), *extra])
    assert code == 0, err
    chi = next(c for c in json.loads(out)["contrasts"] if c["metric"] == "chi")
    return chi["a"], chi["b"]


def test_runoff_raster_weights_chi(tmp_path):
    with rasterio.open(UPLANDS) as src:
        rows, cols = src.height, src.width
    plain = _chi(tmp_path, "plain")
    # Uniform runoff: scaled by its mean it is 1 everywhere, so weighted χ is plain χ (definition).
    uniform = _write_like_dem(tmp_path / "uniform.tif", np.full((rows, cols), 3.0))
    assert _chi(tmp_path, "uniform", "--runoff-raster", uniform) == pytest.approx(plain, rel=1e-9)
    # A wetter east (side b): more discharge there, so less χ on side b and more on the drier side a.
    wet = np.ones((rows, cols))
    wet[:, cols // 2:] = 2.0
    # --runoff: the older name of --runoff-raster, still accepted
    a, b = _chi(tmp_path, "wet", "--runoff", _write_like_dem(tmp_path / "wet.tif", wet))
    assert b < plain[1] and a > plain[0]


def test_a_weighting_raster_with_holes_is_named_in_the_verdict_and_summary(tmp_path):
    # A raster's holes are read as its reference value (docs/methods.md §3); the assessment's outputs say on how many
    # cells (a 10 x 10 block of NaN on the fully valid demo DEM: 100 cells, 100 / 36,000 = 0.28 %).
    with rasterio.open(UPLANDS) as src:
        rain = np.ones((src.height, src.width))
    rain[10:20, 10:20] = np.nan
    code, out, err = _run(["assess", str(UPLANDS), *BASE, "--json", "--quiet", "--out", str(tmp_path / "a"),
                           "--runoff-raster", _write_like_dem(tmp_path / "rain.tif", rain)])
    assert code == 0, err
    summary = json.loads(out)
    assert summary["parameters"]["raster_holes_cells"] == {"runoff": 100}
    note = "The runoff raster has no value on 100 of the DEM's cells (0.28 %)"
    assert note in summary["verdict"]["text"] and note in (tmp_path / "a" / "verdict.txt").read_text()
    assert note.replace("'", "&#x27;") in (tmp_path / "a" / "report.html").read_text()


def test_nodata_inside_the_data_is_counted_and_named(tmp_path):
    # A hole of nodata inside the data is filled by default (docs/methods.md §1). The outputs say how many cells and
    # what was done: a 4 x 5 block of NaN in the west of the fully valid demo DEM is 20 cells.
    with rasterio.open(UPLANDS) as src:
        z = src.read(1).astype(np.float64)
    z[60:64, 30:35] = np.nan
    code, out, err = _run(["assess", _write_like_dem(tmp_path / "lake.tif", z), *BASE, "--json", "--quiet",
                           "--out", str(tmp_path / "a")])
    assert code == 0, err
    summary = json.loads(out)
    assert summary["dem"]["interior_nodata_cells"] == 20 and summary["dem"]["voids"]["filled_cells"] == 20
    assert "The DEM has 20 nodata cells inside its data" in summary["verdict"]["text"]
    assert "filled by harmonic interpolation" in summary["verdict"]["text"]


def test_lonlat_points_snap_like_crs_points(tmp_path):
    # A valley mouth by the east edge (the lowest cell of the second column from the east, as rasterio
    # reads it), in the DEM's CRS and converted to longitude/latitude with pyproj.
    with rasterio.open(UPLANDS) as src:
        z = src.read(1)
        row = int(np.argmin(z[1:-1, -2])) + 1
        x, y = src.xy(row, src.width - 2)
        crs = src.crs
    lon, lat = pyproj.Transformer.from_crs(crs.to_wkt(), "EPSG:4326", always_xy=True).transform(x, y)
    common = ["--side-a", "west", "--closed-edges", "north,south", "--no-robustness", "--json", "--quiet"]
    results = []
    for name, spec, extra in (("crs", f"{x},{y}", []), ("lonlat", f"{lon:.9f},{lat:.9f}", ["--lonlat"])):
        code, out, err = _run(["assess", str(UPLANDS), "--side-b", spec, *common, *extra, "--out", str(tmp_path / name)])
        assert code == 0, err
        results.append(json.loads(out)["sides"]["b"]["snapped_points"][0])
    crs_point, lonlat_point = results
    assert (lonlat_point["x_snapped"], lonlat_point["y_snapped"]) == (crs_point["x_snapped"], crs_point["y_snapped"])
    assert lonlat_point["x"] == pytest.approx(x, abs=1e-3) and lonlat_point["y"] == pytest.approx(y, abs=1e-3)


def test_help_names_the_options_scripts_rely_on():
    code, out, err = _run(["assess", "--help"])
    assert code == 0 and err == ""
    # The option names fixed by DESIGN.md, plus the others the brief lists.
    for option in ("--side-a", "--side-b", "--theta", "--channel-area", "--reference-area", "--base-level",
                   "--dem-error", "--erosion-rate-a", "--erosion-rate-b", "--runoff-raster", "--erodibility-raster",
                   "--seed", "--lonlat", "--out", "--overwrite", "--json", "--quiet", "--closed-edges",
                   "--no-robustness", "--n", "--uplift-raster", "--erodibility-k", "--knickpoint-age", "--band",
                   "--bounds", "--vertical-unit", "--cell-size", "--sea-level", "--conditioning", "--name-a",
                   "--name-b"):
        assert f"{option} " in out or f"{option}," in out, option
    # rasters and single values are told apart by name: the older raster names are hidden aliases
    for hidden in ("--runoff ", "--erodibility ", "--uplift "):
        assert hidden not in out, hidden


def test_help_of_assess_and_demo_imports_nothing_heavy():
    # STYLE.md habit 9: heavy imports inside the command bodies, so --help is instant.
    code = textwrap.dedent(
        """
        import contextlib, io, json, sys, time
        start = time.perf_counter()
        from divides.cli.app import run
        with contextlib.redirect_stdout(io.StringIO()):
            codes = [run(["assess", "--help"]), run(["demo", "--help"])]
        heavy = [m for m in ("numpy", "numba", "rasterio", "scipy", "matplotlib") if m in sys.modules]
        print(json.dumps({"codes": codes, "heavy": heavy, "elapsed": time.perf_counter() - start}))
        """
    )
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=60, check=False,
                          env={**os.environ, "PYTHONWARNINGS": "error"})
    assert proc.returncode == 0, proc.stderr
    result = json.loads(proc.stdout)
    assert result["codes"] == [0, 0] and result["heavy"] == []
    assert result["elapsed"] < 0.5  # the brief: --help answers in under half a second


class _Terminal(io.StringIO):
    def isatty(self) -> bool:
        return True


def test_progress_redraws_one_line_on_a_terminal():
    # Common practice for terminal progress: sub-steps overwrite one line with a carriage
    # return; the next stage starts on a fresh line. Into a file, one line per step instead.
    from divides.cli.options import Progress

    tty = _Terminal()
    progress = Progress(2, stream=tty)
    progress.stage("writing")
    for i, name in enumerate(("summary.json", "report.html"), start=1):
        progress.step(name, i, 2)
    progress.stage("done")
    progress.finish()
    lines = tty.getvalue().split("\n")
    assert lines[0].startswith("divides: [1/2] writing")
    assert lines[1].count("\r") == 2 and "2/2 report.html" in lines[1].split("\r")[-1]
    assert lines[2].startswith("divides: [2/2] done")

    log = io.StringIO()  # not a terminal
    progress = Progress(1, stream=log)
    progress.stage("writing")
    progress.step("summary.json", 1, 2)
    progress.step("report.html", 2, 2)
    assert "\r" not in log.getvalue() and log.getvalue().count("\n") == 3

    quiet = io.StringIO()
    progress = Progress(1, quiet=True, stream=quiet)
    progress.stage("writing")
    progress.step("summary.json", 1, 1)
    progress.finish()
    assert quiet.getvalue() == ""


def test_named_sides_reach_the_verdict_layers_report_and_json(typed_run):
    s = typed_run["summary"]
    # the names typed in TYPED
    assert (s["sides"]["a"]["name"], s["sides"]["b"]["name"]) == ("River Tallow", "Quern Water")
    assert "River Tallow (side a)" in s["verdict"]["text"] and "side a (west)" not in s["verdict"]["text"]
    folder = typed_run["folder"]
    assert "Quern Water" in (folder / "verdict.txt").read_text(encoding="utf-8")
    assert "River Tallow (side a)" in (folder / "report.html").read_text(encoding="utf-8")
    channels = json.loads((folder / "layers" / "channels.geojson").read_text(encoding="utf-8"))
    named = {(f["properties"]["side"], f["properties"]["side_name"]) for f in channels["features"]}
    assert named == {("a", "River Tallow"), ("b", "Quern Water")}


def test_the_verdict_quotes_the_erosion_rate_typed(typed_run):
    text = typed_run["summary"]["verdict"]["text"]
    assert "0.7 mm/yr" in text and "River Tallow" in text  # --erosion-rate-a 0.7 for the named side a


def test_provenance_records_the_command_with_file_names_only(typed_run):
    prov = typed_run["summary"]["provenance"]
    # the arguments as typed (TYPED and BASE), with the DEM and --out reduced to file names
    assert prov["command"] == ["divides", "assess", "uplands.tif", *BASE, *TYPED, "--json", "--out", "out"]
    assert prov["dem_file"] == "uplands.tif"
    folder = typed_run["folder"]
    for path in folder.rglob("*"):  # no folder of the DEM or of the outputs in any file
        if path.is_file():
            data = path.read_bytes()
            assert str(folder.parent).encode() not in data and str(UPLANDS.parent).encode() not in data, path
