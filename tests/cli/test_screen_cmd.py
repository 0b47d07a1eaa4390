"""``divides screen`` through the command line."""

from __future__ import annotations

import csv
import json
from pathlib import Path

import numpy as np
import pytest

from divides.cli.app import run

UPLANDS = str(Path(__file__).resolve().parents[2] / "demo" / "uplands.tif")


def test_screen_writes_the_contract_files_and_lists_segments(tmp_path, capsys):
    out = tmp_path / "screen"
    code = run(["screen", UPLANDS, "--out", str(out), "--quiet", "--top", "5"])
    captured = capsys.readouterr()
    assert code == 0, captured.err
    assert captured.err == ""  # --quiet: nothing on stderr
    lines = captured.out.splitlines()
    assert " given a direction" in lines[0] and lines[0].endswith(".")
    assert sum(1 for line in lines if line[:4].strip().isdigit()) == 5  # the --top rows
    assert "licensed professionals" in captured.out
    for name in ("segments.geojson", "segments.csv", "screening.json", "report.html", "figures/regional_map.png"):
        assert (out / name).is_file(), name
    with open(out / "segments.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    first = lines[0].split()[0]
    assert len(rows) == int(first)  # "N divide segments between ..." counts the CSV rows
    # the report's table says which kind of divide each segment lies on, as segments.csv does
    html = (out / "report.html").read_text()
    assert "<th>divide</th>" in html
    for kind, words in (("main", "main (basins drain apart)"), ("lateral", "lateral (basins drain the same way)")):
        assert (words in html) == any(r["divide_kind"] == kind for r in rows[:25]), kind
    assert "No judged segment lies on a main divide" not in captured.out  # the demo's crest is judged
    assert "drains through basins of at least the minimum basin area" not in captured.out  # most of it is screened


def test_a_crest_left_to_small_basins_is_named(tmp_path, capsys):
    # The demo DEM cut at column 110, 2-20 cells west of its crest (columns 112-130 by the highest cell of each row):
    # every basin draining west is then below the default minimum basin area, so no main-divide segment is judged,
    # while the divides between the outlet basins left are all covered. The command line and the report say so.
    import rasterio
    from affine import Affine

    with rasterio.open(UPLANDS) as src:
        profile = {**src.profile, "width": src.width - 110, "transform": src.transform @ Affine.translation(110, 0)}
        z = src.read(1)[:, 110:]
    path = tmp_path / "east_flank.tif"
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(z, 1)
    out = tmp_path / "s"
    code = run(["screen", str(path), "--out", str(out), "--no-forward-run"])
    captured = capsys.readouterr()
    assert code == 0, captured.err
    document = json.loads((out / "screening.json").read_text())
    assert document["segments"] and all(s["divide_kind"] == "lateral" for s in document["segments"])
    assert document["coverage"]["share"] == pytest.approx(1.0)
    assert "Caution: No judged segment lies on a main divide" in captured.out
    assert "No judged segment lies on a main divide" in (out / "report.html").read_text()


def test_land_left_to_basins_below_the_minimum_area_is_named(tmp_path, capsys):
    # The demo DEM cut to columns 90-160 (2.1 km across its crest): with a minimum basin area of 1 km² two basins
    # qualify, they share no divide, and 31 % of the DEM drains through them. Nothing is judged; rather than only
    # "no divide between outlet basins", the command line and the report say how much land was left unread and how
    # to read it (common practice: say what the user can change).
    import rasterio
    from affine import Affine

    with rasterio.open(UPLANDS) as src:
        profile = {**src.profile, "width": 70, "transform": src.transform @ Affine.translation(90, 0)}
        z = src.read(1)[:, 90:160]
    path = tmp_path / "crest_strip.tif"
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(z, 1)
    out = tmp_path / "s"
    code = run(["screen", str(path), "--out", str(out), "--no-forward-run", "--min-basin-area", "1e6"])
    captured = capsys.readouterr()
    assert code == 0, captured.err
    document = json.loads((out / "screening.json").read_text())
    assert not document["segments"] and document["coverage"]["screened_area_share"] < 0.5
    note = "Caution: Only 31 % of the DEM drains through basins of at least the minimum basin area (1 km²)"
    assert note in captured.out and "a smaller --min-basin-area screens them" in captured.out
    assert note[9:] in (out / "report.html").read_text()
    # it names what smaller basins would drain: 5, 2 and 1 × the channel area, each under the minimum asked for;
    # every cell of a basin of at least some area lies in one of at least any smaller area: the shares cannot fall
    channel = document["parameters"]["channel_area_used_m2"]
    smaller = document["coverage"]["smaller_basin_shares"]
    expected = [k * channel for k in (5, 2, 1) if k * channel < 1e6]
    assert [s["min_basin_area_m2"] for s in smaller] == pytest.approx(expected)
    shares = [document["coverage"]["screened_area_share"]] + [s["screened_area_share"] for s in smaller]
    assert smaller and shares == sorted(shares)
    for s in smaller:
        assert f"{s['min_basin_area_m2'] / 1e6:.3g} km²" in captured.out


def test_screen_json_is_strict(tmp_path, capsys):
    code = run(["screen", UPLANDS, "--out", str(tmp_path / "s"), "--quiet", "--json", "--level", "outlets"])
    captured = capsys.readouterr()
    assert code == 0
    doc = json.loads(captured.out, parse_constant=lambda c: pytest.fail(f"non-strict JSON constant {c}"))
    assert doc["schema"] == "divides.screening/1"
    assert doc["parameters"]["level"] == "outlets"
    assert [s["rank"] for s in doc["segments"]] == list(range(1, len(doc["segments"]) + 1))


@pytest.mark.parametrize(
    ("extra", "needle"),
    [
        (["--level", "valleys"], "--level"),
        (["--theta", "auto"], "--theta"),
        (["--theta", "-1"], "--theta"),
        (["--max-segment", "-5"], "--max-segment"),
        (["--min-basin-area", "abc"], "--min-basin-area"),
        (["--runoff", "missing.tif"], "--runoff"),
        (["--min-basin-area", "1e12"], "minimum basin area"),  # no basin that large: nothing to screen
        (["--voids", "lakes"], "--voids"),
        (["--n", "0"], "--n"),
    ],
)
def test_bad_options_exit_2_with_one_line_and_nothing_written(tmp_path, capsys, extra, needle):
    out = tmp_path / "never"
    code = run(["screen", UPLANDS, "--out", str(out), *extra])
    captured = capsys.readouterr()
    assert code == 2
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1 and needle in lines[0] and "Traceback" not in captured.err
    assert not out.exists()
    assert list(tmp_path.iterdir()) == []


def test_existing_output_folder_is_refused(tmp_path, capsys):
    out = tmp_path / "s"
    out.mkdir()
    (out / "keep.txt").write_text("mine")
    code = run(["screen", UPLANDS, "--out", str(out), "--quiet"])
    captured = capsys.readouterr()
    assert code == 2 and len(captured.err.strip().splitlines()) == 1
    assert (out / "keep.txt").read_text() == "mine"


def test_screen_forward_run_is_asked_for_and_written(tmp_path, capsys):
    # --forward-run (the default, as docs/output-formats.md says): every segment the runs measured carries
    # both runs' shifts and its basins' transience in segments.geojson and segments.csv, screening.json records
    # the run, and the report says what they added, with the slope exponent the runs were given.
    out = tmp_path / "s"
    code = run(["screen", UPLANDS, "--out", str(out), "--quiet", "--level", "outlets", "--forward-run", "--n", "1.5"])
    assert code == 0, capsys.readouterr().err
    doc = json.loads((out / "screening.json").read_text())
    assert doc["parameters"]["forward_run"] is True and doc["parameters"]["forward_run_grid"]["steps"] >= 20
    features = json.loads((out / "segments.geojson").read_text())["features"]
    evidence = ("forward_shift_cells", "forward_shift_basin_cells", "transience_a", "transience_b",
                "transience_sd_a", "transience_sd_b")
    for key in evidence:
        values = [f["properties"][key] for f in features]
        assert values and any(v is not None for v in values)
    with open(out / "segments.csv", newline="") as fh:
        assert set(evidence) <= set(next(csv.reader(fh)))
    report = (out / "report.html").read_text()
    assert "forward runs of the landscape-evolution model" in report and "slope exponent n = 1.5;" in report


def test_screen_says_when_its_runs_are_coarse_for_the_smallest_basins(tmp_path, capsys):
    # The demo's 30 m cells stay model cells (240 columns, at most 300 a side), so a smallest basin of 36 000 m²
    # spans 36 000 / 900 = 40 model cells (arithmetic), under the 50 below which the runs missed moving divides
    # more often on model landscapes (docs/validation.md, round 40): the command line and the report say so.
    out = tmp_path / "s"
    code = run(["screen", UPLANDS, "--out", str(out), "--level", "outlets", "--min-basin-area", "36000", "--top", "1"])
    captured = capsys.readouterr()
    assert code == 0, captured.err
    assert "Caution: The landscape runs are coarse for the smallest basins: the smallest basin screened spans 40 " \
           "model cells of 1 × 1 DEM cells" in captured.out
    grid = json.loads((out / "screening.json").read_text())["parameters"]["forward_run_grid"]
    assert grid["coarse_for_basins"] is True and grid["smallest_basin_model_cells"] == pytest.approx(40.0)
    assert "The landscape runs are coarse" in (out / "report.html").read_text()


def test_screen_names_the_edges_at_the_edges_level(tmp_path, capsys):
    # At --level edges the numbers in the table are the edges' labels; a line says which edge each is (the naming
    # itself is checked against the flow in tests/report/test_screening.py).
    code = run(["screen", UPLANDS, "--out", str(tmp_path / "e"), "--quiet", "--level", "edges", "--closed-edges",
                "north,south"])
    captured = capsys.readouterr()
    assert code == 0, captured.err
    assert "Basins are the land draining off each edge: 2 east, 4 west." in captured.out.splitlines()


def test_a_segment_without_enough_data_shows_an_unknown_confidence(write_geotiff, tmp_path, capsys):
    # A decision that abstained for insufficient data has confidence 0 in the contract; shown as "<0.01" it read as
    # evidence. The table (command line and report) says "unknown" there, as for its instability.
    from affine import Affine

    c = np.arange(60, dtype=np.float64)
    z = (100.0 + np.minimum(c * 2.0, (59 - c) * 2.0)[None, :] + np.random.default_rng(0).random((40, 60)))
    dem = write_geotiff("ridge.tif", z.astype(np.float32), crs="EPSG:32630",
                        transform=Affine(30.0, 0.0, 500_000.0, 0.0, -30.0, 4_000_000.0))
    out = tmp_path / "s"
    code = run(["screen", str(dem), "--out", str(out), "--min-basin-area", "5e4", "--top", "50"])
    captured = capsys.readouterr()
    assert code == 0, captured.err
    doc = json.loads((out / "screening.json").read_text())
    abstained = [s["rank"] for s in doc["segments"] if s["reason"] == "insufficient data"]
    assert abstained  # this small ridge has short divides
    rows = {int(line.split()[0]): line.split() for line in captured.out.splitlines() if line[:4].strip().isdigit()}
    for rank in abstained:
        assert rows[rank][1:4] == ["unknown", "unknown", "unknown"]
    assert "<td class=\"n\">unknown</td><td class=\"n\">unknown</td><td class=\"n\">unknown</td>" in (
        out / "report.html").read_text()


@pytest.mark.parametrize("voids", ["fill", "outlets"])
def test_nodata_inside_the_data_is_named_in_the_outputs(tmp_path, capsys, voids):
    # A hole of nodata inside the data is filled, or with --voids outlets read like the sea (docs/methods.md §1): the
    # screening counts its cells (a 4 x 5 block of NaN on the fully valid demo DEM: 20) and says what it did with
    # them in screening.json, the report and on the command line.
    import rasterio

    with rasterio.open(UPLANDS) as src:
        profile = {**src.profile, "dtype": "float32", "nodata": None}
        z = src.read(1).astype(np.float32)
    z[60:64, 30:35] = np.nan
    path = tmp_path / "lake.tif"
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(z, 1)
    code = run(["screen", str(path), "--out", str(tmp_path / "s"), "--no-forward-run", "--voids", voids])
    captured = capsys.readouterr()
    assert code == 0, captured.err
    assert "Caution: The DEM has 20 nodata cells inside its data" in captured.out
    document = json.loads((tmp_path / "s" / "screening.json").read_text())
    assert document["dem"]["interior_nodata_cells"] == 20
    assert document["dem"]["voids"] == {"handling": voids, "holes": 1, "cells": 20, "largest_cells": 20,
                                        "filled_cells": 20 if voids == "fill" else 0}
    assert document["parameters"]["voids"] == voids
    said = "filled by harmonic interpolation" if voids == "fill" else "drains into them"
    assert said in captured.out
    assert "The DEM has 20 nodata cells inside its data" in (tmp_path / "s" / "report.html").read_text()
    layer = tmp_path / "s" / "layers" / "filled_voids.geojson"  # the filled hole as a polygon, only when filled
    assert layer.exists() == (voids == "fill")
    if voids == "fill":
        assert [f["properties"]["cells"] for f in json.loads(layer.read_text())["features"]] == [20]


def test_a_weighting_raster_with_holes_is_named_in_a_warning(tmp_path, capsys):
    # A raster's holes are read as its reference value (docs/methods.md §3); the user is told how many cells that is
    # (a 10 x 10 block of NaN on a fully valid DEM: 100 cells).
    import rasterio

    with rasterio.open(UPLANDS) as src:
        profile = {**src.profile, "dtype": "float32", "nodata": None}
        rain = np.ones(src.shape, dtype=np.float32)
        assert src.read(1, masked=True).mask.sum() == 0
    rain[10:20, 10:20] = np.nan
    path = tmp_path / "rain.tif"
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(rain, 1)
    code = run(["screen", UPLANDS, "--out", str(tmp_path / "s"), "--runoff-raster", str(path), "--no-forward-run"])
    captured = capsys.readouterr()
    assert code == 0, captured.err
    warned = [line for line in captured.err.splitlines() if "warning" in line and "--runoff-raster" in line]
    assert len(warned) == 1 and "100 of the DEM's cells" in warned[0]
    # and the outputs keep it: screening.json's parameters and the report's caution
    assert json.loads((tmp_path / "s" / "screening.json").read_text())["parameters"]["raster_holes_cells"] == {
        "runoff": 100}
    page = (tmp_path / "s" / "report.html").read_text()
    assert "The runoff raster has no value on 100 of the DEM&#x27;s cells" in page


def test_the_follow_up_command_of_a_screened_segment_runs(tmp_path, capsys):
    # The report gives each segment to assess first its `divides assess` command: the rivers on either side of the
    # stretch the segment was judged on, by their mouths (segments.csv's side_1 and side_2 hold each basin's river),
    # and the options the screening read the DEM with, and its slope exponent n. The command must run as written (the
    # DEM by its path here) and assess the two sides named, the segment's basins' rivers among them.
    import html
    import re
    import shlex

    out = tmp_path / "s"
    code = run(["screen", UPLANDS, "--out", str(out), "--quiet", "--closed-edges", "north,south",
                "--no-forward-run", "--n", "1.5"])
    assert code == 0, capsys.readouterr().err
    assert json.loads((out / "screening.json").read_text())["parameters"]["n"] == 1.5
    text = (out / "report.html").read_text()
    found = re.findall(r'<tr><td class="n">(\d+)</td><td>[^<]*</td><td><code>(divides assess [^<]*)</code>', text)
    assert found
    rank, command = int(found[0][0]), html.unescape(found[0][1])
    words = shlex.split(command)
    assert words[2] == Path(UPLANDS).name
    assert words[words.index("--closed-edges") + 1] == "north,south" and words[words.index("--n") + 1] == "1.5"
    with open(out / "segments.csv", newline="") as fh:
        row = next(r for r in csv.DictReader(fh) if int(r["rank"]) == rank)
    side_a, side_b = (words[words.index(o) + 1].split(";") for o in ("--side-a", "--side-b"))
    assert row["side_1"] in side_a and row["side_2"] in side_b and not set(side_a) & set(side_b)
    assert f"B{row['basin_1']}" in words[words.index("--name-a") + 1]
    capsys.readouterr()
    code = run(["assess", UPLANDS, *words[3:], "--no-robustness", "--quiet", "--out", str(tmp_path / "a")])
    assert code == 0, capsys.readouterr().err
    summary = json.loads((tmp_path / "a" / "summary.json").read_text())
    assert f"B{row['basin_1']}" in json.dumps(summary) and f"B{row['basin_2']}" in json.dumps(summary)


def test_a_likely_mover_with_a_small_instability_is_explained(tmp_path, capsys):
    # The table prints instability beside P(moving); where a row shows an instability under 0.5 beside a P(moving) of
    # 0.5 or more (on the demo the main divide's segments ranked 3-10 since round 62: both runs do not move them), one
    # line says why, and only then (ranks 1-2 show both above 0.99). The report's table (its first 25 rows, read
    # from segments.csv) says it too.
    for top in (2, 10):
        out = tmp_path / f"top{top}"
        assert run(["screen", UPLANDS, "--out", str(out), "--quiet", "--top", str(top)]) == 0
        lines = capsys.readouterr().out.splitlines()
        rows = [line.split() for line in lines if line[:4].strip().isdigit()]
        assert len(rows) == top
        flagged = any(r[1] == "<0.01" and r[2] != "<0.01" and float(r[2].lstrip("<>")) >= 0.5 for r in rows)
        assert flagged == (top == 10)
        assert any(line.startswith("Instability below 0.5 beside P(moving)") for line in lines) == flagged
        with open(out / "segments.csv", newline="") as fh:
            table = list(csv.DictReader(fh))[:25]
        in_table = any(float(r["instability"]) < 0.5 and float(r["motion_probability"]) >= 0.5 for r in table)
        assert in_table
        report = (out / "report.html").read_text()
        assert ("the score an alarm reads stays low unless both landscape runs" in report) == in_table


def test_screen_help_states_the_default_channel_area_bounds(capsys):
    # the help repeats screening's cap rather than importing the screening module (docs/methods.md §2)
    from divides.assess.screen import CHANNEL_AREA_MIN_CELLS, CHANNEL_AREA_SHARE

    assert run(["screen", "--help"]) == 0
    words = " ".join(capsys.readouterr().out.split())
    bounds = f"at least {CHANNEL_AREA_MIN_CELLS:g} cells and at most {100 * CHANNEL_AREA_SHARE:g} % of its valid area"
    assert bounds in words
