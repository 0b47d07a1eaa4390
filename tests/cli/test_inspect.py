"""``divides inspect`` against values computed here with rasterio, numpy, scipy and scikit-image.

Runs go through ``divides.cli.app.run`` (what the console script calls) with
pytest's capsys. Reference values are read from the files with rasterio and
recounted independently; the code under test is the command and the area
accumulation behind it.
"""

from __future__ import annotations

import json
import re
from pathlib import Path

import numpy as np
import pytest
import rasterio
from affine import Affine
from rasterio.crs import CRS
from rasterio.windows import from_bounds
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components
from skimage.morphology import reconstruction

import divides
from divides.cli.app import run

UPLANDS = Path(__file__).resolve().parents[2] / "demo" / "uplands.tif"


@pytest.fixture(scope="module")
def reference():
    """The demo DEM as rasterio reads it: the independent side of every check."""
    with rasterio.open(UPLANDS) as src:
        z = src.read(1, masked=True)
        return {
            "rows": src.height,
            "cols": src.width,
            "res": src.res,
            "bounds": tuple(src.bounds),
            "crs": src.crs,
            "transform": src.transform,
            "z": z.filled(np.nan).astype(np.float64),
        }


def _inspect(capsys, *args: str) -> str:
    code = run(["inspect", *map(str, args)])
    out = capsys.readouterr()
    assert code == 0, out.err
    assert out.err == ""
    return out.out


def _inspect_json(capsys, *args: str) -> dict:
    return json.loads(_inspect(capsys, *args, "--json"))


def _field(text: str, label: str) -> str:
    match = re.search(rf"^{re.escape(label)} +(.+)$", text, flags=re.MULTILINE)
    assert match, f"no line {label!r} in:\n{text}"
    return match.group(1)


# ---------------------------------------------------------------- the demo DEM, as text
def test_text_describes_the_demo_dem(capsys, reference):
    text = _inspect(capsys, UPLANDS)
    rows, cols = reference["rows"], reference["cols"]
    dx, dy = reference["res"]
    zmin, zmax = np.nanmin(reference["z"]), np.nanmax(reference["z"])

    assert _field(text, "DEM") == str(UPLANDS)
    assert _field(text, "CRS").startswith(f"EPSG:{reference['crs'].to_epsg()} (projected")
    assert _field(text, "Grid") == f"{rows:,} rows x {cols:,} cols = {rows * cols:,} cells"
    assert _field(text, "Cell size") == f"{dx:g} x {dy:g} m"
    assert _field(text, "Elevation") == f"{zmin:.2f} to {zmax:.2f} m"
    assert _field(text, "Valid cells") == f"{100 * np.isfinite(reference['z']).mean():.2f} %"
    printed = _field(text, "Bounds").split(" (")[0]
    assert [float(v) for v in printed.split(",")] == pytest.approx(list(reference["bounds"]), abs=0.5)
    assert "\x1b[" not in text  # plain text into a pipe (brief)


def test_text_aligns_the_values(capsys):
    text = _inspect(capsys, UPLANDS)
    labels = ("DEM", "CRS", "Grid", "Cell size", "Bounds", "Valid cells", "Elevation", "Conditioning", "Outlets")
    starts = set()
    for label in labels:
        line = next(ln for ln in text.splitlines() if ln.startswith(label + " "))
        starts.add(len(line) - len(line[len(label) :].lstrip()))
    assert len(starts) == 1  # every value starts in the same column


# ---------------------------------------------------------------- the demo DEM, as JSON
def test_json_grid_against_rasterio(capsys, reference):
    report = _inspect_json(capsys, UPLANDS)
    assert report["schema"] == "divides.inspect/1"
    assert report["shape"] == [reference["rows"], reference["cols"]]
    assert report["n_cells"] == reference["rows"] * reference["cols"]
    assert report["cell_size_m"] == pytest.approx(list(reference["res"]))  # EPSG:32630 is in metres
    assert report["cell_width_range_m"] == pytest.approx([reference["res"][0]] * 2)
    assert report["bounds"] == pytest.approx(list(reference["bounds"]))
    assert CRS.from_user_input(report["crs"]) == reference["crs"]
    assert (report["crs_kind"], report["crs_unit"]) == ("projected", "metre")
    z = reference["z"]
    assert report["elevation_m"] == pytest.approx([np.nanmin(z), np.nanmax(z)], rel=1e-7)
    assert report["valid_share"] == pytest.approx(np.isfinite(z).mean())
    assert report["vertical_unit"] == "m"


def test_json_outlets_are_the_edge_cells(capsys, reference):
    # With no nodata and no sea level only the edge drains off the grid (DESIGN.md:
    # edge cells are outlets); a rows x cols grid has 2 * rows + 2 * cols - 4 edge cells.
    report = _inspect_json(capsys, UPLANDS)
    rows, cols = reference["rows"], reference["cols"]
    assert report["n_outlets"] == 2 * rows + 2 * cols - 4


def test_json_conditioning_against_scikit_image_filling(capsys, reference):
    # Depression filling as morphological reconstruction by erosion from the edge
    # (Soille 2004, "Morphological Image Analysis", ch. 6; scikit-image's example).
    z = reference["z"]
    seed = np.full_like(z, np.nanmax(z))
    seed[0, :], seed[-1, :], seed[:, 0], seed[:, -1] = z[0, :], z[-1, :], z[:, 0], z[:, -1]
    filled = reconstruction(seed, z, method="erosion")
    raised = filled > z
    cell_area = reference["res"][0] * reference["res"][1]

    cond = _inspect_json(capsys, UPLANDS)["conditioning"]
    assert cond["method"] == "fill"
    assert cond["filled_cells"] == int(raised.sum())
    assert cond["filled_area_m2"] == pytest.approx(raised.sum() * cell_area)
    assert cond["filled_volume_m3"] == pytest.approx(float(np.sum(filled - z)) * cell_area, rel=1e-5)


def _basin_cells(receivers: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Label each cell by the tree of the receiver graph it belongs to (scipy), and count them."""
    n = receivers.size
    cells = np.arange(n)
    moving = receivers != cells
    graph = coo_matrix((np.ones(moving.sum()), (cells[moving], receivers[moving])), shape=(n, n))
    _, labels = connected_components(graph, directed=False)
    return labels, np.bincount(labels)


def test_json_largest_basins_against_a_recount(capsys, reference):
    report = _inspect_json(capsys, UPLANDS)
    basins = report["largest_basins"]
    assert [b["id"] for b in basins] == [1, 2, 3, 4, 5]

    # Independent recount: the receivers (not the accumulated area under test) split
    # the grid into trees, one per outlet; a basin's area is its cell count x 30 m x 30 m.
    receivers = np.asarray(divides.route(divides.read_dem(UPLANDS)).receivers)
    labels, sizes = _basin_cells(receivers)
    cell_area = reference["res"][0] * reference["res"][1]
    valid_area = np.isfinite(reference["z"]).sum() * cell_area
    largest = np.sort(sizes)[::-1][:5] * cell_area
    assert [b["area_km2"] for b in basins] == pytest.approx(largest / 1e6, rel=1e-12)
    assert [b["share"] for b in basins] == pytest.approx(largest / valid_area, rel=1e-12)
    areas = [b["area_km2"] for b in basins]
    assert areas == sorted(areas, reverse=True)
    # outlets that drain more than themselves = trees of the receiver graph with 2+ cells (scipy)
    assert report["n_outlets_draining_others"] == int(np.count_nonzero(sizes > 1))

    inverse = ~reference["transform"]
    for b in basins:
        x, y = b["outlet"]
        col, row = (int(np.floor(v)) for v in inverse @ (x, y))
        cell = row * reference["cols"] + col
        assert receivers[cell] == cell  # the outlet drains off the grid
        assert sizes[labels[cell]] * cell_area == pytest.approx(b["area_km2"] * 1e6)
        # cell centre: half a cell in from the corner (rasterio's xy convention)
        assert (x, y) == pytest.approx(reference["transform"] @ (col + 0.5, row + 0.5))


# ---------------------------------------------------------------- options
def test_bounds_reads_a_window(capsys, reference):
    left, bottom, _, top = reference["bounds"]
    box = (left + 300.0, bottom + 600.0, left + 3000.0, bottom + 3000.0)  # whole 30 m cells
    report = _inspect_json(capsys, UPLANDS, "--bounds", ",".join(f"{v:.1f}" for v in box))
    # By hand: 2700 m / 30 m = 90 columns, 2400 m / 30 m = 80 rows.
    assert report["shape"] == [80, 90]
    assert report["bounds"] == pytest.approx(list(box))
    with rasterio.open(UPLANDS) as src:
        window = src.read(1, window=from_bounds(*box, transform=src.transform)).astype(np.float64)
    assert window.shape == (80, 90)
    assert report["elevation_m"] == pytest.approx([window.min(), window.max()], rel=1e-7)


def test_vertical_unit_feet(capsys, reference):
    # The international foot is exactly 0.3048 m (NIST SP 811, B.8).
    report = _inspect_json(capsys, UPLANDS, "--vertical-unit", "ft")
    z = reference["z"]
    assert report["elevation_m"] == pytest.approx([np.nanmin(z) * 0.3048, np.nanmax(z) * 0.3048], rel=1e-6)
    assert report["vertical_unit"] == "ft"


def test_sea_level_makes_low_cells_outlets(capsys, reference):
    # Every cell at or below the sea level drains off the grid, so the edge cells
    # above it plus all cells at or below it are outlets (counted here with numpy).
    z = reference["z"]
    level = float(np.nanpercentile(z, 10))
    edge = np.zeros(z.shape, dtype=bool)
    edge[0, :] = edge[-1, :] = edge[:, 0] = edge[:, -1] = True
    report = _inspect_json(capsys, UPLANDS, "--sea-level", repr(level))
    assert report["n_outlets"] == int(np.count_nonzero(edge | (z <= level)))
    assert report["conditioning"]["sea_level_m"] == level


def _valley(write_geotiff, *, crs=None):
    """A 5 x 5 V-shaped valley draining south down its middle column.

    z = 10 |col - 2| + (4 - row). By hand (D8, steepest descent): middle-column
    cells step south (drop 1 over 10 m); flank cells step sideways into the
    middle (drop 10 over 10 m beats 11 over 14.1 m diagonally). The outlet at
    row 4, col 2 therefore drains itself, 3 interior middle cells and 2 x 3
    interior flank cells: 10 cells. Every other edge cell drains only itself.
    """
    rows, cols = np.mgrid[0:5, 0:5]
    z = (10.0 * np.abs(cols - 2) + (4 - rows)).astype(np.float32)
    return write_geotiff("valley.tif", z, crs=crs, transform=Affine(10.0, 0, 1000.0, 0, -10.0, 2000.0))


def test_dem_without_crs_with_cell_size(capsys, write_geotiff):
    path = _valley(write_geotiff)
    report = _inspect_json(capsys, path, "--cell-size", "10")
    assert report["crs"] is None and report["crs_kind"] == "none"
    assert report["cell_size_m"] == [10.0, 10.0]
    top = report["largest_basins"][0]
    assert top["area_km2"] == pytest.approx(10 * 100 / 1e6)  # 10 cells of 100 m² (docstring)
    assert top["share"] == pytest.approx(10 / 25)
    # Centre of row 4, col 2: x = 1000 + 2.5 * 10, y = 2000 - 4.5 * 10.
    assert top["outlet"] == pytest.approx([1025.0, 1955.0])
    assert [b["area_km2"] for b in report["largest_basins"][1:]] == pytest.approx([100 / 1e6] * 4)
    assert report["n_outlets"] == 16  # the 5 x 5 grid has 16 edge cells

    text = _inspect(capsys, path, "--cell-size", "10")
    assert _field(text, "CRS").startswith("none")
    assert _field(text, "Cell size") == "10 x 10 m"


def test_geographic_dem_reports_the_cell_size_range(capsys, write_geotiff):
    # 0.001° cells from 60°N down to 59.98°N: the width of a cell shrinks toward the
    # pole, so it varies across rows. Width along a parallel = N(φ) cos φ Δλ with
    # N = a / sqrt(1 - e² sin² φ) on WGS 84 (Snyder 1987, USGS PP 1395, ch. 4; from memory).
    rows, cols = np.mgrid[0:20, 0:20]
    z = (100.0 + rows + 0.5 * np.abs(cols - 10)).astype(np.float32)
    path = write_geotiff("geo.tif", z, crs="EPSG:4326", transform=Affine(0.001, 0, 10.0, 0, -0.001, 60.0))
    report = _inspect_json(capsys, path)
    assert report["crs_kind"] == "geographic" and report["crs_unit"] == "degree"

    a, f = 6378137.0, 1 / 298.257223563
    e2 = f * (2 - f)
    lat = np.radians(60.0 - 0.001 * (np.arange(20) + 0.5))  # row centres
    width = a / np.sqrt(1 - e2 * np.sin(lat) ** 2) * np.cos(lat) * np.radians(0.001)
    # rel 1e-4: whether a row is measured at its centre or edges moves the width by about 1.5e-5 (tan φ · Δφ/2).
    assert report["cell_width_range_m"] == pytest.approx([width.min(), width.max()], rel=1e-4)
    text = _inspect(capsys, path)
    assert "varies across rows" in _field(text, "Cell size")


# ---------------------------------------------------------------- bad input
def _fails_cleanly(capsys, *args: str) -> str:
    code = run(["inspect", *map(str, args)])
    out = capsys.readouterr()
    assert code == 2, out.err
    assert out.out == ""  # no partial output
    lines = [ln for ln in out.err.splitlines() if ln.strip()]
    assert len(lines) == 1, out.err
    assert "Traceback" not in out.err
    assert lines[0].startswith("divides: error: ")
    return lines[0]


def test_missing_file(capsys, tmp_path):
    line = _fails_cleanly(capsys, tmp_path / "nowhere.tif")
    assert "nowhere.tif" in line and "does not exist" in line


def test_directory(capsys, tmp_path):
    assert "directory" in _fails_cleanly(capsys, tmp_path)


def test_text_file(capsys, tmp_path):
    path = tmp_path / "notes.tif"
    path.write_text("elevations: 1, 2, 3\n", encoding="utf-8")
    assert "notes.tif" in _fails_cleanly(capsys, path)


@pytest.mark.parametrize("keep", [0.05, 0.5], ids=["header-only", "half-the-data"])
def test_truncated_geotiff(capsys, write_geotiff, keep):
    z = np.arange(64 * 64, dtype=np.float32).reshape(64, 64)
    path = write_geotiff("cut.tif", z, crs="EPSG:32630", transform=Affine(30.0, 0, 0, 0, -30.0, 1920.0))
    data = path.read_bytes()
    path.write_bytes(data[: int(len(data) * keep)])
    assert "cut.tif" in _fails_cleanly(capsys, path)


def test_dem_without_crs_asks_for_a_cell_size(capsys, write_geotiff):
    assert "--cell-size" in _fails_cleanly(capsys, _valley(write_geotiff))


@pytest.mark.parametrize("value", ["1,2,3", "a,b,c,d", "10,0,0,10", "0,10,10,0", "nan,0,1,1", ""])
def test_bad_bounds(capsys, value):
    line = _fails_cleanly(capsys, UPLANDS, "--bounds", value)
    assert "--bounds" in line and "LEFT,BOTTOM,RIGHT,TOP" in line


def test_bounds_outside_the_dem(capsys):
    line = _fails_cleanly(capsys, UPLANDS, "--bounds", "0,0,10,10")
    assert "overlap" in line


@pytest.mark.parametrize("value", ["yd", "M", "feet", ""])
def test_bad_vertical_unit(capsys, value):
    line = _fails_cleanly(capsys, UPLANDS, "--vertical-unit", value)
    assert "--vertical-unit" in line and "m, ft, us-ft" in line


@pytest.mark.parametrize("value", ["-30", "0", "abc", "inf", "10,20,30"])
def test_bad_cell_size(capsys, value):
    line = _fails_cleanly(capsys, UPLANDS, "--cell-size", value)
    assert "--cell-size" in line and "positive" in line


@pytest.mark.parametrize(
    "args, needle",
    [
        (["--conditioning", "carve"], "fill, breach"),
        (["--sea-level", "low"], "--sea-level"),
        (["--band", "2"], "band 2"),
        (["--band", "0"], "--band"),
        (["--colour"], "--colour"),
    ],
)
def test_other_bad_options(capsys, args, needle):
    assert needle in _fails_cleanly(capsys, UPLANDS, *args)


# ---------------------------------------------------------------- suggested parameters
def test_suggested_theta_brackets_the_concavity_the_demo_was_made_with(capsys):
    # demo/make_demo_dem.py grew the demo with stream power of m/n = 0.45 (its constants M and N);
    # its north and south edges were walls, as the demo's story says.
    report = _inspect_json(capsys, UPLANDS, "--closed-edges", "north,south")
    theta = report["suggested"]["theta"]
    assert theta["source"] == "collinearity"
    lo, hi = theta["ci95"]
    assert lo <= 0.45 <= hi
    assert abs(theta["slope_area"]["value"] - 0.45) < 0.1  # the check method agrees to about ±0.1 (common practice)
    assert theta["reason"]


def test_suggested_channel_area_in_cells_and_in_the_text(capsys, reference):
    report = _inspect_json(capsys, UPLANDS)
    area = report["suggested"]["channel_area_m2"]
    dx, dy = reference["res"]  # rasterio's cell size of the file
    assert area["cells"] == pytest.approx(area["value"] / (dx * dy))
    assert area["source"] in ("slope-area break", "fallback") and area["reason"]
    text = _inspect(capsys, UPLANDS)
    line = _field(text, "Channel area")
    assert f"--channel-area {area['value']:.6g}" in line and area["reason"] in line
    assert _field(text, "Theta").startswith(f"{report['suggested']['theta']['value']:.2f} (")


def test_suggested_theta_falls_back_to_the_reference_value(capsys, write_geotiff):
    # A 6 x 6 grid of noise has no channel network to estimate θ from: the usual reference
    # concavity 0.45 (Wobus et al. 2006; common practice) is suggested, with the reason.
    z = np.random.default_rng(3).random((6, 6)).astype(np.float32)
    path = write_geotiff("noise.tif", z, crs="EPSG:32630", transform=Affine(30.0, 0, 5e5, 0, -30.0, 4e6))
    theta = _inspect_json(capsys, path)["suggested"]["theta"]
    assert (theta["value"], theta["source"]) == (0.45, "reference")
    assert "could" in theta["reason"] and "0.45" in theta["reason"]


@pytest.mark.parametrize("collinear, slope_area", [
    ((0.002, (0.002, 0.64)), (1.10, (0.86, 1.33))),  # the scan's lowest value; a loose, steep regression
    (None, (2.79, (0.62, 4.96))),  # collinearity cannot tell; five area bins
])
def test_suggested_theta_is_not_an_estimate_the_data_do_not_bound(capsys, monkeypatch, collinear, slope_area):
    # Estimates that two model landscapes of true θ 0.53 and 0.44 gave (docs/validation.md, round 69): an optimum at
    # the end of the searched range is a boundary solution, not an estimate (common practice), and natural rivers'
    # concavity lies in 0.2-0.8 (Whipple 2004; Gailleton et al. 2021). The reference 0.45 (Wobus et al. 2006) is
    # suggested instead, the estimates named in the reason; screen accepts the suggestion.
    import divides.profiles.analysis as analysis
    from divides.profiles.concavity import ConcavityEstimate

    nan = (float("nan"), float("nan"))
    estimates = {
        "collinearity": ConcavityEstimate(*(collinear or (float("nan"), nan)), "collinearity", 15 if collinear else 0,
                                          "" if collinear else "too few channel links"),
        "slope_area": ConcavityEstimate(*slope_area, "slope-area", 5),
    }
    monkeypatch.setattr(analysis, "network_concavity", lambda *a, **k: estimates)
    theta = _inspect_json(capsys, UPLANDS)["suggested"]["theta"]
    assert (theta["value"], theta["source"]) == (0.45, "reference")
    assert "do not bound" in theta["reason"] and f"{slope_area[0]:.2f}" in theta["reason"]
    assert theta["slope_area"]["value"] == slope_area[0]  # the estimates are still reported


def test_suggested_theta_keeps_a_bounded_estimate_beside_a_loose_one(capsys, monkeypatch):
    import divides.profiles.analysis as analysis
    from divides.profiles.concavity import ConcavityEstimate

    estimates = {"collinearity": ConcavityEstimate(0.002, (0.002, 0.64), "collinearity", 15),
                 "slope_area": ConcavityEstimate(0.48, (0.40, 0.56), "slope-area", 9)}
    monkeypatch.setattr(analysis, "network_concavity", lambda *a, **k: estimates)
    theta = _inspect_json(capsys, UPLANDS)["suggested"]["theta"]
    assert (theta["value"], theta["source"]) == (0.48, "slope-area")
    assert "not bounded by the data" in theta["reason"]


def test_text_says_why_its_theta_differs_from_the_default(capsys):
    # the reference θ of common practice (0.45) is what assess, screen and the demo use unless told otherwise
    assert run(["inspect", str(UPLANDS)]) == 0
    text = " ".join(capsys.readouterr().out.split())
    assert "use the reference θ = 0.45" in text


def test_nodata_inside_the_data_is_counted_apart_from_a_collar(capsys, tmp_path, reference):
    # The demo DEM behind a 4-row nodata collar, with two holes inside the data: 3 x 4 and 2 x 2 cells = 16. The
    # holes are filled by default, or with --voids outlets their rims drain into them (docs/methods.md §1); the
    # collar is where the DEM ends. Counted with
    # scipy's connected components of the 8-neighbour nodata graph, keeping those off the grid's edge.
    z = np.vstack([np.full((4, reference["cols"]), np.nan), reference["z"]])
    z[40:43, 50:54] = np.nan
    z[100:102, 200:202] = np.nan
    profile = {"driver": "GTiff", "height": z.shape[0], "width": z.shape[1], "count": 1, "dtype": "float64",
               "crs": reference["crs"], "transform": reference["transform"] @ Affine.translation(0, -4)}
    path = tmp_path / "holes.tif"
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(z, 1)
    nodata = np.isnan(z)
    idx = -np.ones(z.shape, dtype=np.int64)
    idx[nodata] = np.arange(nodata.sum())
    pairs = []
    for dr, dc in ((0, 1), (1, 0), (1, 1), (1, -1)):
        a = idx[max(0, -dr): z.shape[0] - max(0, dr), max(0, -dc): z.shape[1] - max(0, dc)]
        b = idx[max(0, dr):, max(0, dc): z.shape[1] + min(0, dc) or None][: a.shape[0], : a.shape[1]]
        keep = (a >= 0) & (b >= 0)
        pairs.append(np.column_stack([a[keep], b[keep]]))
    edges = np.concatenate(pairs)
    n = int(nodata.sum())
    _, comp = connected_components(coo_matrix((np.ones(len(edges)), (edges[:, 0], edges[:, 1])), shape=(n, n)),
                                   directed=False)
    border = np.zeros(z.shape, dtype=bool)
    border[[0, -1], :] = border[:, [0, -1]] = True
    outer = np.unique(comp[idx[nodata & border]])
    expected = int(np.count_nonzero(~np.isin(comp, outer)))
    assert expected == 16
    assert _inspect_json(capsys, path)["interior_nodata_cells"] == expected
    assert "16 nodata cells inside the data filled" in _field(_inspect(capsys, path), "Valid cells")
    told = _inspect_json(capsys, path, "--voids", "outlets")
    assert told["voids"] == {"handling": "outlets", "holes": 2, "cells": 16, "largest_cells": 12, "filled_cells": 0}
    # the two holes' rims are outlets draining more than their own cell: more outlets than when filled
    assert told["n_outlets"] > _inspect_json(capsys, path)["n_outlets"]
    assert "drain into them as outlets" in _field(_inspect(capsys, path, "--voids", "outlets"), "Valid cells")


def test_the_screening_default_channel_area_is_the_suggestion_bounded(capsys, reference):
    # docs/methods.md §2 (round 64): screen reads the suggested area raised to 50 cells and capped at 0.2 % of the
    # valid area; checked by arithmetic on the demo's cell count and cell size read by rasterio.
    report = _inspect_json(capsys, UPLANDS)
    area, bounded = report["suggested"]["channel_area_m2"], report["suggested"]["screen_channel_area_m2"]
    dx, dy = reference["res"]
    valid = int(np.isfinite(reference["z"]).sum())
    expected = min(max(area["value"], 50 * dx * dy), 0.002 * valid * dx * dy)
    assert bounded["value"] == pytest.approx(expected) and bounded["cells"] == pytest.approx(expected / (dx * dy))
    text = _inspect(capsys, UPLANDS)
    assert f"screen without --channel-area reads {bounded['value']:,.0f} m²" in text
